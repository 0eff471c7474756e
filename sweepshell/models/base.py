"""The model seam: how a buckling model declares itself and solves a batch of points.

A model is a class with a registry ``name``, a ``version``, declared ``parameters``,
``outputs`` and ``regimes``, numerical settings as keyword-only constructor arguments, and
one method, :meth:`SweepModel.solve_batch`, vectorised over n points.

This module imports numpy only: models never touch xarray, zarr, dask or hydra.
"""

from __future__ import annotations

import abc
import enum
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np

from sweepshell.errors import ParameterError

__all__ = [
    "FINAL_STATUSES",
    "TRUSTED_STATUSES",
    "BatchResult",
    "OutputSpec",
    "ParameterSpec",
    "Status",
    "SweepModel",
]


class Status(enum.IntEnum):
    """Per-point status codes of the ledger (stored as ``uint8``)."""

    pending = 0
    ok = 1
    not_converged = 2
    no_instability = 3
    outside_validity = 4
    failed = 5


#: statuses after which a point is never recomputed
FINAL_STATUSES = frozenset(s for s in Status if s is not Status.pending)
#: statuses whose values can be trusted
TRUSTED_STATUSES = frozenset({Status.ok, Status.no_instability})


@dataclass(frozen=True)
class ParameterSpec:
    """One model parameter.

    Parameters
    ----------
    name
        Public snake_case name (``poisson_ratio``).
    units
        Units as a string (``"1"`` for dimensionless, ``"Pa"``, ``"m"``).
    doc
        One line of meaning.
    default
        Value used when a sweep gives neither a fixed value nor an axis; ``None`` means
        the parameter is required.
    bounds
        ``(low, high)`` for numbers; either may be ``-inf``/``inf``.
    closed
        Whether each bound is included, ``(low_included, high_included)``.
    choices
        For categorical parameters, the allowed names; ``bounds`` is then ignored.
    integer
        Whether only whole numbers are allowed.
    admits_infinity
        Whether an infinite bound, where ``closed``, is itself a value: some parameters mean
        something at infinity (an inextensible strip, a flat section); for every other
        parameter a non-finite value is refused.
    """

    name: str
    units: str
    doc: str
    default: float | str | None = None
    bounds: tuple[float, float] = (-math.inf, math.inf)
    closed: tuple[bool, bool] = (True, True)
    choices: tuple[str, ...] | None = None
    integer: bool = False
    admits_infinity: bool = False
    symbol: str = ""

    @property
    def is_categorical(self) -> bool:
        return self.choices is not None

    def describe_allowed(self) -> str:
        """Return the allowed range in words, e.g. ``[-1, 0.5)`` or ``one of clamped, pinned``."""
        if self.choices is not None:
            return "one of " + ", ".join(self.choices)
        lo, hi = self.bounds
        left = "[" if self.closed[0] and (math.isfinite(lo) or self.admits_infinity) else "("
        right = "]" if self.closed[1] and (math.isfinite(hi) or self.admits_infinity) else ")"
        text = f"{left}{_fmt(lo)}, {_fmt(hi)}{right}"
        return text + (" (whole numbers)" if self.integer else "")

    def check_values(self, values: Any, *, where: str) -> None:
        """Raise :class:`ParameterError` unless every value is allowed.

        Parameters
        ----------
        values
            A scalar or a sequence of values for this parameter.
        where
            How the user gave the value (``"fixed.poisson_ratio"``, ``"axes.edge"``), for
            the message.
        """
        items = list(values) if isinstance(values, (list, tuple, np.ndarray)) else [values]
        for v in items:
            self._check_one(v, where)

    def _check_one(self, v: Any, where: str) -> None:
        if self.choices is not None:
            if not isinstance(v, str) or v not in self.choices:
                raise ParameterError(
                    f"{where}={v!r} is not allowed; use {self.describe_allowed()}",
                    field=where, value=v, allowed=self.describe_allowed())
            return
        if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)):
            raise ParameterError(
                f"{where}={v!r} is not a number; use a number in {self.describe_allowed()}",
                field=where, value=v, allowed=self.describe_allowed())
        x = float(v)
        lo, hi = self.bounds
        ok = math.isfinite(x) or (self.admits_infinity and x in (lo, hi))
        ok = ok and (x > lo or (self.closed[0] and x == lo)) and (x < hi or (self.closed[1] and x == hi))
        if not ok:
            fix = _suggest_fix(self, x)
            raise ParameterError(
                f"{where}={_fmt(x)} is outside {self.describe_allowed()}; {fix}",
                field=where, value=x, allowed=self.describe_allowed())
        if self.integer and x != round(x):
            raise ParameterError(
                f"{where}={_fmt(x)} is not a whole number; use an integer in {self.describe_allowed()}",
                field=where, value=x, allowed=self.describe_allowed())


def _fmt(x: float) -> str:
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return f"{x:g}"


def _suggest_fix(spec: ParameterSpec, x: float) -> str:
    lo, hi = spec.bounds
    if not math.isfinite(x):
        return f"use a finite value in {spec.describe_allowed()}"
    if x <= lo:
        return f"use a value {'at or ' if spec.closed[0] else ''}above {_fmt(lo)}"
    return f"use a value {'at or ' if spec.closed[1] else ''}below {_fmt(hi)}"


@dataclass(frozen=True)
class OutputSpec:
    """One model output.

    Parameters
    ----------
    name
        Public snake_case name (``critical_load``).
    units
        Units as a string.
    doc
        One line of meaning (used as ``long_name`` in the store).
    dims
        Extra dimensions after the sweep axes, by name; their lengths come from
        :attr:`SweepModel.extra_dims`.
    dtype
        Always a floating dtype: a point without a value holds NaN.
    nullable
        Whether the output may be NaN at a point whose status is trusted (its docstring
        then says what NaN means there, e.g. "no fold within the confinement range").
    """

    name: str
    units: str
    doc: str
    dims: tuple[str, ...] = ()
    dtype: str = "float64"
    symbol: str = ""
    nullable: bool = False


@dataclass(frozen=True)
class BatchResult:
    """What :meth:`SweepModel.solve_batch` returns for n points.

    Attributes
    ----------
    outputs
        Output name → array of shape ``(n, *extra)``; NaN exactly where ``status`` is not
        trusted (see :data:`TRUSTED_STATUSES`).
    status
        ``uint8`` array of shape ``(n,)`` with :class:`Status` codes, never ``pending``.
    regime
        ``int8`` array of shape ``(n,)``: index into the model's ``regimes``, ``-1`` where
        the status is not trusted.
    """

    outputs: dict[str, np.ndarray]
    status: np.ndarray
    regime: np.ndarray
    diagnostics: dict[str, Any] = field(default_factory=dict)


class SweepModel(abc.ABC):
    """Base class of every model; subclasses declare and implement :meth:`solve_batch`.

    Subclasses set the class attributes below and accept their numerical settings as
    keyword-only constructor arguments with defaults, stored by :meth:`settings`.
    """

    name: ClassVar[str]
    version: ClassVar[str]
    summary: ClassVar[str] = ""
    parameters: ClassVar[tuple[ParameterSpec, ...]]
    regimes: ClassVar[tuple[str, ...]]
    #: rough wall time of one point on one core at default settings, seconds
    cost_hint: ClassVar[float] = 1e-3
    #: whether the outputs include critical loads (the CLI prints a caution then)
    reports_critical_loads: ClassVar[bool] = True
    #: categorical parameter → choice → parameters that only mean something with that choice
    #: (figure titles leave the others out)
    parameter_groups: ClassVar[Mapping[str, Mapping[str, tuple[str, ...]]]] = {}

    def __init__(self, **settings: Any) -> None:
        if settings:
            raise ParameterError(
                f"{type(self).__name__} has no settings {sorted(settings)}; remove them",
                field="settings", value=sorted(settings))
        self._settings: dict[str, Any] = {}

    # -- declarations -----------------------------------------------------------------
    @property
    @abc.abstractmethod
    def outputs(self) -> tuple[OutputSpec, ...]:
        """The outputs of this model (may depend on settings, e.g. a path length)."""

    @property
    def extra_dims(self) -> dict[str, int]:
        """Length of each extra output dimension."""
        return {}

    def extra_coords(self) -> dict[str, np.ndarray]:
        """Optional coordinate values of extra output dimensions."""
        return {}

    def estimated_cost(self) -> float:
        """Seconds per point on one core with this instance's settings (sizes blocks); ``cost_hint`` by default."""
        return float(self.cost_hint)

    @property
    def settings(self) -> dict[str, Any]:
        """The numerical settings this instance was built with (plain Python types)."""
        return dict(self._settings)

    @classmethod
    def get_parameter(cls, name: str) -> ParameterSpec:
        for p in cls.parameters:
            if p.name == name:
                return p
        raise ParameterError(
            f"model {cls.name!r} has no parameter {name!r}; use one of "
            + ", ".join(p.name for p in cls.parameters),
            field=name, value=name)

    @classmethod
    def check_combination(cls, fixed: Mapping[str, Any], axes: Mapping[str, np.ndarray]) -> None:
        """Raise :class:`ParameterError` for combinations no point could satisfy.

        Called once at plan time, after each value was checked against its bounds.
        """
        return None

    @classmethod
    def kernels_to_compile(cls) -> bool:
        """Whether the first batch in this installation compiles the model's kernels (seconds, once).

        The progress display says so instead of extrapolating an ETA from the compile time.
        """
        return False

    @classmethod
    def study_parameters(cls, fixed: Mapping[str, Any]) -> tuple[str, ...]:
        """Return the fixed parameters that define a study, in the order a figure title names them.

        Categorical parameters come first, then numbers, each in declaration order; values
        that are ``None``/NaN (not given) are left out, and so are parameters that
        :attr:`parameter_groups` ties to another choice of a fixed categorical parameter.
        """
        skip: set[str] = set()
        for chooser, groups in cls.parameter_groups.items():
            if chooser in fixed:
                for choice, names in groups.items():
                    if fixed[chooser] != choice:
                        skip.update(names)

        def given(name: str) -> bool:
            v = fixed.get(name)
            return v is not None and not (isinstance(v, float) and math.isnan(v)) and name not in skip

        ordered = [p.name for p in cls.parameters if p.choices] + [p.name for p in cls.parameters if not p.choices]
        return tuple(name for name in ordered if name in fixed and given(name))

    @classmethod
    def sample_inputs(cls) -> dict[str, np.ndarray]:
        """Return a few representative points for the contract test suite.

        The default cycles categorical parameters through their choices and keeps every
        other parameter at its default; models override it with cheap, telling points.
        """
        n = max([len(p.choices) for p in cls.parameters if p.choices] + [2])
        out: dict[str, np.ndarray] = {}
        for p in cls.parameters:
            if p.choices is not None:
                out[p.name] = np.array([p.choices[i % len(p.choices)] for i in range(n)])
            else:
                out[p.name] = np.full(n, np.nan if p.default is None else float(p.default))
        return out

    # -- work ---------------------------------------------------------------------------
    @abc.abstractmethod
    def solve_batch(self, inputs: Mapping[str, np.ndarray]) -> BatchResult:
        """Solve n points at once.

        Parameters
        ----------
        inputs
            Parameter name → 1-D array of length n (floats, or strings for categorical
            parameters). Every declared parameter is present.

        Returns
        -------
        BatchResult
            Outputs, status and regime per point. Deterministic and batch-invariant.
        """

    # -- helpers for subclasses ---------------------------------------------------------
    def empty_result(self, n: int) -> BatchResult:
        """Return an all-NaN result of n points with status ``failed`` and regime ``-1``."""
        dims = self.extra_dims
        outputs = {o.name: np.full((n, *(dims[d] for d in o.dims)), np.nan, dtype=o.dtype)
                   for o in self.outputs}
        return BatchResult(outputs=outputs, status=np.full(n, Status.failed, dtype=np.uint8),
                           regime=np.full(n, -1, dtype=np.int8))

    def describe(self) -> dict[str, Any]:
        """Return a JSON-ready description (used by ``sweepshell models --json``)."""
        def param(p: ParameterSpec) -> dict[str, Any]:
            default = _json_num(p.default) if isinstance(p.default, float) else p.default
            d: dict[str, Any] = {"name": p.name, "units": p.units, "doc": p.doc,
                                 "default": default, "allowed": p.describe_allowed()}
            if p.choices is not None:
                d["choices"] = list(p.choices)
            else:
                d["bounds"] = [_json_num(p.bounds[0]), _json_num(p.bounds[1])]
            return d

        return {
            "name": self.name,
            "version": self.version,
            "summary": self.summary,
            "parameters": [param(p) for p in self.parameters],
            "outputs": [{"name": o.name, "units": o.units, "doc": o.doc, "dims": list(o.dims),
                         "dtype": o.dtype} for o in self.outputs],
            "regimes": list(self.regimes),
            "settings": self.settings,
            "extra_dims": self.extra_dims,
        }


def _json_num(x: float) -> float | str | None:
    """Return ``x`` as strict JSON: NaN (not given) becomes null, infinities become strings."""
    if math.isnan(x):
        return None
    return x if math.isfinite(x) else ("inf" if x > 0 else "-inf")
