"""Refinement of the first ``cos nθ`` bifurcation inside a cap's flipped path step (shallow-cap model).

The scan (:mod:`.scan`) reports, per cap, the first path step across which stability
determinants changed sign and the wave numbers that did. Several often flip within one step
(deep caps, the sphere's nearly degenerate spectrum), and only the earliest zero matters: the
determinants are sampled inside the step, the crossings of the earliest sampled part with a
sign change are kept, and each determinant's zero is found there by safeguarded inverse
quadratic interpolation along the step's arc (:func:`find_zeros_on_arc`; the determinant is a
smooth function of the arclength), dropping a wave number as soon as its bracket lies wholly
past another's.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from sweepshell.models.shallow_cap.compiled import correct_caps_on_arc
from sweepshell.models.shallow_cap.kernels import CapPathProblem
from sweepshell.models.shallow_cap.modes import compute_mode_determinants
from sweepshell.models.shallow_cap.scan import ModeCrossings
from sweepshell.numerics.arclength import PathHistory

__all__ = ["find_zeros_on_arc", "refine_bifurcations"]

_S_TOL = 1e-9  # zeros are refined to this share of their step
_SAMPLES = 4  # interior points of a flipped step at which its crossings are located
_ITERATIONS = 40

Measure = Callable[[np.ndarray, np.ndarray], np.ndarray]


def _trial(s_pts: np.ndarray, g_pts: np.ndarray, lo: np.ndarray, hi: np.ndarray, glo: np.ndarray,
           ghi: np.ndarray) -> np.ndarray:
    """Next trial arclengths: inverse quadratic interpolation of the three latest points, else regula falsi.

    ``s_pts``, ``g_pts`` ``(k, 3)`` hold the three latest evaluations (the first may be NaN:
    then the secant of the other two); a trial outside the bracket ``(lo, hi)`` falls back to
    regula falsi on the bracket (with Illinois-halved end values), kept 1 % inside it.
    """
    s0, s1, s2 = s_pts.T
    g0, g1, g2 = g_pts.T
    width = hi - lo
    with np.errstate(all="ignore"):
        iqi = (s0 * g1 * g2 / ((g0 - g1) * (g0 - g2)) + s1 * g0 * g2 / ((g1 - g0) * (g1 - g2))
               + s2 * g0 * g1 / ((g2 - g0) * (g2 - g1)))
        secant = s2 - g2 * (s2 - s1) / (g2 - g1)
        falsi = (lo * ghi - hi * glo) / (ghi - glo)
    iqi = np.where(np.isfinite(iqi), iqi, secant)
    inside = np.isfinite(iqi) & (iqi > lo) & (iqi < hi)
    falsi = np.clip(np.nan_to_num(falsi, nan=0.5 * (lo + hi)), lo + 0.01 * width, hi - 0.01 * width)
    return np.where(inside, iqi, falsi)


def find_zeros_on_arc(pb: CapPathProblem, anchor: np.ndarray, tangent: np.ndarray, idx: np.ndarray,
                      s_seed: np.ndarray, g_seed: np.ndarray, scale: np.ndarray, w: np.ndarray, measure: Measure,
                      tol: float, group: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Find the zero of ``measure`` on the arcs from ``anchor`` (tangent ``tangent``).

    ``s_seed``, ``g_seed`` ``(k, 3)``: arclengths and measures of three known points, the last
    two bracketing the zero (opposite signs; the first may be NaN). ``measure(z, rows)`` returns
    the measure at states ``z`` of the arcs ``rows``. Every trial point is corrected onto the path on the
    arc (:func:`~.compiled.correct_caps_on_arc`); iterations stop when the bracket or the last
    move is below ``_S_TOL·scale``. Trials come from inverse quadratic interpolation of the
    latest three points (superlinear on the smooth determinants), safeguarded by an
    Illinois-style regula falsi bracket. Arcs of one ``group`` (a cap's wave numbers, on the same
    arc) whose bracket lies wholly beyond another's are dropped (their zero comes later); their
    arclength is then inf.

    Returns
    -------
    z, s, ok
        The last corrected state of each arc (NaN where none), its arclength and whether every
        corrector converged.
    """
    k, m1 = anchor.shape
    s_pts, g_pts = s_seed.astype(float).copy(), g_seed.astype(float).copy()
    low_first = s_pts[:, 1] < s_pts[:, 2]
    lo, hi = np.where(low_first, s_pts[:, 1], s_pts[:, 2]), np.where(low_first, s_pts[:, 2], s_pts[:, 1])
    glo, ghi = np.where(low_first, g_pts[:, 1], g_pts[:, 2]), np.where(low_first, g_pts[:, 2], g_pts[:, 1])
    side = np.zeros(k, dtype=int)
    s_last = np.full(k, np.nan)
    z_best = np.full((k, m1), np.nan)
    ok = np.ones(k, dtype=bool)
    done = np.zeros(k, dtype=bool)
    dropped = np.zeros(k, dtype=bool)
    for _ in range(_ITERATIONS):
        act = np.nonzero(~done & ok)[0]
        if act.size == 0:
            break
        s = _trial(s_pts[act], g_pts[act], lo[act], hi[act], glo[act], ghi[act])
        with np.errstate(invalid="ignore"):
            near = np.abs(s - s_last[act]) < _S_TOL * scale[act]
        done[act[near]] = True
        act, s = act[~near], s[~near]
        if act.size == 0:
            break
        z, conv, _, _ = correct_caps_on_arc(pb, anchor[act], tangent[act], s, idx[act], w, tol=tol, max_iter=8)
        ok[act[~conv]] = False
        a, s = act[conv], s[conv]
        if a.size == 0:
            continue
        g = measure(z[conv], a)
        z_best[a] = z[conv]
        moved = np.abs(s - s_last[a])
        s_last[a] = s
        s_pts[a] = np.stack([s_pts[a, 1], s_pts[a, 2], s], axis=1)
        g_pts[a] = np.stack([g_pts[a, 1], g_pts[a, 2], g], axis=1)
        same_lo = np.sign(g) == np.sign(glo[a])
        # Illinois: halve the stale end's value when the same end moves twice
        ghi[a] = np.where(same_lo & (side[a] == -1), 0.5 * ghi[a], ghi[a])
        glo[a] = np.where(~same_lo & (side[a] == 1), 0.5 * glo[a], glo[a])
        lo[a] = np.where(same_lo, s, lo[a])
        glo[a] = np.where(same_lo, g, glo[a])
        hi[a] = np.where(same_lo, hi[a], s)
        ghi[a] = np.where(same_lo, ghi[a], g)
        side[a] = np.where(same_lo, -1, 1)
        with np.errstate(invalid="ignore"):
            fin = ((hi[a] - lo[a]) < _S_TOL * scale[a]) | (moved < _S_TOL * scale[a]) | (g == 0.0)
        done[a[fin]] = True
        if group is not None:
            # a zero surely after another zero of its group: its bracket starts past the other's end
            first_end = np.full(int(group.max()) + 1, np.inf)
            np.minimum.at(first_end, group[ok], hi[ok])
            later = ok & (lo >= first_end[group])
            dropped |= later & ~done
            done |= later
    s_out = np.where(np.isfinite(s_last), s_last, 0.5 * (lo + hi))
    return z_best, np.where(dropped, np.inf, s_out), ok


def _determinant_ratios(pb: CapPathProblem, crossings: ModeCrossings, z: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """Signed determinant ratio of the crossings ``rows`` at states ``z`` to their step's start."""
    out = np.empty(rows.size)
    cm = crossings.mode[rows]
    for mode in np.unique(cm):
        sel = cm == mode
        sg, ld = compute_mode_determinants(pb, z[sel], crossings.point[rows[sel]], np.array([mode]))
        r = rows[sel]
        out[sel] = sg[:, 0] * crossings.sign[r] * np.exp(np.clip(ld[:, 0] - crossings.logdet[r], -700, 700))
    return out


def sample_flipped_steps(pb: CapPathProblem, hist: PathHistory, jb: np.ndarray, crossings: ModeCrossings,
                         w: np.ndarray, tol: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Evaluate each crossing's determinant ratio at ``_SAMPLES`` evenly spaced points of its flipped step.

    Returns
    -------
    s, g, settled
        Per crossing the arclengths ``(c, _SAMPLES + 2)`` of the step's start, the interior
        points and its end, the determinant ratios to the start there, and whether all of the
        cap's interior points were corrected onto the path.
    """
    cp = crossings.point
    caps, cap_of = np.unique(cp, return_inverse=True)
    cap_of = cap_of.reshape(-1)
    q = _SAMPLES
    frac = np.arange(1, q + 1) / (q + 1)
    jr = jb[caps]
    step = hist.step[caps, jr]
    z, conv, _, _ = correct_caps_on_arc(pb, np.repeat(hist.z[caps, jr - 1], q, axis=0),
                                        np.repeat(hist.t[caps, jr - 1], q, axis=0),
                                        (step[:, None] * frac[None, :]).ravel(), np.repeat(caps, q), w,
                                        tol=tol, max_iter=8)
    settled = np.asarray(np.asarray(conv, dtype=bool).reshape(-1, q).all(axis=1))[cap_of]
    states = (cap_of[:, None] * q + np.arange(q)[None, :]).ravel()  # each crossing's samples
    inner = _determinant_ratios(pb, crossings, np.nan_to_num(z[states]), np.repeat(np.arange(cp.size), q))
    g = np.concatenate([np.ones((cp.size, 1)), inner.reshape(cp.size, q), crossings.ratio[:, None]], axis=1)
    s = step[cap_of][:, None] * np.concatenate([[0.0], frac, [1.0]])[None, :]
    return s, g, settled


def refine_bifurcations(pb: CapPathProblem, hist: PathHistory, jb: np.ndarray, crossings: ModeCrossings,
                        w: np.ndarray, tol: float) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Refine each cap's first determinant zero along the arc of its flipped step.

    The crossings' determinants are sampled inside the step (:func:`sample_flipped_steps`); a cap
    keeps the crossings of its earliest sampled part with a sign change (several if they share
    it; all, on the whole step, if a sample did not converge), each is refined inside that part,
    seeded with the nearest sample beyond it, and the earliest zero wins.

    Returns
    -------
    z, s, mode, ok
        Per cap ``(n, m+1)`` state at the bifurcation (NaN: none), its arclength from the start
        of the step before (inf: none), its wave number (0: none) and whether the refinement
        converged (True where there was nothing to refine).
    """
    n, _, m1 = hist.z.shape
    z_bif = np.full((n, m1), np.nan)
    s_bif = np.full(n, np.inf)
    mode_bif = np.zeros(n, dtype=int)
    ok = np.ones(n, dtype=bool)
    cp = crossings.point
    if not cp.size:
        return z_bif, s_bif, mode_bif, ok
    s_smp, g_smp, settled = sample_flipped_steps(pb, hist, jb, crossings, w, tol)
    q1 = _SAMPLES + 1
    flipped = g_smp[:, 1:] <= 0.0
    sub = np.where(flipped.any(axis=1), np.argmax(flipped, axis=1), q1 - 1)  # zero in (s[sub], s[sub + 1])
    sub = np.where(settled, sub, 0)
    earliest = np.full(n, q1)
    np.minimum.at(earliest, cp, np.where(settled, sub, -1))
    keep = np.nonzero(~settled | (sub == earliest[cp]))[0]
    row = np.arange(cp.size)
    lo = np.where(settled, sub, 0)
    hi = np.where(settled, sub + 1, q1)
    # the third point of the interpolation: the sample beyond the bracket's far end, else before it
    third = np.where(hi < q1, hi + 1, np.maximum(lo - 1, 0))
    seeds = np.stack([third, lo, hi], axis=1)[keep]
    c = crossings.take(keep)
    jr = jb[c.point]
    zr, sr, okr = find_zeros_on_arc(
        pb, hist.z[c.point, jr - 1], hist.t[c.point, jr - 1], c.point, s_smp[row[keep][:, None], seeds],
        g_smp[row[keep][:, None], seeds], hist.step[c.point, jr], w,
        lambda z, pos: _determinant_ratios(pb, c, z, pos), tol, group=c.point)
    sr = np.where(okr, sr, np.inf)
    order = np.lexsort((sr, c.point))
    first = order[np.r_[True, c.point[order][1:] != c.point[order][:-1]]]
    pts = c.point[first]
    z_bif[pts], s_bif[pts], mode_bif[pts] = zr[first], sr[first], c.mode[first]
    ok[pts] &= np.isfinite(sr[first])
    return z_bif, s_bif, mode_bif, ok
