"""Path following of one cap: the axisymmetric path, the bifurcation, and the bifurcated branch.

Steps (see ``theory.md``):

1. continue the axisymmetric path (the ``K = 0`` problem) by pseudo-arclength from the
   unloaded cap, watching the sign of the determinant of the harmonic-``n`` block of the
   Jacobian (at an axisymmetric state the harmonics decouple, so that block is the ``cos nθ``
   stability operator) and the load component of the tangent (limit points);
2. refine the first sign change by regula falsi along the arc;
3. switch branches: predictor along the null vector of the harmonic-``n`` block, corrected on
   the arc ``tᵀW(z − z_b) = s`` (which the axisymmetric branch cannot meet), then
   pseudo-arclength on the ``K``-harmonic problem until the apex deflection reaches
   ``max_indentation``;
4. put the last point exactly on ``δ/h = max_indentation`` and measure the shape there.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from sweepshell.models.cap_postbuckling.operators import DenseBordered, HarmonicCapProblem
from sweepshell.numerics.arc_refine import refine_on_arc
from sweepshell.numerics.arclength import TRACE_DONE, correct_on_arc, trace_paths

__all__ = ["CapBranchResult", "follow_cap"]

_FIRST_STEP, _MAX_STEP, _MIN_STEP = 0.1, 0.25, 1e-7
_SWITCH_STEP = 1e-2  # arclength of the branch-switching predictor along the critical mode
_SLOPE_STEPS = (2e-3, 4e-3)  # two short arcs on the new branch whose secant slopes give its initial slope
_ASYM_ANGLES = 16  # angles in [0, π/n] at which path points' asymmetry is measured
_RETURN_SHARE = 0.2  # a branch whose asymmetry falls below this share of its peak has turned back
SHAPE_RADII, SHAPE_ANGLES = 24, 72


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


def _weights(pb: HarmonicCapProblem) -> np.ndarray:
    w = np.full(pb.unknowns + 1, 1.0 / (2 * pb.size))
    w[-1] = 1.0
    return w


def _embed(z0: np.ndarray, small: HarmonicCapProblem, big: HarmonicCapProblem) -> np.ndarray:
    """Return the state ``z0`` of ``small`` (fewer harmonics) in the layout of ``big``."""
    out = np.zeros(big.unknowns + 1)
    nb_s, nb_b = small.block, big.block
    out[:nb_s] = z0[:nb_s]
    out[nb_b:nb_b + nb_s] = z0[nb_s:2 * nb_s]
    out[-1] = z0[-1]
    return out


def _mode_block(pb1: HarmonicCapProblem, z1: np.ndarray) -> np.ndarray:
    """Return the harmonic-1 block ``(2M, 2M)`` of the Jacobian of the ``K = 1`` problem at ``z1``."""
    _, jac = pb1.evaluate(z1)
    m, nb = pb1.size, pb1.block
    rows = np.r_[m:2 * m, nb + m:nb + 2 * m]
    return jac[np.ix_(rows, rows)]


def _asymmetry(pb: HarmonicCapProblem, z: np.ndarray) -> float:
    """Return max |ω − ω₀|/(2c) over the nodes and a fan of angles: the non-axisymmetric amplitude over h."""
    if pb.k == 0:
        return 0.0
    w, _, _ = pb.split(z)
    values = np.einsum("jab,jb->ja", pb.fw.value[1:], w[1:]) * pb.lam**2
    theta = np.linspace(0.0, np.pi / pb.n, _ASYM_ANGLES)
    field_ = np.cos(np.outer(theta, pb.n * np.arange(1, pb.k + 1))) @ values
    return float(np.abs(field_).max() / (2.0 * pb.c))


def _trace(pb: HarmonicCapProblem, z0: np.ndarray, t0: np.ndarray, settings: dict, finished, *,  # type: ignore[no-untyped-def]
           orientation: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray, int, int]:
    w = _weights(pb)
    hist = trace_paths(pb, z0[None], t0[None], np.zeros(1, dtype=int), w, first_step=_FIRST_STEP,
                       max_step=_MAX_STEP, min_step=_MIN_STEP, max_points=int(settings["max_points"]),
                       max_angle_deg=float(settings["max_turn_deg"]), tol=float(settings["tolerance"]), max_iter=8,
                       is_finished=finished, orientation=pb.orientation if orientation else None)
    n = int(hist.count[0])
    return hist.z[0, :n], hist.t[0, :n], hist.step[0, :n], n, int(hist.state[0])


def _initial_tangent(pb: HarmonicCapProblem, z0: np.ndarray) -> np.ndarray:
    _, lin = pb.linearize(z0[None], np.zeros(1, dtype=int))
    row = np.zeros((1, pb.unknowns + 1))
    row[0, -1] = 1.0
    t = lin.solve_bordered(row, np.zeros((1, pb.unknowns)), np.ones(1))[0]
    w = _weights(pb)
    return t / math.sqrt(float(np.sum(w * t * t)))


def _slope(pb: HarmonicCapProblem, t: np.ndarray) -> float:
    """Return d(load)/d(conjugate displacement) along tangent ``t`` (see :meth:`HarmonicCapProblem.conjugate`)."""
    dd = float(pb.conjugate(t))
    return float(pb.load(t[-1])) / dd if dd != 0.0 else math.nan


def _land_on_deflection(pb: HarmonicCapProblem, za: np.ndarray, zb: np.ndarray, target: float,
                        tol: float) -> np.ndarray | None:
    """Return the state with δ/h = ``target`` between path points ``za`` and ``zb`` (Newton, bordered)."""
    da, db = float(pb.apex_deflection(za)), float(pb.apex_deflection(zb))
    frac = 0.5 if db == da else min(max((target - da) / (db - da), 0.0), 1.0)
    z = za + frac * (zb - za)
    row = np.zeros(pb.unknowns + 1)
    row[:pb.size] = -(pb.lam**2 / (2.0 * pb.c)) * pb.apex_row
    for _ in range(12):
        r, jac = pb.evaluate(z)
        lin = DenseBordered(jac[None])
        dz = lin.solve_bordered(row[None], -r[None], np.array([target - float(pb.apex_deflection(z))]))[0]
        z = z + dz
        # a Newton step this small leaves an error of its square: far below the path's own tolerance
        if np.sqrt(np.mean(dz * dz)) < max(100.0 * tol, 1e-8) * max(1.0, float(np.sqrt(np.mean(z * z)))):
            return z
    return None


def _ridge(pb: HarmonicCapProblem, z: np.ndarray, contact: float) -> tuple[float, float]:
    """Return the ridge radius (mean over θ, over a) and its relative spread over θ; NaN without an inverted region.

    The ridge is where the meridional curvature of the deformed surface is most convex
    (most negative) outside the loaded contact and the edge zone (0 < r < 0.9a); there is
    one only where the surface inside it is inverted (concave somewhere).
    """
    radius = np.linspace(0.0, 0.9, 721)[1:]
    inner = radius > min(0.3, 3.0 * contact / pb.lam)
    theta = np.linspace(0.0, np.pi / max(pb.n, 1), 33)
    curv = pb.curvature_profile(z, radius[inner], theta)
    at = np.argmin(curv, axis=1)
    full = pb.curvature_profile(z, radius, theta)
    cut = np.searchsorted(radius, radius[inner][at])
    inverted = all(bool((full[q, :cut[q]] > 0.0).any()) for q in range(theta.size))
    if not inverted:
        return math.nan, math.nan
    where = radius[inner][at]
    mean = float(np.mean(0.5 * (where[1:] + where[:-1])))
    return mean, float((where.max() - where.min()) / mean)


def _shape(pb: HarmonicCapProblem, z: np.ndarray) -> np.ndarray:
    radius = np.linspace(0.0, 1.0, SHAPE_RADII)
    angle = 2.0 * np.pi * np.arange(SHAPE_ANGLES) / SHAPE_ANGLES
    coef = pb.sample(z, radius)  # (K+1, R)
    m = max(pb.n, 1) * np.arange(pb.k + 1)
    omega = np.einsum("jr,aj->ra", coef, np.cos(np.outer(angle, m)))
    return -omega / (2.0 * pb.c)


def follow_cap(*, lam: float, nu: float, clamped: bool, immovable: bool, apex: bool, amplitude: float,
               width: float, wave_number: int, max_indentation: float, settings: dict,
               follow_branch: bool = True) -> CapBranchResult:
    """Follow one cap to ``max_indentation`` (δ/h), through its ``cos nθ`` bifurcation if it has one.

    ``wave_number`` 0 follows the axisymmetric path only (no bifurcation is looked for).
    ``follow_branch`` False stops after the bifurcation and the initial post-buckling slope.
    ``settings`` are the model settings plus the grid, ``nodes_used`` and ``stretch_used``.
    """
    s = settings
    out = CapBranchResult()
    nodes, stretch = int(s["nodes_used"]), float(s["stretch_used"])
    contact = float(s["contact_width"])
    common = {"lam": lam, "nu": nu, "clamped": clamped, "immovable": immovable, "apex": apex,
              "amplitude": amplitude, "width": width, "nodes": nodes, "stretch": stretch, "contact": contact}
    n = int(wave_number)
    pb0 = HarmonicCapProblem(wave_number=max(n, 2), harmonics=0, **common)  # type: ignore[arg-type]
    pb1 = HarmonicCapProblem(wave_number=n, harmonics=1, **common) if n >= 2 else None  # type: ignore[arg-type]
    z0 = np.zeros(pb0.unknowns + 1)
    t0 = _initial_tangent(pb0, z0)
    max_load = float(s["max_pressure"]) if not apex else math.inf
    state = {"sign": None, "flipped": False, "fold": False, "logdet": 0.0}

    def block_det(z: np.ndarray) -> tuple[float, float]:
        assert pb1 is not None
        sign, logdet = np.linalg.slogdet(_mode_block(pb1, _embed(z, pb0, pb1)))
        return float(sign), float(logdet)

    if pb1 is not None:
        state["sign"], state["logdet"] = block_det(z0)

    def finished(z_prev, z_new, t_new, rows):  # type: ignore[no-untyped-def]
        done = np.zeros(z_new.shape[0], dtype=bool)
        for i in range(z_new.shape[0]):
            zn = z_new[i]
            if t_new[i, -1] <= 0.0 and not state["fold"] and not state["flipped"]:
                state["fold"] = True
                if not apex:
                    done[i] = True
                    continue
            watching = pb1 is not None and not (state["fold"] and not apex)
            if watching and block_det(zn)[0] != state["sign"]:
                state["flipped"] = True
                done[i] = True
                continue
            d = float(pb0.apex_deflection(zn))
            done[i] = d >= max_indentation or float(pb0.load(zn[-1])) > max_load or d < -max_indentation
        return done

    zs, ts, steps, count, trace_state = _trace(pb0, z0, t0, s, finished, orientation=True)
    out.limit_first = bool(state["fold"])
    defl = pb0.apex_deflection(zs)
    loads = pb0.load(zs[:, -1])
    path = [np.stack([loads, defl, np.zeros(count)], axis=1)]
    if trace_state != TRACE_DONE:
        out.path = path[0]
        return out
    if state["fold"]:
        limit = _refine_fold(pb0, zs, ts, steps, s)
        if limit is None:
            out.path = path[0]
            return out
        out.bifurcation_load, out.bifurcation_deflection = limit
    if not state["flipped"]:
        out.path = path[0]
        if state["fold"] and not apex:
            out.finished = True  # the cap snaps at its pressure maximum
            return out
        return _finish_on_axis(out, pb0, zs, s, max_indentation, contact)
    # -- the bifurcation: refine the determinant's sign change along the last step ------------
    assert pb1 is not None
    w0 = _weights(pb0)
    anchor, tangent = zs[-2][None], ts[-2][None]
    ref = state["logdet"]

    def measure(z, t, rows):  # type: ignore[no-untyped-def]
        vals = np.empty(z.shape[0])
        for i in range(z.shape[0]):
            sg, ld = block_det(z[i])
            vals[i] = sg * math.exp(min(ld - ref, 600.0))
        return vals

    g_lo = measure(zs[-2][None], None, None)
    g_hi = measure(zs[-1][None], None, None)
    zb, tb, _, ok = refine_on_arc(pb0, anchor, tangent, steps[-1:], g_lo, g_hi, np.zeros(1, dtype=int), w0, measure,
                                  tol=float(s["tolerance"]), max_iter=8, iterations=40, s_tol=1e-8)
    if not ok[0]:
        out.path = path[0][:-1]
        return out
    zb, tb = zb[0], tb[0]
    out.wave_number = n
    out.bifurcation_load = float(pb0.load(zb[-1]))
    out.bifurcation_deflection = float(pb0.apex_deflection(zb))
    pre_slope = _slope(pb0, tb)
    # the trace stopped at the first point past the sign change: the path ends at the bifurcation instead
    path = [np.concatenate([path[0][:-1], [[out.bifurcation_load, out.bifurcation_deflection, 0.0]]])]
    # -- branch switching ------------------------------------------------------------------------
    pbk = HarmonicCapProblem(wave_number=n, harmonics=int(s["harmonics"]), **common)  # type: ignore[arg-type]
    block = _mode_block(pb1, _embed(zb, pb0, pb1))
    _, _, vt = np.linalg.svd(block)
    phi = vt[-1]
    phi = phi * (1.0 if phi[np.argmax(np.abs(phi))] > 0 else -1.0)
    zbk = _embed(zb, pb0, pbk)
    mode = np.zeros(pbk.unknowns + 1)
    m = pbk.size
    mode[m:2 * m] = phi[:m]
    mode[pbk.block + m:pbk.block + 2 * m] = phi[m:]
    wk = _weights(pbk)
    mode /= math.sqrt(float(np.sum(wk * mode * mode)))
    idx = np.zeros(1, dtype=int)
    tol = float(s["tolerance"])
    # initial post-buckling slope from two short secants (error O(s²) each, extrapolated)
    secants: list[float] = []
    falls: list[bool] = []
    for arc in _SLOPE_STEPS:
        zc, conv, _, _ = correct_on_arc(pbk, zbk[None], mode[None], np.array([arc]), idx, wk, tol=tol, max_iter=12)
        if not conv[0]:
            break
        dd = float(pbk.conjugate(zc[0]) - pb0.conjugate(zb))
        dl = float(pbk.load(zc[0, -1])) - out.bifurcation_load
        secants.append(dl / dd if dd != 0.0 else math.nan)
        falls.append(dl < 0.0)
    out.load_falls = bool(falls and falls[0])
    if len(secants) == 2 and np.isfinite(pre_slope) and pre_slope != 0.0:
        out.postbuckling_slope = float((4.0 * secants[0] - secants[1]) / 3.0 / pre_slope)
    if not follow_branch:
        out.path = path[0]
        return out
    zc, conv, _, tc = correct_on_arc(pbk, zbk[None], mode[None], np.array([_SWITCH_STEP]), idx, wk, tol=tol,
                                     max_iter=12)
    if not conv[0]:
        out.path = path[0]
        return out
    # the branch is followed away from the bifurcation point (growing critical-mode amplitude)
    if float(np.sum(wk * tc[0] * mode)) < 0.0:
        tc = -tc

    peak = [0.0]

    def finished_k(z_prev, z_new, t_new, rows):  # type: ignore[no-untyped-def]
        d = pbk.apex_deflection(z_new)
        # a branch that comes back to its bifurcation point (the asymmetry falls from its peak towards
        # zero there) does not reach max_indentation: stop rather than go round the loop again
        amp = np.array([_asymmetry(pbk, zz) for zz in z_new])
        peak[0] = max(peak[0], float(amp.max()))
        near = (np.abs(d - out.bifurcation_deflection) < 0.02 * max(abs(out.bifurcation_deflection), 1.0)) & \
            (np.abs(pbk.load(z_new[:, -1]) - out.bifurcation_load) < 0.02 * abs(out.bifurcation_load))
        back = (amp < _RETURN_SHARE * peak[0]) & (peak[0] > 0.05) & near
        return (d >= max_indentation) | (d < -max_indentation) | back

    zk, _, _, count_k, state_k = _trace(pbk, zc[0], tc[0], s, finished_k, orientation=False)
    dk = pbk.apex_deflection(zk)
    lk = pbk.load(zk[:, -1])
    ak = np.array([_asymmetry(pbk, zz) for zz in zk])
    path.append(np.stack([lk, dk, ak], axis=1))
    out.path = np.concatenate(path)
    if state_k != TRACE_DONE or count_k < 2 or dk[-1] < max_indentation:
        return out
    out.load_drop = float(np.min(lk) / out.bifurcation_load) if out.bifurcation_load != 0.0 else math.nan
    zf = _land_on_deflection(pbk, zk[-2], zk[-1], max_indentation, tol)
    if zf is None:
        return out
    return _measure(out, pbk, zf, contact)


def _refine_fold(pb0: HarmonicCapProblem, zs: np.ndarray, ts: np.ndarray, steps: np.ndarray,
                 s: dict) -> tuple[float, float] | None:
    """Return (load, δ/h) at the path's first limit point (zero of the tangent's load component)."""
    j = int(np.argmax(ts[1:, -1] <= 0.0)) + 1
    w0 = _weights(pb0)

    def measure(z, t, rows):  # type: ignore[no-untyped-def]
        return t[:, -1]

    zf, _, _, ok = refine_on_arc(pb0, zs[j - 1][None], ts[j - 1][None], steps[j:j + 1], ts[j - 1:j, -1],
                                 ts[j:j + 1, -1], np.zeros(1, dtype=int), w0, measure, tol=float(s["tolerance"]),
                                 max_iter=8, iterations=40, s_tol=1e-6)
    if not ok[0]:
        return None
    return float(pb0.load(zf[0, -1])), float(pb0.apex_deflection(zf[0]))


def _finish_on_axis(out: CapBranchResult, pb0: HarmonicCapProblem, zs: np.ndarray, s: dict, target: float,
                    contact: float) -> CapBranchResult:
    d = pb0.apex_deflection(zs)
    if d[-1] < target:
        out.finished = True  # the load range ended before max_indentation: stable within it
        return out
    zf = _land_on_deflection(pb0, zs[-2], zs[-1], target, float(s["tolerance"]))
    if zf is None:
        return out
    return _measure(out, pb0, zf, contact)


def _measure(out: CapBranchResult, pb: HarmonicCapProblem, zf: np.ndarray, contact: float) -> CapBranchResult:
    ridge, spread = _ridge(pb, zf, contact)
    out.ridge_radius = ridge * pb.lam / math.sqrt(2.0 * pb.c)
    out.asymmetry = _asymmetry(pb, zf) if pb.k > 0 else 0.0
    out.ridges = float(pb.n) if (pb.k > 0 and spread > RIDGE_SPREAD) else 0.0  # NaN spread: no ridge, 0
    out.shape = _shape(pb, zf)
    out.finished = True
    out.reached_end = True
    return out


#: relative spread (max − min)/mean over θ of the ridge radius above which the ridge counts as polygonal
RIDGE_SPREAD = 0.02
