"""The compiled per-cap kernels of ``shallow_cap`` against the batched numpy specification."""

from __future__ import annotations

import numpy as np
import pytest

from sweepshell.models.shallow_cap.compiled import correct_caps_on_arc, trace_cap_paths
from sweepshell.models.shallow_cap.problem import build_problem
from sweepshell.numerics.arclength import compute_tangent, correct_on_arc, trace_paths

NU = 0.3


def make_mixed_problem():  # type: ignore[no-untyped-def]
    """Six caps covering every branch of the residual: edges, in-plane edges, loads, dimples."""
    n = 6
    lam = np.array([4.0, 7.0, 9.0, 5.0, 12.0, 8.0])
    clamped = np.array([1, 0, 1, 0, 1, 1], bool)
    immovable = np.array([1, 1, 0, 0, 1, 1], bool)
    apex = np.array([0, 0, 0, 1, 1, 0], bool)
    mismatch = np.array([0, 0, 0, 0, 0, 1], bool)
    pb = build_problem(lam, np.full(n, NU), clamped, immovable, apex, np.array([0.0, 0.3, 0.1, 0.2, 0.0, 0.2]),
                      np.full(n, 2.0), 34, mismatch=mismatch, mismatch_strain=np.full(n, -8.0),
                      mismatch_radius=np.full(n, 0.5), annulus=np.zeros(n, bool))
    m = pb.unknowns
    w = np.full(m + 1, 1.0 / m)
    w[-1] = 1.0
    idx = np.arange(n)
    z0 = np.zeros((n, m + 1))
    e = np.zeros((n, m + 1))
    e[:, -1] = 1.0
    _, lin = pb.linearize(z0, idx)
    return pb, w, idx, z0, compute_tangent(lin, e, w)


def test_compiled_corrector_matches_the_numpy_corrector():
    pb, w, idx, z0, t0 = make_mixed_problem()
    for s in (0.05, 0.3):
        want = correct_on_arc(pb, z0, t0, np.full(idx.size, s), idx, w, tol=1e-10, max_iter=8)
        got = correct_caps_on_arc(pb, z0, t0, np.full(idx.size, s), idx, w, tol=1e-10, max_iter=8)
        np.testing.assert_array_equal(got[1], want[1])
        np.testing.assert_array_equal(got[2], want[2])
        ok = want[1]
        assert ok.sum() >= 4
        np.testing.assert_allclose(got[0][ok], want[0][ok], rtol=0, atol=1e-11)
        np.testing.assert_allclose(got[3][ok], want[3][ok], rtol=0, atol=1e-11)


def test_compiled_path_tracing_matches_trace_paths():
    # the stopping rule without the bistability search: the load range or the first fold
    pb, w, idx, z0, t0 = make_mixed_problem()
    c = np.sqrt(3.0 * (1.0 - NU**2))
    mu_max = np.where(pb.apex, np.inf, np.where(pb.mismatch, 8.0 / np.abs(pb.force_scale), 2.0))
    depth = pb.lam**2 / (2.0 * c)
    defl_max = np.where(pb.apex, depth, 1.5 * depth + 2.0)
    fold_seen = np.zeros(idx.size, dtype=bool)

    def is_finished(zp, zn, tn, rows):  # type: ignore[no-untyped-def]
        # the load fell, or dμ/ds turned non-positive (the first limit point is bracketed)
        fold_seen[rows] |= (zn[:, -1] < zp[:, -1]) | (tn[:, -1] <= 0)
        defl = pb.apex_deflection(zn, rows)
        defl = np.where(pb.mismatch[rows], np.abs(defl), defl)
        return (zn[:, -1] > mu_max[rows]) | (defl > defl_max[rows]) | fold_seen[rows]

    want = trace_paths(pb, z0, t0, idx, w, first_step=0.1, max_step=0.25, min_step=1e-7, max_points=400,
                       max_angle_deg=12.0, tol=1e-10, max_iter=8, is_finished=is_finished, orientation=pb.orientation)
    zh, th, sh, count, state, *_ = trace_cap_paths(pb, z0, t0, w, first_step=0.1, max_step=0.25, min_step=1e-7,
                                               max_points=400, max_turn_deg=12.0, tol=1e-10, max_iter=8,
                                               mu_max=mu_max, defl_max=defl_max, check_bistability=False,
                                               max_suction=2.0)
    np.testing.assert_array_equal(count, want.count)
    np.testing.assert_array_equal(state, want.state)
    assert count.min() > 5
    for i in range(idx.size):
        c_i = count[i]
        np.testing.assert_allclose(zh[i, :c_i], want.z[i, :c_i], rtol=0, atol=1e-9)
        np.testing.assert_allclose(th[i, :c_i], want.t[i, :c_i], rtol=0, atol=1e-8)
        # steps follow the turning angle, an arccos of cosines near 1 that amplifies rounding of the states
        np.testing.assert_allclose(sh[i, :c_i], want.step[i, :c_i], rtol=1e-7)
        assert np.isnan(zh[i, c_i:]).all()


def test_compiled_tracing_is_batch_invariant():
    # cap 0 (clamped, pressure, no dimple) alone and among five others: the same path, bit for bit
    pb, w, idx, z0, t0 = make_mixed_problem()
    kw = {"first_step": 0.1, "max_step": 0.25, "min_step": 1e-7, "max_points": 400, "max_turn_deg": 12.0,
          "tol": 1e-10, "max_iter": 8, "check_bistability": True, "max_suction": 2.0}
    mu_max = np.full(idx.size, 2.0)
    defl_max = np.full(idx.size, 50.0)
    full = trace_cap_paths(pb, z0, t0, w, mu_max=mu_max, defl_max=defl_max, **kw)
    sub = build_problem(pb.lam[:1], pb.nu[:1], pb.clamped[:1], pb.immovable[:1], pb.apex[:1],
                       np.zeros(1), np.full(1, 2.0), 34)
    one = trace_cap_paths(sub, z0[:1], t0[:1], w, mu_max=mu_max[:1], defl_max=defl_max[:1], **kw)
    c0 = one[3][0]
    assert full[3][0] == c0
    np.testing.assert_array_equal(full[0][0, :c0], one[0][0, :c0])


def test_compiled_reduced_stability_matrix_is_the_schur_complement_of_the_full_matrix(rng):
    # A − B S⁻¹ C from the full (deflection, stress) matrix of build_mode_matrices, by a dense solve
    from sweepshell.models.shallow_cap.modes import (
        _reduced_matrices,
        build_mode_matrices,
        build_mode_operators,
        compute_mode_coefficients,
    )

    k, m = 6, 24
    pb = build_problem(np.full(k, 9.0), np.array([NU, NU, 0.25, NU, 0.25, NU]), np.array([True, False] * 3),
                      np.array([True, True, False] * 2), np.zeros(k, dtype=bool), np.full(k, 0.2),
                      np.full(k, 2.0), m)
    idx = np.arange(k)
    z = np.zeros((k, 2 * m + 1))
    z[:, :m] = rng.uniform(0.0, 0.6, (k, 1)) * pb.grid.x[None, :] ** 2
    z[:, m:2 * m] = rng.uniform(0.5, 1.2, (k, 1)) * pb.grid.x[None, :]
    co = compute_mode_coefficients(pb, z, idx)
    modes = np.array([1, 2, 5])
    for j, n, got in _reduced_matrices(pb, co, modes):
        full = build_mode_matrices(build_mode_operators(m, n), pb.grid.x, co)
        a, b, c, s = full[:, :m, :m], full[:, :m, m:], full[:, m:, :m], full[:, m:, m:]
        want = a - b @ np.linalg.solve(s, c)
        scale = np.abs(want).max(axis=(1, 2), keepdims=True)
        np.testing.assert_allclose(got / scale, want / scale, rtol=0, atol=1e-9, err_msg=f"n={n}")
        assert j == list(modes).index(n)


def test_compiled_fold_refinement_matches_refine_on_arc():
    from sweepshell.models.shallow_cap.compiled import refine_caps_on_arc
    from sweepshell.numerics.arc_refine import refine_on_arc

    pb, w, idx, z0, t0 = make_mixed_problem()
    zh, th, sh, *_ = trace_cap_paths(pb, z0, t0, w, first_step=0.1, max_step=0.25, min_step=1e-7,
                                           max_points=400, max_turn_deg=12.0, tol=1e-10, max_iter=8,
                                           mu_max=np.full(idx.size, np.inf), defl_max=np.full(idx.size, 1e3),
                                           check_bistability=False, max_suction=2.0)
    tmu = th[:, :, -1]
    bracket = (tmu[:, :-1] > 0) & (tmu[:, 1:] <= 0)
    rows = np.nonzero(bracket.any(axis=1))[0]
    assert rows.size >= 3  # the deeper caps have a limit point
    j = np.argmax(bracket[rows], axis=1)
    args = (zh[rows, j], th[rows, j], sh[rows, j + 1], tmu[rows, j], tmu[rows, j + 1], rows, w)
    want = refine_on_arc(pb, *args, lambda z, t, ii: t[:, -1], tol=1e-10, max_iter=8, iterations=40, s_tol=1e-7)
    got = refine_caps_on_arc(pb, *args, use_load=False, tol=1e-10, max_iter=8, iterations=40, s_tol=1e-7)
    np.testing.assert_array_equal(got[3], want[3])
    assert want[3].all()
    # both stop once the bracket is below s_tol·s_hi: rounding moves the last secant step within it
    assert np.all(np.abs(got[2] - want[2]) <= 1e-7 * args[2])
    np.testing.assert_allclose(got[0], want[0], rtol=0, atol=1e-8)
    assert np.abs(got[1][:, -1]).max() < 1e-6  # the tangent's load component vanishes at the fold


def test_compiled_lu_returns_the_sign_of_the_determinant(rng):
    from sweepshell.models.shallow_cap.compiled_newton import lu_solve

    for n in (1, 2, 5, 17, 40):
        for _ in range(20):
            a = rng.standard_normal((n, n))
            g = np.concatenate([a, rng.standard_normal((n, 2))], axis=1)
            rhs = g[:, n:].copy()
            sign = lu_solve(g, n, np.empty(n + 2))
            assert sign == np.sign(np.linalg.det(a))
            np.testing.assert_allclose(a @ g[:, n:], rhs, atol=1e-8 * max(1.0, np.abs(rhs).max()))


def test_stretching_inverse_shared_per_poisson_ratio_and_edge_is_exact():
    # one inverse per (ν, in-plane edge), its columns scaled by λ², against the inverse of each cap's own block
    pb, _, _, _, _ = make_mixed_problem()
    m = pb.size
    d1 = pb.grid.d1[-1][0]
    for i in range(pb.lam.size):
        block = pb.xl / pb.lam[i] ** 2
        block[0] = d1 - pb.nu[i] * np.eye(1, m)[0] if pb.immovable[i] else np.eye(1, m)[0]
        np.testing.assert_allclose(pb.stretch_inverse[i] @ block, np.eye(m), atol=1e-9)


def test_second_derivative_of_the_quadratic_residual(rng):
    # the residual is a quadratic polynomial of the state: R(z+u+v) - R(z+u) - R(z+v) + R(z) = R''[u, v]
    from sweepshell.models.shallow_cap.compiled_fold import _second_derivative
    from sweepshell.models.shallow_cap.compiled_newton import pack_cap_parameters

    pb, _, idx, _, _ = make_mixed_problem()
    prm = pack_cap_parameters(pb)
    m = pb.size
    for i in idx:  # pressure, apex force, mismatch; all edges
        z, u, v = (0.3 * rng.standard_normal(2 * m + 1) for _ in range(3))
        res = [pb.linearize(s[None], np.array([i]))[0][0] for s in (z + u + v, z + u, z + v, z)]
        want = res[0] - res[1] - res[2] + res[3]
        got1, got2 = np.empty(m), np.empty(m)
        _second_derivative(u, v, prm[i], np.ascontiguousarray(pb.eigen_stress[i]), pb.sigma, got1, got2)
        np.testing.assert_allclose(np.concatenate([got1, got2]), want, rtol=0, atol=1e-9 * np.abs(want).max())


def test_direct_fold_solve_finds_the_refined_limit_point():
    # the limit point solved for from inside its corner is the one the bracketing steps refine to
    from sweepshell.models.shallow_cap.compiled import _shared, refine_caps_on_arc
    from sweepshell.models.shallow_cap.compiled_fold import solve_fold
    from sweepshell.models.shallow_cap.compiled_newton import pack_cap_parameters

    pb, w, idx, z0, t0 = make_mixed_problem()
    kw = {"first_step": 0.1, "max_step": 0.25, "min_step": 1e-7, "max_points": 400, "max_turn_deg": 12.0,
          "tol": 1e-10, "max_iter": 8, "mu_max": np.full(idx.size, np.inf), "defl_max": np.full(idx.size, 1e3),
          "check_bistability": False, "max_suction": 2.0}
    zh, th, sh, _, _, _, fold_at = trace_cap_paths(pb, z0, t0, w, **kw)
    tmu = th[:, :, -1]
    bracket = (tmu[:, :-1] > 0) & (tmu[:, 1:] <= 0)
    rows = np.nonzero(bracket.any(axis=1))[0]
    assert rows.size >= 3 and np.all(fold_at == -1)
    j = np.argmax(bracket[rows], axis=1)
    want, _, _, ok = refine_caps_on_arc(pb, zh[rows, j], th[rows, j], sh[rows, j + 1], tmu[rows, j],
                                        tmu[rows, j + 1], rows, w, use_load=False, tol=1e-10, max_iter=8,
                                        iterations=40, s_tol=1e-9)
    assert ok.all()
    x, xl, d1e, sigma, _ = _shared(pb)
    prm = pack_cap_parameters(pb)
    for r, i in enumerate(rows):
        b = np.ascontiguousarray(pb.stretch_inverse[i])
        start = j[r] - 1 if tmu[i, j[r] - 1] < 0.45 else j[r]  # from inside the corner
        z, t = zh[i, start].copy(), np.empty(z0.shape[1])
        conv, _, _ = solve_fold(z, th[i, start] * w, w, 1e-10, 8, prm[i], np.ascontiguousarray(pb.imperfection[i]),
                                np.ascontiguousarray(pb.eigen_stress[i]), b, np.ascontiguousarray(b.T), x, xl,
                                np.ascontiguousarray(xl.T), d1e, sigma, t)
        assert conv
        assert z[-1] == pytest.approx(want[r, -1], rel=1e-9)  # both within the Newton tolerance
        np.testing.assert_allclose(z, want[r], rtol=0, atol=1e-6)
        assert t[-1] == 0.0 and abs(np.sum(t * t * w) - 1.0) < 1e-12
    # the trace that solves for the fold ends on it, at the same load
    zs, _, _, cs, _, _, fs = trace_cap_paths(pb, z0, t0, w, fold_solve=True, **kw)
    solved = rows[fs[rows] >= 0]
    assert solved.size >= 2
    np.testing.assert_array_equal(fs[solved], cs[solved] - 1)
    np.testing.assert_allclose(zs[solved, fs[solved], -1], want[np.isin(rows, solved), -1], rtol=1e-9)
