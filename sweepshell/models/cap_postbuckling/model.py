"""``cap_postbuckling``: what a shallow spherical cap becomes after it buckles.

The nonlinear Föppl–von Kármán shallow-cap equations in (r, θ) on the n-fold symmetric
subspace (harmonics cos jnθ, j = 0 … K), followed from the unloaded cap through the first
``cos nθ`` bifurcation and along the bifurcated branch up to an apex deflection
``max_indentation``. The equations, the non-dimensionalisation (that of ``shallow_cap``), the
range of validity and the validation record are in ``theory.md`` beside this module.

The critical wave number comes from ``shallow_cap``'s asymmetric scan
(:class:`sweepshell.models.shallow_cap.model.ShallowCapModel`, same parameters); the bifurcation on
this model's own grid is then located and followed.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any, ClassVar

import numpy as np

from sweepshell.errors import ParameterError
from sweepshell.models.base import BatchResult, OutputSpec, ParameterSpec, Status, SweepModel
from sweepshell.models.cap_postbuckling.branches import SHAPE_ANGLES, SHAPE_RADII, CapBranchResult, follow_cap
from sweepshell.models.shallow_cap.grids import get_mismatch_nodes
from sweepshell.models.shallow_cap.model import ShallowCapModel

__all__ = ["CapPostbucklingModel", "choose_grid", "choose_mismatch_grid"]

REGIMES = ("stable", "limit_point", "stable_postbuckling", "unstable_postbuckling")
_STABLE, _LIMIT, _STABLE_PB, _UNSTABLE_PB = range(4)


def choose_grid(lam: float, apex: bool, amplitude: float, width: float, nodes: int) -> tuple[int, float]:
    """Return the radial grid (node count, stretch β) of one point.

    Apex forces: 24 + 2.4λ nodes stretched towards the axis (β = 0.85, as ``shallow_cap``),
    from the bifurcation load's convergence at λ = 20 (48, 60, 72, 84 nodes: 5.843, 6.253,
    6.307, 6.304; the loaded contact needs the axis clustering, the ridge the node count).
    Pressure: 16 + 1.5λ Chebyshev nodes (perfect caps, whose modes live at the edge), or
    max(16 + 1.5λ, 4 + 2λ/b) stretched by β = 0.5 for a dimple of width b. Even, 24 … 96.
    ``nodes`` > 0 fixes the count.
    """
    if apex:
        need, beta = 24.0 + 2.4 * lam, 0.85
    elif amplitude:
        need, beta = max(16.0 + 1.5 * lam, 4.0 + 2.0 * lam / max(width, 0.25)), 0.5
    else:
        need, beta = 16.0 + 1.5 * lam, 0.0
    if nodes:
        return int(nodes), beta
    return int(min(max(math.ceil(need / 2.0) * 2, 24), 96)), beta


def choose_mismatch_grid(lam: float, radius: float, nodes: int) -> tuple[int, float]:
    """Return the radial grid (node count, clustering centre) of a mismatch point: ``shallow_cap``'s.

    The sharp edge of the strained region needs nodes clustered around it with one on it
    (``shallow_cap``'s ``get_mismatch_nodes``: 44 + 1.8λ, even, 48 … 96); ``nodes`` > 0 fixes
    the count. A region reaching the edge (ρ = 1) has no inner edge and keeps Chebyshev points.
    """
    count = get_mismatch_nodes({"mismatch_step_width": 0.0, "nodes": int(nodes)}, np.array([float(lam)]))
    return int(count[0]), (float(radius) if radius < 1.0 else 0.0)


class CapPostbucklingModel(SweepModel):
    """Shallow spherical cap followed through its first bifurcation: ridges, polygons, stability."""

    name: ClassVar[str] = "cap_postbuckling"
    version: ClassVar[str] = "1.1"
    summary: ClassVar[str] = ("shallow spherical cap after buckling (Föppl–von Kármán, n-fold symmetric): "
                              "bifurcated branch, ridges and polygons, stable or unstable post-buckling")
    parameters: ClassVar[tuple[ParameterSpec, ...]] = (
        *ShallowCapModel.parameters,
        ParameterSpec("wave_number", "1", "circumferential wave number n of the followed branch; 0 = the critical "
                      "one from the asymmetric scan", default=0.0, bounds=(0.0, 40.0), integer=True, symbol="n"),
        ParameterSpec("max_indentation", "1", "apex deflection over thickness at which the path stops",
                      default=10.0, bounds=(0.0, 200.0), closed=(False, True), symbol="δ/h"),
    )
    regimes: ClassVar[tuple[str, ...]] = REGIMES
    parameter_groups: ClassVar[Mapping[str, Mapping[str, tuple[str, ...]]]] = ShallowCapModel.parameter_groups
    # measured (one core, benchmarks/bench_cap_postbuckling.py): see theory.md; a few seconds per path
    cost_hint: ClassVar[float] = 3.0

    def __init__(self, *, harmonics: int = 3, nodes: int = 0, tolerance: float = 1e-10, max_points: int = 400,
                 max_turn_deg: float = 12.0, path_samples: int = 64, max_pressure: float = 2.0,
                 contact_width: float = 0.25, asymmetric_modes: int = 30, max_base_ratio: float = 0.5) -> None:
        super().__init__()
        if not 1 <= int(harmonics) <= 12:
            raise ValueError(f"settings.harmonics must be a whole number in [1, 12]; got {harmonics}")
        if int(nodes) != 0 and not 16 <= int(nodes) <= 160:
            raise ValueError(f"settings.nodes must be 0 (automatic) or in [16, 160]; got {nodes}")
        if not 0.0 < float(contact_width) <= 2.0:
            raise ValueError(f"settings.contact_width must be in (0, 2] (over sqrt(R h)/[12(1-nu^2)]^(1/4)); "
                             f"got {contact_width}")
        if not 0.0 < float(max_turn_deg) <= 45.0:
            raise ValueError(f"settings.max_turn_deg must be above 0 and at most 45; got {max_turn_deg}")
        if int(path_samples) < 2 or int(max_points) < 16:
            raise ValueError("settings.path_samples must be at least 2 and settings.max_points at least 16")
        self._settings: dict[str, Any] = {
            "harmonics": int(harmonics), "nodes": int(nodes), "tolerance": float(tolerance),
            "max_points": int(max_points), "max_turn_deg": float(max_turn_deg),
            "path_samples": int(path_samples), "max_pressure": float(max_pressure),
            "contact_width": float(contact_width), "asymmetric_modes": int(asymmetric_modes),
            "max_base_ratio": float(max_base_ratio),
        }

    @property
    def outputs(self) -> tuple[OutputSpec, ...]:
        return (
            # not named wave_number: that is the parameter, and a store cannot hold a variable named like an axis
            OutputSpec("branch_wave_number", "1", "circumferential wave number n of the followed branch "
                       "(0: axisymmetric only)"),
            OutputSpec("bifurcation_load", "1", "load at the bifurcation (limit point for regime limit_point), as "
                       "shallow_cap's critical_load: pressure over p_cl, apex force over E h^3/R or mismatch strain "
                       "over 2h/(R c); NaN when stable",
                       nullable=True),
            OutputSpec("postbuckling_slope", "1", "initial d(load)/d(conjugate displacement) on the bifurcated "
                       "branch over that of the pre-buckling path (negative: unstable); NaN without a branch",
                       nullable=True),
            OutputSpec("load_drop", "1", "lowest load on the bifurcated branch up to max_indentation over the "
                       "bifurcation load; NaN without a branch", nullable=True),
            OutputSpec("ridge_radius", "1", "radius of the ridge (most convex meridional curvature, mean over "
                       "theta) at max_indentation over sqrt(R h); NaN without an inverted region or when "
                       "max_indentation is not reached",
                       nullable=True),
            OutputSpec("ridges", "1", "number of corners of a polygonal ridge at max_indentation (0: round); NaN "
                       "when max_indentation is not reached", nullable=True),
            OutputSpec("asymmetry", "1", "largest non-axisymmetric part of the deflection at max_indentation over "
                       "h; NaN when max_indentation is not reached", nullable=True),
            OutputSpec("shape", "1", "deflection over h (positive inwards) at max_indentation on a polar grid; NaN "
                       "when max_indentation is not reached", dims=("shape_radius", "shape_angle"), nullable=True),
            OutputSpec("load_path", "1", "equilibrium path sampled evenly along its length: load (as "
                       "bifurcation_load), apex deflection over h, asymmetric amplitude over h (kept at "
                       "not_converged points as far as reached)", dims=("path_sample", "path_component")),
            OutputSpec("bifurcation_pressure_si", "Pa", "bifurcation_load as a pressure; NaN unless E, h, R are "
                       "given and the load is pressure", nullable=True),
            OutputSpec("bifurcation_force_si", "N", "bifurcation_load as an apex force; NaN unless E, h, R are "
                       "given and the load is an apex force", nullable=True),
            OutputSpec("bifurcation_mismatch_strain", "1", "bifurcation_load as a plain mismatch strain (negative "
                       "= shrinkage); NaN unless h and R are given and the load is mismatch", nullable=True),
        )

    @property
    def extra_dims(self) -> dict[str, int]:
        return {"shape_radius": SHAPE_RADII, "shape_angle": SHAPE_ANGLES,
                "path_sample": self._settings["path_samples"], "path_component": 3}

    def extra_coords(self) -> dict[str, np.ndarray]:
        return {"shape_radius": np.linspace(0.0, 1.0, SHAPE_RADII),
                "shape_angle": 2.0 * np.pi * np.arange(SHAPE_ANGLES) / SHAPE_ANGLES,
                "path_sample": np.arange(self._settings["path_samples"]),
                "path_component": np.array(["load", "deflection", "asymmetry"])}

    def estimated_cost(self) -> float:
        return float(self.cost_hint) * (1.0 + 0.3 * (self._settings["harmonics"] - 3))

    @classmethod
    def check_combination(cls, fixed: Mapping[str, Any], axes: Mapping[str, np.ndarray]) -> None:
        ShallowCapModel.check_combination(fixed, axes)
        waves = np.atleast_1d(axes["wave_number"]) if "wave_number" in axes else \
            np.atleast_1d(fixed.get("wave_number", 0))
        where = "axes.wave_number" if "wave_number" in axes else "fixed.wave_number"
        if np.any(np.asarray(waves, dtype=float) == 1.0):
            raise ParameterError(f"{where}=1 is not followed (a tilt of the whole dimple, outside the n-fold "
                                 "symmetric subspace); use 0 (the critical wave number) or an integer of 2 or more",
                                 field=where, value=1)

    @classmethod
    def sample_inputs(cls) -> dict[str, np.ndarray]:
        n = 3
        out: dict[str, np.ndarray] = {}
        for p in cls.parameters:
            if p.choices is not None:
                out[p.name] = np.array([str(p.default)] * n)
            else:
                out[p.name] = np.full(n, np.nan if p.default is None else float(p.default))
        # cheap points: a limit point, and two paths that end before their bifurcation
        out["shell_parameter"] = np.array([4.0, 7.0, 7.0])
        out["wave_number"] = np.array([0.0, 4.0, 4.0])
        out["max_indentation"] = np.array([2.0, 0.2, 0.2])
        out["edge_inplane"] = np.array(["immovable", "immovable", "sliding"])
        return out

    def solve_batch(self, inputs: Mapping[str, np.ndarray]) -> BatchResult:
        s = self._settings
        n = np.asarray(inputs["shell_parameter"]).shape[0]
        res = self.empty_result(n)
        lam, geometry = _shell_parameter(inputs, s["max_base_ratio"])
        load = np.asarray(inputs["load"]).astype(str)
        wave = np.asarray(inputs["wave_number"], dtype=float)
        target = np.asarray(inputs["max_indentation"], dtype=float)
        valid = geometry & (lam > 0) & (lam <= 30.0) & (wave != 1.0) & (target > 0)
        res.status[~valid] = Status.outside_validity
        critical = self._scan(inputs, valid & (wave == 0.0))
        for i in np.nonzero(valid)[0]:
            follow = int(wave[i]) if wave[i] else int(critical[i])
            if follow < 0:
                res.status[i] = Status.not_converged  # the scan did not finish
                continue
            if follow == 1:
                res.status[i] = Status.outside_validity  # critical mode n = 1: not in the n-fold subspace
                continue
            try:
                branch = self._follow(inputs, int(i), float(lam[i]), follow, str(load[i]))
            except (np.linalg.LinAlgError, FloatingPointError, ZeroDivisionError):
                res.status[i] = Status.not_converged
                continue
            _fill(res, int(i), branch, s["path_samples"])
        _fill_si(res, inputs, load)
        return res

    def _follow(self, inputs: Mapping[str, np.ndarray], i: int, lam: float, wave: int, load: str) -> CapBranchResult:
        """Follow point ``i`` of ``inputs`` (shell parameter ``lam``) on the branch of wave number ``wave``."""
        s = self._settings
        get = {k: np.asarray(inputs[k])[i] for k in ("poisson_ratio", "edge", "edge_inplane", "dimple_amplitude",
                                                     "dimple_width", "mismatch_strain", "mismatch_radius",
                                                     "mismatch_region", "max_indentation")}
        apex, amp, width = load == "apex_force", float(get["dimple_amplitude"]), float(get["dimple_width"])
        mismatch = None
        settings = dict(s)
        if load == "mismatch":
            strain, radius = float(get["mismatch_strain"]), float(get["mismatch_radius"])
            mismatch = (strain, radius, str(get["mismatch_region"]) == "annulus")
            nodes, centre = choose_mismatch_grid(lam, radius, s["nodes"])
            settings.update(nodes_used=nodes, stretch_used=0.0, centre_used=centre, max_mismatch=abs(strain))
        else:
            nodes, beta = choose_grid(lam, apex, amp, width, s["nodes"])
            settings.update(nodes_used=nodes, stretch_used=beta, centre_used=0.0)
        return follow_cap(lam=lam, nu=float(get["poisson_ratio"]), clamped=str(get["edge"]) == "clamped",
                          immovable=str(get["edge_inplane"]) == "immovable", apex=apex, amplitude=amp, width=width,
                          wave_number=wave, max_indentation=float(get["max_indentation"]), settings=settings,
                          mismatch=mismatch)

    def _scan(self, inputs: Mapping[str, np.ndarray], rows: np.ndarray) -> np.ndarray:
        """Return the critical wave number of ``shallow_cap`` per point (0: limit point or none; -1: failed)."""
        out = np.zeros(rows.shape[0], dtype=int)
        idx = np.nonzero(rows)[0]
        if idx.size == 0:
            return out
        # the clustered grid of a sharp mismatch edge, as this model's own paths (choose_mismatch_grid)
        scan = ShallowCapModel(asymmetric_modes=self._settings["asymmetric_modes"], check_bistability=False,
                               max_pressure=self._settings["max_pressure"], path_samples=2, mismatch_grid="clustered")
        sub = {p.name: np.asarray(inputs[p.name])[idx] for p in ShallowCapModel.parameters}
        found = scan.solve_batch(sub)
        wn = found.outputs["critical_wavenumber"]
        ok = (found.status == Status.ok) | (found.status == Status.no_instability)
        out[idx] = np.where(ok, np.nan_to_num(wn, nan=0.0), -1).astype(int)
        return out


def sample_path(path: np.ndarray, samples: int) -> np.ndarray:
    """Return ``(samples, 3)`` points evenly spaced along ``path`` (load and deflection scaled by their ranges)."""
    if path.shape[0] == 0:
        return np.full((samples, 3), np.nan)
    if path.shape[0] == 1:
        return np.repeat(path[:1], samples, axis=0)
    scale = np.maximum(np.abs(path[:, :2]).max(axis=0), 1e-12)
    seg = np.hypot(*(np.diff(path[:, :2], axis=0) / scale).T)
    arc = np.concatenate([[0.0], np.cumsum(seg)])
    if arc[-1] <= 0.0:
        return np.repeat(path[:1], samples, axis=0)
    u = np.linspace(0.0, arc[-1], samples)
    return np.stack([np.interp(u, arc, path[:, k]) for k in range(3)], axis=1)


def _shell_parameter(inputs: Mapping[str, np.ndarray], max_ratio: float) -> tuple[np.ndarray, np.ndarray]:
    """Return λ per point (set by base_radius, thickness and sphere_radius when all are given, as shallow_cap)
    and whether the point is shallow enough (a/R ≤ ``max_ratio`` where the geometry is given)."""
    lam = np.asarray(inputs["shell_parameter"], dtype=float).copy()
    nu = np.asarray(inputs["poisson_ratio"], dtype=float)
    c = np.sqrt(3.0 * (1.0 - nu**2))
    h, big_r, a = (_optional(inputs, k, lam.shape[0]) for k in ("thickness", "sphere_radius", "base_radius"))
    geometric = np.isfinite(a) & np.isfinite(h) & np.isfinite(big_r)
    with np.errstate(invalid="ignore", divide="ignore"):
        lam = np.where(geometric, np.sqrt(np.abs(2.0 * c * a**2 / (big_r * h))), lam)
        shallow = ~(geometric & (a / np.where(geometric, big_r, 1.0) > max_ratio))
    return lam, shallow


def _optional(inputs: Mapping[str, np.ndarray], key: str, n: int) -> np.ndarray:
    return np.asarray(inputs[key], dtype=float) if key in inputs else np.full(n, np.nan)


def _fill_si(res: BatchResult, inputs: Mapping[str, np.ndarray], load: np.ndarray) -> None:
    """Fill the SI outputs from bifurcation_load where E, h and R (h and R for a strain) are given (as shallow_cap)."""
    n = load.shape[0]
    nu = np.asarray(inputs["poisson_ratio"], dtype=float)
    c = np.sqrt(3.0 * (1.0 - nu**2))
    h, big_r, e_mod = (_optional(inputs, k, n) for k in ("thickness", "sphere_radius", "youngs_modulus"))
    crit = res.outputs["bifurcation_load"]
    trusted = (res.status == Status.ok) | (res.status == Status.no_instability)
    with np.errstate(invalid="ignore"):
        res.outputs["bifurcation_pressure_si"][:] = np.where(trusted & (load == "pressure"),
                                                             crit * 2.0 * e_mod * h**2 / (big_r**2 * c), np.nan)
        res.outputs["bifurcation_force_si"][:] = np.where(trusted & (load == "apex_force"),
                                                          crit * e_mod * h**3 / big_r, np.nan)
        res.outputs["bifurcation_mismatch_strain"][:] = np.where(trusted & (load == "mismatch"),
                                                                 crit * 2.0 * h / (big_r * c), np.nan)


def _fill(res: BatchResult, i: int, b: CapBranchResult, samples: int) -> None:
    out = res.outputs
    out["load_path"][i] = sample_path(b.path, samples)
    if not b.finished:
        res.status[i] = Status.not_converged
        return
    out["branch_wave_number"][i] = b.wave_number
    out["bifurcation_load"][i] = b.bifurcation_load
    out["postbuckling_slope"][i] = b.postbuckling_slope
    out["load_drop"][i] = b.load_drop
    out["ridge_radius"][i] = b.ridge_radius
    out["ridges"][i] = b.ridges
    out["asymmetry"][i] = b.asymmetry
    out["shape"][i] = b.shape
    if b.limit_first:
        regime = _LIMIT
    elif b.wave_number and np.isfinite(b.bifurcation_load):
        regime = _UNSTABLE_PB if b.load_falls else _STABLE_PB
    else:
        regime = _STABLE
    res.status[i] = Status.ok if regime != _STABLE else Status.no_instability
    res.regime[i] = regime
