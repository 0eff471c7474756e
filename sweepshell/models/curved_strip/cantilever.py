"""A curved strip as a cantilever: clamped at one end, concave side up, under its weight and a tip load."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from sweepshell.models.base import Status
from sweepshell.models.curved_strip.moment_path import invert_moment

__all__ = ["solve_cantilever"]

#: Gauss points along a cantilever for its tip deflection
_CANTILEVER_GAUSS = 32


def solve_cantilever(s: Mapping[str, Any], inputs: Mapping[str, np.ndarray], idx: np.ndarray,
                     paths: dict[str, np.ndarray], at: np.ndarray, m_unit: np.ndarray, k_unit: np.ndarray,
                     out: dict[str, np.ndarray], status: np.ndarray, regime: np.ndarray) -> None:
    """Fill the cantilever outputs of points ``idx`` from their paths: critical length, tip deflection, regime.

    The root moment is qL²/2 + PL (small slopes); the tip deflection integrates κ(M(ξ)) ξ over
    the length on the pre-peak branch; a tip rotation above ``max_tip_rotation``, or a moment
    beyond the path's top, is ``outside_validity``.
    """

    def get(name: str) -> np.ndarray:
        return np.asarray(inputs[name], dtype=float)[idx]

    w, h, length = get("width"), get("thickness"), get("length")
    q = get("density") * get("gravity") * h * w
    tip = get("tip_load")
    m_peak = paths["m_peak"][at] * m_unit
    # the positive root of qL²/2 + PL = M_peak, written without cancellation for large P
    with np.errstate(invalid="ignore"):
        l_crit = 2.0 * m_peak / (np.sqrt(tip**2 + 2.0 * q * m_peak) + tip)
    out["critical_length"][idx] = l_crit
    collapsed = length > l_crit  # False where l_crit is NaN (no limit point)
    regime[idx] = np.where(collapsed, 2, 0)
    holds = ~collapsed
    if not holds.any():
        return
    sel = np.nonzero(holds)[0]
    xg, wg = np.polynomial.legendre.leggauss(_CANTILEVER_GAUSS)
    xi = 0.5 * (xg + 1.0)[None, :] * length[sel, None]  # distance from the tip
    weights = 0.5 * wg[None, :] * length[sel, None]
    target = (0.5 * q[sel, None] * xi**2 + tip[sel, None] * xi) / m_unit[sel, None]
    u = at[sel]
    k_top = np.where(paths["has_peak"][u], paths["k_peak"][u], paths["k_max"][u])
    m_top = np.where(paths["has_peak"][u], paths["m_peak"][u], paths["m_max"][u])
    beyond = (target > m_top[:, None]).any(axis=1)
    k = invert_moment(s["modes"], paths["c"][u], paths["nu"][u], paths["p"][u],
                      np.minimum(target, m_top[:, None]), k_top, paths["gain"][u] * (1.0 - paths["nu"][u] ** 2))
    kappa = k * k_unit[sel, None]
    out["tip_deflection"][idx[sel]] = np.sum(kappa * xi * weights, axis=1)
    rotation = np.sum(kappa * weights, axis=1)
    too_steep = beyond | (rotation > s["max_tip_rotation"])
    status[idx[sel[too_steep]]] = Status.outside_validity
