"""cap_postbuckling: Jacobian, agreement with shallow_cap, convergence, mirror buckling, stability, bad input."""

from __future__ import annotations

import math

import numpy as np
import pytest

from sweepshell.cli.main import main
from sweepshell.models import Status, get_model
from sweepshell.models.cap_postbuckling.branches import follow_cap
from sweepshell.models.cap_postbuckling.model import CapPostbucklingModel, choose_grid
from sweepshell.models.cap_postbuckling.operators import HarmonicCapProblem
from sweepshell.models.shallow_cap.model import ShallowCapModel

SETTINGS = CapPostbucklingModel().settings
POGORELOV = 1.6245  # F R (1-nu^2)^(3/4) / (E h^(5/2) delta^(1/2)), derived in theory.md (ridge boundary layer)


def _follow(lam, n, *, apex=False, edge="clamped", inplane="immovable", amplitude=0.0, target=30.0,
            branch=False, nodes=0, harmonics=None, **extra):
    nodes_used, beta = choose_grid(lam, apex, amplitude, 2.0, nodes)
    settings = {**SETTINGS, **extra, "nodes_used": nodes_used, "stretch_used": beta}
    if harmonics is not None:
        settings["harmonics"] = harmonics
    return follow_cap(lam=lam, nu=0.3, clamped=edge == "clamped", immovable=inplane == "immovable", apex=apex,
                      amplitude=amplitude, width=2.0, wave_number=n, max_indentation=target, settings=settings,
                      follow_branch=branch)


def _shallow(lam, *, load="pressure", edge="clamped", inplane="immovable", amplitude=0.0):
    model = ShallowCapModel(check_bistability=False)
    inputs = {p.name: np.array([p.default]) for p in model.parameters}
    inputs.update(shell_parameter=np.array([float(lam)]), edge=np.array([edge]), edge_inplane=np.array([inplane]),
                  dimple_amplitude=np.array([amplitude]), load=np.array([load]))
    out = model.solve_batch(inputs).outputs
    return (int(np.nan_to_num(out["critical_wavenumber"][0])), float(out["critical_load"][0]),
            float(out["critical_deflection"][0]))


@pytest.mark.parametrize(("clamped", "immovable", "apex"), [(True, True, False), (False, True, False),
                                                          (False, False, True), (True, False, True)])
def test_jacobian_matches_finite_differences(rng, clamped, immovable, apex):
    pb = HarmonicCapProblem(lam=8.0, nu=0.3, clamped=clamped, immovable=immovable, apex=apex, amplitude=0.3,
                            width=2.0, wave_number=3, harmonics=2, nodes=12, stretch=0.5 if apex else 0.0,
                            contact=0.5)
    z = 0.1 * rng.normal(size=pb.unknowns + 1)
    _, jac = pb.evaluate(z)
    fd = np.empty_like(jac)
    step = 1e-6
    for i in range(z.size):
        e = np.zeros_like(z)
        e[i] = step
        fd[:, i] = (pb.evaluate(z + e)[0] - pb.evaluate(z - e)[0]) / (2 * step)
    assert np.abs(fd - jac).max() < 1e-8 * np.abs(jac).max()


@pytest.mark.parametrize(("lam", "edge", "inplane", "amplitude"), [
    (8.0, "clamped", "immovable", 0.0),   # n = 4 bifurcation
    (10.0, "pinned", "immovable", 0.0),   # n = 6 bifurcation
    (9.0, "clamped", "sliding", 0.0),     # n = 3 bifurcation
    (8.0, "clamped", "immovable", 0.3),   # dimpled: limit point
    (4.0, "clamped", "immovable", 0.0),   # limit point
])
def test_axisymmetric_restriction_reproduces_shallow_cap(lam, edge, inplane, amplitude):
    # the n = 0 problem and the harmonic-n block are shallow_cap's equations on another discretisation:
    # the critical load and the apex deflection there agree to 1e-6 (common practice, no source)
    n, load, deflection = _shallow(lam, edge=edge, inplane=inplane, amplitude=amplitude)
    out = _follow(lam, n, edge=edge, inplane=inplane, amplitude=amplitude)
    assert out.bifurcation_load == pytest.approx(load, rel=1e-6)
    assert out.bifurcation_deflection == pytest.approx(deflection, rel=1e-6)
    assert out.limit_first == (n == 0)


def test_critical_wave_number_is_critical_on_this_grid_too():
    # shallow_cap's scan picks n = 4 at lambda = 8: its neighbours bifurcate later on this model's grid
    n, load, _ = _shallow(8.0)
    loads = {k: _follow(8.0, k, target=5.0).bifurcation_load for k in (n - 1, n, n + 1)}
    assert loads[n] == pytest.approx(load, rel=1e-6)
    assert loads[n] < loads[n - 1] and loads[n] < loads[n + 1]


@pytest.mark.slow
def test_apex_force_bifurcation_agrees_with_shallow_cap():
    # this model spreads the apex force over a Gaussian of width 0.25 l (theory.md); shallow_cap's is a
    # point force: at lambda = 10 the loads agree within 0.3 % (measured 0.10 %; 0.16 % at lambda = 20, theory.md)
    for lam in (10.0,):
        n, load, _ = _shallow(lam, load="apex_force")
        out = _follow(lam, n, apex=True)
        assert out.wave_number == n
        assert out.bifurcation_load == pytest.approx(load, rel=3e-3)


def test_pressure_caps_post_buckle_unstably():
    # Hutchinson 1967, J. Appl. Mech. 34:49: the pressure falls along the bifurcated branch of a spherical
    # shell (imperfection-sensitive); checked for the sign only (the size is not derived here)
    for lam in (8.0, 12.0):
        n, _, _ = _shallow(lam)
        out = _follow(lam, n)
        assert out.load_falls
        assert out.postbuckling_slope < 0 or out.postbuckling_slope > 1


@pytest.mark.slow
def test_pressure_branch_load_drops_and_polygon_appears():
    # Hutchinson 1967 (sign): the load on the branch stays below the bifurcation load
    model = CapPostbucklingModel()
    inputs = model.sample_inputs()
    inputs = {k: v[:1] for k, v in inputs.items()}
    inputs.update(shell_parameter=np.array([8.0]), wave_number=np.array([0.0]), max_indentation=np.array([0.3]))
    res = model.solve_batch(inputs)
    assert res.status[0] == Status.ok
    assert model.regimes[res.regime[0]] == "unstable_postbuckling"
    assert res.outputs["load_drop"][0] < 0.95
    assert res.outputs["branch_wave_number"][0] == 4


@pytest.mark.slow
def test_convergence_with_harmonics_and_nodes():
    # (common practice, no source) harmonics: apex force, lambda = 20, n = 3, asymmetry at delta = 16.5 h on the
    # branch against K = 5; against K = 6 it moved 4.5e-4, 1.2e-4, 6e-6 for K = 2, 3, 4: about one digit per harmonic
    asym = {k: _follow(20.0, 3, apex=True, target=16.5, branch=True, harmonics=k).asymmetry for k in (2, 3, 4, 5)}
    errors = np.array([abs(asym[k] - asym[5]) for k in (2, 3, 4)])
    rate = -np.polyfit([2, 3, 4], np.log10(errors), 1)[0]  # digits per harmonic
    assert rate > 0.6, (asym, errors, rate)
    # radial nodes: bifurcation load of lambda = 10 under an apex force against 80 nodes; measured 3.6e-3,
    # 5.7e-5, 4.0e-6 on 44, 52, 60 nodes (spectral: the fitted algebraic order is above 20)
    nodes = (44, 52, 60)
    ref = _follow(10.0, 4, apex=True, nodes=80).bifurcation_load
    err = np.array([abs(_follow(10.0, 4, apex=True, nodes=m).bifurcation_load - ref) for m in nodes])
    order = -np.polyfit(np.log(nodes), np.log(err), 1)[0]
    assert order > 8.0, (err, order)


@pytest.mark.slow
def test_mirror_buckling_follows_pogorelov():
    # Pogorelov 1988, Bendings of Surfaces and Stability of Shells: F = C E h^(5/2) delta^(1/2) / (R (1-nu^2)^(3/4))
    # with C = 1.6245 from the ridge boundary layer (derived in theory.md). Finite-delta corrections are of the
    # ridge width over the rim radius, l/sqrt(R delta) ~ 1/(1.8 sqrt(delta/h)) = 0.09 at delta = 40 h: exponent
    # within 0.05 of 1/2 and prefactor within 12 % (from below) at delta = 40 h; the rim radius sqrt(R delta)
    # within 10 %
    out = _follow(30.0, 0, apex=True, target=40.0, branch=True)
    load, defl = out.path[:, 0], out.path[:, 1]
    grid = np.array([20.0, 25.0, 30.0, 35.0, 40.0])
    force = np.interp(grid, defl, load)
    slope = np.polyfit(np.log(grid), np.log(force), 1)[0]
    assert abs(slope - 0.5) < 0.05
    prefactor = force[-1] * (1 - 0.3**2) ** 0.75 / math.sqrt(40.0)
    assert 0.88 * POGORELOV < prefactor < 1.02 * POGORELOV
    assert out.ridge_radius == pytest.approx(math.sqrt(40.0), rel=0.1)


def test_failure_is_not_converged_with_the_reached_path_kept():
    model = get_model("cap_postbuckling")(max_points=16)
    inputs = {k: v[:1] for k, v in model.sample_inputs().items()}
    # the pressure branch of lambda = 8 winds through more than 16 points before delta = 3 h
    inputs.update(shell_parameter=np.array([8.0]), wave_number=np.array([4.0]), max_indentation=np.array([3.0]))
    res = model.solve_batch(inputs)
    assert res.status[0] == Status.not_converged
    assert res.regime[0] == -1
    path = res.outputs["load_path"][0]
    assert np.isfinite(path).all() and path[:, 2].max() > 0.1  # the branch was reached
    assert np.isnan(res.outputs["bifurcation_load"][0])


@pytest.mark.slow
def test_shape_layout():
    model = CapPostbucklingModel()
    coords = model.extra_coords()
    assert coords["shape_radius"].shape == (24,) and coords["shape_angle"].shape == (72,)
    assert coords["shape_angle"][1] == pytest.approx(2 * np.pi / 72)
    out = _follow(20.0, 3, apex=True, target=18.0, branch=True)
    shape = out.shape
    assert shape.shape == (24, 72)
    # positive inwards like shallow_cap's apex deflection; 3-fold symmetric; zero at the clamped edge
    assert shape[0, 0] == pytest.approx(18.0, rel=1e-6)
    np.testing.assert_allclose(shape[:, :24], shape[:, 24:48], atol=1e-9)
    np.testing.assert_allclose(shape[-1], 0.0, atol=1e-9)
    assert out.ridges == 3 and out.asymmetry > 0.1


SWEEP = """\
name: bad_cap
model: cap_postbuckling
fixed: {load: apex_force}
axes:
  shell_parameter: [10.0]
store: {path: results/bad_cap.zarr}
"""


@pytest.mark.parametrize(("override", "expected"), [
    ("+fixed.wave_number=1", "fixed.wave_number=1 is not followed"),
    ("+fixed.max_indentation=0", "fixed.max_indentation=0 is outside (0, 200]"),
    ("+fixed.max_indentation=-3", "fixed.max_indentation=-3 is outside (0, 200]"),
    ("fixed.load=mismatch", "fixed.load=mismatch is not followed by cap_postbuckling"),
])
def test_bad_input_is_one_line_exit_2(workdir, capsys, override, expected):
    sweep = workdir / "bad_cap.yaml"
    sweep.write_text(SWEEP)
    code = main(["run", str(sweep), override])
    err = capsys.readouterr().err
    assert code == 2
    assert expected in err and err.count("\n") == 1
    assert not (workdir / "results" / "bad_cap.zarr").exists()
