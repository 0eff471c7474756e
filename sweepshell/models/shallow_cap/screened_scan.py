"""Screened asymmetric scan of apex-force caps: a cheap grid says where the stability grid must look.

An apex-force state's stability determinants are those of its interpolant on a grid three times
the state's (:mod:`.modes`), 27 times the work of the state's own grid per determinant. The
scan needs the signs of all wave numbers at every path step up to the first sign change, so
here every step is first evaluated on the screening grid (the state's own nodes with the
interpolant filtered: :func:`~.stability_grid.select_stability_nodes` with ``screen``), which follows
the stability grid's low eigenvalues only roughly. The stability grid is evaluated

- at the path's first point (the reference signs), only when the path does not start unloaded
  and stress-free: an unloaded cap's signs are the flat plate's (:func:`compute_unloaded_signs`),
- from a step where a screening sign differs from the screen's own first-point sign on, at every
  step, for those wave numbers (they stay watched: a screen that ran ahead of the stability
  grid shows nothing of their later changes),
- at a step where a watched wave number's stability sign changed, for every wave number (one
  whose screen lags may have changed in the same step or earlier),
- backwards from there, step by step, for the wave numbers changed or watched there, until a
  step without change: the first changed step of that run (evaluated for every wave number) is
  the cap's first flip, as the unscreened scan defines it, with the same crossings, and
- at the scanned range's last step, for every wave number, when no flip was found: a screen that
  lags the stability grid may not have changed yet where the range ends, and a change found
  there is walked back to its first step as above.

A screen that lags or leads the stability grid by a few steps, or has spurious sign changes,
costs more stability-grid evaluations but gives the same first flip. What it cannot see is a
window of the stability grid (a sign change and its return) that the screen misses entirely,
unless another wave number changes in the window's first step.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from sweepshell.models.shallow_cap.kernels import CapPathProblem
from sweepshell.models.shallow_cap.modes import build_mode_operators, compute_mode_determinants
from sweepshell.models.shallow_cap.stability_grid import select_stability_nodes

__all__ = ["compute_unloaded_signs", "scan_screened"]

_ROUND = 8  # path steps per cap screened before looking at them
Crossing = tuple[int, int, float, float, float]  # cap, wave number, determinant ratio, sign and log|det| before


def _evaluate(pb: CapPathProblem, z: np.ndarray, cap: int, modes: np.ndarray,
              screen: bool = False) -> tuple[np.ndarray, np.ndarray]:
    return compute_mode_determinants(pb, z, np.full(z.shape[0], cap), modes, screen=screen)


class _CapScan:
    """The screened scan of one cap: its references and the wave numbers the stability grid watches."""

    def __init__(self, pb: CapPathProblem, zh: np.ndarray, cap: int, modes: np.ndarray,
                 screen_ref: np.ndarray, unloaded_ref: np.ndarray | None) -> None:
        self.pb, self.zh, self.cap, self.modes = pb, zh, cap, modes
        self.screen_ref = screen_ref
        self.watched = np.zeros(modes.size, dtype=bool)
        self._ref = unloaded_ref

    @property
    def ref(self) -> np.ndarray:
        """The reference signs: the stability grid's at the path's first point (evaluated when first
        needed unless the path starts unloaded: a cap whose screen never changes needs none)."""
        if self._ref is None:
            self._ref = self._at(0, np.ones(self.modes.size, dtype=bool))[0]
        return self._ref

    def _at(self, j: int, which: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Signs and log|det| of step ``j``'s wave numbers ``which`` (a mask) on the stability grid."""
        sg, ld = _evaluate(self.pb, self.zh[self.cap, j:j + 1], self.cap, self.modes[which])
        return sg[0], ld[0]

    def visit(self, j: int, screen_sign: np.ndarray) -> tuple[int, list[Crossing]] | None:
        """Look at step ``j`` with its screening signs; return ``(first flipped step, crossings)`` or None."""
        look = self.watched | (screen_sign != self.screen_ref)
        if not look.any():
            return None
        sg, _ = self._at(j, look)
        if not (sg != self.ref[look]).any():
            self.watched = look
            return None
        return self._first_flip(j, look)

    def finish(self, j: int) -> tuple[int, list[Crossing]] | None:
        """Check the last scanned step ``j`` for every wave number; return its first flip as ``visit`` or None."""
        at_j = self._at(j, np.ones(self.modes.size, dtype=bool))
        if not (at_j[0] != self.ref).any():
            return None
        return self._first_flip(j, self.watched, at_j)

    def _first_flip(self, j: int, look: np.ndarray,
                    at_j: tuple[np.ndarray, np.ndarray] | None = None) -> tuple[int, list[Crossing]]:
        """Walk back from the flipped step ``j`` to the first step of its run of flipped steps.

        The run's first step is evaluated for every wave number (one whose screen lags may have
        flipped there too, or earlier); the steps before it only for the wave numbers flipped there
        and those the screen has flagged: any other one changed there and back is a window the
        screen missed, which the module docstring excludes.
        """
        every = np.ones(self.modes.size, dtype=bool)
        k, (sg, ld) = j, self._at(j, every) if at_j is None else at_j
        sub = look.copy()
        while True:
            sub |= sg != self.ref
            ref = self.ref[sub]
            s = k - 1
            prev = self._at(s, sub)
            while s > 0 and (prev[0] != ref).any():
                s -= 1
                prev = self._at(s, sub)
            if s == k - 1:
                break
            k = s + 1  # a longer run: its first step, for every wave number
            sg, ld = self._at(k, every)
        now_s, now_l, (prev_s, prev_l) = sg[sub], ld[sub], prev
        out: list[Crossing] = []
        for c in np.nonzero((now_s != ref) & (now_s != prev_s))[0]:
            ratio = prev_s[c] * now_s[c] * np.exp(np.clip(now_l[c] - prev_l[c], -700, 700))
            out.append((self.cap, int(self.modes[sub][c]), float(ratio), float(prev_s[c]), float(prev_l[c])))
        return k, out


def compute_unloaded_signs(problem: CapPathProblem, idx: np.ndarray, modes: np.ndarray) -> np.ndarray:
    """Return the determinant signs of the unloaded, stress-free states of apex-force caps ``idx``, ``(k, len(modes))``.

    A stress-free shallow cap is stable whatever its rise or dimple: its bending and stretching
    energies are both positive. So no determinant vanishes along the family of stress-free
    shapes from the flat plate (ζ = 0) to the cap's unloaded one, and each sign is the flat
    plate's on the same stability grid. That sign depends only on the grid, the wave number
    and the bending edge row, and is cached by them: the reference signs of a path that starts
    unloaded, without assembling the cap's matrices. tests/models/shallow_cap/test_apex_scan.py
    compares them with the assembled ones over rises, dimples, edges and Poisson's ratios.
    """
    g = problem.grid
    nodes = select_stability_nodes(problem, idx)
    if np.any(nodes == problem.size):
        raise ValueError("unloaded signs are for apex-force caps on their refined stability grid")
    out = np.empty((idx.size, len(modes)))
    key = tuple(int(n) for n in modes)
    for r, i in enumerate(idx):
        clamped = bool(problem.clamped[i])
        nu = 0.0 if clamped else float(problem.nu[i])
        out[r] = _flat_plate_signs(int(nodes[r]), g.stretch, g.centre, clamped, nu, key)
    return out


@lru_cache(maxsize=512)
def _flat_plate_signs(size: int, stretch: float, centre: float, clamped: bool, nu: float,
                      modes: tuple[int, ...]) -> np.ndarray:
    """Signs of the reduced matrices at ζ = f = 0 (the bilaplacian with the bending edge rows)."""
    out = np.empty(len(modes))
    for j, n in enumerate(modes):
        wo = build_mode_operators(size, n, stretch, centre).deflection
        a = wo.bilaplacian.copy()
        a[0] = wo.w0[0]
        a[1] = wo.w1[0] if clamped else wo.w2[0] + nu * wo.w1[0]
        out[j] = np.linalg.slogdet(a)[0]
    out.setflags(write=False)
    return out


def scan_screened(pb: CapPathProblem, zh: np.ndarray, caps: np.ndarray, scan_end: np.ndarray, modes: np.ndarray,
                  stride: int) -> tuple[np.ndarray, list[Crossing]]:
    """Return the first path step of the caps ``caps`` where a stability determinant changed sign.

    Same result as evaluating every wave number at every ``stride``-th step on the stability
    grid (the steps in between when one changed) up to ``scan_end``, except for windows the
    screen misses (module docstring): a change that lasts to ``scan_end`` is always found.

    Returns
    -------
    step, crossings
        ``(caps.size,)`` first flipped step (-1: none) and the crossings of those steps as
        tuples ``(cap, wave number, determinant ratio, sign before, log|det| before)``.
    """
    jb = np.full(caps.size, -1)
    found: list[Crossing] = []
    if caps.size == 0:
        return jb, found
    screen_ref, _ = compute_mode_determinants(pb, zh[caps, 0], caps, modes, screen=True)
    unloaded = ~pb.mismatch[caps] & ~np.any(zh[caps, 0] != 0.0, axis=1)
    refs = np.full((caps.size, modes.size), np.nan)
    refs[unloaded] = compute_unloaded_signs(pb, caps[unloaded], modes)
    scans = [_CapScan(pb, zh, int(c), modes, screen_ref[r], refs[r] if unloaded[r] else None)
             for r, c in enumerate(caps)]
    samples = []
    for c in caps:
        steps = np.arange(1, scan_end[c] + 1)
        samples.append(steps[(steps % stride == 0) | (steps == scan_end[c])])
    active = [r for r in range(caps.size) if samples[r].size]
    start = 0
    while active:
        rows = [(r, samples[r][start:start + _ROUND]) for r in active]
        pi = np.concatenate([np.full(s.size, caps[r]) for r, s in rows])
        pj = np.concatenate([s for _, s in rows])
        screen_sign, _ = compute_mode_determinants(pb, zh[pi, pj], pi, modes, screen=True)
        pos = 0
        still = []
        for r, steps in rows:
            result = None
            for q, j in enumerate(steps):
                result = scans[r].visit(int(j), screen_sign[pos + q])
                if result is not None:
                    jb[r] = result[0]
                    found.extend(result[1])
                    break
            pos += steps.size
            if result is None and samples[r].size > start + _ROUND:
                still.append(r)
        active = still
        start += _ROUND
    for last in np.nonzero(jb < 0)[0].tolist():
        result = scans[last].finish(int(samples[last][-1])) if samples[last].size else None
        if result is not None:
            jb[last] = result[0]
            found.extend(result[1])
    return jb, found
