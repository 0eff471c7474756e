"""``foundation_strip``: a strip on an elastic foundation — wrinkles, folds and plate flexure.

One model, two problems, chosen per point by the categorical parameter ``problem``.

**compression** — a strip of bending stiffness B (N·m) and length L on a foundation of
stiffness K (Pa/m) with an optional cubic term K₃ (Pa/m³), compressed by an imposed
end-shortening per unit length c (``confinement``). Geometrically exact (inextensible)
elastica in the arc length s, angle φ, height y (y' = sin φ): equilibria are the
stationary points of

    Π[φ] = ∫₀ᴸ [B φ'²/2 + cos φ (K y²/2 + K₃ y⁴/4)] ds − P (∫₀ᴸ (1 − cos φ) ds − cL),

with y(0) = y(L) = 0 and no end moments (pinned ends), P the compressive force;
the foundation energy counted per horizontal length (dx = cos φ ds: a hydrostatic,
liquid-like foundation, as for a sheet floating on a liquid, Diamant & Witten 2011).
Both ends are pinned on the foundation surface. A stress-free imperfection
y⁰ = a sech(ξ/w) cos(ξ/ℓ), ξ = x − L/2, seeds the localisation; the optional stretching
stiffness A (N/m) adds a uniform axial strain P/A to the end-shortening.
Non-dimensionalisation: ℓ = (B/K)^{1/4}, forces by √(BK); then the only numbers are
L/ℓ (setting ``length`` in classical wavelengths 2πℓ), a/(2πℓ) (``imperfection``),
c₃ = K₃ℓ²/K, s = √(BK)/A and c. Discretised as N straight segments
(:mod:`sweepshell.models.foundation_strip.elastica`, second order in h) and followed from the
stress-free state by pseudo-arclength continuation
(:mod:`sweepshell.models.foundation_strip.continuation`), so limit points are passed.
Outputs (normalised by the classical 2√(BK) and 2π(B/K)^{1/4} of the infinite strip):
``critical_load`` and ``wavelength`` of the first bifurcation of the perfect pinned strip
(closed form; → 1 as L → ∞), ``fold_confinement`` (criterion in
:mod:`sweepshell.models.foundation_strip.path`), ``fold_amplitude`` (largest crest depth
at the requested confinement over 2πℓ, where folded), and the regime at the requested c:
``flat`` (c ≤ onset confinement s·P_c), ``folded`` (c ≥ fold confinement), else
``wrinkled``. Validity: no self-contact (past it: ``outside_validity``), |y|
within the range where the foundation law holds (a softening cubic loses its meaning
where 1 + c₃y² < 0), uniform axial strain P/A ≪ 1.

**flexure** — the linear plate on a fluid foundation in physical units, closed form
(:mod:`sweepshell.models.foundation_strip.flexure`): D = E T_e³/(12(1 − ν²)), K = Δρ g,
D w'''' + N w'' + K w = 0 with a line load and moment at x = 0 on a ``broken`` or
``continuous`` plate. Outputs in metres: ``flexural_parameter`` α = (4D/K)^{1/4},
``zero_crossing_distance``, ``forebulge_distance``, ``forebulge_height`` (up
positive), ``max_deflection`` (down positive). Regime ``flexure`` (a loaded, unbuckled plate:
the compression regimes do not apply); |N| ≥ 2√(DK) is ``outside_validity``.

Outputs that do not belong to a point's problem are NaN (all outputs are nullable).

Choices worth knowing: a perfect strip (``imperfection`` = 0) switches branches (see
:mod:`sweepshell.models.foundation_strip.continuation`): at the first bifurcation of the flat state
(the discrete P_c) onto the periodic wrinkle, and at the first bifurcation on that wrinkle
that keeps its mirror symmetry about mid-length onto the branch that localises there.
Bifurcations that shift the envelope to one end (the periodic wrinkle of a pinned strip
first loses stability to a fold at an end, at c ≈ 0.004 for the default length) are
passed, as they are by a strip with the centred imperfection; their confinements are not
reported. The perfect strip's fold is the limit of imperfect ones when the critical mode
has the imperfection's parity (half-integer ``length``, e.g. 7.5); at integer lengths the
critical mode is odd about mid-length, the perfect strip folds antisymmetrically and
imperfect strips symmetrically (fold confinement 0.0235 against 0.0209 at length 8).
Accuracy at the default 16 segments per wavelength: the
discrete onset is low by h²/4 (2 % of P_c; 0.3 % at 40), the fold-branch load within
1.5 % of the exact law and second order in h; the reported ``critical_load`` and
``wavelength`` are the exact closed form. Points sharing (c₃, s, a) share one path, so a
confinement axis costs one path per strip and block. The cost per path is measured by
``benchmarks/bench_foundation_strip.py`` and recorded in ``theory.md``.

References checked by the tests: Hetényi (1946) and Timoshenko & Gere (1961) for the
onset 2√(BK), 2π(B/K)^{1/4} and the finite pinned strip; Diamant & Witten (2011) for the
exact fold law P = 2√(BK)(1 − Δ²/(32ℓ²)) (P = 2 − Δ²/16 in their units) on the hydrostatic
foundation; Hunt, Bolt & Thompson (1989) qualitatively for softening/stiffening cubic
foundations; Hetényi (1946) and Turcotte & Schubert (*Geodynamics*) for flexure.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any, ClassVar

import numpy as np

from sweepshell.models.base import BatchResult, OutputSpec, ParameterSpec, Status, SweepModel
from sweepshell.models.foundation_strip.flexure import compute_flexure
from sweepshell.models.foundation_strip.path import compute_pinned_onset, solve_strip

__all__ = ["FoundationStripModel"]

_INF = math.inf
_COMPRESSION_OUTPUTS = ("critical_load", "wavelength", "fold_confinement", "fold_amplitude")
_FLEXURE_OUTPUTS = ("flexural_parameter", "zero_crossing_distance", "forebulge_distance",
                    "forebulge_height", "max_deflection")


class FoundationStripModel(SweepModel):
    """Strip on an elastic foundation: wrinkle onset, wrinkle-to-fold path, plate flexure.

    Parameters
    ----------
    segments_per_wavelength
        Straight segments per classical wavelength 2πℓ (resolution of the elastica).
    length
        Strip length in classical wavelengths.
    imperfection_width
        Width w of the imperfection's sech envelope, in classical wavelengths.
    fold_contrast
        Crest contrast (largest over median crest) that marks a fold.
    max_confinement
        Confinement up to which a fold is searched (the path runs at least this far).
    tolerance
        Newton tolerance on the unknowns (angles in radians, forces in √(BK)).
    max_steps
        Continuation step budget per path.
    follow_path_below_onset
        If False, points whose confinement is at or below the onset skip the path (fast:
        only the linear onset is computed) and report NaN fold outputs.
    """

    name: ClassVar[str] = "foundation_strip"
    # 1.2: flexure points carry the regime "flexure" instead of "flat" (a compression regime)
    version: ClassVar[str] = "1.2"
    summary: ClassVar[str] = ("strip on an elastic foundation: wrinkle onset, wrinkle-to-fold "
                              "continuation path, plate flexure in physical units")
    parameters: ClassVar[tuple[ParameterSpec, ...]] = (
        ParameterSpec("problem", "1", "compression (wrinkle/fold path) or flexure (loaded plate)",
                      default="compression", choices=("compression", "flexure")),
        ParameterSpec("bending_stiffness", "N m", "bending stiffness B per unit width",
                      default=1.0, bounds=(0.0, _INF), closed=(False, False), symbol="B"),
        ParameterSpec("foundation_stiffness", "Pa m-1", "linear foundation stiffness K",
                      default=1.0, bounds=(0.0, _INF), closed=(False, False), symbol="K"),
        ParameterSpec("cubic_stiffness", "Pa m-3",
                      "cubic foundation term K3 (reaction K y + K3 y^3; < 0 softening)",
                      default=0.0, symbol="K3"),
        ParameterSpec("stretching_stiffness", "N m-1",
                      "axial stiffness A per unit width (inf: inextensible)",
                      default=_INF, bounds=(0.0, _INF), closed=(False, True), admits_infinity=True, symbol="A"),
        ParameterSpec("confinement", "1", "imposed end-shortening per unit length",
                      default=0.02, bounds=(0.0, 0.5), symbol="c"),
        ParameterSpec("imperfection", "1",
                      "amplitude of the stress-free localised imperfection over 2 pi (B/K)^(1/4) (0: perfect)",
                      default=1e-3, bounds=(0.0, 0.1), symbol="a"),
        ParameterSpec("elastic_thickness", "m", "elastic thickness T_e of the plate",
                      default=20e3, bounds=(0.0, _INF), closed=(False, False), symbol="T_e"),
        ParameterSpec("youngs_modulus", "Pa", "Young's modulus E", default=70e9,
                      bounds=(0.0, _INF), closed=(False, False), symbol="E"),
        ParameterSpec("poisson_ratio", "1", "Poisson's ratio", default=0.25, bounds=(-1.0, 0.5),
                      closed=(False, False), symbol="ν"),
        ParameterSpec("density_contrast", "kg m-3", "foundation minus infill density (K = Δρ g)",
                      default=2300.0, bounds=(0.0, _INF), closed=(False, False), symbol="Δρ"),
        ParameterSpec("gravity", "m s-2", "gravitational acceleration", default=9.81,
                      bounds=(0.0, _INF), closed=(False, False), symbol="g"),
        ParameterSpec("end_load", "N m-1", "line load at x = 0 (positive down)", default=1e12,
                      symbol="V0"),
        ParameterSpec("end_moment", "N", "moment at x = 0 per unit length (positive bends x > 0 down)",
                      default=0.0, symbol="M0"),
        ParameterSpec("axial_force", "N m-1", "horizontal force per unit length (compressive positive)",
                      default=0.0, symbol="N"),
        ParameterSpec("plate", "1", "broken (free end at the load) or continuous plate",
                      default="broken", choices=("broken", "continuous")),
    )
    regimes: ClassVar[tuple[str, ...]] = ("flat", "wrinkled", "folded", "flexure")
    parameter_groups: ClassVar[Mapping[str, Mapping[str, tuple[str, ...]]]] = {"problem": {
        "compression": ("bending_stiffness", "foundation_stiffness", "cubic_stiffness", "stretching_stiffness",
                        "confinement", "imperfection"),
        "flexure": ("elastic_thickness", "youngs_modulus", "poisson_ratio", "density_contrast", "gravity",
                    "end_load", "end_moment", "axial_force", "plate")}}
    #: measured: a path to the fold at default settings, one core (benchmarks/bench_foundation_strip.py)
    cost_hint: ClassVar[float] = 0.1

    def __init__(self, *, segments_per_wavelength: int = 16, length: float = 8.0,
                 imperfection_width: float = 1.0, fold_contrast: float = 3.0,
                 max_confinement: float = 0.06, tolerance: float = 1e-9, max_steps: int = 300,
                 follow_path_below_onset: bool = True) -> None:
        super().__init__()
        self._settings: dict[str, Any] = {
            "segments_per_wavelength": int(segments_per_wavelength),
            "length": float(length),
            "imperfection_width": float(imperfection_width),
            "fold_contrast": float(fold_contrast),
            "max_confinement": float(max_confinement),
            "tolerance": float(tolerance),
            "max_steps": int(max_steps),
            "follow_path_below_onset": bool(follow_path_below_onset),
        }

    @property
    def outputs(self) -> tuple[OutputSpec, ...]:
        return (
            OutputSpec("critical_load", "1",
                       "first bifurcation load of the perfect strip over 2 sqrt(B K) (NaN: flexure)",
                       symbol="P_c/2√(BK)", nullable=True),
            OutputSpec("wavelength", "1",
                       "wavelength at the first bifurcation over 2 pi (B/K)^(1/4) (NaN: flexure)",
                       symbol="λ/λ_c", nullable=True),
            OutputSpec("fold_confinement", "1",
                       "confinement at which the wrinkle localises into a fold (NaN: no fold "
                       "up to max_confinement, path skipped, or flexure)", nullable=True),
            OutputSpec("fold_amplitude", "1",
                       "largest crest depth at the requested confinement over 2 pi (B/K)^(1/4) "
                       "(NaN unless folded)", nullable=True),
            OutputSpec("flexural_parameter", "m", "flexural parameter (4D/K)^(1/4) (NaN: compression)",
                       symbol="α", nullable=True),
            OutputSpec("zero_crossing_distance", "m",
                       "distance from the load to the first zero of the deflection "
                       "(NaN: compression or no load)", nullable=True),
            OutputSpec("forebulge_distance", "m", "distance from the load to the forebulge crest "
                       "(NaN: compression or no load)", nullable=True),
            OutputSpec("forebulge_height", "m", "height of the forebulge crest, up positive "
                       "(NaN: compression)", nullable=True),
            OutputSpec("max_deflection", "m", "deflection of largest magnitude, down positive "
                       "(NaN: compression)", nullable=True),
        )

    @classmethod
    def sample_inputs(cls) -> dict[str, np.ndarray]:
        """Wrinkled and folded states of one strip, a broken plate and a plate that buckles."""
        out: dict[str, np.ndarray] = {p.name: np.array([p.default] * 4) for p in cls.parameters}
        out["problem"] = np.array(["compression", "compression", "flexure", "flexure"])
        out["plate"] = np.array(["broken", "broken", "broken", "continuous"])
        out["confinement"] = np.array([0.01, 0.03, 0.0, 0.0])
        out["axial_force"] = np.array([0.0, 0.0, 0.0, 1e20])
        return out

    def solve_batch(self, inputs: Mapping[str, np.ndarray]) -> BatchResult:
        problem = np.asarray(inputs["problem"]).astype(str)
        n = problem.shape[0]
        outputs = {o.name: np.full(n, np.nan, dtype=np.float64) for o in self.outputs}
        status = np.full(n, Status.ok, dtype=np.uint8)
        regime = np.zeros(n, dtype=np.int8)

        flex = problem == "flexure"
        if np.any(flex):
            self._solve_flexure(inputs, flex, outputs, status)
            regime[flex] = self.regimes.index("flexure")  # a loaded plate: neither flat nor wrinkled
        comp = ~flex
        if np.any(comp):
            self._solve_compression(inputs, comp, outputs, status, regime)

        trusted = (status == Status.ok) | (status == Status.no_instability)
        regime[~trusted] = -1
        for v in outputs.values():
            v[~trusted] = np.nan
        return BatchResult(outputs=outputs, status=status, regime=regime)

    # -- flexure ------------------------------------------------------------------------
    def _solve_flexure(self, inputs: Mapping[str, np.ndarray], mask: np.ndarray,
                       outputs: dict[str, np.ndarray], status: np.ndarray) -> None:
        def get(name: str) -> np.ndarray:
            return np.asarray(inputs[name], dtype=float)[mask]

        with np.errstate(all="ignore"):
            prof = compute_flexure(get("elastic_thickness"), get("youngs_modulus"), get("poisson_ratio"),
                                   get("density_contrast"), get("gravity"), get("end_load"),
                                   get("end_moment"), get("axial_force"),
                                   np.asarray(inputs["plate"]).astype(str)[mask] == "continuous")
        for name in _FLEXURE_OUTPUTS:
            outputs[name][mask] = getattr(prof, name)
        finite = np.isfinite(prof.flexural_parameter) & np.isfinite(prof.max_deflection)
        idx = np.nonzero(mask)[0]
        status[idx[~prof.valid]] = Status.outside_validity
        status[idx[prof.valid & ~finite]] = Status.failed

    # -- compression --------------------------------------------------------------------
    def _solve_compression(self, inputs: Mapping[str, np.ndarray], mask: np.ndarray,
                           outputs: dict[str, np.ndarray], status: np.ndarray, regime: np.ndarray) -> None:
        s = self._settings
        idx = np.nonzero(mask)[0]
        B = np.asarray(inputs["bending_stiffness"], dtype=float)[idx]
        K = np.asarray(inputs["foundation_stiffness"], dtype=float)[idx]
        K3 = np.asarray(inputs["cubic_stiffness"], dtype=float)[idx]
        A = np.asarray(inputs["stretching_stiffness"], dtype=float)[idx]
        conf = np.asarray(inputs["confinement"], dtype=float)[idx]
        imp = np.asarray(inputs["imperfection"], dtype=float)[idx]

        two_pi = 2.0 * np.pi
        L = s["length"] * two_pi
        p_c, lam = compute_pinned_onset(L)
        outputs["critical_load"][idx] = 0.5 * float(p_c)
        outputs["wavelength"][idx] = float(lam) / two_pi
        with np.errstate(all="ignore"):
            cubic = K3 * np.sqrt(B / K) / K
            compliance = np.where(np.isinf(A), 0.0, np.sqrt(B * K) / A)
        onset = compliance * float(p_c)
        regime[idx] = np.where(conf <= onset, 0, 1)
        bad = ~(np.isfinite(cubic) & np.isfinite(compliance))
        status[idx[bad]] = Status.failed

        # points sharing (c3, s, a) share one path: solve each distinct strip once
        keys = np.column_stack([cubic, compliance, imp])
        run = ~bad
        if not s["follow_path_below_onset"]:
            run &= conf > onset
        if not np.any(run):
            return
        uniq, inverse = np.unique(keys[run], axis=0, return_inverse=True)
        inverse = inverse.reshape(-1)
        run_idx = np.nonzero(run)[0]
        segments = max(8, round(s["segments_per_wavelength"] * s["length"]))
        for g, (c3, comp, a) in enumerate(uniq):
            members = run_idx[inverse == g]
            out = solve_strip(length=L, segments=segments, imperfection=float(a) * two_pi,
                              width=s["imperfection_width"] * two_pi, cubic=float(c3),
                              compliance=float(comp), onset_confinement=float(comp) * float(p_c),
                              targets=conf[members], fold_contrast=s["fold_contrast"],
                              search_limit=s["max_confinement"], tol=s["tolerance"],
                              max_steps=s["max_steps"])
            where = idx[members]
            outputs["fold_confinement"][where] = out.fold_confinement
            outputs["fold_amplitude"][where] = out.depth / two_pi
            status[where] = out.status
            folded = np.isfinite(out.fold_confinement) & (conf[members] >= out.fold_confinement) & (
                conf[members] > onset[members])
            regime[where[folded]] = 2
