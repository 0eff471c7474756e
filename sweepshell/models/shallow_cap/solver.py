"""Path following and critical-state search of the shallow-cap model (batched, numpy only).

See :mod:`sweepshell.models.shallow_cap.model` for the equations and conventions. Steps:

1. trace every cap's axisymmetric path by pseudo-arclength continuation from the unloaded
   state until the load range ends, or (when bistability is checked) until the path
   returns to zero load after its first limit point;
2. bracket the first limit point (sign change of dμ/ds) and, for n = 1…N, the first sign
   change of the stability determinants along the path before it;
3. refine whichever comes first by regula falsi along the arc; classify the point.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from sweepshell.models.base import Status
from sweepshell.models.shallow_cap.compiled import (
    correct_caps_on_arc,
    initial_tangents,
    refine_caps_on_arc,
    trace_cap_paths,
)
from sweepshell.models.shallow_cap.kernels import CapPathProblem, eigenstrain_stress
from sweepshell.models.shallow_cap.modes import (
    compute_mode_determinants,
    count_unstable_modes,
    select_stability_nodes,
)
from sweepshell.numerics.arclength import (
    TRACE_DONE,
    TRACE_STEP_LIMIT,
    PathHistory,
    refine_on_arc,
)
from sweepshell.numerics.radial_chebyshev import make_radial_grid

__all__ = ["CapSolution", "solve_caps"]

_REGIME_STABLE, _REGIME_LIMIT, _REGIME_BIFURCATION = 0, 1, 2
_DET_CHUNK = 1024
_DET_CHUNK_ELEMENTS = 12_500_000  # ~100 MB per (states, M, M) float64 stack of stability matrices
_FIRST_STEP, _MAX_STEP = 0.25, 0.25
# limit points are refined to this share of their step: the load there is stationary, so its
# error is about |dt_μ/ds|·(s_tol·step)²/2 ≤ 10⁻⁸·step (10⁻⁹ relative or less); the state's is s_tol·step
_FOLD_S_TOL = 1e-4
_MAX_SUCTION = 2.0  # a path needing more outward load than this (in its load unit) is not followed
# undecided bistability: the path is followed again with this many times the capacity, so many caps at a time
_LONG_PATH_FACTOR, _LONG_PATH_GROUP = 5, 8  # 8 × 2000 points × 193 unknowns × 2: 50 MB at most
_SCAN_ROUND = 8  # sampled path points per cap evaluated before looking for a flip
_CROSSING_SAMPLES = 4  # interior points of a flipped step at which its crossings are located


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


def make_problem(lam: np.ndarray, nu: np.ndarray, clamped: np.ndarray, immovable: np.ndarray,
                 apex: np.ndarray, amplitude: np.ndarray, width: np.ndarray, nodes: int, *,
                 mismatch: np.ndarray | None = None, mismatch_strain: np.ndarray | None = None,
                 mismatch_radius: np.ndarray | None = None, annulus: np.ndarray | None = None,
                 step_width: float = 0.1, stretch: float = 0.0, centre: float = 0.0) -> CapPathProblem:
    """Return the batched axisymmetric problem of the given caps.

    The mismatch arrays (all or none) select the mismatch load per cap: its direction is the
    sign of ``mismatch_strain`` (over ε_cl; negative = shrinkage), its region the disc
    ``x < mismatch_radius`` or, where ``annulus``, the ring outside it, its edge sharp
    (``step_width`` 0) or smoothed over ``step_width`` (over a; 0.1 here for direct callers, the
    model's default is the sharp edge). ``nodes``, ``stretch`` and
    ``centre`` choose the radial grid (see
    :func:`~sweepshell.numerics.radial_chebyshev.make_radial_grid`; a sharp edge wants
    ``centre`` = its radius, which puts a node on it).
    """
    grid = make_radial_grid(nodes, stretch, centre)
    x = grid.x
    n = lam.shape[0]
    c = np.sqrt(3.0 * (1.0 - nu**2))
    lw = (lam / width)[:, None]
    imperfection = 4.0 * (c * amplitude / width**2)[:, None] * x[None, :] * np.exp(-(lw * x[None, :]) ** 2)
    force_scale = np.where(apex, 1.0 + lam**2 / (4.0 * c), 1.0)
    if mismatch is None or mismatch_strain is None or mismatch_radius is None or annulus is None:
        mismatch = np.zeros(n, dtype=bool)
        mismatch_strain, mismatch_radius, annulus = np.zeros(n), np.ones(n), np.zeros(n, dtype=bool)
    # the critical mismatch of a nearly flat cap grows like 1/λ² (plate buckling): this unit
    # keeps the continuation parameter of order one
    direction = np.where(mismatch_strain < 0, -1.0, 1.0)
    force_scale = np.where(mismatch, direction * (1.0 + 4.0 / lam**2), force_scale)
    f_p, df_p, edge = eigenstrain_stress(x, mismatch_radius.astype(float), annulus, nu.astype(float), immovable,
                                         step_width)
    f_p[~mismatch] = 0.0
    df_p[~mismatch] = 0.0
    edge[~mismatch] = 0.0
    return CapPathProblem(grid=grid, lam=lam.astype(float), nu=nu.astype(float), clamped=clamped,
                          immovable=immovable, apex=apex, imperfection=imperfection, force_scale=force_scale,
                          mismatch=mismatch, eigen_stress=f_p, eigen_stress_slope=df_p, eigen_edge=edge)


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


def _scan_modes(pb: CapPathProblem, zh: np.ndarray, scanned: np.ndarray, scan_end: np.ndarray,
                modes: np.ndarray, stride: int) -> tuple[np.ndarray, ModeCrossings]:
    """Return the first path step where a stability determinant changed sign, per cap.

    All wave numbers are evaluated at every ``stride``-th accepted step (and at the last one);
    path steps are short where the state changes fast (near folds), so this sampling is
    densest where determinants move fastest. The samples are evaluated ``_SCAN_ROUND`` per cap at
    a time along the path, and a cap's later samples are skipped once one has flipped (same
    result, tested). Inside the first sampled interval whose end has a
    flipped sign, only the flipped wave numbers are evaluated at the steps in between, and the
    first step with a flip is kept. A wave number whose determinant changes sign twice between
    two evaluations (two eigenvalues crossing) is missed: ``stride = 1`` (every step) is the
    safe default.

    Returns
    -------
    step, crossings
        ``(n,)`` index of the first step with a flip (-1: none), and the wave numbers that
        flipped in that step.
    """
    n = zh.shape[0]
    jb = np.full(n, -1)
    none = ModeCrossings(*(np.zeros(0, dtype=t) for t in (int, int, float, float, float)))
    if modes.size == 0 or not scanned.any():
        return jb, none
    steps = np.arange(zh.shape[1])
    inside = (steps[None, :] <= scan_end[:, None]) & scanned[:, None]
    sampled = inside & ((steps[None, :] % stride == 0) | (steps[None, :] == scan_end[:, None]))
    sg_all = np.full((n, zh.shape[1], modes.size), np.nan)
    ld_all = np.full_like(sg_all, np.nan)
    # samples are evaluated in rounds along the path, and a cap stops at the round of its first flip
    # (a deep cap under an apex force bifurcates long before its path ends)
    rank = np.cumsum(sampled, axis=1) - 1
    last_rank = rank[:, -1]
    evaluated = np.zeros_like(sampled)
    active = sampled.any(axis=1)
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
    ref = sg_all[:, 0]
    flip_at = (sg_all != ref[:, None, :]) & evaluated[:, :, None]
    any_flip = flip_at.any(axis=2)
    rows = np.nonzero(any_flip.any(axis=1))[0]
    if rows.size == 0:
        return jb, none
    j_hi = np.argmax(any_flip[rows], axis=1)
    j_lo = (j_hi - 1) // stride * stride
    flipped = flip_at[rows, j_hi]  # (r, modes)
    if stride > 1:
        # the steps strictly between the two samples, only for the wave numbers that flipped
        for col in np.nonzero(flipped.any(axis=0))[0]:
            sel = flipped[:, col]
            ri = np.repeat(rows[sel], stride)
            rj = (j_lo[sel][:, None] + np.arange(1, stride + 1)[None, :]).ravel()
            keep = rj < np.repeat(j_hi[sel], stride)
            ri, rj = ri[keep], rj[keep]
            if ri.size:
                s1, l1 = _modes_determinants(pb, zh[ri, rj], ri, modes[col:col + 1])
                sg_all[ri, rj, col], ld_all[ri, rj, col] = s1[:, 0], l1[:, 0]
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
    cols = list(zip(*out, strict=True))
    return jb, ModeCrossings(*(np.asarray(c) for c in cols))


def solve_caps(lam: np.ndarray, nu: np.ndarray, clamped: np.ndarray, immovable: np.ndarray,
               apex: np.ndarray, amplitude: np.ndarray, width: np.ndarray, *,
               settings: Mapping[str, Any], mismatch: np.ndarray | None = None,
               mismatch_strain: np.ndarray | None = None, mismatch_radius: np.ndarray | None = None,
               annulus: np.ndarray | None = None, retry_long_paths: bool = True) -> CapSolution:
    """Solve n caps; every array argument has shape ``(n,)``.

    A path that fills ``max_points`` after its first limit point without deciding bistability
    is followed again with ``_LONG_PATH_FACTOR`` times the capacity (``retry_long_paths``; in
    groups of ``_LONG_PATH_GROUP`` caps, since histories are padded to the longest path): some
    sliding-edge caps wind through several hundred points before the load returns to zero. The
    same path is traced again, so only the undecided flag and the load path change.

    Parameters
    ----------
    lam, nu
        Shell parameter λ and Poisson's ratio.
    clamped, immovable, apex
        Edge and load flags (see :class:`CapPathProblem`).
    amplitude, width
        Dimple amplitude (over h) and width (over ℓ = a/λ).
    settings
        The model settings.
    mismatch, mismatch_strain, mismatch_radius, annulus
        Mismatch load flags and its range end (signed, over ε_cl = 2h/(R c)), region radius over
        a and region kind (see :func:`make_problem`); all or none.
    """
    n = lam.shape[0]
    nodes = int(settings["nodes"])
    pb = make_problem(lam, nu, clamped, immovable, apex, amplitude, width, nodes, mismatch=mismatch,
                      mismatch_strain=mismatch_strain, mismatch_radius=mismatch_radius, annulus=annulus,
                      step_width=float(settings.get("mismatch_step_width", 0.1)),
                      stretch=float(settings.get("grid_stretch", 0.0)),
                      centre=float(settings.get("grid_centre", 0.0)))
    eigen = pb.mismatch
    m = pb.unknowns
    w = np.full(m + 1, 1.0 / m)
    w[-1] = 1.0
    idx = np.arange(n)
    c = np.sqrt(3.0 * (1.0 - nu**2))
    z0 = np.zeros((n, m + 1))
    # the initial tangents (increasing load) and the paths' orientation at the unloaded state
    t0, orientation = initial_tangents(pb, z0, w)
    load_unit = pb.force_scale
    d_defl = pb.apex_deflection(t0, idx)
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = t0[:, -1] * load_unit / d_defl
    stiffness = np.where(apex, slope * c / 4.0, slope)
    with np.errstate(divide="ignore", invalid="ignore"):
        # mismatch: the initial apex deflection rate (finite also where the apex does not move)
        stiffness = np.where(eigen, d_defl / (t0[:, -1] * load_unit), stiffness)

    mu_max = np.where(apex, np.inf, float(settings["max_pressure"]))
    if mismatch_strain is not None:
        mu_max = np.where(eigen, np.abs(mismatch_strain) / np.abs(load_unit), mu_max)
    inversion = lam**2 / (2.0 * c)  # 2H/h
    defl_max = np.where(apex, float(settings["max_indentation"]) * inversion, 1.5 * inversion + 2.0)
    check_bi = bool(settings["check_bistability"])
    # the whole axisymmetric path of each cap runs in compiled code (same rules as trace_paths
    # with the stopping rule below: see shallow_cap_compiled)
    zh, th, sh, count, state, path_deflection = trace_cap_paths(
        pb, z0, t0, w, first_step=_FIRST_STEP, max_step=_MAX_STEP, min_step=1e-7,
        max_points=int(settings["max_points"]), max_turn_deg=float(settings["max_turn_deg"]),
        tol=float(settings["tolerance"]), max_iter=8, mu_max=mu_max, defl_max=defl_max,
        check_bistability=check_bi, max_suction=_MAX_SUCTION, orientation=orientation)
    hist = PathHistory(z=zh, t=th, step=sh, count=count, state=state)
    tol = float(settings["tolerance"])
    count = hist.count
    tmu = hist.t[:, :, -1]
    mu = hist.z[:, :, -1]
    steps = np.arange(hist.z.shape[1])
    valid = steps[None, :] < count[:, None]
    # first limit point: dμ/ds changes from positive to non-positive within the load range
    fold_b = valid[:, 1:] & (tmu[:, :-1] > 0) & (tmu[:, 1:] <= 0) & (mu[:, :-1] <= mu_max[:, None])
    has_fold = np.asarray(fold_b.any(axis=1))
    jf = np.where(has_fold, np.argmax(fold_b, axis=1), -1)
    scan_end = np.where(has_fold, jf + 1, count - 1)

    # asymmetric scan along the path up to the fold bracket
    n_modes = int(settings["asymmetric_modes"])
    modes = np.arange(1, n_modes + 1)
    # apex-force states are analysed on a 3x finer stability grid (the polynomial interpolant
    # of the state): their log-singular apex curvature sampled on the state's own grid gives
    # spurious n = 2, 3 modes (see shallow_cap_modes)
    jb, crossings = _scan_modes(pb, hist.z, np.ones(n, dtype=bool), scan_end, modes, int(settings["scan_stride"]))
    bif_mode = np.zeros(n, dtype=int)

    crit_z = np.full((n, m + 1), np.nan)
    crit_s_fold = np.full(n, np.inf)
    crit_s_bif = np.full(n, np.inf)
    refine_ok = np.ones(n, dtype=bool)
    z_fold = np.full((n, m + 1), np.nan)
    z_bif = np.full((n, m + 1), np.nan)
    rf = np.nonzero(has_fold & ((jb < 0) | (jb >= jf + 1)))[0]
    if rf.size:
        jr = jf[rf]
        zf, _, sf, okf = refine_caps_on_arc(
            pb, hist.z[rf, jr], hist.t[rf, jr], hist.step[rf, jr + 1], tmu[rf, jr], tmu[rf, jr + 1], rf, w,
            use_load=False, tol=tol, max_iter=8, iterations=40, s_tol=_FOLD_S_TOL)
        z_fold[rf], crit_s_fold[rf] = zf, sf
        refine_ok[rf] &= okf
    if crossings.point.size:
        # several wave numbers often change sign within one step (about six per cap on deep caps):
        # sampling the step first keeps only those that change sign in its earliest flipped part
        keep, s_lo, s_hi, g_lo, g_hi = _bracket_first_crossings(pb, hist, jb, crossings, w, tol)
        crossings = ModeCrossings(*(np.asarray(v)[keep] for v in vars(crossings).values()))
        s_lo, s_hi, g_lo, g_hi = s_lo[keep], s_hi[keep], g_lo[keep], g_hi[keep]
        cp, cm = crossings.point, crossings.mode
        jr = jb[cp]

        def measure(z: np.ndarray, t: np.ndarray, pos: np.ndarray) -> np.ndarray:
            out = np.empty(z.shape[0])
            for mode in np.unique(cm[pos]):
                sel = cm[pos] == mode
                rows = pos[sel]
                sg, ld = compute_mode_determinants(pb, z[sel], cp[rows], np.array([mode]))
                out[sel] = sg[:, 0] * crossings.sign[rows] * np.exp(np.clip(ld[:, 0] - crossings.logdet[rows],
                                                                             -700, 700))
            return out

        zb, _, sb, okb = refine_on_arc(
            pb, hist.z[cp, jr - 1], hist.t[cp, jr - 1], s_hi, g_lo, g_hi, cp, w,
            measure, tol=tol, max_iter=8, iterations=40, s_tol=1e-9, corrector=correct_caps_on_arc, s_lo=s_lo)
        sb = np.where(okb, sb, np.inf)
        order = np.lexsort((sb, cp))
        first = order[np.r_[True, cp[order][1:] != cp[order][:-1]]]
        pts = cp[first]
        z_bif[pts], crit_s_bif[pts], bif_mode[pts] = zb[first], sb[first], cm[first]
        refine_ok[pts] &= np.isfinite(sb[first])

    # which comes first along the path (compare arclength positions step index + offset)
    pos_fold = np.where(np.isfinite(crit_s_fold), jf + crit_s_fold / np.maximum(hist.step[idx, np.maximum(jf, 0) + 1],
                                                                                 1e-300), np.inf)
    pos_bif = np.where(np.isfinite(crit_s_bif), jb - 1 + crit_s_bif / np.maximum(hist.step[idx, np.maximum(jb, 0)],
                                                                                 1e-300), np.inf)
    use_bif = pos_bif < pos_fold
    crit_z = np.where(use_bif[:, None], z_bif, z_fold)
    found = np.isfinite(pos_bif) | np.isfinite(pos_fold)
    crit_mu = crit_z[:, -1]
    crit_load = crit_mu * load_unit
    in_range = found & (crit_mu <= mu_max)
    regime = np.where(in_range, np.where(use_bif, _REGIME_BIFURCATION, _REGIME_LIMIT), _REGIME_STABLE)
    status = np.where(in_range, Status.ok, Status.no_instability).astype(np.uint8)
    reached = (hist.state == TRACE_DONE) | has_fold | (jb > 0)
    status[~reached | (in_range & ~refine_ok)] = Status.not_converged
    crit_load = np.where(in_range, crit_load, np.nan)
    wavenumber = np.where(in_range, np.where(use_bif, bif_mode, 0).astype(float), np.nan)
    deflection = np.where(in_range, pb.apex_deflection(np.nan_to_num(crit_z), idx), np.nan)
    volume = np.where(in_range, pb.volume_change(np.nan_to_num(crit_z), idx), np.nan)
    bistable = _check_bistability(pb, hist, w, has_fold, jf, modes, tol=tol) \
        if check_bi else np.full(n, np.nan)
    path = _sample_paths(hist, path_deflection, load_unit, int(settings["path_samples"]))
    solution = CapSolution(status=status,
                           regime=np.where(status <= Status.no_instability, regime, -1).astype(np.int8),
                           critical_load=crit_load, critical_wavenumber=wavenumber, critical_deflection=deflection,
                           critical_volume_change=volume, stiffness=stiffness, bistable=bistable, load_path=path)
    undecided = np.nonzero(np.isnan(bistable) & has_fold & (hist.state == TRACE_STEP_LIMIT))[0]
    if check_bi and retry_long_paths and undecided.size:
        longer = {**settings, "max_points": _LONG_PATH_FACTOR * int(settings["max_points"])}
        for lo in range(0, undecided.size, _LONG_PATH_GROUP):
            rows = undecided[lo:lo + _LONG_PATH_GROUP]
            part = solve_caps(lam[rows], nu[rows], clamped[rows], immovable[rows], apex[rows], amplitude[rows],
                              width[rows], settings=longer, mismatch=pb.mismatch[rows],
                              mismatch_strain=None if mismatch_strain is None else mismatch_strain[rows],
                              mismatch_radius=None if mismatch_radius is None else mismatch_radius[rows],
                              annulus=None if annulus is None else annulus[rows], retry_long_paths=False)
            for key, value in vars(part).items():
                getattr(solution, key)[rows] = value
    return solution


def _bracket_first_crossings(pb: CapPathProblem, hist: Any, jb: np.ndarray, crossings: ModeCrossings,
                             w: np.ndarray, tol: float,
                             ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Locate each crossing inside its step and keep the earliest ones per cap.

    The determinants of a cap's crossing wave numbers are evaluated at ``_CROSSING_SAMPLES``
    evenly spaced points of the flipped step (on the same arc as the refinement). Each crossing
    gets the sub-interval of its first sign change; a cap keeps the crossings of its earliest
    sub-interval (several if they share it: their order inside is left to the refinement).
    Caps whose samples do not all converge keep every crossing and the whole step.

    Returns
    -------
    keep, s_lo, s_hi, g_lo, g_hi
        Per crossing: kept or not, and the bracket (arclengths from the step's start, and the
        determinant ratios to the step's start at both ends).
    """
    cp, cm = crossings.point, crossings.mode
    caps, cap_of = np.unique(cp, return_inverse=True)
    cap_of = cap_of.reshape(-1)
    q = _CROSSING_SAMPLES
    frac = np.arange(1, q + 1) / (q + 1)
    jr = jb[caps]
    step = hist.step[caps, jr]
    anchor = np.repeat(hist.z[caps, jr - 1], q, axis=0)
    tangent = np.repeat(hist.t[caps, jr - 1], q, axis=0)
    sample_cap = np.repeat(caps, q)
    z, conv, _, _ = correct_caps_on_arc(pb, anchor, tangent, (step[:, None] * frac[None, :]).ravel(),
                                        sample_cap, w, tol=tol, max_iter=8)
    settled = np.asarray(np.asarray(conv, dtype=bool).reshape(-1, q).all(axis=1))
    rows = (cap_of[:, None] * q + np.arange(q)[None, :]).ravel()  # each crossing's samples
    crossing_of = np.repeat(np.arange(cp.size), q)
    g_flat = np.full(rows.size, np.nan)
    mode_rows = np.repeat(cm, q)
    for mode in np.unique(cm):
        sel = mode_rows == mode
        sg, ld = compute_mode_determinants(pb, np.nan_to_num(z[rows[sel]]), sample_cap[rows[sel]],
                                           np.array([mode]))
        ref = crossing_of[sel]
        g_flat[sel] = sg[:, 0] * crossings.sign[ref] * np.exp(np.clip(ld[:, 0] - crossings.logdet[ref], -700, 700))
    g = g_flat.reshape(cp.size, q)
    flipped = np.asarray(g <= 0)
    sub = np.where(flipped.any(axis=1), np.argmax(flipped, axis=1), q)  # crossing in (s_sub, s_sub+1)
    earliest = np.full(caps.size, q)
    np.minimum.at(earliest, cap_of, sub)
    ok = settled[cap_of]
    keep = ~ok | (sub == earliest[cap_of])
    bounds = np.concatenate([[0.0], frac, [1.0]])
    row = np.arange(cp.size)
    s_step = step[cap_of]
    s_lo = np.where(ok, bounds[sub] * s_step, 0.0)
    s_hi = np.where(ok, bounds[sub + 1] * s_step, s_step)
    g_lo = np.where(ok & (sub > 0), g[row, np.maximum(sub - 1, 0)], 1.0)
    g_hi = np.where(ok & (sub < q), g[row, np.minimum(sub, q - 1)], crossings.ratio)
    return keep, s_lo, s_hi, g_lo, g_hi


def _check_bistability(pb: CapPathProblem, hist: Any, w: np.ndarray, has_fold: np.ndarray, jf: np.ndarray,
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


def _sample_paths(hist: Any, deflection: np.ndarray, load_unit: np.ndarray, samples: int) -> np.ndarray:
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
