"""The caps of one batch and the axisymmetric path problem built from them."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, fields
from typing import Any

import numpy as np

from sweepshell.models.shallow_cap.grids import get_cap_grid
from sweepshell.models.shallow_cap.kernels import CapPathProblem, eigenstrain_stress

__all__ = ["CapInputs", "build_batch_problem", "build_problem"]


@dataclass(frozen=True)
class CapInputs:
    """The non-dimensional inputs of n caps (arrays of shape ``(n,)``).

    Attributes
    ----------
    lam, nu
        Shell parameter λ and Poisson's ratio.
    clamped, immovable, apex
        Edge and load flags (see :class:`~sweepshell.models.shallow_cap.kernels.CapPathProblem`).
    amplitude, width
        Dimple amplitude (over h) and width (over ℓ = a/λ).
    mismatch, mismatch_strain, mismatch_radius, annulus
        Mismatch load flags and its range end (signed, over ε_cl = 2h/(R c)), region radius over
        a and region kind (see :func:`build_problem`); all or none.
    """

    lam: np.ndarray
    nu: np.ndarray
    clamped: np.ndarray
    immovable: np.ndarray
    apex: np.ndarray
    amplitude: np.ndarray
    width: np.ndarray
    mismatch: np.ndarray | None = None
    mismatch_strain: np.ndarray | None = None
    mismatch_radius: np.ndarray | None = None
    annulus: np.ndarray | None = None

    def take(self, rows: np.ndarray) -> CapInputs:
        """Return the caps ``rows`` (absent mismatch arrays stay absent)."""
        parts: dict[str, Any] = {}
        for f in fields(self):
            value = getattr(self, f.name)
            parts[f.name] = None if value is None else value[rows]
        return CapInputs(**parts)



def build_problem(lam: np.ndarray, nu: np.ndarray, clamped: np.ndarray, immovable: np.ndarray,
                 apex: np.ndarray, amplitude: np.ndarray, width: np.ndarray, nodes: int, *,
                 mismatch: np.ndarray | None = None, mismatch_strain: np.ndarray | None = None,
                 mismatch_radius: np.ndarray | None = None, annulus: np.ndarray | None = None,
                 step_width: float = 0.1, stretch: float = 0.0, centre: float = 0.0, split: float = 0.0,
                 outer: int = 0) -> CapPathProblem:
    """Return the batched axisymmetric problem of the given caps.

    The mismatch arrays (all or none) select the mismatch load per cap: its direction is the
    sign of ``mismatch_strain`` (over ε_cl; negative = shrinkage), its region the disc
    ``x < mismatch_radius`` or, where ``annulus``, the ring outside it, its edge sharp
    (``step_width`` 0) or smoothed over ``step_width`` (over a; 0.1 here for direct callers, the
    model's default is the sharp edge). ``nodes``, ``stretch`` and
    ``centre`` choose the radial grid (see
    :func:`~sweepshell.numerics.radial_chebyshev.build_radial_grid`; a sharp edge wants
    ``centre`` = its radius, which puts a node on it); ``split`` ρ > 0 with ``outer`` the
    two-domain grid split at ρ instead (:func:`~.grids.get_cap_grid`).
    """
    grid = get_cap_grid(nodes, stretch, centre, split, outer)
    x = grid.x
    n = lam.shape[0]
    c = np.sqrt(3.0 * (1.0 - nu**2))
    lw = (lam / width)[:, None]
    imperfection = 4.0 * (c * amplitude / width**2)[:, None] * x[None, :] * np.exp(-(lw * x[None, :]) ** 2)
    force_scale = np.where(apex, 1.0 + lam**2 / (4.0 * c), 1.0)
    if mismatch is None or mismatch_strain is None or mismatch_radius is None or annulus is None:
        mismatch = np.zeros(n, dtype=bool)
        mismatch_strain, mismatch_radius, annulus = np.zeros(n), np.ones(n), np.zeros(n, dtype=bool)
    # the critical mismatch of a nearly flat cap grows like 1/λ² (plate buckling): this unit
    # keeps the continuation parameter of order one
    direction = np.where(mismatch_strain < 0, -1.0, 1.0)
    force_scale = np.where(mismatch, direction * (1.0 + 4.0 / lam**2), force_scale)
    f_p, df_p, edge = eigenstrain_stress(x, mismatch_radius.astype(float), annulus, nu.astype(float), immovable,
                                         step_width)
    f_p[~mismatch] = 0.0
    df_p[~mismatch] = 0.0
    edge[~mismatch] = 0.0
    return CapPathProblem(grid=grid, lam=lam.astype(float), nu=nu.astype(float), clamped=clamped,
                          immovable=immovable, apex=apex, imperfection=imperfection, force_scale=force_scale,
                          mismatch=mismatch, eigen_stress=f_p, eigen_stress_slope=df_p, eigen_edge=edge)



def build_batch_problem(caps: CapInputs, settings: Mapping[str, Any]) -> CapPathProblem:
    """Return the path problem of ``caps`` on the radial grid that ``settings`` choose."""
    return build_problem(caps.lam, caps.nu, caps.clamped, caps.immovable, caps.apex, caps.amplitude, caps.width,
                         int(settings["nodes"]), mismatch=caps.mismatch, mismatch_strain=caps.mismatch_strain,
                         mismatch_radius=caps.mismatch_radius, annulus=caps.annulus,
                         step_width=float(settings.get("mismatch_step_width", 0.1)),
                         stretch=float(settings.get("grid_stretch", 0.0)),
                         centre=float(settings.get("grid_centre", 0.0)), split=float(settings.get("grid_split", 0.0)),
                         outer=int(settings.get("grid_outer", 0)))
