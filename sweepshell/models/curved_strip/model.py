"""``curved_strip``: a transversely curved strip under longitudinal bending — stiffening, snap and fold.

Governing equations (derived in ``theory.md`` beside this module)
-----------------------------------------------------------------
A long strip of width w (arc length across), thickness h, Young's modulus E, Poisson's
ratio ν and natural transverse radius R_t (a shallow circular arc, z₀ = y²/(2R_t), edges
towards the centre of curvature) is bent by end moments to a uniform longitudinal
curvature κ. Every section deforms alike (the Brazier and Mansfield tradition): in
Föppl–von Kármán shallow-shell theory the free edges and the x-independence give
N_y = N_xy = 0, compatibility turns the Gaussian curvature κz'' into the longitudinal
strain ε_x = ∓κ(z − z̄) (z̄ removes the mean and the linear part across the width), and
the energy per unit length is

    U = ½ E h κ² ∫(z − z̄)² dy + ½ D ∫[κ² + (z'' − z₀'')² ± 2νκ(z'' − z₀'')] dy,

D = E h³/(12(1−ν²)); the sign of the Poisson term is the bending sense. The moment is
M = dU/dκ along the equilibrium path. Non-dimensionalisation: η = y/w, ζ = z/h,
k = κw²/h, m = M w/(D h); the only numbers left are ν and the curvature parameter
c = w²/(R_t h) (the strip's "shell parameter"; c²/60 is the stiffening at small loads).

Numerics: a Ritz expansion of the section in even Legendre polynomials (``modes``; see
:mod:`.section`, the path in :mod:`.moment_path`). For fixed k the energy is a positive
definite quadratic in the section, so each curvature has exactly one equilibrium section, found by one linear solve; the
moment–curvature path is sampled on a geometric grid of ``curvature_samples`` curvatures
from k = 0.05 to k = ``curvature_range``·(c + 20), the limit point is bracketed by the sign
change of dm/dk and refined by regula falsi, the fold by the Maxwell construction (min Û/k
past the limit point; where m never falls below Û/k — c just above the limit-point
threshold — the section snaps without a localised fold and the fold outputs are NaN).
Points sharing (c, ν, sense) share one path. Discretisation error: the same quantities on
the leading 3/4 of the basis; a relative difference above ``tolerance``, or a fold edge
layer ℓ = [12(1−ν²)]^(−1/4)(h/κ)^(1/2) narrower than ``layer_resolution``·w/(2·modes)²
(both bases would miss it alike), is ``not_converged``.

Outputs and conventions
-----------------------
Signs follow Seffen & Pellegrino (1999): moments and curvatures are positive in the
opposite sense (bending against the transverse curvature: the edges in tension, the
crown in compression — a tape measure held concave side up and bent down) and negative
in the equal sense. ``stiffness_gain`` is the initial stiffness over the flat strip's
initial stiffness E w h³/12 = (1 − ν²)·D·w (at infinitesimal load a flat strip bends as a
beam, its anticlastic curvature free; D·w is reached only once κw²/h ≫ 1), so it is 1 for
a flat strip and 1 + w⁴/(60 R_t² h²) by beam theory of the arc. ``peak_moment`` and
``peak_curvature``: the limit point of the moment–curvature path; ``fold_moment`` and
``fold_radius``: the steady moment and the longitudinal radius of a fully formed localised
fold; ``section_shape``: the section unloaded, at the peak and in the fold. A cantilever
(``load = cantilever``) is clamped at one end and held concave side up, so its own weight
q = ρ g h w per unit length and a tip load P bend it in the opposite sense; its root moment
is qL²/2 + PL (small slopes), its tip deflection δ = ∫₀ᴸ κ(M(ξ)) ξ dξ (ξ from the tip) on
the pre-peak branch, its critical length solves qL²/2 + PL = peak moment.

Regimes: ``stiff`` (no limit point within the curvature range, or a cantilever no longer
than its critical length), ``folded`` (end moments: the path has a limit point, the
section snaps), ``collapsed`` (a cantilever longer than its critical length).

Validity: shallow section, w/R_t ≤ ``max_width_ratio``; thin, h/w ≤ ``max_thickness_ratio``
(else ``outside_validity``); linear elastic (metal strips may yield in the fold: the fold's
surface strain is h/(2R_t)); uniform bending — end effects and three-dimensional modes are
not modelled: equal-sense strips are observed to fail by flexural–torsional buckling below
this section's limit point (Seffen & Pellegrino 1999, from memory), so the equal-sense ``peak_moment``
is an upper bound; cantilever slopes small (tip rotation ≤ ``max_tip_rotation``).

References checked by the tests (``tests/models/curved_strip/``, published values in its
``test_reference.py``): beam theory of the arc
section (common practice); Seffen & Pellegrino (1999), *Proc. R. Soc. A* 455:1003, and
Calladine (1988), *Proc. Instn Mech. Engrs* 202, for the fold radius R_t and the fold
moments (1 + ν)D w/R_t and −(1 − ν)D w/R_t (values from memory).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any, ClassVar

import numpy as np

from sweepshell.models.base import BatchResult, OutputSpec, ParameterSpec, Status, SweepModel
from sweepshell.models.curved_strip.cantilever import solve_cantilever
from sweepshell.models.curved_strip.moment_path import solve_paths
from sweepshell.models.curved_strip.section import make_section_operators, trace_section_shapes

__all__ = ["CurvedStripModel"]

_INF = math.inf
_STATIONS = 41
_LOADS = ("bend_opposite", "bend_equal", "cantilever")


class CurvedStripModel(SweepModel):
    """Transversely curved strip under end moments or as a cantilever under its own weight.

    Parameters
    ----------
    modes
        Even Legendre modes across the width (section resolution).
    curvature_range
        The path runs to k = curvature_range·(c + 20), c = w²/(R_t h), k = κw²/h.
    curvature_samples
        Geometric search grid of the path (limit point and fold are refined from it).
    path_samples
        Samples of the stored moment–curvature path (even in its normalised arc length).
    tolerance
        Largest relative change of the peak and fold moments between the full and the 3/4 basis.
    max_width_ratio
        Largest w/R_t (shallow section).
    max_thickness_ratio
        Largest h/w (thin strip).
    max_tip_rotation
        Largest cantilever tip rotation in radians (small-slope theory).
    layer_resolution
        Smallest (fold edge-layer width / w)·(2·modes)²; 4 keeps the fold moment within about 10⁻⁴
        (the modes ladders in ``theory.md``); 0 switches the check off.
    """

    name: ClassVar[str] = "curved_strip"
    version: ClassVar[str] = "1.0"
    summary: ClassVar[str] = ("transversely curved strip (tape spring) under end moments or as a cantilever: "
                              "stiffening, limit moment, localised fold, critical length")
    parameters: ClassVar[tuple[ParameterSpec, ...]] = (
        ParameterSpec("width", "m", "width w of the strip, measured along its curved section",
                      default=0.04, bounds=(0.0, _INF), closed=(False, False), symbol="w"),
        ParameterSpec("thickness", "m", "wall thickness h", default=1e-4, bounds=(0.0, _INF),
                      closed=(False, False), symbol="h"),
        ParameterSpec("transverse_radius", "m", "natural radius R_t of the section (inf, .inf in YAML: a flat strip)",
                      default=0.05, bounds=(0.0, _INF), closed=(False, True), admits_infinity=True, symbol="R_t"),
        ParameterSpec("youngs_modulus", "Pa", "Young's modulus E", default=200e9, bounds=(0.0, _INF),
                      closed=(False, False), symbol="E"),
        ParameterSpec("poisson_ratio", "1", "Poisson's ratio", default=0.3, bounds=(-1.0, 0.5),
                      closed=(False, False), symbol="ν"),
        ParameterSpec("length", "m", "length L of the strip (sets the cantilever's load)", default=1.0,
                      bounds=(0.0, _INF), closed=(False, False), symbol="L"),
        ParameterSpec("load", "1", "bend_opposite or bend_equal (end moments against or with the transverse "
                      "curvature) or cantilever (own weight plus tip load, concave side up)",
                      default="bend_opposite", choices=_LOADS),
        ParameterSpec("density", "kg m-3", "density of the wall material", default=7850.0,
                      bounds=(0.0, _INF), closed=(False, False), symbol="ρ"),
        ParameterSpec("gravity", "m s-2", "gravitational acceleration (cantilever)", default=9.81,
                      bounds=(0.0, _INF), closed=(False, False), symbol="g"),
        ParameterSpec("tip_load", "N", "downward force at the cantilever's free end", default=0.0,
                      bounds=(0.0, _INF), closed=(True, False), symbol="P"),
    )
    regimes: ClassVar[tuple[str, ...]] = ("stiff", "folded", "collapsed")
    # seconds per point at the default settings, for block sizing (the measurement: theory.md, Speed)
    cost_hint: ClassVar[float] = 0.002

    def __init__(self, *, modes: int = 24, curvature_range: float = 2.5, curvature_samples: int = 160,
                 path_samples: int = 64, tolerance: float = 1e-4, max_width_ratio: float = 1.0,
                 max_thickness_ratio: float = 0.05, max_tip_rotation: float = 0.35,
                 layer_resolution: float = 4.0) -> None:
        super().__init__()
        if not 4 <= int(modes) <= 120:
            raise ValueError(f"settings.modes must be a whole number from 4 to 120; got {modes}")
        if not float(curvature_range) >= 1.2:
            raise ValueError(f"settings.curvature_range must be at least 1.2 (the fold sits near k = c); "
                             f"got {curvature_range}")
        if not float(layer_resolution) >= 0.0:
            raise ValueError(f"settings.layer_resolution must be 0 or positive; got {layer_resolution}")
        if int(curvature_samples) < 20 or int(path_samples) < 2:
            raise ValueError("settings.curvature_samples must be at least 20 and settings.path_samples at least 2")
        for key, value in (("tolerance", tolerance), ("max_width_ratio", max_width_ratio),
                           ("max_thickness_ratio", max_thickness_ratio), ("max_tip_rotation", max_tip_rotation)):
            if not float(value) > 0.0:
                raise ValueError(f"settings.{key} must be positive; got {value}")
        self._settings: dict[str, Any] = {
            "modes": int(modes), "curvature_range": float(curvature_range),
            "curvature_samples": int(curvature_samples), "path_samples": int(path_samples),
            "tolerance": float(tolerance), "max_width_ratio": float(max_width_ratio),
            "max_thickness_ratio": float(max_thickness_ratio), "max_tip_rotation": float(max_tip_rotation),
            "layer_resolution": float(layer_resolution),
        }

    @property
    def outputs(self) -> tuple[OutputSpec, ...]:
        return (
            OutputSpec("stiffness_gain", "1", "initial bending stiffness over the flat strip's E w h^3/12 = "
                       "(1 - nu^2) D w", symbol="K/K_flat"),
            OutputSpec("peak_moment", "N m", "limit moment of the moment-curvature path (positive: opposite "
                       "sense, negative: equal sense); NaN where no limit point within the curvature range",
                       symbol="M_max", nullable=True),
            OutputSpec("peak_curvature", "m-1", "longitudinal curvature at the limit moment (signed as the "
                       "moment); NaN where no limit point", symbol="κ_max", nullable=True),
            OutputSpec("fold_moment", "N m", "steady moment of a fully formed localised fold (signed as the "
                       "moment); NaN where no localised fold forms", symbol="M_fold", nullable=True),
            OutputSpec("fold_radius", "m", "longitudinal radius of the fold region; NaN where no localised "
                       "fold forms", symbol="R_fold", nullable=True),
            OutputSpec("tip_deflection", "m", "cantilever tip deflection, down positive; NaN unless the load "
                       "is cantilever and the strip holds (not collapsed)", symbol="δ", nullable=True),
            OutputSpec("critical_length", "m", "longest cantilever that holds its own weight and tip load "
                       "without folding; NaN unless the load is cantilever and the path has a limit point",
                       symbol="L_c", nullable=True),
            OutputSpec("moment_path", "N m, m-1", "moment-curvature path sampled along its length: moment [N m] "
                       "and curvature [m-1], signed as peak_moment", dims=("path_sample", "path_component")),
            OutputSpec("section_shape", "m", "cross-section (y, z) at 41 arc stations, z = 0 at the crown, "
                       "edges up when unloaded; section_stage 0 = unloaded, 1 = at the peak moment, 2 = in the "
                       "fold; stages 1 and 2 are NaN where there is no limit point or no fold",
                       dims=("section_stage", "section_xy", "section_arc"), nullable=True),
        )

    @property
    def extra_dims(self) -> dict[str, int]:
        return {"path_sample": self._settings["path_samples"], "path_component": 2,
                "section_stage": 3, "section_xy": 2, "section_arc": _STATIONS}

    def extra_coords(self) -> dict[str, np.ndarray]:
        return {"path_sample": np.arange(self._settings["path_samples"]),
                "path_component": np.array(["moment", "curvature"]),
                "section_stage": np.arange(3), "section_xy": np.arange(2),
                "section_arc": np.linspace(-0.5, 0.5, _STATIONS)}

    def estimated_cost(self) -> float:
        """Seconds per point on one core (sizes blocks); about linear in ``modes`` and the search samples."""
        s = self._settings
        return float(self.cost_hint) * (s["modes"] / 24.0) * (s["curvature_samples"] / 160.0)

    @classmethod
    def sample_inputs(cls) -> dict[str, np.ndarray]:
        """A flat strip, folding strips in both senses, short and long cantilevers, a too-deep section."""
        out: dict[str, np.ndarray] = {p.name: np.array([p.default] * 7) for p in cls.parameters}
        out["transverse_radius"] = np.array([_INF, 0.05, 0.05, 0.05, 0.05, 0.2, 0.02])
        out["load"] = np.array(["bend_opposite", "bend_opposite", "bend_equal", "cantilever", "cantilever",
                                "bend_equal", "bend_opposite"])
        out["length"] = np.array([1.0, 1.0, 1.0, 0.5, 5.0, 1.0, 1.0])
        return out

    # -- work ---------------------------------------------------------------------------
    def solve_batch(self, inputs: Mapping[str, np.ndarray]) -> BatchResult:
        s = self._settings
        w = np.asarray(inputs["width"], dtype=float)
        h = np.asarray(inputs["thickness"], dtype=float)
        r_t = np.asarray(inputs["transverse_radius"], dtype=float)
        e_mod = np.asarray(inputs["youngs_modulus"], dtype=float)
        nu = np.asarray(inputs["poisson_ratio"], dtype=float)
        load = np.asarray(inputs["load"]).astype(str)
        n = w.shape[0]
        res = self.empty_result(n)
        out = res.outputs
        status, regime = res.status, res.regime
        with np.errstate(divide="ignore", invalid="ignore"):
            c = np.where(np.isinf(r_t), 0.0, w**2 / (r_t * h))
            ratio = np.where(np.isinf(r_t), 0.0, w / r_t)
        valid = (ratio <= s["max_width_ratio"]) & (h / w <= s["max_thickness_ratio"]) & np.isfinite(c)
        status[~valid] = Status.outside_validity
        work = np.nonzero(valid)[0]
        if work.size == 0:
            return res
        p = np.where(load == "bend_equal", 1.0, -1.0)
        sign = -p  # public sign: opposite sense positive
        keys = np.column_stack([c[work], nu[work], p[work]])
        uniq, inverse = np.unique(keys, axis=0, return_inverse=True)
        paths = solve_paths(s, uniq[:, 0], uniq[:, 1], uniq[:, 2])
        at = inverse.reshape(-1)
        d_mod = e_mod * h**3 / (12.0 * (1.0 - nu**2))
        m_unit = (d_mod * h / w)[work]
        k_unit = (h / w**2)[work]
        sg = sign[work]
        converged = paths["converged"][at]
        has_peak = paths["has_peak"][at]
        out["stiffness_gain"][work] = paths["gain"][at]
        out["peak_moment"][work] = sg * paths["m_peak"][at] * m_unit
        out["peak_curvature"][work] = sg * paths["k_peak"][at] * k_unit
        out["fold_moment"][work] = sg * paths["m_fold"][at] * m_unit
        with np.errstate(divide="ignore"):
            out["fold_radius"][work] = 1.0 / (paths["k_fold"][at] * k_unit)
        out["moment_path"][work, :, 0] = sg[:, None] * paths["path_m"][at] * m_unit[:, None]
        out["moment_path"][work, :, 1] = sg[:, None] * paths["path_k"][at] * k_unit[:, None]
        # sections: stage 0 unloaded, 1 at the peak, 2 in the fold; modal coordinates → drawn shape in metres
        coeff = np.stack([paths["a_natural"][at], paths["a_peak"][at], paths["a_fold"][at]], axis=1)
        scale = (h / w)[work][:, None]
        with np.errstate(invalid="ignore"):
            shapes = trace_section_shapes(make_section_operators(s["modes"]), coeff, _STATIONS, scale)
        out["section_shape"][work] = shapes * w[work][:, None, None, None]
        bending = load[work] != "cantilever"
        status[work] = np.where(has_peak, Status.ok, Status.no_instability)
        regime[work] = np.where(bending & has_peak, 1, 0)
        cant = work[~bending]
        if cant.size:
            solve_cantilever(s, inputs, cant, paths, inverse.reshape(-1)[~bending], m_unit[~bending],
                             k_unit[~bending], out, status, regime)
        status[work[~converged]] = Status.not_converged
        # never pass a NaN off as a result: a trusted point missing a required output is a failure
        trusted = (status == Status.ok) | (status == Status.no_instability)
        for spec in self.outputs:
            if not spec.nullable:
                bad = trusted & ~np.isfinite(out[spec.name].reshape(n, -1)).all(axis=1)
                status[bad] = Status.failed
                trusted &= ~bad
        regime[~trusted] = -1
        for v in out.values():
            v[~trusted] = np.nan
        return res
