"""``shallow_cap``: snap-through and asymmetric buckling of shallow spherical caps (Föppl–von Kármán).

Governing equations
-------------------
A spherical cap of base radius a, sphere radius R, thickness h, Young's modulus E and
Poisson's ratio ν, edge at r = a. Marguerre's shallow-shell (Föppl–von Kármán) equations for
the deflection W (positive upwards, away from the sphere's centre), the Airy stress function
F and the stress-free surface Z₀ = −r²/(2R) − w₀(r) (sphere minus an inward apex dimple w₀)::

    D ∇⁴W − [F, Z] = q_z,        ∇⁴F / (E h) = −½ ([Z, Z] − [Z₀, Z₀]),     Z = Z₀ + W,

with [A, B] = A_xx B_yy + A_yy B_xx − 2 A_xy B_xy and D = E h³/(12(1−ν²)).

Non-dimensionalisation: x = r/a, W = h ω/(2c), F = D Φ, c = √(3(1−ν²)), which turns both
equations into ``∇⁴ω − [Φ, ζ] = q̂`` and ``∇⁴Φ = −½([ζ,ζ] − [ζ₀,ζ₀])`` with the perfect
sphere ζ₀ = −λ²x²/2. The single geometric parameter is the shell parameter

    λ = [12(1−ν²)]^{1/4} a / √(R h),   λ² = 2c a²/(R h),   λ⁴ = 12(1−ν²) a⁴/(R h)²,
    a²/(R h) = λ²/(2c),   H/h = λ²/(4c)   (H = a²/(2R) the rise),

so λ = k_c a with k_c = [12(1−ν²)]^{1/4}/√(Rh) the classical critical wavenumber of the
sphere (Budiansky 1959; Huang 1964 use the same λ). Axisymmetric states are solved in the
once-integrated form for y = ω' and f = −Φ' (both odd in x)::

    x L[f] = −s₀ y + y²/2,      −x L[y] + f (s₀ − y) = 2 λ⁴ q x² + κ λ² P,
    L[u] = u'' + u'/x − u/x²,   s₀ = λ² x − g(x),   κ = 2c²/π,

where q = p/p_cl is the pressure over the classical buckling pressure of the complete
sphere p_cl = 2 E h²/(R² c) (Zoelly 1915) and P = F_apex R/(E h³) the apex force.

Mismatch strain (``load = mismatch``): an isotropic in-plane eigenstrain ε*(r) = ε₀ χ(r/a),
uniform through the thickness (no natural curvature: a one-sided coating's bending is not
modelled), in the disc r < ρa (``mismatch_region = disc``, a coated central patch) or the
annulus ρa < r < a (``annulus``); ε₀ < 0 is shrinkage, ε₀ > 0 swelling. With
N_r = (Eh/(1−ν²))[(ε_r − ε*) + ν(ε_θ − ε*)] it enters compatibility like a thermal strain,
∇⁴F/(Eh) = −∇²ε* − ½([Z,Z] − [Z₀,Z₀]), i.e. once integrated ``x L[f] = … + 4 e x χ'``.
The load parameter is e = ε₀/ε_cl, ε_cl = 2h/(R c): at e = 1 a small disc in a large flat sheet
carries the membrane stress of the classical sphere, N = −E h ε₀/2 = −E h²/(R c). The edge of
the region is sharp by default (``mismatch_step_width`` w = 0): the particular stress is then
in closed form (F_p = 2x inside, 2ρ²/x outside the disc: continuous, its slope and the hoop
stress jump at ρ) and the response has a kink there (the slope's third derivative jumps). On
plain Chebyshev nodes that converges only at first order and oscillates with where ρ falls
between nodes (λ = 8 disc below: −3.75, −3.94, −3.80, −3.91, −3.87 on 34 … 128 nodes), so
sharp-edged points use nodes clustered around ±ρ with a node on ρ (the odd sinh map of
:mod:`sweepshell.numerics.radial_chebyshev`, cluster width ∝ 1/nodes²), where the hoop
stress takes the mean of its one-sided values. The critical load then converges at observed
order ≈ 6 (λ = 8 disc: −3.87073, −3.86888, −3.86861, −3.86856 on 34, 48, 64, 96 nodes;
λ = 6 swelling annulus: 7.086669, 7.086306, 7.086273, 7.086263), about 10⁻⁴ relative with the
automatic 44 + 1.8λ nodes (48 … 96), and agrees with the sharp-edge extrapolation of smoothed
edges to ≈ 10⁻⁴. Points with different ρ do not share a grid (one batch per ρ). A positive
w smooths the step by a Gaussian, χ = ½[erf((x+ρ)/w) − erf((x−ρ)/w)] (even in x), a coating
whose edge tapers over ≈ 2w (10–90 %), on plain nodes: results converge spectrally in
``nodes`` for fixed w, with max(``nodes`` or 34, ⌈3.4/w⌉) nodes (about 10⁻⁶ relative); the
sharp-edge limit w → 0 is approached roughly as w² (observed w^1.8 … w^2.7) and matters where a mode sits at the
region's edge: a shrinking disc (ρ = 0.5, clamped, λ = 8) wrinkles at e = −4.46 with w = 0.1,
−4.04 with w = 0.05, −3.91 with w = 0.025, −3.880 with w = 0.0125 and −3.8686 with a sharp
edge; a swelling annulus (λ = 6) moves by 0.7 % between w = 0.1 and the sharp edge (7.039 →
7.0863). In a flat sheet a shrinking disc
puts its surroundings in hoop compression (the sheet wrinkles around the disc), a swelling
disc is itself in equibiaxial compression. On a cap the mismatch stress times the curvature
is a normal load: a shrinking (tensed) disc pulls the apex in, a swelling one pushes it out,
so a swelling full-width region bulges stably instead of bifurcating as a flat plate would.
``critical_load`` is the signed critical e; ``mismatch_strain`` is the signed end of the
load range (its sign chooses shrinkage or swelling). The dimple
w₀ = δ_d h exp(−(r/(b ℓ))²), ℓ = √(Rh)/[12(1−ν²)]^{1/4} = a/λ, enters through
g = 4c δ_d (λ/b)² x exp(−(λx/b)²) (``dimple_amplitude`` δ_d, ``dimple_width`` b).

Conventions
-----------
* Pressure is a dead load along the cap axis (shallow-shell sense), positive inwards.
* The apex force acts inwards along the axis; its whole path is traced by pseudo-arclength
  continuation in (state, force), i.e. as under displacement control, snap-backs included.
  Its critical state is the first force maximum (snap-through under force control) or an
  earlier ``cos nθ`` bifurcation. The apex curvature of a point-loaded state grows like log x:
  its stability operators are those of the polynomial interpolant of the state, on a grid of
  3×``nodes`` (:mod:`.modes`); on the state's own grid they have spurious n = 2, 3
  modes (determinant sign changes at the first loaded step). Observed with the defaults
  (clamped immovable): no bifurcation for λ = 4, 6, 8; n = 4 at δ = 18.7 h, F R/(E h³) = 9.447 for
  λ = 10 (version 1.8 reported n = 5 at 9.76: its sparser stability samples missed the n = 4
  window); n = 3 at δ ≈ 15.2–15.3 h, F R/(E h³) ≈ 6.25–6.30 for λ = 20–30 (nearly independent of λ:
  the dimple is local), well before the force maximum; pinned caps with λ = 6–8 bifurcate in n = 1
  just before it.
  Deep indented shells do buckle into polygonal shapes once the inverted dimple is deep
  (Vaziri & Mahadevan 2008, PNAS 105:7913; Pauchard & Rica 1998, Phil. Mag. B 78:225; value
  from memory, qualitative only); the values above are not checked against a published source.
  The force unit is E h³/R; the linear stiffness unit is Reissner's k_R = 4 E h²/(R c)
  (Reissner 1946).
* Edge r = a: W = 0 and clamped (W' = 0) or pinned (M_r = 0). In-plane: ``immovable``
  (u_r = 0, and u_θ = 0 for asymmetric modes) by default, or ``sliding`` (N_r = N_rθ = 0).
* Asymmetric bifurcation: the linearised equations for w(r) cos nθ, Φ(r) cos nθ about the
  axisymmetric state, n = 1…N; a zero crossing of the determinant of the discretised
  problem marks a bifurcation (dead pressure: no load-stiffness term).
* Mismatch strain: the eigenstrain does not follow the deformation (no load-stiffness term in
  the stability problem); the immovable edge holds u_r = 0 with the eigenstrain acting there
  (a region reaching the edge pushes against it), the sliding edge N_r = 0. ``knockdown``
  compares with the same cap without a dimple; ``stiffness`` is the initial apex deflection
  rate d(δ/h)/de (negative: a shrinking disc, e < 0, pulls the apex in).
* ``critical_deflection`` is the apex deflection δ/h; ``critical_volume_change`` the swept
  volume over the cap volume π a² H/2 (2 at mirror inversion).
* ``bistable`` (common practice, no source): the axisymmetric path is continued past the
  first limit point (longer steps there) until the load returns to zero while rising along
  the path, the deflection passes 1.5·2H/h + 2 (pressure; ``max_indentation``·2H/h for apex
  force), or the load falls below −2. The zero-load state is refined and counts as a second
  stable equilibrium when (i) dμ/ds > 0 there — the stability index changes by one at each
  fold, so this is an even index (a parity test, sound while at most one axisymmetric
  eigenvalue is negative) — and (ii) no ``cos nθ`` operator, n = 1…N, has a negative
  eigenvalue (an eigenvalue count, not a determinant parity). Caps without a limit point are
  not bistable; NaN where the path ended (step limit, stall) before a decision. A path that
  fills ``max_points`` past its first limit point is followed again with five times the
  capacity (clamped sliding caps with λ ≈ 13–22 wind through 350–830 points there; with 400
  about 8 % of them were left undecided before version 1.9). Only the
  connected path from the unloaded cap is searched. Observed with the defaults: no cap with
  λ ≤ 6 is bistable; clamped immovable caps are not bistable up to λ = 20 (the load stays
  positive along the whole inversion); pinned immovable caps are bistable in bands of λ
  (≈ 8–11, 14.5–16.5), elsewhere their near-inverted shape needs outward pressure and the path
  turns back — not monotone in λ, and not checked against a published source.

Numerics
--------
Chebyshev collocation on the odd half grid (``nodes`` points in 0 < x ≤ 1; see "Resolution"
below), Newton with the analytic Jacobian and the stretching block eliminated (Schur
complement), pseudo-arclength continuation with step control on Newton work and tangent
turning: each step is sized for 60 % of the turn limit at the turning rate extrapolated from
the last two steps. Each cap's whole path and every Newton corrector run in compiled per-cap
kernels (:mod:`.compiled`; the batched numpy versions in
:mod:`.kernels` and :mod:`sweepshell.numerics.arclength` are the specification they
are tested against). Limit points (zeros of dq/ds) and determinant sign changes are refined
by secant/regula-falsi steps along the arc (limit points to 10⁻⁴ of their step, where the
load is stationary: about 10⁻⁹ relative). Each Newton solve carries the tangent as a second
right-hand side; steps are also rejected when the corrector lands far from the predictor (a
fold pair inside the step) and when they change the path's orientation, the sign of
det [∂R/∂z; tᵀ] (Keller 1977), which stays constant along a path, through limit points too,
and flips only across a branch point. Paths of slightly imperfect caps turn through tight
corners where a neighbouring branch passes within a step (a nearly broken bifurcation): a step
across such a corner lands on the other branch with a nearly parallel tangent, so neither the
turn limit nor the drift test sees it, but the orientation does. Before version 1.9 such jumps
overestimated the first limit pressure by up to 16 % for about one cap in a thousand (small
narrow dimples, e.g. λ = 19.54, ν = 0.25, amplitude 0.042 h, width 1.28: 1.0089 instead of
0.8703). A step shorter than 4·10⁻⁷ may change the orientation: it crosses a branch point of
its own path. The turn limit ``max_turn_deg`` is 12° (validated with the orientation test
against a 2.5° continuation on 9,000 random caps for the first limit point, 1,400 with the
scan, and on λ 23.5 … 27 in steps of 0.025, where the first pressure maximum changes folds;
version 1.8 needed 8° without the orientation test). Past the first limit point the search for
a return to zero load allows twice the turn: on 3,000 random caps (axisymmetric stability
only) one flag differed from the 2.5° search (λ = 22.16, clamped, sliding, ν = 0.3: 0 instead
of 1; 8° gave 0 as well; with the asymmetric check it is 0 either way).
The
stability determinants are those of ``A − B S⁻¹ C`` (the fixed stress block ``S`` eliminated;
assembled per state in a compiled kernel);
all n = 1…N are evaluated at every ``scan_stride``-th path point (default 1, every point; the
steps are short where the state changes fast), only the flipped wave numbers in between. Several wave numbers
often flip within one step (about six per cap on deep caps, the sphere's nearly degenerate
spectrum): their determinants are evaluated at four interior points of the step, and only those
flipping in its earliest flipped part are refined (the same critical states as refining all, at
about 60 % of the scan's cost; tested).
A wave number whose determinant changes sign twice between evaluations is missed: stride 3
(the default before version 1.9) missed the first bifurcation of the apex-force λ = 10 cap
(n = 4 at F R/(E h³) = 9.447; it reported n = 5 at 9.763) and of deep pinned caps (n = 22 for
21, 0.05–0.1 % high, in 2 of 600 random caps with 8° steps, 20 of 600 with 16°), while stride 1
costs no more, since the scan stops at a cap's first flip. For sliding edges, n = 1 has one
in-plane edge condition (N_r and N_rθ both reduce to F' − F). The apex-force singularity
y ∝ x log x is subtracted analytically in the axisymmetric problem; apex-force stability
operators are evaluated on 3×``nodes`` (see Conventions; 2× leaves spurious sign changes at
small forces, also on the stretched grid). The apex-force critical force converges
algebraically in ``nodes`` (see Resolution): on the stretched grid to ~10⁻⁵ (bifurcation,
λ = 10, immovable) and ~3·10⁻⁴ (force maximum); on plain Chebyshev nodes an immovable edge
converged at about first order and picked n = 4 instead of 5 at λ = 10.

Resolution
----------
``nodes`` = 0 (default) picks each point's grid (:func:`choose_grids`): the count grows linearly
with λ (14 + λ with the asymmetric scan, max(14 + λ, 8 + 1.5λ) without; dimpled caps also
4 + 2λ/b; apex forces 16 + 1.4λ; even, 16 … 96), fitted to the measured need for 3·10⁻⁷
relative accuracy of the critical load over λ = 3.5 … 30 and checked against grids twice as
fine (tests/models/shallow_cap/test_resolution.py). The rule for perfect caps without the scan
was checked at every 0.1 of λ = 3.5 … 30 for clamped and pinned, immovable and sliding edges,
ν = 0.3 and 0.45, against 84 nodes: within 4.8·10⁻⁷ (2,128 points). Dimpled caps and apex forces use nodes stretched
towards the axis, x = (1 − β)ξ + βξ³ of the Chebyshev points ξ (β = ``dimple_grid_stretch``
0.5, ``apex_grid_stretch`` 0.85), because their solutions vary fastest there; perfect caps keep
Chebyshev points (the asymmetric modes live at the edge, where the stretch coarsens the grid).
Apex-force results converge only algebraically: after the x log x singularity is removed the
nonlinear state keeps weaker singular terms at the apex, and the force maximum is resolved to
about 3·10⁻⁴ (on 34 plain nodes, as before version 1.8, it was off by 1–2 %). A positive
``nodes`` fixes the count for all points (stretches still apply).

The continuation limits the tangent's turn per step to ``max_turn_deg`` = 12° (see Numerics).
Before the orientation test (version 1.9) 12° turns stepped
over a small first fold near λ ≈ 25 (δ ≈ 0.4 h) and bolder step sizing stepped onto a
neighbouring branch at λ = 24.46 (0.991 instead of 0.974 p_cl); both were jumps across a
corner of the path, which the orientation test now rejects (tested, with other λ where the
first pressure maximum changes fold). ``benchmarks/check_first_fold.py`` compares random caps
against a 2.5° continuation; re-run it after any change to the step rules.

Range of validity
-----------------
Shallow caps (a/R ≲ 0.5; points with physical dimensions and a/R > ``max_base_ratio`` get
``outside_validity``), elastic, moderate rotations, axisymmetric stress-free shape; λ ≤ 30.

References checked by the tests
-------------------------------
Mismatch strain: the plane-stress disc inclusion (Lamé problem; Timoshenko & Goodier 1951,
thermal stresses in a thin circular disc; re-derived for the immovable and the free edge) for
the linear in-plane response of a nearly flat cap, with a nearly sharp smoothed edge and with
the sharp edge (there at every node, the edge node included); the clamped circular plate under
equibiaxial compression, N_cr = j₁,₁² D/a² = 14.682 D/a², pinned 4.198 D/a² at ν = 0.3,
asymmetric n = 1 j₂,₁² = 26.375 (Timoshenko & Gere 1961; Bessel zeros recomputed) for the
λ → 0 limit of the stability operators.

Vaziri & Mahadevan 2008, PNAS 105:7913 and Pauchard & Rica 1998, Phil. Mag. B 78:225 (value
from memory, qualitative: indented spheres stay axisymmetric at small indentation, polygonal
buckling once the dimple is deep).

Zoelly 1915 (p_cl); Reissner 1946, J. Math. Phys. 25 (apex stiffness); Budiansky 1959,
Weinitschke 1960 J. Math. Phys. 38:209, Huang 1964 J. Appl. Mech. 31:447 (clamped caps:
onset of snapping near λ ≈ 3.2–3.4, limit pressure, asymmetric bifurcation first above λ ≈
5.5); Hutchinson 2016 Proc. R. Soc. A 472:20160577 and Lee et al. 2016 J. Appl. Mech.
83:111005 (knock-down against dimple amplitude).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any, ClassVar

import numpy as np

from sweepshell.models.base import BatchResult, OutputSpec, ParameterSpec, Status, SweepModel
from sweepshell.models.shallow_cap.solver import CapSolution, solve_caps

__all__ = ["ShallowCapModel"]

_NAN = math.nan


class ShallowCapModel(SweepModel):
    """Shallow spherical cap under pressure or an apex force: limit points and bifurcations."""

    name: ClassVar[str] = "shallow_cap"
    version: ClassVar[str] = "1.9"
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
        # numba writes its cache (index *.nbi) beside the kernels' module; an index older than the module is stale
        from pathlib import Path

        from sweepshell.models.shallow_cap import compiled

        source = Path(compiled.__file__)
        index = list((source.parent / "__pycache__").glob(f"{source.stem}.*.nbi"))
        return not index or min(p.stat().st_mtime for p in index) < source.stat().st_mtime
    # measured (one core, wall, benchmarks/bench_shallow_cap.py, λ = 3.5 … 20): ~1 ms axisymmetric, ~12 ms
    # with the scan, ~15 ms with bistability; apex-force points 0.1–0.3 s (λ 6–30) with the scan (its 3x
    # stability grid); sharp-edged mismatch points 45–100 ms with the scan
    cost_hint: ClassVar[float] = 0.025

    def __init__(self, *, nodes: int = 0, asymmetric_modes: int = 30, max_pressure: float = 2.0,
                 max_indentation: float = 1.0, path_samples: int = 64, check_bistability: bool = True,
                 tolerance: float = 1e-10, max_points: int = 400, max_base_ratio: float = 0.5,
                 max_turn_deg: float = 12.0, scan_stride: int = 1, mismatch_step_width: float = 0.0,
                 dimple_grid_stretch: float = 0.5, apex_grid_stretch: float = 0.85) -> None:
        super().__init__()
        for key, beta in (("dimple_grid_stretch", dimple_grid_stretch), ("apex_grid_stretch", apex_grid_stretch)):
            if not 0.0 <= float(beta) < 1.0:
                raise ValueError(f"settings.{key} must be in [0, 1) (a grid map x = (1-b) xi + b xi^3); "
                                 f"got {beta}")
        if not float(mismatch_step_width) >= 0.0:
            raise ValueError(f"settings.mismatch_step_width must be 0 (a sharp edge) or a positive smoothing "
                             f"width over the base radius; got {mismatch_step_width}")
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
        cost = 0.001 + 0.00035 * int(s["asymmetric_modes"])
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


_FIXED_NODES = 34  # smoothed-edge mismatch points' base grid when ``nodes`` is automatic


def get_mismatch_nodes(settings: Mapping[str, Any], lam: np.ndarray) -> np.ndarray:
    """Return the grid size of mismatch-strain points with shell parameters ``lam``.

    Sharp edge (``mismatch_step_width`` 0), on the grid clustered at the edge
    (:func:`choose_grid_centres`): ``nodes``, or when automatic 44 + 1.8λ (even, 48 … 96), the
    measured need for 10⁻⁴ relative accuracy of the critical load (against 160 nodes: 48 nodes
    leave 2·10⁻⁴ at λ = 8 and 12, 10⁻³ at λ = 20; 64 nodes 4·10⁻⁵ at λ = 12, 80 nodes 7·10⁻⁵ at
    λ = 20; tests/models/shallow_cap/test_mismatch_sharp.py). Smoothed edge: the edge sits
    inside the cap, where the Chebyshev grid is coarsest; below w·nodes ≈ 3.4 the results lose
    digits fast (10⁻⁶ relative at 3.4, 10⁻³ at 2), so ``nodes`` (when automatic max(34,
    16 + 1.5λ), even) is raised until w·nodes ≥ 3.4.
    """
    width = float(settings["mismatch_step_width"])
    if width == 0.0:
        if int(settings["nodes"]):
            return np.full(lam.shape, int(settings["nodes"]))
        return np.clip(np.ceil((44.0 + 1.8 * lam) / 2.0) * 2.0, 48, 96).astype(int)
    if int(settings["nodes"]):
        return np.full(lam.shape, max(int(settings["nodes"]), math.ceil(3.4 / width)))
    # on deep caps the mismatch state needs more than 34 nodes whatever the width: at λ = 20 a
    # shrinking disc (ρ = 0.5) showed a spurious n = 2 bifurcation on 34 nodes, none on 40 … 80
    return np.maximum(math.ceil(3.4 / width),
                      np.maximum(_FIXED_NODES, np.ceil((16.0 + 1.5 * lam) / 2.0) * 2.0)).astype(int)


def choose_grid_centres(settings: Mapping[str, Any], eigen: np.ndarray, radius: np.ndarray) -> np.ndarray:
    """Return each point's clustering centre ρ of the radial grid (0: none; see ``make_radial_grid``).

    Mismatch points with a sharp edge inside the cap (``mismatch_step_width`` 0, ρ < 1) get the
    grid clustered around x = ±ρ with a node on ρ: their response has a kink there (a jump of
    the hoop prestress and of the third derivative of the slope), which a plain grid resolves
    only to first order, oscillating with where ρ falls between nodes.
    """
    sharp = eigen & (float(settings["mismatch_step_width"]) == 0.0) & (radius < 1.0)
    return np.where(sharp, radius, 0.0)


def choose_grids(settings: Mapping[str, Any], lam: np.ndarray, apex: np.ndarray, eigen: np.ndarray,
                 amplitude: np.ndarray, width: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return each point's radial grid: node count and stretch β (see ``make_radial_grid``).

    With ``nodes`` 0 (automatic) the count follows the measured need for 3·10⁻⁷ relative
    accuracy of the critical load (tests/models/shallow_cap/test_resolution.py; theory.md).
    It grows about linearly with λ (edge and ridge layers of width ∝ 1/λ; a dimple of width b
    over a/λ has width b/λ in x). Grids are stretched towards the axis where the solution
    varies fastest there: dimpled caps (``dimple_grid_stretch``) and apex forces
    (``apex_grid_stretch``); perfect caps under pressure keep Chebyshev points, whose edge
    clustering the asymmetric modes need; mismatch points use :func:`get_mismatch_nodes` (and
    sharp-edged ones the clustered map of :func:`choose_grid_centres`).
    Counts are even, from 16 to 96.
    """
    scan = int(settings["asymmetric_modes"]) > 0
    dimpled = (amplitude != 0.0) & ~apex & ~eigen
    beta = np.where(apex, float(settings["apex_grid_stretch"]),
                    np.where(dimpled, float(settings["dimple_grid_stretch"]), 0.0))
    if int(settings["nodes"]):
        nodes = np.full(lam.shape, int(settings["nodes"]))
    else:
        perfect = 14.0 + lam if scan else np.maximum(14.0 + lam, 8.0 + 1.5 * lam)
        stretched = 12.0 + 1.5 * lam if scan else 14.0 + 1.2 * lam
        dimple = np.where(amplitude != 0.0, 4.0 + 2.0 * lam / np.maximum(width, 0.25), 0.0)
        need = np.where(apex, np.maximum(16.0 + 1.4 * lam, dimple),
                        np.where(dimpled, np.maximum(stretched, dimple), perfect))
        nodes = np.clip(np.ceil(need / 2.0) * 2.0, 16, 96).astype(int)
    mismatch_nodes = get_mismatch_nodes(settings, lam)
    if not int(settings["nodes"]):
        # a dimple on a mismatch grid (no axis stretch there): the plain-grid need of a dimple,
        # 2 + 4.6λ/b (measured for pressure; not separately measured for mismatch loads)
        plain_dimple = np.where(amplitude != 0.0, 2.0 + 4.6 * lam / np.maximum(width, 0.25), 0.0)
        mismatch_nodes = np.maximum(mismatch_nodes,
                                    np.clip(np.ceil(plain_dimple / 2.0) * 2.0, 0, 96).astype(int))
    nodes = np.where(eigen, mismatch_nodes, nodes)
    return nodes, np.where(eigen, 0.0, beta)


def _solve_by_grid(s: Mapping[str, Any], eigen: np.ndarray, *args: np.ndarray) -> CapSolution:
    """Solve the points in groups that share a radial grid (:func:`choose_grids`)."""
    lam, nu, clamped, immovable, apex, amp, width, strain, radius, annulus = args
    nodes, stretch = choose_grids(s, lam, apex, eigen, amp, width)
    centre = choose_grid_centres(s, eigen, radius)
    keys = np.stack([nodes.astype(float), stretch, centre], axis=1)
    groups, inverse = np.unique(keys, axis=0, return_inverse=True)
    inverse = inverse.reshape(-1)
    parts: list[tuple[np.ndarray, CapSolution]] = []
    for k, (size, beta, rho) in enumerate(groups):
        rows = np.nonzero(inverse == k)[0]
        settings = {**s, "nodes": int(size), "grid_stretch": float(beta), "grid_centre": float(rho)}
        parts.append((rows, solve_caps(
            lam[rows], nu[rows], clamped[rows], immovable[rows], apex[rows], amp[rows], width[rows],
            settings=settings, mismatch=eigen[rows], mismatch_strain=strain[rows],
            mismatch_radius=radius[rows], annulus=annulus[rows])))
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
