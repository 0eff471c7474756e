"""``elastic_ring``: a long thin tube (pipe liner) on a Winkler foundation under external pressure.

A ring of radius R and wall thickness t (per unit length of a long tube, bending stiffness
D = E t³/(12(1−ν²))) resting on radial springs of modulus k (pressure per unit radial
deflection, Pa/m: grout or soil around a liner) buckles under an external pressure p in an
inextensional mode w = a cos nθ when

    p_n R³ / D = (n² − 1) + κ/(n² − 1),    κ = k R⁴/D,    n = 2, 3, ...

and the critical pressure is the smallest p_n. Without a foundation this is the classical
long-tube result p_cr = 3D/R³ = E/(4(1−ν²)) (t/R)³ (Bryan 1888; Timoshenko & Gere 1961,
Theory of Elastic Stability, Sec. 7.3-7.4); the foundation term is the Rayleigh-Ritz energy
of the same mode (bending (D/2R³)(n²−1)²πa², springs (kR/2)πa², pressure work
(p/2)(n²−1)πa² per unit length), the ring's analogue of a column on a Winkler foundation.

Status rules: R/t < 10 (thick ring) or a half-wave πR/n shorter than 5t (the foundation
forces waves too short for ring theory) → ``outside_validity``; an applied pressure at or
above p_cr → ``ok`` with regime ``buckled``; below → ``no_instability`` with regime ``round``.
These limits are common practice, no source.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import ClassVar

import numpy as np

from sweepshell.models import BatchResult, OutputSpec, ParameterSpec, Status, SweepModel

__all__ = ["ElasticRingModel", "ring_critical_pressure"]


def ring_critical_pressure(kappa: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return ``(p_cr R³/D, n)`` for foundation parameters ``kappa`` = k R⁴/D (vectorised)."""
    kappa = np.asarray(kappa, dtype=float)
    # p_n is smallest where n² − 1 is near √κ: compare the two whole n around it
    n_low = np.maximum(2.0, np.floor(np.sqrt(np.sqrt(kappa) + 1.0)))
    n_high = n_low + 1.0
    p_low = (n_low**2 - 1.0) + kappa / (n_low**2 - 1.0)
    p_high = (n_high**2 - 1.0) + kappa / (n_high**2 - 1.0)
    use_high = p_high < p_low
    return np.where(use_high, p_high, p_low), np.where(use_high, n_high, n_low)


class ElasticRingModel(SweepModel):
    """A thin ring (long tube) on a Winkler foundation under external pressure, in closed form."""

    name: ClassVar[str] = "elastic_ring"
    version: ClassVar[str] = "1.0"
    summary: ClassVar[str] = "thin ring / long tube on a Winkler foundation under external pressure (plug-in)"
    parameters: ClassVar[tuple[ParameterSpec, ...]] = (
        ParameterSpec("radius", "m", "mid-wall radius R", default=0.5, bounds=(0.0, math.inf),
                      closed=(False, True)),
        ParameterSpec("thickness", "m", "wall thickness t", default=0.01, bounds=(0.0, math.inf),
                      closed=(False, True)),
        ParameterSpec("youngs_modulus", "Pa", "Young's modulus E of the wall", default=1.0e9,
                      bounds=(0.0, math.inf), closed=(False, True)),
        ParameterSpec("poisson_ratio", "1", "Poisson's ratio of the wall", default=0.45, bounds=(0.0, 0.5),
                      closed=(True, False)),
        ParameterSpec("foundation_modulus", "Pa/m", "radial spring modulus k of the surrounding medium",
                      default=0.0, bounds=(0.0, math.inf)),
        ParameterSpec("pressure", "Pa", "applied external pressure p", default=None, bounds=(0.0, math.inf)),
    )
    regimes: ClassVar[tuple[str, ...]] = ("round", "buckled")
    cost_hint: ClassVar[float] = 1e-6

    def __init__(self, *, min_slenderness: float = 10.0) -> None:
        super().__init__()
        self._settings = {"min_slenderness": float(min_slenderness)}

    @property
    def outputs(self) -> tuple[OutputSpec, ...]:
        return (
            OutputSpec("critical_pressure", "Pa", "external pressure at which the ring buckles", symbol="p_cr"),
            OutputSpec("mode_number", "1", "number of full waves n of the buckling mode", symbol="n"),
            OutputSpec("safety_factor", "1", "critical pressure over applied pressure (inf without pressure)"),
        )

    @classmethod
    def sample_inputs(cls) -> dict[str, np.ndarray]:
        return {"radius": np.array([0.5, 0.5, 0.5, 0.05, 0.5, 1.0]),
                "thickness": np.array([0.01, 0.01, 0.01, 0.01, 0.001, 0.02]),
                "youngs_modulus": np.full(6, 1.0e9),
                "poisson_ratio": np.array([0.45, 0.3, 0.45, 0.45, 0.45, 0.0]),
                "foundation_modulus": np.array([0.0, 1.0e6, 0.0, 0.0, 1.0e12, 5.0e4]),
                "pressure": np.array([1000.0, 5000.0, 3000.0, 1000.0, 10.0, 0.0])}

    def solve_batch(self, inputs: Mapping[str, np.ndarray]) -> BatchResult:
        R = np.asarray(inputs["radius"], dtype=float)
        t = np.asarray(inputs["thickness"], dtype=float)
        E = np.asarray(inputs["youngs_modulus"], dtype=float)
        nu = np.asarray(inputs["poisson_ratio"], dtype=float)
        k = np.asarray(inputs["foundation_modulus"], dtype=float)
        p = np.asarray(inputs["pressure"], dtype=float)
        D = E * t**3 / (12.0 * (1.0 - nu**2))
        scaled, n = ring_critical_pressure(k * R**4 / D)
        p_cr = scaled * D / R**3
        buckled = p >= p_cr
        status = np.where(buckled, Status.ok, Status.no_instability).astype(np.uint8)
        thick = (R / t < self._settings["min_slenderness"]) | (np.pi * R / n < 5.0 * t)
        status[thick] = Status.outside_validity
        trusted = status != Status.outside_validity
        regime = np.where(trusted, buckled.astype(np.int8), np.int8(-1)).astype(np.int8)
        safety = np.full_like(p_cr, np.inf)
        np.divide(p_cr, p, out=safety, where=p > 0)
        outputs = {"critical_pressure": p_cr, "mode_number": n, "safety_factor": safety}
        for values in outputs.values():
            values[~trusted] = np.nan
        return BatchResult(outputs=outputs, status=status, regime=regime)
