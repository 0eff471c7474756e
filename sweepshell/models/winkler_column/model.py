"""A cheap analytic model for engine tests and benchmarks: ``winkler_column``.

A pinned column of bending stiffness B and length L on a Winkler foundation of stiffness K
buckles at (Timoshenko & Gere 1961, Sec. 2.10)

    P_cr L² / (π² B) = min over m ≥ 1 of (m² + η/m²),    η = K L⁴ / (π⁴ B),

with m half-waves; the mode switches from m to m+1 at η = m²(m+1)². The model reports the
normalised critical load, the mode number, the margin against an applied load ratio and a
short sampled load path, so that every feature of the model seam (categorical
parameters, extra output dimensions, every status code) is exercised cheaply.

Parameters (public names → symbols): ``stiffness_ratio`` η, ``load_ratio`` applied load
over π²B/L², ``end`` (``pinned`` only as physics; ``weak`` halves the result, a made-up
variant for categorical tests).

Status rules (for tests): η above ``validity_limit`` → ``outside_validity``; a load ratio
exactly equal to ``fail_at`` (setting, None = never) → ``failed``; a load ratio below the
critical load → ``no_instability`` with regime ``stable``.
"""

from __future__ import annotations

import math
import time
from collections.abc import Mapping
from typing import ClassVar

import numpy as np

from sweepshell.models.base import BatchResult, OutputSpec, ParameterSpec, Status, SweepModel

__all__ = ["WinklerColumnModel", "winkler_column_critical"]


def winkler_column_critical(eta: np.ndarray, m_max: int = 200) -> tuple[np.ndarray, np.ndarray]:
    """Return ``(P_cr L²/(π² B), m)`` for foundation parameters ``eta`` (vectorised)."""
    eta = np.asarray(eta, dtype=float)
    m = np.maximum(1.0, np.floor(eta ** 0.25))
    # the optimum is m or m+1 around eta^(1/4)
    m2 = m + 1.0
    p1 = m ** 2 + eta / m ** 2
    p2 = m2 ** 2 + eta / m2 ** 2
    use2 = p2 < p1
    return np.where(use2, p2, p1), np.where(use2, m2, m)


class WinklerColumnModel(SweepModel):
    """Closed-form pinned column on a Winkler foundation (cheap; for tests and benchmarks)."""

    name: ClassVar[str] = "winkler_column"
    version: ClassVar[str] = "1.0"
    summary: ClassVar[str] = "pinned column on a Winkler foundation, closed form (test model)"
    parameters: ClassVar[tuple[ParameterSpec, ...]] = (
        ParameterSpec("stiffness_ratio", "1", "foundation parameter eta = K L^4/(pi^4 B)",
                      default=0.0, bounds=(0.0, math.inf), symbol="η"),
        ParameterSpec("load_ratio", "1", "applied axial load over the Euler load pi^2 B/L^2",
                      default=None, bounds=(0.0, math.inf), symbol="P/P_E"),
        ParameterSpec("end", "1", "end condition", default="pinned", choices=("pinned", "weak")),
    )
    regimes: ClassVar[tuple[str, ...]] = ("stable", "buckled")
    cost_hint: ClassVar[float] = 2e-6

    def __init__(self, *, path_samples: int = 8, validity_limit: float = 1e6,
                 fail_at: float | None = None, work_seconds: float = 0.0) -> None:
        super().__init__()
        self._settings = {"path_samples": int(path_samples), "validity_limit": float(validity_limit),
                          "fail_at": None if fail_at is None else float(fail_at),
                          "work_seconds": float(work_seconds)}

    def estimated_cost(self) -> float:
        return self.cost_hint + self._settings["work_seconds"]

    @classmethod
    def sample_inputs(cls) -> dict[str, np.ndarray]:
        return {"stiffness_ratio": np.array([0.0, 1.0, 10.0, 100.0, 1000.0, 2e6]),
                "load_ratio": np.array([1.0, 0.5, 30.0, 30.0, 1000.0, 1.0]),
                "end": np.array(["pinned", "weak", "pinned", "weak", "pinned", "pinned"])}

    @property
    def outputs(self) -> tuple[OutputSpec, ...]:
        return (
            OutputSpec("critical_load", "1", "critical load over the Euler load", symbol="P_cr/P_E"),
            OutputSpec("mode_number", "1", "number of half-waves of the critical mode", symbol="m"),
            OutputSpec("margin", "1", "critical load over applied load"),
            OutputSpec("load_path", "1", "load ratio sampled from zero to the critical load",
                       dims=("path_sample",)),
        )

    @property
    def extra_dims(self) -> dict[str, int]:
        return {"path_sample": self._settings["path_samples"]}

    def solve_batch(self, inputs: Mapping[str, np.ndarray]) -> BatchResult:
        eta = np.asarray(inputs["stiffness_ratio"], dtype=float)
        load = np.asarray(inputs["load_ratio"], dtype=float)
        end = np.asarray(inputs["end"]).astype(str)
        n = eta.shape[0]
        s = self._settings
        if s["work_seconds"] > 0:
            _spin(s["work_seconds"] * n)
        pcr, m = winkler_column_critical(eta)
        pcr = np.where(end == "weak", 0.5 * pcr, pcr)
        status = np.where(load >= pcr, Status.ok, Status.no_instability).astype(np.uint8)
        status[eta > s["validity_limit"]] = Status.outside_validity
        if s["fail_at"] is not None:
            status[load == s["fail_at"]] = Status.failed
        regime = np.where(load >= pcr, 1, 0).astype(np.int8)
        trusted = (status == Status.ok) | (status == Status.no_instability)
        regime[~trusted] = -1
        k = s["path_samples"]
        path = pcr[:, None] * np.linspace(0.0, 1.0, k)[None, :]
        with np.errstate(divide="ignore", invalid="ignore"):
            margin = np.where(load > 0, pcr / np.where(load > 0, load, 1.0), np.inf)
        out = {"critical_load": pcr, "mode_number": m, "margin": margin, "load_path": path}
        for v in out.values():
            v[~trusted] = np.nan
        return BatchResult(outputs=out, status=status, regime=regime)


def _spin(seconds: float) -> None:
    """Burn CPU for ``seconds`` (simulates an expensive model in benchmarks)."""
    end = time.perf_counter() + seconds
    x = 0.0
    while time.perf_counter() < end:
        x = math.sin(x + 1.0)
