"""Load paths of the shallow-cap model sampled evenly along their length."""

from __future__ import annotations

import numpy as np

from sweepshell.numerics.arclength import PathHistory

__all__ = ["sample_paths"]


def sample_paths(hist: PathHistory, deflection: np.ndarray, load_unit: np.ndarray, samples: int) -> np.ndarray:
    """Return ``(n, samples, 2)``: (load, apex deflection/h) evenly spaced along each path.

    ``deflection`` ``(n, S)`` is the apex deflection of every path point. Length along a path is
    measured with load and deflection each scaled by their largest magnitude on that path; all
    paths are interpolated at once (one sorted search).
    """
    n, cap, _ = hist.z.shape
    out = np.empty((n, samples, 2))
    if n == 0:
        return out
    defl = np.nan_to_num(deflection)
    load = hist.z[:, :, -1] * load_unit[:, None]
    # past a path's end repeat its last point: zero-length segments that interpolation never lands in
    last = np.maximum(hist.count - 1, 0)
    beyond = np.arange(cap)[None, :] > last[:, None]
    idx = np.arange(n)
    load = np.where(beyond, load[idx, last][:, None], load)
    defl = np.where(beyond, defl[idx, last][:, None], defl)
    scale_l = np.maximum(np.abs(load).max(axis=1), 1e-12)[:, None]
    scale_d = np.maximum(np.abs(defl).max(axis=1), 1e-12)[:, None]
    seg = np.hypot(np.diff(load, axis=1) / scale_l, np.diff(defl, axis=1) / scale_d)
    arc = np.concatenate([np.zeros((n, 1)), np.cumsum(seg, axis=1)], axis=1)
    total = arc[:, -1]
    moving = total > 0
    with np.errstate(invalid="ignore", divide="ignore"):
        frac_arc = np.where(moving[:, None], arc / total[:, None], 0.0)
    # rows side by side on one axis (row i occupies [2i, 2i + 1]) for a single searchsorted
    keys = (2.0 * idx[:, None] + frac_arc).ravel()
    u = np.linspace(0.0, 1.0, samples)
    targets = (2.0 * idx[:, None] + u[None, :]).ravel()
    pos = np.searchsorted(keys, targets, side="right") - 1
    row_of = np.repeat(idx, samples)
    pos = np.clip(pos, row_of * cap, row_of * cap + cap - 2)
    k0, k1 = keys[pos], keys[pos + 1]
    with np.errstate(invalid="ignore", divide="ignore"):
        w1 = np.where(k1 > k0, (targets - k0) / (k1 - k0), 0.0)
    w1 = np.clip(w1, 0.0, 1.0)
    for comp, values in enumerate((load.ravel(), defl.ravel())):
        v = values[pos] + w1 * (values[pos + 1] - values[pos])
        out[:, :, comp] = v.reshape(n, samples)
    still = ~moving
    out[still, :, 0] = load[still, :1]
    out[still, :, 1] = defl[still, :1]
    return out
