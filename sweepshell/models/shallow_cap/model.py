"""``shallow_cap``: snap-through and asymmetric buckling of shallow spherical caps (Föppl–von Kármán).

Governing equations
-------------------
A spherical cap of base radius a, sphere radius R, thickness h, Young's modulus E and
Poisson's ratio ν, edge at r = a. Marguerre's shallow-shell (Föppl–von Kármán) equations for
the deflection W, the Airy stress function F and the stress-free surface Z₀ = −r²/(2R) − w₀(r)
(sphere minus an inward apex dimple w₀)::

    D ∇⁴W − [F, Z] = q_z,        ∇⁴F / (E h) = −½ ([Z, Z] − [Z₀, Z₀]),     Z = Z₀ + W,

with [A, B] = A_xx B_yy + A_yy B_xx − 2 A_xy B_xy and D = E h³/(12(1−ν²)). A mismatch
(eigen)strain ε*(r) in a disc or annulus enters compatibility like a thermal strain.

Non-dimensionalisation: x = r/a, W = h ω/(2c), F = D Φ, c = √(3(1−ν²)); the single geometric
parameter is the shell parameter λ = [12(1−ν²)]^{1/4} a/√(R h) (H/h = λ²/(4c), H the rise).
Loads: q = p/p_cl with p_cl = 2 E h²/(R² c) (Zoelly 1915); the apex force F_apex R/(E h³);
the mismatch strain over ε_cl = 2h/(R c). Axisymmetric states are solved in the once-integrated
form for y = ω' and f = −Φ'; ``cos nθ`` bifurcations, n = 1…N, from the linearised equations
about them. ``critical_load`` is the first limit point (snap-through) or an earlier bifurcation
along the path traced by pseudo-arclength continuation; ``bistable`` (common practice, no
source) flags a stable zero-load state past the first limit point.

Range of validity
-----------------
Shallow caps (a/R ≲ 0.5; points with physical dimensions and a/R > ``max_base_ratio`` get
``outside_validity``), elastic, moderate rotations, axisymmetric stress-free shape; λ ≤ 30.

The full statement of equations and conventions (loads, edges, mismatch regions, dimples,
bistability), the numerics, the resolution rules and the validation record are in this
package's ``theory.md``.

References checked by the tests
-------------------------------
Zoelly 1915 (p_cl); Reissner 1946, J. Math. Phys. 25 (apex stiffness); Budiansky 1959,
Weinitschke 1960 J. Math. Phys. 38:209, Huang 1964 J. Appl. Mech. 31:447 (clamped caps);
Hutchinson 2016 Proc. R. Soc. A 472:20160577 and Lee et al. 2016 J. Appl. Mech. 83:111005
(knock-down against dimple amplitude); Timoshenko & Goodier 1951 (disc inclusion) and
Timoshenko & Gere 1961 (plate buckling) for the mismatch load.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any, ClassVar

import numpy as np

from sweepshell.models.base import BatchResult, OutputSpec, ParameterSpec, Status, SweepModel
from sweepshell.models.shallow_cap.grids import choose_grid_centres, choose_grid_splits, choose_grids
from sweepshell.models.shallow_cap.solver import CapInputs, CapSolution, solve_caps

__all__ = ["ShallowCapModel"]

_NAN = math.nan


class ShallowCapModel(SweepModel):
    """Shallow spherical cap under pressure or an apex force: limit points and bifurcations."""

    name: ClassVar[str] = "shallow_cap"
    version: ClassVar[str] = "1.11"
    summary: ClassVar[str] = ("shallow spherical cap (Föppl–von Kármán): snap-through, asymmetric "
                              "bifurcation, apex indentation, mismatch strain, dimple imperfections")
    parameters: ClassVar[tuple[ParameterSpec, ...]] = (
        ParameterSpec("shell_parameter", "1", "lambda = [12(1-nu^2)]^(1/4) a/sqrt(R h)", default=6.0,
                      bounds=(0.0, 30.0), closed=(False, True), symbol="λ"),
        ParameterSpec("poisson_ratio", "1", "Poisson's ratio", default=0.3, bounds=(-0.9, 0.5),
                      closed=(True, False), symbol="ν"),
        ParameterSpec("edge", "1", "bending condition at the edge", default="clamped",
                      choices=("clamped", "pinned")),
        ParameterSpec("edge_inplane", "1", "in-plane condition at the edge (immovable: u = 0; sliding: N_r = 0)",
                      default="immovable", choices=("immovable", "sliding")),
        ParameterSpec("load", "1", "uniform dead pressure, inward apex force or in-plane mismatch strain",
                      default="pressure", choices=("pressure", "apex_force", "mismatch")),
        ParameterSpec("dimple_amplitude", "1", "inward Gaussian apex dimple amplitude over thickness",
                      default=0.0, bounds=(0.0, 10.0), symbol="δ_d/h"),
        ParameterSpec("dimple_width", "1", "dimple width over sqrt(R h)/[12(1-nu^2)]^(1/4)", default=2.0,
                      bounds=(0.0, 100.0), closed=(False, True), symbol="b"),
        ParameterSpec("mismatch_strain", "1", "load = mismatch: largest isotropic mismatch strain applied, over "
                      "2h/(R c); negative = shrinkage, positive = swelling", default=-8.0,
                      bounds=(-1000.0, 1000.0), symbol="ε*/ε_cl"),
        ParameterSpec("mismatch_radius", "1", "load = mismatch: radius of the strained region's inner edge over a",
                      default=0.5, bounds=(0.0, 1.0), closed=(False, True), symbol="ρ"),
        ParameterSpec("mismatch_region", "1", "load = mismatch: strained disc r < rho a or annulus rho a < r < a",
                      default="disc", choices=("disc", "annulus")),
        ParameterSpec("thickness", "m", "shell thickness h (optional; NaN = not given)", default=_NAN,
                      bounds=(0.0, math.inf), closed=(False, False), symbol="h"),
        ParameterSpec("sphere_radius", "m", "sphere radius R (optional; NaN = not given)", default=_NAN,
                      bounds=(0.0, math.inf), closed=(False, False), symbol="R"),
        ParameterSpec("base_radius", "m", "base radius a (optional; if given with h and R it sets lambda)",
                      default=_NAN, bounds=(0.0, math.inf), closed=(False, False), symbol="a"),
        ParameterSpec("youngs_modulus", "Pa", "Young's modulus E (optional; NaN = not given)", default=_NAN,
                      bounds=(0.0, math.inf), closed=(False, False), symbol="E"),
    )
    regimes: ClassVar[tuple[str, ...]] = ("stable", "limit_point", "bifurcation")
    parameter_groups: ClassVar[Mapping[str, Mapping[str, tuple[str, ...]]]] = {
        "load": {"mismatch": ("mismatch_strain", "mismatch_radius", "mismatch_region")}}

    @classmethod
    def kernels_to_compile(cls) -> bool:
        # numba writes each kernel module's cache (index *.nbi) beside it; an index older than its module is stale
        from pathlib import Path

        from sweepshell.models.shallow_cap import compiled

        folder = Path(compiled.__file__).parent
        for source in folder.glob("compiled*.py"):
            index = list((folder / "__pycache__").glob(f"{source.stem}.*.nbi"))
            if not index or min(p.stat().st_mtime for p in index) < source.stat().st_mtime:
                return True
        return False

    # seconds per point with the scan and bistability (benchmarks/bench_shallow_cap.py; theory.md)
    cost_hint: ClassVar[float] = 0.022

    def __init__(self, *, nodes: int = 0, asymmetric_modes: int = 30, max_pressure: float = 2.0,
                 max_indentation: float = 1.0, path_samples: int = 64, check_bistability: bool = True,
                 tolerance: float = 1e-10, max_points: int = 400, max_base_ratio: float = 0.5,
                 max_turn_deg: float = 12.0, scan_stride: int = 1, mismatch_step_width: float = 0.0,
                 dimple_grid_stretch: float = 0.5, apex_grid_stretch: float = 0.85,
                 mismatch_grid: str = "split") -> None:
        super().__init__()
        for key, beta in (("dimple_grid_stretch", dimple_grid_stretch), ("apex_grid_stretch", apex_grid_stretch)):
            if not 0.0 <= float(beta) < 1.0:
                raise ValueError(f"settings.{key} must be in [0, 1) (a grid map x = (1-b) xi + b xi^3); "
                                 f"got {beta}")
        if not float(mismatch_step_width) >= 0.0:
            raise ValueError(f"settings.mismatch_step_width must be 0 (a sharp edge) or a positive smoothing "
                             f"width over the base radius; got {mismatch_step_width}")
        if mismatch_grid not in ("clustered", "split"):
            raise ValueError(f"settings.mismatch_grid must be 'clustered' (one grid clustered at a sharp region "
                             f"edge) or 'split' (two domains split there); got {mismatch_grid!r}")
        if int(nodes) != 0 and int(nodes) < 8:
            raise ValueError(f"settings.nodes must be 0 (automatic) or at least 8; got {nodes}")
        if not 0.0 < float(max_turn_deg) <= 45.0:
            raise ValueError(f"settings.max_turn_deg must be a turn limit in degrees, above 0 and at most 45; "
                             f"got {max_turn_deg}")
        self._settings: dict[str, Any] = {
            "nodes": int(nodes), "asymmetric_modes": int(asymmetric_modes),
            "max_pressure": float(max_pressure), "max_indentation": float(max_indentation),
            "path_samples": int(path_samples), "check_bistability": bool(check_bistability),
            "tolerance": float(tolerance), "max_points": int(max_points),
            "max_base_ratio": float(max_base_ratio), "max_turn_deg": float(max_turn_deg),
            "scan_stride": max(int(scan_stride), 1),
            "mismatch_step_width": float(mismatch_step_width),
            "dimple_grid_stretch": float(dimple_grid_stretch), "apex_grid_stretch": float(apex_grid_stretch),
            "mismatch_grid": str(mismatch_grid),
        }

    @property
    def outputs(self) -> tuple[OutputSpec, ...]:
        return (
            OutputSpec("critical_load", "1", "critical pressure over p_cl = 2Eh^2/(R^2 c), apex force "
                       "over E h^3/R, or mismatch strain over 2h/(R c) (signed); NaN when stable within the load "
                       "range", nullable=True),
            OutputSpec("knockdown", "1", "critical load over the classical pressure p_cl (pressure) or over "
                       "the same cap without dimple (apex force, mismatch); NaN when undefined", nullable=True),
            OutputSpec("critical_wavenumber", "1", "circumferential wave number of the critical mode "
                       "(0 = axisymmetric limit point); NaN when stable", nullable=True),
            OutputSpec("critical_deflection", "1", "apex deflection over thickness at the critical state",
                       nullable=True),
            OutputSpec("critical_volume_change", "1", "swept volume over cap volume pi a^2 H/2 at the "
                       "critical state", nullable=True),
            OutputSpec("stiffness", "1", "initial slope: (p/p_cl)/(delta/h) for pressure; F/delta over "
                       "Reissner's 4Eh^2/(R c) for apex force; for mismatch the apex deflection rate "
                       "d(delta/h)/d(mismatch strain over 2h/(R c))"),
            OutputSpec("bistable", "1", "1 if a stable inverted equilibrium exists at zero load, else 0; "
                       "NaN when not checked", nullable=True),
            OutputSpec("load_path", "1", "equilibrium path sampled evenly along its length: load (as "
                       "critical_load) and apex deflection over h", dims=("path_sample", "path_component")),
            OutputSpec("critical_pressure_si", "Pa", "critical pressure; NaN unless E, h, R are given "
                       "and the load is pressure", nullable=True),
            OutputSpec("critical_force_si", "N", "critical apex force; NaN unless E, h, R are given and "
                       "the load is an apex force", nullable=True),
            OutputSpec("critical_mismatch_strain", "1", "critical mismatch strain (plain strain, negative = "
                       "shrinkage); NaN unless h and R are given and the load is mismatch", nullable=True),
        )

    def estimated_cost(self) -> float:
        """Seconds per pressure point on one core with these settings (sizes blocks; see ``cost_hint``)."""
        s = self._settings
        cost = 0.0008 + 0.00028 * int(s["asymmetric_modes"])
        return cost + (0.0045 if s["check_bistability"] else 0.0)

    @property
    def extra_dims(self) -> dict[str, int]:
        return {"path_sample": self._settings["path_samples"], "path_component": 2}

    def extra_coords(self) -> dict[str, np.ndarray]:
        return {"path_sample": np.arange(self._settings["path_samples"]),
                "path_component": np.array(["load", "deflection"])}

    @classmethod
    def check_combination(cls, fixed: Mapping[str, Any], axes: Mapping[str, np.ndarray]) -> None:
        from sweepshell.errors import ParameterError

        given = {k for k in ("base_radius", "thickness", "sphere_radius")
                 if k in axes or (k in fixed and not _is_nan(fixed[k]))}
        if "base_radius" in given and "shell_parameter" in axes:
            raise ParameterError(
                "axes.shell_parameter cannot be swept while base_radius is given (base_radius, thickness "
                "and sphere_radius set lambda); remove one of them", field="axes.shell_parameter")
        if "base_radius" in given and given != {"base_radius", "thickness", "sphere_radius"}:
            raise ParameterError(
                "base_radius needs thickness and sphere_radius as well to set lambda; give all three",
                field="base_radius")

    def solve_batch(self, inputs: Mapping[str, np.ndarray]) -> BatchResult:
        s = self._settings
        lam = np.asarray(inputs["shell_parameter"], dtype=float).copy()
        n = lam.shape[0]
        nu = np.asarray(inputs["poisson_ratio"], dtype=float)
        c = np.sqrt(3.0 * (1.0 - nu**2))
        h = _get(inputs, "thickness", n)
        big_r = _get(inputs, "sphere_radius", n)
        a = _get(inputs, "base_radius", n)
        e_mod = _get(inputs, "youngs_modulus", n)
        geometric = np.isfinite(a) & np.isfinite(h) & np.isfinite(big_r)
        with np.errstate(invalid="ignore", divide="ignore"):
            lam = np.where(geometric, np.sqrt(np.abs(2.0 * c * a**2 / (big_r * h))), lam)
        outside = (geometric & (a / np.where(geometric, big_r, 1.0) > s["max_base_ratio"])) | ~(lam > 0)
        outside |= lam > 30.0
        load = np.asarray(inputs["load"]).astype(str)
        apex = load == "apex_force"
        eigen = load == "mismatch"
        strain = np.asarray(inputs["mismatch_strain"], dtype=float)
        radius = np.asarray(inputs["mismatch_radius"], dtype=float)
        annulus = np.asarray(inputs["mismatch_region"]).astype(str) == "annulus"
        # loads without a classical reference value: knock-down against the same cap without dimple
        relative = apex | eigen
        amp = np.asarray(inputs["dimple_amplitude"], dtype=float)
        width = np.asarray(inputs["dimple_width"], dtype=float)
        clamped = np.asarray(inputs["edge"]).astype(str) == "clamped"
        immovable = np.asarray(inputs["edge_inplane"]).astype(str) == "immovable"
        res = self.empty_result(n)
        work = np.nonzero(~outside)[0]
        res.status[outside] = Status.outside_validity
        if work.size == 0:
            return res
        # the apex-force and mismatch knock-downs compare with the same cap without a dimple, solved alongside
        ref = work[relative[work] & (amp[work] != 0.0)]
        rows = np.concatenate([work, ref])
        amp_rows = np.concatenate([amp[work], np.zeros(ref.size)])
        sol = _solve_by_grid(s, eigen[rows], lam[rows], nu[rows], clamped[rows], immovable[rows], apex[rows],
                             amp_rows, width[rows], strain[rows], radius[rows], annulus[rows])
        main = _take(sol, slice(0, work.size))
        _fill(res, work, main, relative[work], s)
        if ref.size:
            perfect = _take(sol, slice(work.size, None))
            pos = np.searchsorted(work, ref)
            kd = res.outputs["knockdown"]
            with np.errstate(invalid="ignore", divide="ignore"):
                kd[ref] = main.critical_load[pos] / perfect.critical_load
        pressure_si = res.outputs["critical_pressure_si"]
        force_si = res.outputs["critical_force_si"]
        crit = res.outputs["critical_load"]
        pcl = 2.0 * e_mod * h**2 / (big_r**2 * c)
        pressure_si[:] = np.where(~relative, crit * pcl, np.nan)
        force_si[:] = np.where(apex, crit * e_mod * h**3 / big_r, np.nan)
        res.outputs["critical_mismatch_strain"][:] = np.where(eigen, crit * 2.0 * h / (big_r * c), np.nan)
        trusted = (res.status == Status.ok) | (res.status == Status.no_instability)
        for v in res.outputs.values():
            v[~trusted] = np.nan
        res.regime[~trusted] = -1
        return res


def _is_nan(v: Any) -> bool:
    try:
        return math.isnan(float(v))
    except (TypeError, ValueError):
        return False


def _get(inputs: Mapping[str, np.ndarray], key: str, n: int) -> np.ndarray:
    if key in inputs:
        return np.asarray(inputs[key], dtype=float)
    return np.full(n, np.nan)


def _solve_by_grid(s: Mapping[str, Any], eigen: np.ndarray, *args: np.ndarray) -> CapSolution:
    """Solve the points in groups that share a radial grid (:func:`choose_grids`)."""
    lam, nu, clamped, immovable, apex, amp, width, strain, radius, annulus = args
    nodes, stretch = choose_grids(s, lam, apex, eigen, amp, width)
    centre = choose_grid_centres(s, eigen, radius)
    nodes, split, outer = choose_grid_splits(s, lam, eigen, radius, nodes)
    keys = np.stack([nodes.astype(float), stretch, centre, split, outer.astype(float)], axis=1)
    groups, inverse = np.unique(keys, axis=0, return_inverse=True)
    inverse = inverse.reshape(-1)
    parts: list[tuple[np.ndarray, CapSolution]] = []
    for k, (size, beta, rho, cut, p) in enumerate(groups):
        rows = np.nonzero(inverse == k)[0]
        settings = {**s, "nodes": int(size), "grid_stretch": float(beta), "grid_centre": float(rho),
                    "grid_split": float(cut), "grid_outer": int(p)}
        caps = CapInputs(lam[rows], nu[rows], clamped[rows], immovable[rows], apex[rows], amp[rows], width[rows],
                         mismatch=eigen[rows], mismatch_strain=strain[rows], mismatch_radius=radius[rows],
                         annulus=annulus[rows])
        parts.append((rows, solve_caps(caps, settings=settings)))
    if len(parts) == 1:
        return parts[0][1]
    out = {}
    for key, first in vars(parts[0][1]).items():
        merged = np.empty((eigen.size, *first.shape[1:]), dtype=first.dtype)
        for rows, part in parts:
            merged[rows] = getattr(part, key)
        out[key] = merged
    return CapSolution(**out)


def _take(sol: CapSolution, sl: slice) -> CapSolution:
    return CapSolution(**{k: v[sl] for k, v in vars(sol).items()})


def _fill(res: BatchResult, rows: np.ndarray, sol: CapSolution, relative: np.ndarray, s: Mapping[str, Any]) -> None:
    out = res.outputs
    res.status[rows] = sol.status
    res.regime[rows] = sol.regime
    out["critical_load"][rows] = sol.critical_load
    out["knockdown"][rows] = np.where(relative, np.where(np.isfinite(sol.critical_load), 1.0, np.nan),
                                      sol.critical_load)
    out["critical_wavenumber"][rows] = sol.critical_wavenumber
    out["critical_deflection"][rows] = sol.critical_deflection
    out["critical_volume_change"][rows] = sol.critical_volume_change
    out["stiffness"][rows] = sol.stiffness
    out["bistable"][rows] = sol.bistable
    out["load_path"][rows] = sol.load_path
