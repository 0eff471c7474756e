"""Path following and critical-state search of the shallow-cap model (batched).

See :mod:`sweepshell.models.shallow_cap.model` and ``theory.md`` for the equations and
conventions. Phases:

1. trace every cap's axisymmetric path by pseudo-arclength continuation from the unloaded
   state until the load range ends, or (when bistability is checked) until the path
   returns to zero load after its first limit point;
2. bracket the first limit point (sign change of dμ/ds) and, for n = 1…N, the first sign
   change of the stability determinants along the path before it (:mod:`.scan`);
3. refine whichever comes first by regula falsi along the arc; classify the point;
4. check bistability past the limit point (:mod:`.bistability`) and sample the load paths
   (:mod:`.sampling`).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from sweepshell.models.base import Status
from sweepshell.models.shallow_cap.bifurcations import refine_bifurcations
from sweepshell.models.shallow_cap.bistability import check_bistability
from sweepshell.models.shallow_cap.compiled import initial_tangents, refine_caps_on_arc, trace_cap_paths
from sweepshell.models.shallow_cap.kernels import CapPathProblem
from sweepshell.models.shallow_cap.problem import CapInputs, build_batch_problem
from sweepshell.models.shallow_cap.sampling import sample_paths
from sweepshell.models.shallow_cap.scan import scan_modes
from sweepshell.numerics.arclength import TRACE_DONE, TRACE_STEP_LIMIT, PathHistory

__all__ = ["CapInputs", "CapSolution", "solve_caps"]

_REGIME_STABLE, _REGIME_LIMIT, _REGIME_BIFURCATION = 0, 1, 2
_FIRST_STEP, _MAX_STEP = 0.25, 0.25
# limit points are refined to this share of their step: the load there is stationary, so its
# error is about |dt_μ/ds|·(s_tol·step)²/2 ≤ 10⁻⁸·step (10⁻⁹ relative or less); the state's is s_tol·step
_FOLD_S_TOL = 1e-4
_MAX_SUCTION = 2.0  # a path needing more outward load than this (in its load unit) is not followed
# undecided bistability: the path is followed again with this many times the capacity, so many caps at a time
_LONG_PATH_FACTOR, _LONG_PATH_GROUP = 5, 8  # 8 × 2000 points × 193 unknowns × 2: 50 MB at most


@dataclass
class CapSolution:
    """Per-cap results (arrays over caps); see the model's outputs for meanings."""

    status: np.ndarray
    regime: np.ndarray
    critical_load: np.ndarray
    critical_wavenumber: np.ndarray
    critical_deflection: np.ndarray
    critical_volume_change: np.ndarray
    stiffness: np.ndarray
    bistable: np.ndarray
    load_path: np.ndarray


@dataclass(frozen=True)
class _Paths:
    """The traced paths of a batch and what bounds them (arrays over caps)."""

    hist: PathHistory
    deflection: np.ndarray  # (n, S) apex deflection over h of every path point
    weights: np.ndarray  # (m+1,) weights of the arclength norm
    load_unit: np.ndarray
    stiffness: np.ndarray
    mu_max: np.ndarray
    fold_at: np.ndarray  # index of the directly solved first limit point (-1: none)


@dataclass(frozen=True)
class _Critical:
    """The first critical state of each cap along its path (arrays over caps)."""

    z: np.ndarray
    in_range: np.ndarray
    use_bif: np.ndarray
    mode: np.ndarray
    refine_ok: np.ndarray
    has_fold: np.ndarray
    jf: np.ndarray
    jb: np.ndarray


def _initial_stiffness(pb: CapPathProblem, caps: CapInputs, t0: np.ndarray, idx: np.ndarray) -> np.ndarray:
    """Load per apex deflection at the unloaded state (mismatch: deflection rate per load)."""
    c = np.sqrt(3.0 * (1.0 - caps.nu**2))
    load_unit = pb.force_scale
    d_defl = pb.apex_deflection(t0, idx)
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = t0[:, -1] * load_unit / d_defl
    stiffness = np.where(caps.apex, slope * c / 4.0, slope)
    with np.errstate(divide="ignore", invalid="ignore"):
        # mismatch: the initial apex deflection rate (finite also where the apex does not move)
        return np.where(pb.mismatch, d_defl / (t0[:, -1] * load_unit), stiffness)


def _trace_paths(pb: CapPathProblem, caps: CapInputs, settings: Mapping[str, Any]) -> _Paths:
    """Trace every cap's axisymmetric path from the unloaded state (compiled, one cap at a time)."""
    n, m = caps.lam.shape[0], pb.unknowns
    w = np.full(m + 1, 1.0 / m)
    w[-1] = 1.0
    z0 = np.zeros((n, m + 1))
    # the initial tangents (increasing load) and the paths' orientation at the unloaded state
    t0, orientation = initial_tangents(pb, z0, w)
    stiffness = _initial_stiffness(pb, caps, t0, np.arange(n))
    apex = caps.apex
    mu_max = np.where(apex, np.inf, float(settings["max_pressure"]))
    if caps.mismatch_strain is not None:
        mu_max = np.where(pb.mismatch, np.abs(caps.mismatch_strain) / np.abs(pb.force_scale), mu_max)
    inversion = caps.lam**2 / (2.0 * np.sqrt(3.0 * (1.0 - caps.nu**2)))  # 2H/h
    defl_max = np.where(apex, float(settings["max_indentation"]) * inversion, 1.5 * inversion + 2.0)
    # without the asymmetric scan the first limit point is solved for directly from inside its
    # corner; the scan keeps every step through the corner (it samples stability at each)
    zh, th, sh, count, state, path_deflection, fold_at = trace_cap_paths(
        pb, z0, t0, w, first_step=_FIRST_STEP, max_step=_MAX_STEP, min_step=1e-7,
        max_points=int(settings["max_points"]), max_turn_deg=float(settings["max_turn_deg"]),
        tol=float(settings["tolerance"]), max_iter=8, mu_max=mu_max, defl_max=defl_max,
        check_bistability=bool(settings["check_bistability"]), max_suction=_MAX_SUCTION, orientation=orientation,
        fold_solve=int(settings["asymmetric_modes"]) == 0)
    hist = PathHistory(z=zh, t=th, step=sh, count=count, state=state)
    return _Paths(hist=hist, deflection=path_deflection, weights=w, load_unit=pb.force_scale, stiffness=stiffness,
                  mu_max=mu_max, fold_at=fold_at)


def _first_folds(paths: _Paths) -> tuple[np.ndarray, np.ndarray]:
    """Return per cap whether its path has a limit point in the load range, and the step before it (-1)."""
    hist = paths.hist
    tmu = hist.t[:, :, -1]
    mu = hist.z[:, :, -1]
    steps = np.arange(hist.z.shape[1])
    valid = steps[None, :] < hist.count[:, None]
    # first limit point: dμ/ds changes from positive to non-positive within the load range
    fold_b = valid[:, 1:] & (tmu[:, :-1] > 0) & (tmu[:, 1:] <= 0) & (mu[:, :-1] <= paths.mu_max[:, None])
    has_fold = np.asarray(fold_b.any(axis=1))
    return has_fold, np.where(has_fold, np.argmax(fold_b, axis=1), -1)


def _refine_folds(pb: CapPathProblem, paths: _Paths, rf: np.ndarray, jf: np.ndarray,
                  tol: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Refine the limit points of the caps ``rf``: per cap state (NaN), arclength (inf) and success.

    A limit point solved for during the trace (the point after the bracket's start) is taken as it is.
    """
    hist = paths.hist
    n, _, m1 = hist.z.shape
    z_fold = np.full((n, m1), np.nan)
    s_fold = np.full(n, np.inf)
    ok = np.ones(n, dtype=bool)
    solved = rf[paths.fold_at[rf] == jf[rf] + 1]
    z_fold[solved], s_fold[solved] = hist.z[solved, jf[solved] + 1], hist.step[solved, jf[solved] + 1]
    rf = rf[paths.fold_at[rf] != jf[rf] + 1]
    if rf.size:
        jr = jf[rf]
        tmu = hist.t[:, :, -1]
        zf, _, sf, okf = refine_caps_on_arc(
            pb, hist.z[rf, jr], hist.t[rf, jr], hist.step[rf, jr + 1], tmu[rf, jr], tmu[rf, jr + 1], rf,
            paths.weights, use_load=False, tol=tol, max_iter=8, iterations=40, s_tol=_FOLD_S_TOL)
        z_fold[rf], s_fold[rf] = zf, sf
        ok[rf] &= okf
    return z_fold, s_fold, ok


def _find_critical(pb: CapPathProblem, paths: _Paths, settings: Mapping[str, Any]) -> _Critical:
    """Return each cap's first critical state: a limit point or an earlier bifurcation."""
    hist = paths.hist
    n = hist.z.shape[0]
    idx = np.arange(n)
    tol = float(settings["tolerance"])
    has_fold, jf = _first_folds(paths)
    scan_end = np.where(has_fold, jf + 1, hist.count - 1)
    modes = np.arange(1, int(settings["asymmetric_modes"]) + 1)
    # apex-force states are analysed on a 3x finer stability grid (the polynomial interpolant
    # of the state): their log-singular apex curvature sampled on the state's own grid gives
    # spurious n = 2, 3 modes (see modes.py)
    jb, crossings = scan_modes(pb, hist.z, np.ones(n, dtype=bool), scan_end, modes, int(settings["scan_stride"]))
    rf = np.nonzero(has_fold & ((jb < 0) | (jb >= jf + 1)))[0]
    z_fold, s_fold, ok_fold = _refine_folds(pb, paths, rf, jf, tol)
    z_bif, s_bif, bif_mode, ok_bif = refine_bifurcations(pb, hist, jb, crossings, paths.weights, tol)
    # which comes first along the path (compare arclength positions step index + offset)
    pos_fold = np.where(np.isfinite(s_fold), jf + s_fold / np.maximum(hist.step[idx, np.maximum(jf, 0) + 1],
                                                                      1e-300), np.inf)
    pos_bif = np.where(np.isfinite(s_bif), jb - 1 + s_bif / np.maximum(hist.step[idx, np.maximum(jb, 0)],
                                                                       1e-300), np.inf)
    use_bif = pos_bif < pos_fold
    crit_z = np.where(use_bif[:, None], z_bif, z_fold)
    found = np.isfinite(pos_bif) | np.isfinite(pos_fold)
    in_range = found & (crit_z[:, -1] <= paths.mu_max)
    return _Critical(z=crit_z, in_range=in_range, use_bif=use_bif, mode=bif_mode, refine_ok=ok_fold & ok_bif,
                     has_fold=has_fold, jf=jf, jb=jb)


def _classify(pb: CapPathProblem, paths: _Paths, crit: _Critical, bistable: np.ndarray,
              samples: int) -> CapSolution:
    """Return the per-cap results of the critical states found."""
    idx = np.arange(crit.z.shape[0])
    in_range, use_bif = crit.in_range, crit.use_bif
    regime = np.where(in_range, np.where(use_bif, _REGIME_BIFURCATION, _REGIME_LIMIT), _REGIME_STABLE)
    status = np.where(in_range, Status.ok, Status.no_instability).astype(np.uint8)
    reached = (paths.hist.state == TRACE_DONE) | crit.has_fold | (crit.jb > 0)
    status[~reached | (in_range & ~crit.refine_ok)] = Status.not_converged
    crit_load = np.where(in_range, crit.z[:, -1] * paths.load_unit, np.nan)
    wavenumber = np.where(in_range, np.where(use_bif, crit.mode, 0).astype(float), np.nan)
    deflection = np.where(in_range, pb.apex_deflection(np.nan_to_num(crit.z), idx), np.nan)
    volume = np.where(in_range, pb.volume_change(np.nan_to_num(crit.z), idx), np.nan)
    path = sample_paths(paths.hist, paths.deflection, paths.load_unit, samples)
    return CapSolution(status=status, regime=np.where(status <= Status.no_instability, regime, -1).astype(np.int8),
                       critical_load=crit_load, critical_wavenumber=wavenumber, critical_deflection=deflection,
                       critical_volume_change=volume, stiffness=paths.stiffness, bistable=bistable, load_path=path)


def _retry_long_paths(caps: CapInputs, settings: Mapping[str, Any], solution: CapSolution,
                      undecided: np.ndarray) -> None:
    """Follow the undecided caps again with ``_LONG_PATH_FACTOR`` times the capacity, in place."""
    longer = {**settings, "max_points": _LONG_PATH_FACTOR * int(settings["max_points"])}
    for lo in range(0, undecided.size, _LONG_PATH_GROUP):
        rows = undecided[lo:lo + _LONG_PATH_GROUP]
        part = solve_caps(caps.take(rows), settings=longer, retry_long_paths=False)
        for key, value in vars(part).items():
            getattr(solution, key)[rows] = value


def solve_caps(caps: CapInputs, *, settings: Mapping[str, Any], retry_long_paths: bool = True) -> CapSolution:
    """Solve the caps ``caps`` on the radial grid that ``settings`` choose (the model settings).

    A path that fills ``max_points`` after its first limit point without deciding bistability
    is followed again with ``_LONG_PATH_FACTOR`` times the capacity (``retry_long_paths``; in
    groups of ``_LONG_PATH_GROUP`` caps, since histories are padded to the longest path): some
    sliding-edge caps wind through several hundred points before the load returns to zero. The
    same path is traced again, so only the undecided flag and the load path change.
    """
    n = caps.lam.shape[0]
    pb = build_batch_problem(caps, settings)
    paths = _trace_paths(pb, caps, settings)
    crit = _find_critical(pb, paths, settings)
    check_bi = bool(settings["check_bistability"])
    modes = np.arange(1, int(settings["asymmetric_modes"]) + 1)
    bistable = check_bistability(pb, paths.hist, paths.weights, crit.has_fold, crit.jf, modes,
                                 tol=float(settings["tolerance"])) if check_bi else np.full(n, np.nan)
    solution = _classify(pb, paths, crit, bistable, int(settings["path_samples"]))
    undecided = np.nonzero(np.isnan(bistable) & crit.has_fold & (paths.hist.state == TRACE_STEP_LIMIT))[0]
    if check_bi and retry_long_paths and undecided.size:
        _retry_long_paths(caps, settings, solution, undecided)
    return solution
