"""Path following of one cap: the axisymmetric path, the bifurcation, and the bifurcated branch.

Steps (see ``theory.md``):

1. trace the axisymmetric path (:mod:`.fundamental`), watching the ``cos nθ`` stability
   determinant and the load component of the tangent (limit points);
2. refine the first sign change along the arc: the bifurcation load;
3. switch branches: predictor along the null vector of the harmonic-``n`` block, corrected on
   the arc ``tᵀW(z − z_b) = s`` (which the axisymmetric branch cannot meet), then
   pseudo-arclength on the ``K``-harmonic problem until the apex deflection reaches
   ``max_indentation``. A branch that rejoins the axisymmetric path is followed on along it;
4. put the last point exactly on ``δ/h = max_indentation`` and measure the shape there.

Under an apex force the axisymmetric path and the bifurcation load are the point force's
(``shallow_cap``'s); the branch is that of the force spread over a small Gaussian contact,
whose collocated ``cos nθ`` operators are well posed (``theory.md``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from sweepshell.models.cap_postbuckling.fundamental import (
    Fundamental,
    block_determinant,
    embed,
    initial_tangent,
    mode_block,
    point_force_determinant,
    refine_bifurcation,
    refine_fold,
    trace,
    trace_fundamental,
    weights,
)
from sweepshell.models.cap_postbuckling.measure import (
    SHAPE_ANGLES,
    SHAPE_RADII,
    asymmetry,
    land_on_deflection,
    ridge_measures,
    shape,
)
from sweepshell.models.cap_postbuckling.operators import HarmonicCapProblem, Mismatch
from sweepshell.numerics.arclength import TRACE_DONE, correct_on_arc

__all__ = ["SHAPE_ANGLES", "SHAPE_RADII", "CapBranchResult", "follow_cap"]

_SWITCH_STEPS = (1e-2, 5e-3, 2e-3)  # arclengths of the branch-switching predictor along the critical mode
_SLOPE_STEPS = (2e-3, 4e-3)  # two short arcs on the new branch whose secant slopes give its initial slope
_RETURN_SHARE = 0.05  # a branch whose asymmetry falls below this share of its peak has rejoined the axisymmetric path


@dataclass
class CapBranchResult:
    """What :func:`follow_cap` found for one cap (plain floats; NaN where undefined)."""

    finished: bool = False
    limit_first: bool = False
    wave_number: int = 0
    bifurcation_load: float = math.nan
    bifurcation_deflection: float = math.nan
    postbuckling_slope: float = math.nan
    load_drop: float = math.nan
    ridge_radius: float = math.nan
    ridges: float = math.nan
    asymmetry: float = math.nan
    shape: np.ndarray = field(default_factory=lambda: np.full((SHAPE_RADII, SHAPE_ANGLES), np.nan))
    path: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    reached_end: bool = False
    load_falls: bool = False
    rejoined: bool = False


@dataclass
class _Cap:
    """One cap's problems and targets (the common part of every step)."""

    common: dict
    settings: dict
    n: int
    target: float
    apex: bool
    mismatch: Mismatch | None
    max_load: float

    def problem(self, harmonics: int, *, point_force: bool = False) -> HarmonicCapProblem:
        contact = 0.0 if point_force else self.common["contact"]
        return HarmonicCapProblem(wave_number=max(self.n, 2) if harmonics == 0 else self.n, harmonics=harmonics,
                                  **{**self.common, "contact": contact})

    def stop(self, deflection: float, load: float) -> bool:
        return deflection >= self.target or deflection < -self.target or abs(load) > self.max_load


def follow_cap(*, lam: float, nu: float, clamped: bool, immovable: bool, apex: bool, amplitude: float,
               width: float, wave_number: int, max_indentation: float, settings: dict,
               follow_branch: bool = True, mismatch: Mismatch | None = None) -> CapBranchResult:
    """Follow one cap to ``max_indentation`` (δ/h), through its ``cos nθ`` bifurcation if it has one.

    ``wave_number`` 0 follows the axisymmetric path only (no bifurcation is looked for).
    ``follow_branch`` False stops after the bifurcation and the initial post-buckling slope.
    ``settings`` are the model settings plus the grid (``nodes_used``, ``stretch_used``,
    ``centre_used``); ``mismatch`` = (direction, radius, annulus) for a mismatch load, whose
    range ends at ``settings["max_mismatch"]`` (|e|).
    """
    s = settings
    common = {"lam": lam, "nu": nu, "clamped": clamped, "immovable": immovable, "apex": apex,
              "amplitude": amplitude, "width": width, "nodes": int(s["nodes_used"]),
              "stretch": float(s["stretch_used"]), "centre": float(s.get("centre_used", 0.0)),
              "contact": float(s["contact_width"]), "mismatch": mismatch}
    max_load = math.inf if apex else float(s["max_mismatch"] if mismatch else s["max_pressure"])
    cap = _Cap(common, s, int(wave_number), float(max_indentation), apex, mismatch, max_load)
    out = CapBranchResult()
    pb0 = cap.problem(0, point_force=apex)
    n = cap.n
    det = None if n < 2 else (point_force_determinant(pb0, n) if apex else block_determinant(pb0, cap.problem(1)))
    fund = trace_fundamental(pb0, det, s, cap.stop, displacement_control=apex)
    out.limit_first = fund.fold
    out.path = _path_of(pb0, fund.zs)
    if not fund.done:
        return out
    if fund.fold:
        limit = refine_fold(pb0, fund, s)
        if limit is None:
            return out
        out.bifurcation_load, out.bifurcation_deflection = limit
    if not fund.flipped:
        if fund.fold and not apex:
            out.finished = True  # the cap snaps at its load maximum
            return out
        return _finish_on_axis(out, pb0, fund, cap)
    assert det is not None
    found = refine_bifurcation(pb0, fund, det, s)
    if found is None:
        out.path = out.path[:-1]
        return out
    zb, _ = found
    out.wave_number = n
    out.bifurcation_load, out.bifurcation_deflection = float(pb0.load(zb[-1])), float(pb0.apex_deflection(zb))
    # the trace stopped at the first point past the sign change: the path ends at the bifurcation instead
    out.path = np.concatenate([out.path[:-1], [[out.bifurcation_load, out.bifurcation_deflection, 0.0]]])
    return _follow_branch(out, cap, pb0 if not apex else None, found, follow_branch)


def _path_of(pb: HarmonicCapProblem, zs: np.ndarray) -> np.ndarray:
    amp = np.array([asymmetry(pb, z) for z in zs]) if pb.k else np.zeros(zs.shape[0])
    return np.stack([pb.load(zs[:, -1]), pb.apex_deflection(zs), amp], axis=1)


def _branch_start(cap: _Cap, pb0_exact: HarmonicCapProblem | None,
                  found: tuple[np.ndarray, np.ndarray]) -> tuple[HarmonicCapProblem, np.ndarray, np.ndarray] | None:
    """Return the axisymmetric problem, bifurcation state and tangent the branch starts from.

    Pressure and mismatch: the refined bifurcation itself. Apex force: the bifurcation of the
    contact-spread force, traced and refined on its own axisymmetric path.
    """
    if pb0_exact is not None:
        return pb0_exact, found[0], found[1]
    pb0 = cap.problem(0)
    det = block_determinant(pb0, cap.problem(1))
    fund = trace_fundamental(pb0, det, cap.settings, cap.stop, displacement_control=True)
    if not (fund.done and fund.flipped):
        return None
    again = refine_bifurcation(pb0, fund, det, cap.settings)
    return None if again is None else (pb0, again[0], again[1])


def _critical_mode(pb0: HarmonicCapProblem, pb1: HarmonicCapProblem, pbk: HarmonicCapProblem,
                   zb: np.ndarray) -> np.ndarray:
    """Return the null vector of the harmonic-n block at ``zb`` in the layout of ``pbk`` (unit weighted norm)."""
    _, _, vt = np.linalg.svd(mode_block(pb1, embed(zb, pb0, pb1)))
    phi = vt[-1]
    phi = phi * (1.0 if phi[np.argmax(np.abs(phi))] > 0 else -1.0)
    mode = np.zeros(pbk.unknowns + 1)
    m = pbk.size
    mode[m:2 * m] = phi[:m]
    mode[pbk.block + m:pbk.block + 2 * m] = phi[m:]
    return mode / math.sqrt(float(np.sum(weights(pbk) * mode * mode)))


def _initial_slope(out: CapBranchResult, pb0: HarmonicCapProblem, pbk: HarmonicCapProblem, zb: np.ndarray,
                   tb: np.ndarray, mode: np.ndarray, tol: float) -> None:
    """Set the post-buckling slope ratio and whether the load falls, from two short secants on the branch."""
    zbk, idx, wk = embed(zb, pb0, pbk), np.zeros(1, dtype=int), weights(pbk)
    load_b = float(pb0.load(zb[-1]))
    dd_pre = float(pb0.conjugate(tb))
    pre_slope = float(pb0.load(tb[-1])) / dd_pre if dd_pre != 0.0 else math.nan
    secants: list[float] = []
    falls: list[bool] = []
    for arc in _SLOPE_STEPS:
        zc, conv, _, _ = correct_on_arc(pbk, zbk[None], mode[None], np.array([arc]), idx, wk, tol=tol, max_iter=12)
        if not conv[0]:
            break
        dd = float(pbk.conjugate(zc[0]) - pb0.conjugate(zb))
        dl = float(pbk.load(zc[0, -1])) - load_b
        secants.append(dl / dd if dd != 0.0 else math.nan)
        falls.append(dl * math.copysign(1.0, load_b) < 0.0)  # its magnitude falls (a mismatch strain may be < 0)
    out.load_falls = bool(falls and falls[0])
    if len(secants) == 2 and np.isfinite(pre_slope) and pre_slope != 0.0:
        # each secant errs by O(s²): the Richardson pair by O(s⁴)
        out.postbuckling_slope = float((4.0 * secants[0] - secants[1]) / 3.0 / pre_slope)


def _follow_branch(out: CapBranchResult, cap: _Cap, pb0_exact: HarmonicCapProblem | None,
                   found: tuple[np.ndarray, np.ndarray], follow: bool) -> CapBranchResult:
    start = _branch_start(cap, pb0_exact, found)
    if start is None:
        return out
    pb0, zb, tb = start
    pbk = cap.problem(int(cap.settings["harmonics"]))
    mode = _critical_mode(pb0, cap.problem(1), pbk, zb)
    tol = float(cap.settings["tolerance"])
    _initial_slope(out, pb0, pbk, zb, tb, mode, tol)
    if not follow:
        return out
    wk, idx = weights(pbk), np.zeros(1, dtype=int)
    for step in _SWITCH_STEPS:  # the first predictor step the corrector takes
        zc, conv, _, tc = correct_on_arc(pbk, embed(zb, pb0, pbk)[None], mode[None], np.array([step]), idx, wk,
                                         tol=tol, max_iter=12)
        if conv[0]:
            break
    else:
        return out
    # the branch is followed away from the bifurcation point (growing critical-mode amplitude)
    t_start = tc[0] if float(np.sum(wk * tc[0] * mode)) >= 0.0 else -tc[0]
    zk, state_k, back = _trace_branch(cap, pbk, zc[0], t_start)
    out.path = np.concatenate([out.path, _path_of(pbk, zk)])
    if zk.shape[0] == 0:
        return out
    base = float(pb0.load(zb[-1]))
    out.load_drop = float(np.min(pbk.load(zk[:, -1]) / base)) if base != 0.0 else math.nan
    if back:
        return _rejoin(out, cap, pb0, pbk, zk[-1])
    if state_k == TRACE_DONE and abs(float(pbk.load(zk[-1, -1]))) > cap.max_load:
        out.finished = True  # the load range ended before max_indentation: nothing to measure there
        return out
    if state_k != TRACE_DONE or zk.shape[0] < 2 or pbk.apex_deflection(zk[-1]) < cap.target:
        return out
    zf = land_on_deflection(pbk, zk[-2], zk[-1], cap.target, tol)
    return out if zf is None else _measure(out, pbk, zf, cap)


def _trace_branch(cap: _Cap, pbk: HarmonicCapProblem, z0: np.ndarray,
                  t0: np.ndarray) -> tuple[np.ndarray, int, bool]:
    """Trace the bifurcated branch; return its states, the trace state and whether it rejoined the axisymmetric path.

    A branch rejoins when its asymmetry falls below ``_RETURN_SHARE`` of its peak: it has come
    back to the axisymmetric path, at the other end of an instability window (λ = 10 under an
    apex force: n = 4 from δ = 18.7 h, the branch rises to 23.1 h, turns back and rejoins at
    20.1 h, where the axisymmetric path is stable again) or at its own bifurcation.
    """
    peak = [0.0]
    back = [False]

    def finished(z_prev, z_new, t_new, rows):  # type: ignore[no-untyped-def]
        d = pbk.apex_deflection(z_new)
        amp = np.array([asymmetry(pbk, zz) for zz in z_new])
        peak[0] = max(peak[0], float(amp.max()))
        rejoined = (amp < _RETURN_SHARE * peak[0]) & (peak[0] > 0.05)
        back[0] = back[0] or bool(rejoined.any())
        return (d >= cap.target) | (d < -cap.target) | rejoined | (np.abs(pbk.load(z_new[:, -1])) > cap.max_load)

    zk, _, _, _, state = trace(pbk, z0, t0, cap.settings, finished, orientation=False)
    return zk, state, back[0]


def _rejoin(out: CapBranchResult, cap: _Cap, pb0: HarmonicCapProblem, pbk: HarmonicCapProblem,
            z_back: np.ndarray) -> CapBranchResult:
    """Follow the axisymmetric path on from where the branch rejoined it, up to ``max_indentation``.

    The path is watched for another ``cos nθ`` instability; there the point ends with what it
    reached (a second branch is not followed).
    """
    out.rejoined = True
    guess = np.concatenate([z_back[:pb0.size], z_back[pbk.block:pbk.block + pb0.size], z_back[-1:]])
    defl = float(pb0.apex_deflection(guess))
    z0 = land_on_deflection(pb0, guess, guess, defl, float(cap.settings["tolerance"]))
    if z0 is None:
        return out
    t0 = initial_tangent(pb0, z0)
    if float(pb0.deflection_row() @ t0) < 0.0:
        t0 = -t0
    det = block_determinant(pb0, cap.problem(1))
    sign0 = det(z0)[0]
    flipped = [False]

    def finished(z_prev, z_new, t_new, rows):  # type: ignore[no-untyped-def]
        done = np.zeros(z_new.shape[0], dtype=bool)
        for i, z in enumerate(z_new):
            flipped[0] = flipped[0] or det(z)[0] != sign0
            done[i] = flipped[0] or cap.stop(float(pb0.apex_deflection(z)), float(pb0.load(z[-1])))
        return done

    zs, _, _, count, state = trace(pb0, z0, t0, cap.settings, finished, orientation=False)
    out.path = np.concatenate([out.path, _path_of(pb0, zs)])
    # a second instability of the axisymmetric path is not followed: what was reached is kept
    if state != TRACE_DONE or flipped[0] or count < 2 or pb0.apex_deflection(zs[-1]) < cap.target:
        return out
    zf = land_on_deflection(pb0, zs[-2], zs[-1], cap.target, float(cap.settings["tolerance"]))
    return out if zf is None else _measure(out, pb0, zf, cap)


def _finish_on_axis(out: CapBranchResult, pb0: HarmonicCapProblem, fund: Fundamental, cap: _Cap) -> CapBranchResult:
    zs = fund.zs
    if pb0.apex_deflection(zs[-1]) < cap.target:
        out.finished = True  # the load range ended before max_indentation: stable within it
        return out
    zf = land_on_deflection(pb0, zs[-2], zs[-1], cap.target, float(cap.settings["tolerance"]))
    return out if zf is None else _measure(out, pb0, zf, cap)


def _measure(out: CapBranchResult, pb: HarmonicCapProblem, zf: np.ndarray, cap: _Cap) -> CapBranchResult:
    out.ridge_radius, out.ridges = ridge_measures(pb, zf, float(cap.common["contact"]))
    out.asymmetry = asymmetry(pb, zf)
    out.shape = shape(pb, zf)
    out.finished = True
    out.reached_end = True
    return out
