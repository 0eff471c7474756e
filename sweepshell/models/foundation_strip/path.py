"""Confinement path of one strip: linear onset, fold detection and the state at a confinement.

Non-dimensional throughout (B = K = 1: lengths in ℓ = (B/K)^{1/4}, forces in √(BK)). The
model module maps public parameters to these numbers; this module holds the definitions
the model documents:

* **onset** (first bifurcation of the perfect strip with pinned ends, Timoshenko & Gere
  1961): P_c = (π/L)² min_m (m² + η/m²), η = (L/π)⁴, wavelength 2L/m; the onset
  confinement of an extensible strip is c_on = s P_c (s = √(BK)/A), zero if inextensible.
* **fold criterion**: along the path, the crest contrast (largest crest over the median
  crest, :func:`~sweepshell.models.foundation_strip.elastica.compute_crest_contrast`) first falls
  below ``fold_contrast`` as the imperfection's bump spreads into a wrinkle, then rises
  through it as the wrinkle localises; the fold confinement is that upward crossing
  (linear interpolation in c). If the contrast starts to rise again before it ever fell
  below the threshold (a large imperfection), the strip folds without a wrinkled stage
  and the fold confinement is the confinement of that contrast minimum, the least
  localised state on the path. It is never reported below c_on.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from sweepshell.models.base import Status
from sweepshell.models.foundation_strip.continuation import (
    PathEnd,
    StripPath,
    follow_confinement_path,
    solve_at_confinement,
)
from sweepshell.models.foundation_strip.elastica import (
    build_strip_grid,
    build_strip_problem,
    compute_crest_contrast,
    compute_node_heights,
)

__all__ = ["FoldWatch", "StripOutcome", "compute_pinned_onset", "solve_strip"]


def compute_pinned_onset(length: float | np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return ``(P_c, wavelength)`` of a perfect pinned strip of ``length`` (units of ℓ).

    P_c is in units of √(BK), the wavelength 2L/m in units of ℓ (vectorised).
    """
    L = np.asarray(length, dtype=float)
    eta = (L / np.pi) ** 4
    m = np.maximum(1.0, np.floor(eta ** 0.25))
    m2 = m + 1.0
    p1 = m ** 2 + eta / m ** 2
    p2 = m2 ** 2 + eta / m2 ** 2
    use2 = p2 < p1
    p = np.where(use2, p2, p1) * (np.pi / L) ** 2
    return p, 2.0 * L / np.where(use2, m2, m)


class FoldWatch:
    """Applies the fold criterion to a path as it grows (see module notes)."""

    def __init__(self, threshold: float) -> None:
        self.threshold = threshold
        self.seen_wrinkle = False
        self.fold: float | None = None

    def update(self, path: StripPath) -> None:
        """Look at the newest state of ``path``."""
        if self.fold is not None:
            return
        i = len(path.load) - 1
        now = path.contrast[i]
        if now < self.threshold:
            self.seen_wrinkle = True
            return
        if self.seen_wrinkle and i > 0:
            c0, c1 = path.confinement[i - 1], path.confinement[i]
            before = path.contrast[i - 1]
            f = (self.threshold - before) / (now - before) if math.isfinite(now) and now > before else 1.0
            self.fold = c0 + f * (c1 - c0)
        elif not self.seen_wrinkle and i >= 1 and now > path.contrast[i - 1]:
            self.fold = path.confinement[i - 1]


@dataclass(frozen=True)
class StripOutcome:
    """Per-target answers of one strip (non-dimensional arrays of the targets' shape).

    Attributes
    ----------
    fold_confinement
        First fold on the path at or below max(search limit, target); NaN if none.
    depth
        Largest crest |y| (units of ℓ) where the target state is folded, else NaN.
    status
        :class:`Status` code per target.
    path
        The followed path (for tests and diagnostics).
    """

    fold_confinement: np.ndarray
    depth: np.ndarray
    status: np.ndarray
    path: StripPath


def solve_strip(*, length: float, segments: int, imperfection: float, width: float, cubic: float,
                compliance: float, onset_confinement: float, targets: np.ndarray, fold_contrast: float,
                search_limit: float, tol: float, max_steps: int) -> StripOutcome:
    """Follow one strip's path and answer every requested confinement on it.

    Parameters
    ----------
    length, segments, imperfection, width, cubic, compliance
        Strip definition in units of ℓ (see :func:`build_strip_problem`), s = √(BK)/A.
    onset_confinement
        c_on of the perfect strip.
    targets
        Requested confinements; the path runs at least to the largest, and to the fold
        or ``search_limit``.
    fold_contrast, search_limit, tol, max_steps
        Fold threshold, confinement up to which a fold is searched, Newton tolerance,
        step budget.

    Notes
    -----
    Each target's answer depends only on the path up to max(search_limit, target), and
    the path's steps do not depend on the targets, so answers are the same whatever
    other targets share the path (batch invariance).
    """
    grid = build_strip_grid(length, segments)
    problem = build_strip_problem(grid, imperfection=imperfection, width=width, cubic=cubic)
    watch = FoldWatch(fold_contrast)
    goal = float(np.max(targets))

    def stop(path: StripPath) -> bool:
        watch.update(path)
        c = path.confinement[-1]
        if watch.fold is not None:
            return c >= goal
        return c >= max(goal, search_limit)

    path = follow_confinement_path(problem, compliance=compliance, stop=stop, tol=tol, max_steps=max_steps)
    reached = float(np.max(path.confinement))
    contact = path.confinement[-1] if path.end == PathEnd.contact else math.inf
    n = targets.shape[0]
    fold = np.full(n, np.nan)
    depth = np.full(n, np.nan)
    status = np.full(n, int(Status.ok), dtype=np.uint8)
    for j, c in enumerate(targets.tolist()):
        horizon = max(search_limit, c)
        if c > contact:
            status[j] = Status.outside_validity
            continue
        if watch.fold is not None and watch.fold <= horizon:
            fold[j] = max(watch.fold, onset_confinement)
        elif not (reached >= horizon or c <= contact < math.inf):
            status[j] = Status.not_converged  # the fold search did not finish
            continue
        if math.isnan(fold[j]) or c < fold[j] or c <= onset_confinement:
            continue
        if c > reached:
            status[j] = Status.not_converged
            continue
        X = solve_at_confinement(problem, path, c, compliance=compliance, tol=tol)
        if X is None:
            status[j] = Status.not_converged
            continue
        depth[j] = compute_crest_contrast(compute_node_heights(X[: grid.n], grid.h))[1]
    return StripOutcome(fold_confinement=fold, depth=depth, status=status, path=path)
