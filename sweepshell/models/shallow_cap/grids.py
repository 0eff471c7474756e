"""Radial grid of each shallow-cap point: node count, axis stretch and clustering centre.

The automatic node counts follow the measured need for the stated accuracy of the critical
load (``theory.md``; ``tests/models/shallow_cap/test_resolution.py``).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from sweepshell.numerics.radial_chebyshev import RadialGrid, build_radial_grid
from sweepshell.numerics.radial_two_domain import build_split_grid

__all__ = ["choose_grid_centres", "choose_grid_splits", "choose_grids", "get_cap_grid", "get_mismatch_nodes",
           "get_split_counts"]

_FIXED_NODES = 34  # smoothed-edge mismatch points' base grid when ``nodes`` is automatic


def get_cap_grid(m: int, stretch: float = 0.0, centre: float = 0.0, split: float = 0.0, outer: int = 0) -> RadialGrid:
    """Return the radial grid of identity ``(m, stretch, centre, split, outer)`` (both builders cache).

    ``split`` ρ > 0: the two-domain grid split at ρ with ``outer`` + 1 nodes on ``[ρ, 1]``
    (:func:`~sweepshell.numerics.radial_two_domain.build_split_grid`); otherwise the single
    grid of :func:`~sweepshell.numerics.radial_chebyshev.build_radial_grid`.
    """
    if split > 0.0:
        return build_split_grid(m, split, outer)
    return build_radial_grid(m, stretch, centre)


def get_mismatch_nodes(settings: Mapping[str, Any], lam: np.ndarray) -> np.ndarray:
    """Return the grid size of mismatch-strain points with shell parameters ``lam``.

    Sharp edge (``mismatch_step_width`` 0), on the grid clustered at the edge
    (``mismatch_grid`` clustered, :func:`choose_grid_centres`): ``nodes``, or when automatic
    44 + 1.8λ (even, 48 … 96), the size that gives about 10⁻⁴ relative accuracy of the critical
    load (the measurements are in ``theory.md`` and tests/models/shallow_cap/test_mismatch_sharp.py);
    the two-domain grid's counts are :func:`get_split_counts` (:func:`choose_grid_splits`). Smoothed edge: the edge
    sits inside the cap, where the Chebyshev grid is coarsest, and results lose digits fast when
    w·nodes falls below about 3.4, so ``nodes`` (when automatic max(34, 16 + 1.5λ), even) is
    raised until w·nodes ≥ 3.4.
    """
    width = float(settings["mismatch_step_width"])
    if width == 0.0:
        if int(settings["nodes"]):
            return np.full(lam.shape, int(settings["nodes"]))
        return np.clip(np.ceil((44.0 + 1.8 * lam) / 2.0) * 2.0, 48, 96).astype(int)
    if int(settings["nodes"]):
        return np.full(lam.shape, max(int(settings["nodes"]), math.ceil(3.4 / width)))
    # on deep caps the mismatch state needs more than 34 nodes whatever the width: at λ = 20 a
    # shrinking disc (ρ = 0.5) showed a spurious n = 2 bifurcation on 34 nodes, none on 40 … 80
    return np.maximum(math.ceil(3.4 / width),
                      np.maximum(_FIXED_NODES, np.ceil((16.0 + 1.5 * lam) / 2.0) * 2.0)).astype(int)


def choose_grid_centres(settings: Mapping[str, Any], eigen: np.ndarray, radius: np.ndarray) -> np.ndarray:
    """Return each point's clustering centre ρ of the radial grid (0: none; see ``build_radial_grid``).

    Mismatch points with a sharp edge inside the cap (``mismatch_step_width`` 0, ρ < 1) and
    ``mismatch_grid`` clustered get the grid clustered around x = ±ρ with a node on ρ (with
    ``mismatch_grid`` split the two-domain grid of :func:`choose_grid_splits`):
    their response has a kink there (a jump of
    the hoop prestress and of the third derivative of the slope), which a plain grid resolves
    only to first order, oscillating with where ρ falls between nodes.
    """
    sharp = eigen & (float(settings["mismatch_step_width"]) == 0.0) & (radius < 1.0)
    return np.where(sharp & ~_sharp_split(settings, eigen, radius), radius, 0.0)


def _sharp_split(settings: Mapping[str, Any], eigen: np.ndarray, radius: np.ndarray) -> np.ndarray:
    """Return which points are sharp-edged mismatch points on the two-domain grid."""
    return (eigen & (float(settings["mismatch_step_width"]) == 0.0) & (radius < 1.0)
            & (str(settings.get("mismatch_grid", "split")) == "split"))


def get_split_counts(lam: float, rho: float, nodes: int = 0) -> tuple[int, int]:
    """Return ``(M, p)``: the node count and outer order of the two-domain grid split at ρ (λ the shell parameter).

    The measured need for about 10⁻⁵ relative accuracy of the critical load (against 96 nodes
    with the same rule; ladders in ``theory.md``): ``p = 20 + 1.4 λ (1 − ρ)`` on the outer side
    (the edge layer, the layer at ρ and wrinkles around a disc), ``q = 8 + 1.5 λ ρ`` on the inner
    one, M = p + q, with λ rounded up to an even number so that points of one region radius and
    nearby λ share a grid (and a batch). A given ``nodes`` M is shared in the same proportion (at
    least 8 and 6).
    """
    lam = 2.0 * math.ceil(lam / 2.0)
    p_need, q_need = 20.0 + 1.4 * lam * (1.0 - rho), 8.0 + 1.5 * lam * rho
    if nodes <= 0:
        p, q = math.ceil(p_need), math.ceil(q_need)
        return p + q, p
    p = round(nodes * p_need / (p_need + q_need))
    return nodes, int(min(max(p, 8), nodes - 6))


def choose_grid_splits(settings: Mapping[str, Any], lam: np.ndarray, eigen: np.ndarray, radius: np.ndarray,
                       nodes: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return each point's node count, split radius ρ and outer order (0, 0 for one domain).

    Sharp-edged mismatch points (``mismatch_step_width`` 0, ρ < 1) with ``mismatch_grid`` split
    get the two-domain grid of :func:`get_split_counts` (``nodes`` when fixed); the others keep
    ``nodes``.
    """
    split = _sharp_split(settings, eigen, radius)
    fixed = int(settings["nodes"])
    counts = [get_split_counts(float(v), float(r), fixed) if s else (int(m), 0)
              for v, r, s, m in zip(lam, radius, split, nodes, strict=True)]
    size = np.array([c[0] for c in counts], dtype=int)
    outer = np.array([c[1] for c in counts], dtype=int)
    return size, np.where(split, radius, 0.0), outer


def choose_grids(settings: Mapping[str, Any], lam: np.ndarray, apex: np.ndarray, eigen: np.ndarray,
                 amplitude: np.ndarray, width: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return each point's radial grid: node count and stretch β (see ``build_radial_grid``).

    With ``nodes`` 0 (automatic) the count follows the measured need for 3·10⁻⁷ relative
    accuracy of the critical load (tests/models/shallow_cap/test_resolution.py; theory.md).
    It grows about linearly with λ (edge and ridge layers of width ∝ 1/λ; a dimple of width b
    over a/λ has width b/λ in x). Grids are stretched towards the axis where the solution
    varies fastest there: dimpled caps (``dimple_grid_stretch``) and apex forces
    (``apex_grid_stretch``); perfect caps under pressure keep Chebyshev points, whose edge
    clustering the asymmetric modes need; mismatch points use :func:`get_mismatch_nodes` (and
    sharp-edged ones the clustered map of :func:`choose_grid_centres`, or the two-domain grid of
    :func:`choose_grid_splits`, which sets its own counts).
    Counts are even, from 16 to 96.
    """
    scan = int(settings["asymmetric_modes"]) > 0
    dimpled = (amplitude != 0.0) & ~apex & ~eigen
    beta = np.where(apex, float(settings["apex_grid_stretch"]),
                    np.where(dimpled, float(settings["dimple_grid_stretch"]), 0.0))
    if int(settings["nodes"]):
        nodes = np.full(lam.shape, int(settings["nodes"]))
    else:
        perfect = 14.0 + lam if scan else np.maximum(14.0 + lam, 8.0 + 1.5 * lam)
        stretched = 12.0 + 1.5 * lam if scan else 14.0 + 1.2 * lam
        dimple = np.where(amplitude != 0.0, 4.0 + 2.0 * lam / np.maximum(width, 0.25), 0.0)
        need = np.where(apex, np.maximum(16.0 + 1.4 * lam, dimple),
                        np.where(dimpled, np.maximum(stretched, dimple), perfect))
        nodes = np.clip(np.ceil(need / 2.0) * 2.0, 16, 96).astype(int)
    mismatch_nodes = get_mismatch_nodes(settings, lam)
    if not int(settings["nodes"]):
        # a dimple on a mismatch grid (no axis stretch there): the plain-grid need of a dimple,
        # 2 + 4.6λ/b (measured for pressure; not separately measured for mismatch loads)
        plain_dimple = np.where(amplitude != 0.0, 2.0 + 4.6 * lam / np.maximum(width, 0.25), 0.0)
        mismatch_nodes = np.maximum(mismatch_nodes,
                                    np.clip(np.ceil(plain_dimple / 2.0) * 2.0, 0, 96).astype(int))
    nodes = np.where(eigen, mismatch_nodes, nodes)
    return nodes, np.where(eigen, 0.0, beta)
