"""Bistability of the shallow-cap model: a stable zero-load state past the first limit point."""

from __future__ import annotations

import numpy as np

from sweepshell.models.shallow_cap.compiled import refine_caps_on_arc
from sweepshell.models.shallow_cap.kernels import CapPathProblem
from sweepshell.models.shallow_cap.modes import count_unstable_modes
from sweepshell.numerics.arclength import TRACE_DONE, PathHistory

__all__ = ["check_bistability"]


def check_bistability(pb: CapPathProblem, hist: PathHistory, w: np.ndarray, has_fold: np.ndarray, jf: np.ndarray,
                      modes: np.ndarray, tol: float) -> np.ndarray:
    """Return 1/0 per cap: a stable zero-load state on the path past the first limit point.

    The candidate is the first state after the first limit point where the load returns to
    zero while increasing along the path (dμ/ds > 0). Axisymmetric stability: the path starts
    stable with dμ/ds > 0 and the stability index changes by one at each fold, so dμ/ds > 0
    means an even index (a parity test, sound while at most one axisymmetric eigenvalue is
    negative). Asymmetric stability: no negative eigenvalue of the ``cos nθ`` operators for
    n = 1…N (a count, not a parity). Caps without a limit point are not bistable (0); NaN when
    the path ended (step limit, stall) before a decision.
    """
    n = hist.count.shape[0]
    out = np.zeros(n)
    mu = hist.z[:, :, -1]
    steps = np.arange(mu.shape[1])
    valid = steps[None, :] < hist.count[:, None]
    after = steps[None, :-1] > jf[:, None]
    up = valid[:, 1:] & after & (mu[:, :-1] < 0) & (mu[:, 1:] >= 0) & has_fold[:, None]
    found = up.any(axis=1)
    out[has_fold & ~found & (hist.state != TRACE_DONE)] = np.nan
    rows = np.nonzero(found)[0]
    if rows.size == 0:
        return out
    j = np.argmax(up[rows], axis=1)
    zr, tr, _, ok = refine_caps_on_arc(pb, hist.z[rows, j], hist.t[rows, j], hist.step[rows, j + 1],
                                       mu[rows, j], mu[rows, j + 1], rows, w, use_load=True,
                                       tol=tol, max_iter=8, iterations=30, s_tol=1e-6)
    stable = ok & (np.nan_to_num(tr[:, -1]) > 0)
    if modes.size and ok.any():
        unstable = count_unstable_modes(pb, np.nan_to_num(zr[ok]), rows[ok], modes)
        stable[ok] &= unstable.sum(axis=1) == 0
    out[rows] = np.where(ok, stable.astype(float), np.nan)
    return out
