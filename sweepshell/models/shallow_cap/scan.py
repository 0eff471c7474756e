"""The asymmetric scan of the shallow-cap model: stability determinants along each traced path.

All wave numbers n = 1…N are evaluated at sampled path points up to the first limit point;
the first step where a determinant changes sign brackets a ``cos nθ`` bifurcation, which
:mod:`.bifurcations` then locates inside the step and refines along the arc.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from sweepshell.models.shallow_cap.kernels import CapPathProblem
from sweepshell.models.shallow_cap.modes import compute_mode_determinants
from sweepshell.models.shallow_cap.screened_scan import scan_screened
from sweepshell.models.shallow_cap.stability_grid import select_stability_nodes

__all__ = ["ModeCrossings", "scan_modes"]

_DET_CHUNK = 1024
_DET_CHUNK_ELEMENTS = 12_500_000  # ~100 MB per (states, M, M) float64 stack of stability matrices
_SCAN_ROUND = 8  # sampled path points per cap evaluated before looking for a flip
SCREEN_APEX = True  # apex-force caps are scanned on the screening grid first (screened_scan.py)


@dataclass(frozen=True)
class ModeCrossings:
    """Wave numbers whose stability determinant changed sign in a cap's first flipped step.

    Arrays over crossings: the cap (``point``), the wave number, the determinant ratio across
    the step and the determinant's sign and log|det| at the step before.
    """

    point: np.ndarray
    mode: np.ndarray
    ratio: np.ndarray
    sign: np.ndarray
    logdet: np.ndarray

    def take(self, keep: np.ndarray) -> ModeCrossings:
        """Return the crossings selected by ``keep``."""
        return ModeCrossings(*(np.asarray(v)[keep] for v in vars(self).values()))


_NO_CROSSINGS = ModeCrossings(*(np.zeros(0, dtype=t) for t in (int, int, float, float, float)))


def _modes_determinants(pb: CapPathProblem, z: np.ndarray, idx: np.ndarray,
                        modes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    sign = np.empty((z.shape[0], modes.size))
    logdet = np.empty_like(sign)
    if z.shape[0] == 0:
        return sign, logdet
    # apex-force states are analysed on a 3x grid: fewer states per chunk keeps the matrices in memory bounds
    size = int(select_stability_nodes(pb, idx).max())
    chunk = int(max(32, min(_DET_CHUNK, _DET_CHUNK_ELEMENTS // (size * size))))
    for lo in range(0, z.shape[0], chunk):
        sl = slice(lo, lo + chunk)
        sign[sl], logdet[sl] = compute_mode_determinants(pb, z[sl], idx[sl], modes)
    return sign, logdet


def _evaluate_in_rounds(pb: CapPathProblem, zh: np.ndarray, sampled: np.ndarray,
                        modes: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Evaluate the sampled states ``_SCAN_ROUND`` per cap at a time, each cap up to its first flip.

    A deep cap under an apex force bifurcates long before its path ends, so its later samples
    are skipped. Returns the signs and log|det| ``(n, S, modes)`` (NaN where not evaluated) and
    the evaluated mask ``(n, S)``.
    """
    n = zh.shape[0]
    sg_all = np.full((n, zh.shape[1], modes.size), np.nan)
    ld_all = np.full_like(sg_all, np.nan)
    rank = np.cumsum(sampled, axis=1) - 1
    last_rank = rank[:, -1]
    evaluated = np.zeros_like(sampled)
    active = np.asarray(sampled.any(axis=1))
    start = 0
    while active.any():
        chunk = sampled & active[:, None] & (rank >= start) & (rank < start + _SCAN_ROUND)
        pi, pj = np.nonzero(chunk)
        sg_all[pi, pj], ld_all[pi, pj] = _modes_determinants(pb, zh[pi, pj], pi, modes)
        evaluated |= chunk
        flipped_now = (sg_all[pi, pj] != sg_all[pi, 0]).any(axis=1)
        active[pi[flipped_now]] = False
        start += _SCAN_ROUND
        active &= last_rank >= start
    return sg_all, ld_all, evaluated


def _fill_between_samples(pb: CapPathProblem, zh: np.ndarray, rows: np.ndarray, j_lo: np.ndarray,
                          j_hi: np.ndarray, flipped: np.ndarray, modes: np.ndarray, stride: int,
                          sg_all: np.ndarray, ld_all: np.ndarray) -> None:
    """Evaluate the steps strictly between two samples, only for the wave numbers that flipped."""
    for col in np.nonzero(flipped.any(axis=0))[0]:
        sel = flipped[:, col]
        ri = np.repeat(rows[sel], stride)
        rj = (j_lo[sel][:, None] + np.arange(1, stride + 1)[None, :]).ravel()
        keep = rj < np.repeat(j_hi[sel], stride)
        ri, rj = ri[keep], rj[keep]
        if ri.size:
            s1, l1 = _modes_determinants(pb, zh[ri, rj], ri, modes[col:col + 1])
            sg_all[ri, rj, col], ld_all[ri, rj, col] = s1[:, 0], l1[:, 0]


def scan_modes(pb: CapPathProblem, zh: np.ndarray, scanned: np.ndarray, scan_end: np.ndarray,
               modes: np.ndarray, stride: int) -> tuple[np.ndarray, ModeCrossings]:
    """Return the first path step where a stability determinant changed sign, per cap.

    Apex-force caps are scanned by :func:`~.screened_scan.scan_screened` (a cheap screening
    grid first, their stability grid where it matters), the others by evaluating every sampled
    step (:func:`_scan_every_step`).

    Returns
    -------
    step, crossings
        ``(n,)`` index of the first step with a flip (-1: none), and the wave numbers that
        flipped in that step.
    """
    jb = np.full(zh.shape[0], -1)
    if modes.size == 0 or not scanned.any():
        return jb, _NO_CROSSINGS
    screened = scanned & pb.apex if SCREEN_APEX else np.zeros_like(scanned)
    caps = np.nonzero(screened)[0]
    jb[caps], out = scan_screened(pb, zh, caps, scan_end, modes, stride)
    rest = scanned & ~screened
    if rest.any():
        jb_rest, out_rest = _scan_every_step(pb, zh, rest, scan_end, modes, stride)
        jb[rest] = jb_rest[rest]
        out += out_rest
    if not out:
        return jb, _NO_CROSSINGS
    out.sort(key=lambda c: c[0])
    cols = list(zip(*out, strict=True))
    return jb, ModeCrossings(*(np.asarray(c) for c in cols))


def _scan_every_step(pb: CapPathProblem, zh: np.ndarray, scanned: np.ndarray, scan_end: np.ndarray,
                     modes: np.ndarray, stride: int) -> tuple[np.ndarray, list[tuple[int, int, float, float, float]]]:
    """Return the first path step where a stability determinant changed sign, per cap (every sample evaluated).

    All wave numbers are evaluated at every ``stride``-th accepted step (and at the last one);
    path steps are short where the state changes fast (near folds), so this sampling is
    densest where determinants move fastest. The samples are evaluated in rounds along the
    path and a cap's later samples are skipped once one has flipped (same result). Inside the
    first sampled interval whose end has a flipped sign, only the flipped wave numbers are
    evaluated at the steps in between, and the first step with a flip is kept. A wave number
    whose determinant changes sign twice between two evaluations (two eigenvalues crossing) is
    missed: ``stride = 1`` (every step) is the safe default.

    Returns
    -------
    step, crossings
        ``(n,)`` index of the first step with a flip (-1: none), and the crossings of that step
        as tuples ``(cap, wave number, determinant ratio, sign before, log|det| before)``.
    """
    n = zh.shape[0]
    jb = np.full(n, -1)
    steps = np.arange(zh.shape[1])
    inside = (steps[None, :] <= scan_end[:, None]) & scanned[:, None]
    sampled = inside & ((steps[None, :] % stride == 0) | (steps[None, :] == scan_end[:, None]))
    sg_all, ld_all, evaluated = _evaluate_in_rounds(pb, zh, sampled, modes)
    ref = sg_all[:, 0]
    flip_at = (sg_all != ref[:, None, :]) & evaluated[:, :, None]
    any_flip = flip_at.any(axis=2)
    rows = np.nonzero(any_flip.any(axis=1))[0]
    if rows.size == 0:
        return jb, []
    j_hi = np.argmax(any_flip[rows], axis=1)
    j_lo = (j_hi - 1) // stride * stride
    flipped = flip_at[rows, j_hi]  # (r, modes)
    if stride > 1:
        _fill_between_samples(pb, zh, rows, j_lo, j_hi, flipped, modes, stride, sg_all, ld_all)
    out: list[tuple[int, int, float, float, float]] = []
    for r, i in enumerate(rows):
        cand = flipped[r]
        seg = sg_all[i, j_lo[r] + 1:j_hi[r] + 1][:, cand] != ref[i, cand][None, :]
        j = int(j_lo[r] + 1 + np.argmax(seg.any(axis=1)))
        prev_s, prev_l = sg_all[i, j - 1], ld_all[i, j - 1]
        now_s, now_l = sg_all[i, j], ld_all[i, j]
        jb[i] = j
        for k in np.nonzero(cand & (now_s != prev_s))[0]:
            ratio = prev_s[k] * now_s[k] * np.exp(np.clip(now_l[k] - prev_l[k], -700, 700))
            out.append((int(i), int(modes[k]), float(ratio), float(prev_s[k]), float(prev_l[k])))
    return jb, out
