"""Refinement of sign changes along pseudo-arclength steps (batched, numpy only).

A quantity measured along a path (the tangent's load component at a fold, a stability
determinant at a bifurcation) changes sign inside an accepted step; the point where it
vanishes is found on the same arc by regula falsi (Illinois variant) with secant steps inside
the safe bracket, every trial point corrected onto the path (:func:`~sweepshell.numerics.arclength.correct_on_arc`).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from sweepshell.numerics.arclength import ContinuationProblem, correct_on_arc

__all__ = ["refine_on_arc"]


@dataclass
class _Bracket:
    """Sign-change brackets ``(lo, hi)`` along k arcs with the measure at both ends, and the two
    latest evaluations (for secant steps, superlinear, inside the safe bracket)."""

    lo: np.ndarray
    hi: np.ndarray
    glo: np.ndarray
    ghi: np.ndarray
    side: np.ndarray
    s_a: np.ndarray
    g_a: np.ndarray
    s_b: np.ndarray
    g_b: np.ndarray
    s_last: np.ndarray

    @classmethod
    def start(cls, s_lo: np.ndarray, s_hi: np.ndarray, g_lo: np.ndarray, g_hi: np.ndarray) -> _Bracket:
        k = s_hi.shape[0]
        return cls(lo=s_lo.astype(float).copy(), hi=s_hi.astype(float).copy(), glo=g_lo.astype(float).copy(),
                   ghi=g_hi.astype(float).copy(), side=np.zeros(k, dtype=int), s_a=np.full(k, np.nan),
                   g_a=np.full(k, np.nan), s_b=np.full(k, np.nan), g_b=np.full(k, np.nan),
                   s_last=np.full(k, np.nan))

    def trial(self, act: np.ndarray) -> np.ndarray:
        """Next trial arclengths of the brackets ``act``: secant if inside, else clipped regula falsi."""
        lo, hi, glo, ghi = self.lo[act], self.hi[act], self.glo[act], self.ghi[act]
        width = hi - lo
        with np.errstate(all="ignore"):
            denom = ghi - glo
            s = np.where(denom != 0, (lo * ghi - hi * glo) / denom, 0.5 * (lo + hi))
            sec = self.s_b[act] - self.g_b[act] * (self.s_b[act] - self.s_a[act]) / (self.g_b[act] - self.g_a[act])
        inside = np.isfinite(sec) & (sec > lo + 1e-3 * width) & (sec < hi - 1e-3 * width)
        return np.where(inside, sec, np.clip(np.nan_to_num(s), lo + 0.01 * width, hi - 0.01 * width))

    def move(self, a: np.ndarray, sc: np.ndarray, g: np.ndarray) -> np.ndarray:
        """Move an end of the brackets ``a`` to the new points ``sc`` (measure ``g``); return how far each moved."""
        self.s_a[a], self.g_a[a] = self.s_b[a], self.g_b[a]
        self.s_b[a], self.g_b[a] = sc, g
        moved = np.abs(sc - self.s_last[a])
        self.s_last[a] = sc
        same_lo = np.sign(g) == np.sign(self.glo[a])
        # Illinois: halve the stale end's value when the same end moves twice
        lo_move = a[same_lo]
        hi_move = a[~same_lo]
        self.ghi[lo_move[self.side[lo_move] == -1]] *= 0.5
        self.glo[hi_move[self.side[hi_move] == 1]] *= 0.5
        self.lo[lo_move] = sc[same_lo]
        self.glo[lo_move] = g[same_lo]
        self.side[lo_move] = -1
        self.hi[hi_move] = sc[~same_lo]
        self.ghi[hi_move] = g[~same_lo]
        self.side[hi_move] = 1
        return moved


def refine_on_arc(problem: ContinuationProblem, anchor: np.ndarray, tangent: np.ndarray,
                  s_hi: np.ndarray, g_lo: np.ndarray, g_hi: np.ndarray, idx: np.ndarray,
                  w: np.ndarray, measure: Callable[[np.ndarray, np.ndarray, np.ndarray], np.ndarray],
                  *, tol: float, max_iter: int, iterations: int, s_tol: float,
                  corrector: Callable[..., tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]] | None = None,
                  s_lo: np.ndarray | None = None,
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Find the arclength ``s ∈ (s_lo, s_hi)`` from ``anchor`` where ``measure`` changes sign.

    Parameters
    ----------
    anchor, tangent
        ``(k, m+1)`` accepted point before the sign change and its tangent.
    s_hi
        ``(k,)`` arclength of the accepted point after the sign change.
    g_lo, g_hi
        ``(k,)`` values of ``measure`` at both ends (opposite signs).
    s_lo
        ``(k,)`` start of the bracket along the same arc (default 0: the anchor).
    measure
        ``f(z, t, rows) -> (k,)`` scalar whose zero is sought (e.g. the tangent's load
        component for a fold, or a stability determinant for a bifurcation); ``rows`` are the
        positions of the states among the ``k`` refined here (not problem indices), so one
        problem may be refined for several measures at once.
    corrector
        Replacement for :func:`correct_on_arc` with the same signature and results (e.g. a
        compiled one for a particular problem); default :func:`correct_on_arc`.

    Returns
    -------
    z, t, s, ok
        The refined states, tangents, arclengths from the anchor and a success mask.
    """
    k = anchor.shape[0]
    br = _Bracket.start(np.zeros(k) if s_lo is None else s_lo, s_hi, g_lo, g_hi)
    z_best = np.full_like(anchor, np.nan)
    t_best = np.full_like(anchor, np.nan)
    ok = np.ones(k, dtype=bool)
    done = np.zeros(k, dtype=bool)
    correct = correct_on_arc if corrector is None else corrector
    for _ in range(iterations):
        act = np.nonzero(~done & ok)[0]
        if act.size == 0:
            break
        s = br.trial(act)
        # a point that would move less than the tolerance is not corrected: the last one is kept
        with np.errstate(invalid="ignore"):
            near = np.abs(s - br.s_last[act]) < s_tol * np.maximum(s_hi[act], 1e-300)
        done[act[near]] = True
        act, s = act[~near], s[~near]
        if act.size == 0:
            break
        z, conv, _, t_all = correct(problem, anchor[act], tangent[act], s, idx[act], w,
                                    tol=tol, max_iter=max_iter)
        ok[act[~conv]] = False
        c = np.nonzero(conv)[0]
        if c.size == 0:
            continue
        a = act[c]
        sc = s[c]
        t = t_all[c]
        g = measure(z[c], t, a)
        z_best[a] = z[c]
        t_best[a] = t
        moved = br.move(a, sc, g)
        scale = np.maximum(s_hi[a], 1e-300)
        with np.errstate(invalid="ignore"):
            fin = ((br.hi[a] - br.lo[a]) < s_tol * scale) | (moved < s_tol * scale) | (g == 0.0)
        done[a[fin]] = True
    s_out = np.where(np.isfinite(br.s_last), br.s_last, 0.5 * (br.lo + br.hi))
    return z_best, t_best, s_out, ok
