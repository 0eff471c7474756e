"""Synthetic stores with a stored shape, written with plain xarray in the store layout.

The cap store imitates ``cap_postbuckling`` (a ``shape`` field w/h over ``shape_radius`` ×
``shape_angle``), the strip store ``curved_strip`` (a ``section_shape`` over ``section_stage`` ×
``section_xy`` × ``section_arc``). The fields are analytic, so the tests need no model run. The
stores name models that are not registered (``synthetic_cap`` …): a registered name would make
the integrity checks expect every output of that model. Each store is one block (one chunk).
"""

from __future__ import annotations

import datetime as dt
import json
import warnings
from pathlib import Path

import numpy as np
import xarray as xr

from sweepshell.about import CAUTION
from sweepshell.models.base import Status
from sweepshell.store import metadata
from sweepshell.store.metadata import ATTR

CAP_REGIMES = ("stable", "limit_point", "stable_postbuckling", "unstable_postbuckling")
STRIP_REGIMES = ("stiff", "folded", "collapsed")


def cap_field(amplitude: float, n: int, radius: np.ndarray, angle: np.ndarray) -> np.ndarray:
    """Return w/h = −A(1−r²)² + (A/4) r² (1−r²) cos(nθ) on the polar grid (rows r, columns θ)."""
    r = radius[:, None]
    return -amplitude * (1 - r**2) ** 2 + 0.25 * amplitude * r**2 * (1 - r**2) * np.cos(n * angle[None, :])


def _attrs(model: str, fixed: dict, axes: dict, regimes: tuple[str, ...]) -> dict:
    return {ATTR.tool: "0.1.0", ATTR.schema: metadata.SCHEMA_VERSION, ATTR.model: model, ATTR.model_version: "0.9",
            ATTR.settings: json.dumps({}), ATTR.fixed: json.dumps(fixed, sort_keys=True),
            ATTR.axes: json.dumps(axes, sort_keys=True), ATTR.sweep_name: f"synthetic_{model}",
            ATTR.sweep_yaml: f"name: synthetic_{model}\nmodel: {model}\n",
            ATTR.created: dt.datetime(2026, 12, 2, tzinfo=dt.UTC).isoformat(), ATTR.caution: CAUTION,
            ATTR.block_shape: [len(v) for v in axes.values()], ATTR.regimes: list(regimes),
            ATTR.conventions: "CF-1.10"}


def _write(path: Path, dims: tuple[str, ...], data_vars: dict, coords: dict, attrs: dict,
           regimes: tuple[str, ...]) -> Path:
    status = data_vars.pop(metadata.STATUS_VAR)
    regime = data_vars.pop(metadata.REGIME_VAR)
    data_vars[metadata.STATUS_VAR] = xr.Variable(dims, status.astype(np.uint8), metadata.status_attrs())
    data_vars[metadata.REGIME_VAR] = xr.Variable(dims, regime.astype(np.int8), metadata.regime_attrs(regimes))
    # one block, fill values as the store writer sets them (a chunk equal to its fill value is not written)
    encoding = {name: {"chunks": np.shape(var.data), "fill_value": np.nan} for name, var in data_vars.items()}
    encoding[metadata.STATUS_VAR]["fill_value"] = 0
    encoding[metadata.REGIME_VAR]["fill_value"] = -1
    with warnings.catch_warnings():  # consolidated metadata, as the store writer makes it
        warnings.filterwarnings("ignore", message=".*[Cc]onsolidated metadata.*")
        xr.Dataset(data_vars, coords=coords, attrs=attrs).to_zarr(path, mode="w-", zarr_format=3, consolidated=True,
                                                                   encoding=encoding)
    return path


def make_cap_store(folder: Path) -> Path:
    """Write a 4 × 3 cap store over shell_parameter × max_indentation with every status and regime present.

    Regimes by indentation: 2 h stable, 8 h stable post-buckling (n = 5), 20 h unstable
    post-buckling (n = 6); λ = 5 is a limit-point cap at every indentation, λ = 20 at 20 h is
    not converged, λ = 14 at 8 h is trusted but has no stored shape.
    """
    lam = np.array([5.0, 9.0, 14.0, 20.0])
    depth = np.array([2.0, 8.0, 20.0])
    radius = np.linspace(0.0, 1.0, 24)
    angle = 2 * np.pi * np.arange(72) / 72
    shape = np.full((4, 3, 24, 72), np.nan)
    status = np.full((4, 3), int(Status.ok))
    regime = np.zeros((4, 3), dtype=int)
    wave = np.zeros((4, 3))
    for i in range(4):
        for j, d in enumerate(depth):
            n = 0 if j == 0 or i == 0 else (5 if j == 1 else 6)
            regime[i, j] = 1 if i == 0 else (0, 2, 3)[j]
            wave[i, j] = n
            shape[i, j] = -d * (1 - radius[:, None] ** 2) ** 2 * np.ones((1, 72)) if n == 0 \
                else cap_field(d, n, radius, angle)
    status[0, 0] = int(Status.no_instability)
    status[3, 2], regime[3, 2], wave[3, 2] = int(Status.not_converged), -1, np.nan
    shape[3, 2] = np.nan
    shape[2, 1] = np.nan
    dims = ("shell_parameter", "max_indentation")
    coords = {
        "shell_parameter": xr.Variable(("shell_parameter",), lam, {"units": "1", "symbol": "λ", "spacing": "linear"}),
        "max_indentation": xr.Variable(("max_indentation",), depth, {"units": "1", "symbol": "δ/h",
                                                                     "spacing": "linear"}),
        "shape_radius": xr.Variable(("shape_radius",), radius),
        "shape_angle": xr.Variable(("shape_angle",), angle),
    }
    data_vars = {
        "shape": xr.Variable((*dims, "shape_radius", "shape_angle"), shape, {"units": "1", "long_name": "w/h"}),
        "branch_wave_number": xr.Variable(dims, wave, {"units": "1"}),
        "ridges": xr.Variable(dims, wave, {"units": "1"}),
        metadata.STATUS_VAR: status, metadata.REGIME_VAR: regime,
    }
    fixed = {"load": "apex_force", "edge": "clamped", "poisson_ratio": 0.3, "wave_number": 0}
    attrs = _attrs("synthetic_cap", fixed, {"shell_parameter": lam.tolist(), "max_indentation": depth.tolist()},
                   CAP_REGIMES)
    return _write(folder / "caps.zarr", dims, data_vars, coords, attrs, CAP_REGIMES)


def strip_section(width: float, radius: float, flatten: float) -> np.ndarray:
    """Return (y, z) [m] of a shallow circular-arc section of ``width`` with its curvature scaled by ``flatten``."""
    s = np.linspace(-0.5, 0.5, 41) * width
    return np.stack([s, -flatten * s**2 / (2 * radius)])


def make_strip_store(folder: Path) -> Path:
    """Write a 2 × 2 strip store over width × load (named axis); one point without limit point or fold, one failed."""
    widths = np.array([0.02, 0.04])
    loads = np.array(["bend_opposite", "bend_equal"], dtype=object)
    radius = 0.025
    section = np.full((2, 2, 3, 2, 41), np.nan)
    status = np.full((2, 2), int(Status.ok))
    regime = np.ones((2, 2), dtype=int)
    for i, w in enumerate(widths):
        for j in range(2):
            section[i, j, 0] = strip_section(w, radius, 1.0)
            section[i, j, 1] = strip_section(w, radius, 0.6)
            section[i, j, 2] = strip_section(w, radius, 0.05)
    section[0, 1, 1:] = np.nan       # no limit point and no fold: stages 1 and 2 are NaN
    regime[0, 1] = 0
    status[1, 1], regime[1, 1] = int(Status.failed), -1
    section[1, 1] = np.nan
    dims = ("width", "load")
    coords = {
        "width": xr.Variable(("width",), widths, {"units": "m", "spacing": "linear"}),
        "load": xr.Variable(("load",), loads, {"units": "1", "spacing": "list"}),
        "section_stage": xr.Variable(("section_stage",), np.arange(3)),
        "section_xy": xr.Variable(("section_xy",), np.arange(2)),
        "section_arc": xr.Variable(("section_arc",), np.linspace(-0.5, 0.5, 41)),
    }
    data_vars = {
        "section_shape": xr.Variable((*dims, "section_stage", "section_xy", "section_arc"), section,
                                     {"units": "m", "long_name": "deformed mid-surface section"}),
        "peak_moment": xr.Variable(dims, np.full((2, 2), 0.12), {"units": "N m"}),
        metadata.STATUS_VAR: status, metadata.REGIME_VAR: regime,
    }
    fixed = {"thickness": 1.5e-4, "transverse_radius": radius, "youngs_modulus": 2.0e11, "poisson_ratio": 0.3,
             "length": 0.6}
    attrs = _attrs("synthetic_strip", fixed, {"width": widths.tolist(), "load": loads.tolist()}, STRIP_REGIMES)
    return _write(folder / "strips.zarr", dims, data_vars, coords, attrs, STRIP_REGIMES)


def make_plain_store(folder: Path) -> Path:
    """Write a store with scalar outputs only (no shape)."""
    lam = np.array([5.0, 9.0])
    coords = {"shell_parameter": xr.Variable(("shell_parameter",), lam, {"units": "1", "spacing": "linear"})}
    data_vars = {"critical_load": xr.Variable(("shell_parameter",), np.array([1.0, 0.8]), {"units": "1"}),
                 metadata.STATUS_VAR: np.ones(2), metadata.REGIME_VAR: np.zeros(2)}
    attrs = _attrs("synthetic_plain", {}, {"shell_parameter": lam.tolist()}, ("stable", "limit_point"))
    return _write(folder / "plain.zarr", ("shell_parameter",), data_vars, coords, attrs, ("stable", "limit_point"))
