"""Screened asymmetric scan of apex-force caps: a cheap grid says where the stability grid must look.

An apex-force state's stability determinants are those of its interpolant on a grid three times
the state's (:mod:`.modes`), 27 times the work of the state's own grid per determinant. The
scan needs the signs of all wave numbers at every path step up to the first sign change, so
here every step is first evaluated on the screening grid (the state's own nodes with the
interpolant filtered: :func:`~.stability_grid.select_stability_nodes` with ``screen``), which follows
the stability grid's low eigenvalues only roughly, and the stability grid is evaluated only

- at the path's first point (the reference signs), when a cap first needs them,
- at every step where a screening sign differs from the screen's own first-point sign (all
  wave numbers), and from then on at every step for the wave numbers whose screening sign
  changed while the stability grid's did not (the screen ran ahead: its later changes of
  those wave numbers cannot be seen on the screen, so the stability grid watches them),
- backwards from a step where a stability sign changed, step by step, until a step without
  change: the first changed step of that run is the cap's first flip, as the unscreened scan
  defines it, with the same crossings.

A screen that lags or leads the stability grid by a few steps, or has spurious sign changes,
costs more stability-grid evaluations but gives the same first flip. What it cannot see is a
window of the stability grid (a sign change and its return) that the screen misses entirely
while never changing sign itself.
"""

from __future__ import annotations

import numpy as np

from sweepshell.models.shallow_cap.kernels import CapPathProblem
from sweepshell.models.shallow_cap.modes import compute_mode_determinants

__all__ = ["scan_screened"]

_ROUND = 8  # path steps per cap screened before looking at them
Crossing = tuple[int, int, float, float, float]  # cap, wave number, determinant ratio, sign and log|det| before


def _evaluate(pb: CapPathProblem, z: np.ndarray, cap: int, modes: np.ndarray,
              screen: bool = False) -> tuple[np.ndarray, np.ndarray]:
    return compute_mode_determinants(pb, z, np.full(z.shape[0], cap), modes, screen=screen)


class _CapScan:
    """The screened scan of one cap: its references and what the stability grid has seen so far."""

    def __init__(self, pb: CapPathProblem, zh: np.ndarray, cap: int, modes: np.ndarray,
                 screen_ref: np.ndarray) -> None:
        self.pb, self.zh, self.cap, self.modes = pb, zh, cap, modes
        self.screen_ref = screen_ref
        self.watched = np.zeros(modes.size, dtype=bool)
        self.checked = 0  # last step evaluated for every wave number on the stability grid, no flip there
        self._checked_det: tuple[np.ndarray, np.ndarray] | None = None  # None: the first point's
        self._first: tuple[np.ndarray, np.ndarray] | None = None

    def _reference(self) -> tuple[np.ndarray, np.ndarray]:
        """Signs and log|det| of the path's first point (evaluated when first needed: a cap whose screen
        never changes needs no stability-grid determinant at all)."""
        if self._first is None:
            self._first = self._all(0)
        return self._first

    @property
    def ref(self) -> np.ndarray:
        """The reference signs: the stability grid's at the path's first point."""
        return self._reference()[0]

    @property
    def checked_det(self) -> tuple[np.ndarray, np.ndarray]:
        """Signs and log|det| at step ``checked``."""
        return self._reference() if self._checked_det is None else self._checked_det

    def _all(self, j: int) -> tuple[np.ndarray, np.ndarray]:
        sg, ld = _evaluate(self.pb, self.zh[self.cap, j:j + 1], self.cap, self.modes)
        return sg[0], ld[0]

    def visit(self, j: int, screen_sign: np.ndarray) -> tuple[int, list[Crossing]] | None:
        """Look at step ``j`` with its screening signs; return ``(first flipped step, crossings)`` or None."""
        trigger = (screen_sign != self.screen_ref) & ~self.watched
        if trigger.any():
            sg, ld = self._all(j)
            if not (sg != self.ref).any():
                self.watched |= trigger
                self.checked, self._checked_det = j, (sg, ld)
                return None
            return self._first_flip(j, (sg, ld))
        if not self.watched.any():
            return None
        sg_w, _ = _evaluate(self.pb, self.zh[self.cap, j:j + 1], self.cap, self.modes[self.watched])
        if not (sg_w[0] != self.ref[self.watched]).any():
            return None
        return self._first_flip(j, self._all(j))

    def _first_flip(self, j: int, now: tuple[np.ndarray, np.ndarray]) -> tuple[int, list[Crossing]]:
        """Walk back from the flipped step ``j`` to the first step of its run of flipped steps."""
        prev = self.checked_det
        for k in range(j - 1, self.checked, -1):
            det_k = self._all(k)
            if not (det_k[0] != self.ref).any():
                prev = det_k
                break
            j, now = k, det_k
        (now_s, now_l), (prev_s, prev_l) = now, prev
        out: list[Crossing] = []
        for c in np.nonzero((now_s != self.ref) & (now_s != prev_s))[0]:
            ratio = prev_s[c] * now_s[c] * np.exp(np.clip(now_l[c] - prev_l[c], -700, 700))
            out.append((self.cap, int(self.modes[c]), float(ratio), float(prev_s[c]), float(prev_l[c])))
        return j, out


def scan_screened(pb: CapPathProblem, zh: np.ndarray, caps: np.ndarray, scan_end: np.ndarray, modes: np.ndarray,
                  stride: int) -> tuple[np.ndarray, list[Crossing]]:
    """Return the first path step of the caps ``caps`` where a stability determinant changed sign.

    Same result as evaluating every wave number at every ``stride``-th step on the stability
    grid (the steps in between when one changed) up to ``scan_end``, except for windows the
    screen misses (module docstring).

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
    scans = [_CapScan(pb, zh, int(c), modes, screen_ref[r]) for r, c in enumerate(caps)]
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
    return jb, found
