"""The axisymmetric (fundamental) path of one cap: trace, stability watch, bifurcation and limit point.

The path is the ``K = 0`` problem, ``shallow_cap``'s own, continued by pseudo-arclength with
the orientation test. A ``determinant`` callable watches the ``cos nθ`` stability operator at
every accepted point; its first sign change is refined along the arc. Two determinants are
used (``theory.md``): the harmonic-``n`` block of the model's own ``K = 1`` Jacobian
(pressure, mismatch, and the contact-spread apex force of the branch), and ``shallow_cap``'s
stability operator on its refined grid (the point force, whose ``log x`` curvature the
model's collocated block cannot take).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from sweepshell.models.cap_postbuckling.operators import HarmonicCapProblem
from sweepshell.models.shallow_cap.modes import compute_mode_determinants
from sweepshell.models.shallow_cap.problem import build_problem
from sweepshell.numerics.arc_refine import refine_on_arc
from sweepshell.numerics.arclength import TRACE_DONE, trace_paths

__all__ = ["Determinant", "Fundamental", "block_determinant", "embed", "mode_block", "point_force_determinant",
           "refine_bifurcation", "refine_fold", "trace", "trace_fundamental", "weights"]

Determinant = Callable[[np.ndarray], tuple[float, float]]  # state -> (sign, log|det|)
_FIRST_STEP, _MAX_STEP, _MIN_STEP = 0.1, 0.25, 1e-7


def weights(pb: HarmonicCapProblem) -> np.ndarray:
    """Return the arclength weights: 1/(2M) per nodal unknown, 1 for the load parameter."""
    w = np.full(pb.unknowns + 1, 1.0 / (2 * pb.size))
    w[-1] = 1.0
    return w


def embed(z0: np.ndarray, small: HarmonicCapProblem, big: HarmonicCapProblem) -> np.ndarray:
    """Return the state ``z0`` of ``small`` (fewer harmonics) in the layout of ``big``."""
    out = np.zeros(big.unknowns + 1)
    nb_s, nb_b = small.block, big.block
    out[:nb_s] = z0[:nb_s]
    out[nb_b:nb_b + nb_s] = z0[nb_s:2 * nb_s]
    out[-1] = z0[-1]
    return out


def mode_block(pb1: HarmonicCapProblem, z1: np.ndarray) -> np.ndarray:
    """Return the harmonic-1 block ``(2M, 2M)`` of the Jacobian of the ``K = 1`` problem at ``z1``."""
    _, jac = pb1.evaluate(z1)
    m, nb = pb1.size, pb1.block
    rows = np.r_[m:2 * m, nb + m:nb + 2 * m]
    return jac[np.ix_(rows, rows)]


def block_determinant(pb0: HarmonicCapProblem, pb1: HarmonicCapProblem) -> Determinant:
    """Return the determinant of the model's own ``cos nθ`` block at axisymmetric states of ``pb0``."""

    def det(z: np.ndarray) -> tuple[float, float]:
        sign, logdet = np.linalg.slogdet(mode_block(pb1, embed(z, pb0, pb1)))
        return float(sign), float(logdet)

    return det


def point_force_determinant(pb0: HarmonicCapProblem, n: int) -> Determinant:
    """Return ``shallow_cap``'s ``cos nθ`` stability determinant at states of ``pb0`` (same unknowns, same grid)."""
    g = pb0.grid
    problem = build_problem(np.array([pb0.lam]), np.array([pb0.nu]), np.array([pb0.clamped]),
                            np.array([pb0.immovable]), np.array([pb0.apex]), np.array([pb0.amplitude]),
                            np.array([pb0.width]), pb0.size, stretch=g.stretch, centre=g.centre)
    idx, modes = np.zeros(1, dtype=int), np.array([n])

    def det(z: np.ndarray) -> tuple[float, float]:
        sign, logdet = compute_mode_determinants(problem, z[None], idx, modes)
        return float(sign[0, 0]), float(logdet[0, 0])

    return det


def trace(pb: HarmonicCapProblem, z0: np.ndarray, t0: np.ndarray, settings: dict, finished, *,  # type: ignore[no-untyped-def]
          orientation: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray, int, int]:
    """Continue ``pb`` from ``z0`` along ``t0``: states, tangents, steps, count and the trace state."""
    hist = trace_paths(pb, z0[None], t0[None], np.zeros(1, dtype=int), weights(pb), first_step=_FIRST_STEP,
                       max_step=_MAX_STEP, min_step=_MIN_STEP, max_points=int(settings["max_points"]),
                       max_angle_deg=float(settings["max_turn_deg"]), tol=float(settings["tolerance"]), max_iter=8,
                       is_finished=finished, orientation=pb.orientation if orientation else None)
    n = int(hist.count[0])
    return hist.z[0, :n], hist.t[0, :n], hist.step[0, :n], n, int(hist.state[0])


def initial_tangent(pb: HarmonicCapProblem, z0: np.ndarray) -> np.ndarray:
    """Return the unit tangent at ``z0`` with a positive load component."""
    _, lin = pb.linearize(z0[None], np.zeros(1, dtype=int))
    row = np.zeros((1, pb.unknowns + 1))
    row[0, -1] = 1.0
    t = lin.solve_bordered(row, np.zeros((1, pb.unknowns)), np.ones(1))[0]
    return t / math.sqrt(float(np.sum(weights(pb) * t * t)))


@dataclass
class Fundamental:
    """The traced axisymmetric path: states, tangents, steps, trace state and what stopped it."""

    zs: np.ndarray
    ts: np.ndarray
    steps: np.ndarray
    state: int
    fold: bool
    flipped: bool
    reference: float  # log|det| at the unloaded cap (scales the refinement's measure)

    @property
    def done(self) -> bool:
        return self.state == TRACE_DONE


def trace_fundamental(pb0: HarmonicCapProblem, determinant: Determinant | None, settings: dict,
                      stop: Callable[[float, float], bool], *, displacement_control: bool) -> Fundamental:
    """Trace the axisymmetric path until ``stop(δ/h, load)``, a determinant sign change or a fold.

    ``displacement_control`` (apex force) continues through folds (the arclength path is the
    displacement-controlled one); otherwise the first fold ends the path (a snap).
    """
    z0 = np.zeros(pb0.unknowns + 1)
    flags = {"fold": False, "flipped": False}
    sign0, ref = determinant(z0) if determinant is not None else (0.0, 0.0)

    def finished(z_prev, z_new, t_new, rows):  # type: ignore[no-untyped-def]
        done = np.zeros(z_new.shape[0], dtype=bool)
        for i, zn in enumerate(z_new):
            if t_new[i, -1] <= 0.0 and not flags["fold"] and not flags["flipped"]:
                flags["fold"] = True
                if not displacement_control:
                    done[i] = True
                    continue
            watching = determinant is not None and not (flags["fold"] and not displacement_control)
            if watching and determinant(zn)[0] != sign0:
                flags["flipped"] = done[i] = True
                continue
            done[i] = stop(float(pb0.apex_deflection(zn)), float(pb0.load(zn[-1])))
        return done

    zs, ts, steps, _, state = trace(pb0, z0, initial_tangent(pb0, z0), settings, finished, orientation=True)
    return Fundamental(zs, ts, steps, state, flags["fold"], flags["flipped"], ref)


def refine_bifurcation(pb0: HarmonicCapProblem, fund: Fundamental, determinant: Determinant,
                       settings: dict) -> tuple[np.ndarray, np.ndarray] | None:
    """Return the state and tangent where the determinant changes sign in the path's last step."""

    def measure(z, t, rows):  # type: ignore[no-untyped-def]
        vals = np.empty(z.shape[0])
        for i in range(z.shape[0]):
            sg, ld = determinant(z[i])
            vals[i] = sg * math.exp(min(ld - fund.reference, 600.0))
        return vals

    zs, ts = fund.zs, fund.ts
    zb, tb, _, ok = refine_on_arc(pb0, zs[-2][None], ts[-2][None], fund.steps[-1:], measure(zs[-2][None], None, None),
                                  measure(zs[-1][None], None, None), np.zeros(1, dtype=int), weights(pb0), measure,
                                  tol=float(settings["tolerance"]), max_iter=8, iterations=40, s_tol=1e-8)
    return (zb[0], tb[0]) if ok[0] else None


def refine_fold(pb0: HarmonicCapProblem, fund: Fundamental, settings: dict) -> tuple[float, float] | None:
    """Return (load, δ/h) at the path's first limit point (zero of the tangent's load component)."""
    ts = fund.ts
    j = int(np.argmax(ts[1:, -1] <= 0.0)) + 1

    def measure(z, t, rows):  # type: ignore[no-untyped-def]
        return t[:, -1]

    zf, _, _, ok = refine_on_arc(pb0, fund.zs[j - 1][None], ts[j - 1][None], fund.steps[j:j + 1], ts[j - 1:j, -1],
                                 ts[j:j + 1, -1], np.zeros(1, dtype=int), weights(pb0), measure,
                                 tol=float(settings["tolerance"]), max_iter=8, iterations=40, s_tol=1e-6)
    if not ok[0]:
        return None
    return float(pb0.load(zf[0, -1])), float(pb0.apex_deflection(zf[0]))
