"""The separate checks of ``sweepshell verify``: metadata files, attributes, layout, ledger rules, point list.

Each check returns the :class:`~sweepshell.store.verify_report.VerifyProblem` list it found
and reads nothing but JSON attributes and zarr arrays of the store's declared numeric dtypes.
:mod:`sweepshell.store.verify` runs them in order over the store and its blocks.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from sweepshell.models.base import TRUSTED_STATUSES, Status
from sweepshell.store import metadata
from sweepshell.store.metadata import ATTR
from sweepshell.store.verify_report import VerifyProblem

__all__ = ["check_attributes", "check_ledger", "check_metadata_files", "check_point_list", "failure_reason",
           "open_arrays"]

_UNTRUSTED_FINAL = np.array(sorted(int(s) for s in Status if s is not Status.pending and s not in TRUSTED_STATUSES))
_TRUSTED = np.array(sorted(int(s) for s in TRUSTED_STATUSES))


def check_metadata_files(root: Path) -> list[VerifyProblem]:
    """Return one problem per ``zarr.json`` in the store that does not parse."""
    problems = []
    for meta in sorted(root.rglob(metadata.META_FILE)):
        try:
            metadata.read_node(meta.parent)
        except (OSError, ValueError) as exc:
            rel = meta.relative_to(root).as_posix()
            problems.append(VerifyProblem("metadata", f"{rel} does not parse ({exc})"))
    return problems


def check_attributes(attrs: dict[str, Any]) -> tuple[list[VerifyProblem], dict[str, list[Any]] | None,
                                                       tuple[int, ...] | None, list[str]]:
    """Check the root attributes; return the problems, the axes, the block shape and the regime names.

    The axes or the block shape are ``None`` when they do not parse (nothing block-wise can be
    checked then); unreadable regimes read as an empty list.
    """
    problems = []
    parsed: dict[str, Any] = {}
    for key in (ATTR.settings, ATTR.fixed, ATTR.axes):
        try:
            value = metadata.read_record(attrs, key)
            if not isinstance(value, dict):
                raise ValueError("not an object")
            parsed[key] = value
        except (KeyError, TypeError, ValueError) as exc:
            problems.append(VerifyProblem("attribute", f"attribute {key} is missing or does not parse ({exc})"))
    axes = parsed.get(ATTR.axes)
    if axes is not None and not all(isinstance(v, list) and v for v in axes.values()):
        problems.append(VerifyProblem("attribute", f"attribute {ATTR.axes} has an axis without a list of values"))
        axes = None
    block_shape: tuple[int, ...] | None = None
    raw = attrs.get(ATTR.block_shape)
    if isinstance(raw, list) and all(isinstance(b, int) and not isinstance(b, bool) and b > 0 for b in raw) and (
            axes is None or len(raw) == len(axes)):
        block_shape = tuple(raw)
    else:
        problems.append(VerifyProblem("attribute", f"attribute {ATTR.block_shape}={raw!r} is not one positive "
                                                   "whole number per axis"))
    regimes = attrs.get(ATTR.regimes)
    if not (isinstance(regimes, list) and all(isinstance(r, str) for r in regimes)):
        problems.append(VerifyProblem("attribute", f"attribute {ATTR.regimes}={regimes!r} is not a list of names"))
        regimes = []
    for key in (ATTR.model, ATTR.model_version):
        if not isinstance(attrs.get(key), str):
            problems.append(VerifyProblem("attribute", f"attribute {key}={attrs.get(key)!r} is not a string"))
    try:
        _dt.datetime.fromisoformat(str(attrs.get(ATTR.created)))
    except ValueError:
        problems.append(VerifyProblem("attribute", f"attribute {ATTR.created}={attrs.get(ATTR.created)!r} is not "
                                                   "an ISO 8601 time"))
    return problems, axes, block_shape, regimes


def open_arrays(root: Path, names: list[str], axes: dict[str, list[Any]]) -> tuple[
        list[VerifyProblem], dict[str, Any]]:
    """Open every data variable from its own metadata (not the consolidated copy) and check the layout."""
    import zarr

    problems: list[VerifyProblem] = []
    arrays: dict[str, Any] = {}
    shape = tuple(len(axes[n]) for n in names)
    for sub in metadata.child_nodes(root):
        name = sub.name
        try:
            meta = metadata.read_node(sub)
        except (OSError, ValueError):
            continue  # reported by the metadata check
        if meta.get("node_type") != "array":
            continue
        try:
            arr = zarr.open_array(str(sub), mode="r", zarr_format=3)
        except Exception as exc:
            problems.append(VerifyProblem("metadata", f"array {name} cannot be opened ({type(exc).__name__})",
                                          variable=name))
            continue
        dims = tuple(getattr(arr.metadata, "dimension_names", None) or ())
        if name in axes:
            try:
                values = np.asarray(arr[...]).tolist()
            except Exception as exc:
                problems.append(VerifyProblem("chunk", f"coordinate {name} does not decode ({type(exc).__name__})",
                                              variable=name))
                continue
            recorded = axes[name]
            if [str(v) for v in values] != [str(v) for v in recorded] and values != recorded:
                problems.append(VerifyProblem("layout", f"coordinate {name} differs from the recorded axis values",
                                              variable=name))
            continue
        if dims[:len(names)] != tuple(names):
            if len(dims) == 1 and dims[0] not in names:
                continue  # the coordinate of an extra output dimension
            problems.append(VerifyProblem("layout", f"variable {name} has dimensions {list(dims)}, expected the axes "
                                                    f"{names} first", variable=name))
            continue
        if tuple(arr.shape[:len(names)]) != shape:
            problems.append(VerifyProblem("layout", f"variable {name} has shape {list(arr.shape)}, the axes say "
                                                    f"{list(shape)}", variable=name))
            continue
        arrays[name] = arr
    for required in (metadata.STATUS_VAR, metadata.REGIME_VAR):
        if required not in arrays and not any(p.variable == required for p in problems):
            problems.append(VerifyProblem("layout", f"variable {required} is missing", variable=required))
    return problems, arrays


def failure_reason(exc: BaseException) -> str:
    """Return the exception's type and the first line of its message, for a one-line problem."""
    text = str(exc).splitlines()[0] if str(exc) else ""
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


def check_ledger(block: Any, status: np.ndarray, values: dict[str, np.ndarray], outputs: list[str],
                  n_regimes: int, will_recompute: bool, not_nullable: set[str] | frozenset[str] = frozenset(),
                  ) -> list[VerifyProblem]:
    """Return the ledger-rule violations of one block (pending points are exempt).

    ``not_nullable`` names the outputs that must hold a value at every trusted point: NaN there
    is lost data, not an answer.
    """
    problems = []
    where = f"block {list(block.index)}"
    unknown = ~np.isin(status, np.arange(len(Status)))
    if unknown.any():
        problems.append(VerifyProblem("ledger", f"{where}: {int(unknown.sum())} points have unknown status codes "
                                                f"{sorted(set(status[unknown].tolist()))[:5]}",
                                      variable=metadata.STATUS_VAR, block=block.index, points=int(unknown.sum()),
                                      recomputed=will_recompute))
    untrusted = np.isin(status, _UNTRUSTED_FINAL)
    trusted = np.isin(status, _TRUSTED)
    regime = values.get(metadata.REGIME_VAR)
    if regime is not None:
        bad = untrusted & (regime != -1)
        if bad.any():
            problems.append(VerifyProblem("ledger", f"{where}: {int(bad.sum())} points with an untrusted status "
                                                    "have a regime other than -1", variable=metadata.REGIME_VAR,
                                          block=block.index, points=int(bad.sum()), recomputed=will_recompute))
        bad = trusted & ((regime < 0) | (regime >= n_regimes))
        if bad.any():
            problems.append(VerifyProblem("ledger", f"{where}: {int(bad.sum())} points with a trusted status have "
                                                    f"no regime in 0..{n_regimes - 1}", variable=metadata.REGIME_VAR,
                                          block=block.index, points=int(bad.sum()), recomputed=will_recompute))
    for name in outputs:
        arr = values.get(name)
        if arr is None or arr.dtype.kind != "f":
            continue
        finite = ~np.isnan(arr.reshape(*status.shape, -1)).all(axis=-1)
        bad = untrusted & finite
        if bad.any():
            problems.append(VerifyProblem("ledger", f"{where}: {int(bad.sum())} points with an untrusted status "
                                                    f"have values in {name} (must be NaN)", variable=name,
                                          block=block.index, points=int(bad.sum()), recomputed=will_recompute))
        bad = trusted & ~finite if name in not_nullable else None
        if bad is not None and bad.any():
            problems.append(VerifyProblem("ledger", f"{where}: {int(bad.sum())} points with a trusted status have "
                                                    f"no value in {name} (NaN; {name} is never NaN at a trusted "
                                                    "point: lost data)", variable=name, block=block.index,
                                          points=int(bad.sum()), recomputed=will_recompute))
    return problems


_POINT_BOOKKEEPING = ("level", "origin")


def check_point_list(root: Path, axis_names: list[str], n_regimes: int) -> list[VerifyProblem]:
    """Check the off-grid point list: chunks decode, final points obey the ledger rules."""
    import zarr

    folder = root / metadata.POINTS_GROUP
    if not metadata.has_node(folder):
        return []
    problems: list[VerifyProblem] = []
    values: dict[str, np.ndarray] = {}
    for sub in metadata.child_nodes(folder):
        name = f"{metadata.POINTS_GROUP}/{sub.name}"
        try:
            values[sub.name] = np.asarray(zarr.open_array(str(sub), mode="r", zarr_format=3)[...])
        except Exception as exc:
            problems.append(VerifyProblem("chunk", f"{name} does not decode ({failure_reason(exc)})",
                                          variable=name))
    status = values.get(metadata.STATUS_VAR)
    if status is None:
        if not any(p.variable == f"{metadata.POINTS_GROUP}/{metadata.STATUS_VAR}" for p in problems):
            problems.append(VerifyProblem("layout", "the point list has no status array",
                                          variable=f"{metadata.POINTS_GROUP}/{metadata.STATUS_VAR}"))
        return problems
    skip = {*axis_names, metadata.STATUS_VAR, metadata.REGIME_VAR, *_POINT_BOOKKEEPING}
    outputs = [n for n in values if n not in skip]
    clipped = {n: v[: status.shape[0]] for n, v in values.items()}
    found = check_ledger(_PointListBlock(), status, clipped, outputs, n_regimes, False)
    return problems + [VerifyProblem(p.kind, p.message.replace("block []", "point list"),
                                     variable=f"{metadata.POINTS_GROUP}/{p.variable}", points=p.points) for p in found]


@dataclass(frozen=True)
class _PointListBlock:
    """Stands for a block in messages about the point list."""

    index: tuple[int, ...] = ()
