"""Linear stability of axisymmetric cap states against ``cos nθ`` modes (shallow-cap model).

Notation of :mod:`sweepshell.models.shallow_cap.model`. About an axisymmetric state with slope and
curvature ``ζ'``, ``ζ''`` of the deformed surface and compressive stress-function slope
``f = −Φ₀'``, the perturbation ``w(x) cos nθ``, ``Φ(x) cos nθ`` satisfies (times x²)::

    x²(∇⁴w − [Φ₀, w] − [Φ, ζ]) = 0,      x²(∇⁴Φ + [ζ, w]) = 0,

with two edge conditions per field (``w = 0``, clamped ``w' = 0`` or pinned ``M_r = 0``;
immovable ``u_r = u_θ = 0`` or sliding ``N_r = N_rθ = 0``). The collocated matrix is

    [[A(z), B(z)], [C(z), S]],

and its stress block ``S`` (in-plane bilaplacian with its edge rows) does not depend on the
state. So ``det = det S · det(A − B S⁻¹ C)`` and the state-dependent factor, an ``M``-square
determinant instead of a ``2M``-square one, carries every sign change along a path. ``S⁻¹`` is
folded into two fixed matrices per wave number and in-plane edge, with a rank-2 correction for
Poisson's ratio (which enters only the immovable edge's rows of ``S``).

Apex-force states are analysed on a finer grid than the state's, as the polynomial interpolant
of the discrete state (:mod:`.stability_grid`, which gives the reasons and measurements).
Pressure and mismatch states keep the state's grid (a sharp-edged mismatch strain's kink is
handled by that grid's node on the edge, see :mod:`sweepshell.numerics.radial_chebyshev`).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from sweepshell.models.shallow_cap.compiled_modes import assemble_reduced_stability, slogdet_in_place
from sweepshell.models.shallow_cap.field_operators import FieldOperators, build_field_operators
from sweepshell.models.shallow_cap.kernels import CapPathProblem
from sweepshell.models.shallow_cap.split_modes import add_sliding_n1_row, sliding_n1_stress
from sweepshell.models.shallow_cap.stability_grid import build_refinement, select_stability_nodes
from sweepshell.numerics.array_cache import cache_arrays
from sweepshell.numerics.radial_chebyshev import build_radial_grid

__all__ = [
    "ModeCoefficients",
    "build_mode_matrices",
    "build_mode_operators",
    "compute_mode_coefficients",
    "compute_mode_determinants",
    "count_unstable_modes",
]

# up to this size the compiled LU is faster than np.linalg.slogdet (benchmarks/bench_small_slogdet.py)
SMALL_LU_NODES = 64


@dataclass(frozen=True)
class ModeOperators:
    """State-independent pieces of the stability matrix of circumferential wave number n.

    The deflection is ``w = x^m v`` with ``m = min(n, 2)``, so the polynomial ``v`` excludes the
    non-smooth ``x^0 cos 2θ``; the stress function is ``Φ = x^m φ`` with ``m = 3`` for n = 1,
    which removes the stress-free gauge ``Φ = x cos θ`` (a linear function, zero stress).
    """

    n: int
    deflection: FieldOperators
    stress: FieldOperators


@cache_arrays(64 * 2**20)
def build_mode_operators(size: int, n: int, stretch: float = 0.0, centre: float = 0.0, split: float = 0.0,
                         outer: int = 0) -> ModeOperators:
    """Return the operators of wave number ``n ≥ 1`` on a half grid of ``size`` nodes (cached).

    ``stretch``, ``centre``, ``split`` and ``outer`` choose the grid (see
    :func:`~sweepshell.models.shallow_cap.grids.get_cap_grid`).
    """
    grid = (stretch, centre, split, outer)
    return ModeOperators(n=n, deflection=build_field_operators(size, n, 1 if n == 1 else 2, *grid),
                         stress=build_field_operators(size, n, 3 if n == 1 else 2, *grid))


def _stress_edge_rows(ops: ModeOperators, nu: float, immovable: bool) -> tuple[np.ndarray, np.ndarray]:
    """Return the two edge rows of the stress block (``u_r = u_θ = 0`` or ``N_r = N_rθ = 0``)."""
    so = ops.stress
    f0, f1, f2, f3 = so.w0[0], so.w1[0], so.w2[0], so.w3_edge
    if not immovable:
        if ops.n == 1:
            # N_r and N_rθ of cos θ both reduce to F' − F: one condition; the other row keeps the
            # interior equation at the second node (see _sliding_n1)
            return f1 - f0, so.bilaplacian[1]
        return f0, f1
    n2 = ops.n * ops.n
    # immovable: ε_θ = 0 and ∂_r(r ε_θ) − ε_r − ∂_θ γ + ζ' w' = 0 (u_r = u_θ = 0 along the edge);
    # the ζ' w' part couples to the deflection and sits in the C block
    e_theta = f2 - nu * (f1 - n2 * f0)
    de_theta = f3 - nu * (f2 - f1 - n2 * f1 + 2 * n2 * f0)
    e_r = (f1 - n2 * f0) - nu * f2
    shear = 2.0 * (1.0 + nu) * n2 * (f1 - f0)
    return e_theta, de_theta - e_r - shear


@dataclass(frozen=True)
class _AssemblyOperators:
    """What the compiled assembly of one wave number takes of its deflection operators (edge rows contiguous)."""

    bilaplacian: np.ndarray
    bracket: np.ndarray
    w2: np.ndarray
    w0_edge: np.ndarray
    w1_edge: np.ndarray
    w2_edge: np.ndarray
    inner_rows: np.ndarray | None


# The operator caches of the scan are bounded by bytes, not entries: a sweep over many grid sizes
# (apex-force caps over λ = 6 … 30 use 17 state sizes, each with its 3× stability grid, times 30
# wave numbers) keeps every size's operators (about 210 MB and 140 MB there) instead of rebuilding
# them in every block, while caps on large grids cannot grow the caches without bound.
@cache_arrays(320 * 2**20)
def _build_assembly_operators(size: int, n: int, stretch: float = 0.0, centre: float = 0.0, split: float = 0.0,
                              outer: int = 0) -> _AssemblyOperators:
    wo = build_mode_operators(size, n, stretch, centre, split, outer).deflection
    return _AssemblyOperators(bilaplacian=wo.bilaplacian, bracket=wo.bracket, w2=wo.w2, w0_edge=wo.w0[0].copy(),
                              w1_edge=wo.w1[0].copy(), w2_edge=wo.w2[0].copy(), inner_rows=wo.inner_rows)


@cache_arrays(256 * 2**20)
def _build_stress_reduction(size: int, n: int, immovable: bool, stretch: float = 0.0, centre: float = 0.0,
                            split: float = 0.0, outer: int = 0) -> np.ndarray:
    """Return ``K₀ = [P₁; P₂] S₀⁻¹`` (``2M × M``), the fixed part of ``B S⁻¹`` at ν = 0 (cached).

    ``B = −(diag(ζ'') P₁ + diag(x ζ') P₂)`` with ``P₁ = x φ' − n² φ``, ``P₂ = φ''`` operators on
    the stress function, zero on the two edge rows. Only the immovable edge rows of ``S`` depend
    on ν, linearly (:func:`_build_poisson_correction`), so one matrix serves every Poisson's ratio.
    """
    s, _ = _stress_block(size, n, immovable, stretch, centre, split, outer)
    so = build_mode_operators(size, n, stretch, centre, split, outer).stress
    p = np.concatenate([so.bracket, so.w2], axis=0)
    k = np.linalg.solve(s.T, p.T).T
    k[[0, 1, size, size + 1]] = 0.0
    k.setflags(write=False)
    return k


def _stress_block(size: int, n: int, immovable: bool, stretch: float, centre: float, split: float,
                  outer: int) -> tuple[np.ndarray, np.ndarray]:
    """Return the stress block ``S₀`` at ν = 0 and its edge rows' ν-derivative ``D`` (``2 × M``)."""
    ops = build_mode_operators(size, n, stretch, centre, split, outer)
    so = ops.stress
    s = so.bilaplacian.copy()
    s[0], s[1] = _stress_edge_rows(ops, 0.0, immovable)
    if split > 0.0 and n == 1 and not immovable and so.inner_rows is not None:
        sliding_n1_stress(s, so.bilaplacian, so.inner_rows, outer)  # see split_modes
    return s, np.stack(_stress_edge_rows(ops, 1.0, immovable)) - s[:2]


@lru_cache(maxsize=4096)
def _build_poisson_correction(size: int, n: int, nu: float, stretch: float = 0.0, centre: float = 0.0,
                              split: float = 0.0, outer: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """Return ``L`` (``2M × 2``) and ``R`` (``2 × M``) with ``[P₁; P₂] S_ν⁻¹ = K₀ − L R``, immovable edge (cached).

    ``S_ν = S₀ + E ν D`` (``E``: the two edge rows) is a rank-2 change, so by the Woodbury identity
    ``S_ν⁻¹ = S₀⁻¹ − S₀⁻¹E (I + ν D S₀⁻¹E)⁻¹ ν D S₀⁻¹``: ``L = K₀E (I + ν D S₀⁻¹E)⁻¹``, ``R = ν D S₀⁻¹``.
    """
    s, d = _stress_block(size, n, True, stretch, centre, split, outer)
    s_inv_e = np.linalg.solve(s, np.eye(size)[:, :2])
    right = nu * np.linalg.solve(s.T, d.T).T
    left = _build_stress_reduction(size, n, True, stretch, centre, split, outer)[:, :2] @ np.linalg.inv(
        np.eye(2) + nu * (d @ s_inv_e))
    left.setflags(write=False)
    right.setflags(write=False)
    return left, right


@dataclass(frozen=True)
class ModeCoefficients:
    """State-dependent coefficients of the stability operators, ``(k, M)`` each.

    ``f``, ``df``: compressive stress-function slope ``−Φ₀'`` and its derivative; ``zeta1``,
    ``zeta2``: slope and curvature of the deformed surface; plus the point's ``nu``,
    ``clamped`` and ``immovable`` flags ``(k,)``.
    """

    f: np.ndarray
    df: np.ndarray
    zeta1: np.ndarray
    zeta2: np.ndarray
    nu: np.ndarray
    clamped: np.ndarray
    immovable: np.ndarray


def compute_mode_coefficients(problem: CapPathProblem, z: np.ndarray, idx: np.ndarray,
                              nodes: int | None = None, smooth: bool = False) -> ModeCoefficients:
    """Return the stability coefficients of axisymmetric states ``z`` ``(k, 2M+1)``.

    Parameters
    ----------
    nodes
        Node count of the stability grid (default: the state's ``M``). On another grid the
        coefficients are those of the polynomial interpolant of the state's slope ``ζ'`` and
        stress slope ``f`` (their derivatives exact), which is how apex-force states are
        analysed (:func:`select_stability_nodes`); that path ignores the mismatch strain's
        exact stress slope, so it is meant for pressure and apex-force states.
    smooth
        Filter the interpolant (``APEX_SCREEN_FILTER``; the screening grid of apex-force scans).
    """
    g = problem.grid
    x = g.x
    lam2 = problem.lam[idx] ** 2
    y, _, _, p = problem.split(z, idx)
    fs, dfs_eigen = problem.total_stress(z, idx)
    kap = problem.kappa[idx]
    ybar = y + (kap * p)[:, None] * problem.sigma[None, :]
    imp = problem.imperfection[idx]
    if nodes is not None and (nodes != g.size or smooth):
        e, de = build_refinement(g.size, int(nodes), g.stretch, g.centre, smooth)
        slope = ybar - (x[None, :] - imp)
        return ModeCoefficients(
            f=lam2[:, None] * (fs @ e.T), df=lam2[:, None] * (fs @ de.T),
            zeta1=lam2[:, None] * (slope @ e.T), zeta2=lam2[:, None] * (slope @ de.T),
            nu=problem.nu[idx], clamped=problem.clamped[idx], immovable=problem.immovable[idx])
    # the mismatch strain's stress F_p is kinked at the region's edge: its slope is exact, not
    # a derivative of the interpolant
    dfs = (z[:, g.size:2 * g.size] @ g.d1[-1].T) + dfs_eigen
    d1t = g.d1[-1].T
    dybar = y @ d1t + (kap * p)[:, None] * problem.dsigma[None, :]
    dimp = imp @ d1t
    return ModeCoefficients(
        f=lam2[:, None] * fs, df=lam2[:, None] * dfs,
        zeta1=lam2[:, None] * (-(x[None, :] - imp) + ybar),
        zeta2=lam2[:, None] * (-(1.0 - dimp) + dybar),
        nu=problem.nu[idx], clamped=problem.clamped[idx], immovable=problem.immovable[idx])


def _deflection_blocks(ops: ModeOperators, x: np.ndarray, co: ModeCoefficients) -> tuple[np.ndarray, np.ndarray]:
    """Return the ``A`` and ``C`` blocks ``(k, M, M)`` with their edge rows."""
    wo = ops.deflection
    a = wo.bilaplacian + co.df[:, :, None] * wo.bracket + (x * co.f)[:, :, None] * wo.w2
    a[:, 0] = wo.w0[0]
    a[:, 1] = np.where(co.clamped[:, None], wo.w1[0][None, :], wo.w2[0][None, :] + co.nu[:, None] * wo.w1[0][None, :])
    c = co.zeta2[:, :, None] * wo.bracket + (x * co.zeta1)[:, :, None] * wo.w2
    c[:, 0] = 0.0
    # sliding n = 1 has a single in-plane edge condition: row 1 stays the interior equation
    keep = ~co.immovable if ops.n == 1 else np.zeros_like(co.immovable)
    c[:, 1] = np.where(co.immovable[:, None], co.zeta1[:, :1] * wo.w1[0][None, :],
                       np.where(keep[:, None], c[:, 1], 0.0))
    return a, c


def build_mode_matrices(ops: ModeOperators, x: np.ndarray, co: ModeCoefficients) -> np.ndarray:
    """Return the full ``(k, 2M, 2M)`` stability matrices of wave number ``ops.n`` (for tests)."""
    k, m = co.f.shape
    so = ops.stress
    out = np.zeros((k, 2 * m, 2 * m))
    out[:, :m, :m], out[:, m:, :m] = _deflection_blocks(ops, x, co)
    out[:, :m, m:] = -(co.zeta2[:, :, None] * so.bracket + (x * co.zeta1)[:, :, None] * so.w2)
    out[:, :2, m:] = 0.0
    out[:, m:, m:] = so.bilaplacian
    for i in range(k):
        out[i, m, m:], out[i, m + 1, m:] = _stress_edge_rows(ops, float(co.nu[i]), bool(co.immovable[i]))
    return out


def _reduced_matrices(problem: CapPathProblem, co: ModeCoefficients, modes: np.ndarray):  # type: ignore[no-untyped-def]
    """Yield ``(j, n, A − B S⁻¹ C)`` ``(k, M, M)`` for each wave number of ``modes`` (on the grid of ``co``)."""
    g = problem.grid
    m = co.f.shape[1]
    # a finer stability grid (apex forces) is a single grid of the same map
    key = (g.stretch, g.centre, g.split, g.interface) if m == problem.size else (g.stretch, g.centre, 0.0, 0)
    x = g.x if m == problem.size else build_radial_grid(m, g.stretch, g.centre).x
    # sliding edges' stress blocks do not depend on ν: those states share one group
    groups = [(nu if im else 0.0, im) for nu, im in zip(co.nu.tolist(), co.immovable.tolist(), strict=True)]
    unique = sorted(set(groups))
    group = np.array([unique.index(u) for u in groups], dtype=np.int64) if len(unique) > 1 \
        else np.zeros(len(groups), dtype=np.int64)
    corrected = np.array([im and nu != 0.0 for nu, im in unique])
    f, df, zeta1, zeta2 = (np.ascontiguousarray(v) for v in (co.f, co.df, co.zeta1, co.zeta2))
    for j, n in enumerate(modes):
        wo = _build_assembly_operators(m, int(n), *key)
        bases = {im: _build_stress_reduction(m, int(n), im, *key) for im in {im for _, im in unique}}
        left, right = np.zeros((len(unique), 2 * m, 2)), np.zeros((len(unique), 2, m))
        for u in np.nonzero(corrected)[0]:
            left[u], right[u] = _build_poisson_correction(m, int(n), unique[u][0], *key)
        base_sliding = bases[False] if False in bases else bases[True]
        base_immovable = bases.get(True, base_sliding)
        a = assemble_reduced_stability(wo.bilaplacian, wo.bracket, wo.w2, wo.w0_edge, wo.w1_edge,
                                       wo.w2_edge, x, base_sliding, base_immovable, left, right, corrected,
                                       group, f, df, zeta1, zeta2, co.nu.astype(float), co.clamped.astype(bool),
                                       co.immovable.astype(bool), int(n) == 1 and not key[2])
        sliding = np.nonzero(~co.immovable)[0]
        if key[2] and n == 1 and wo.inner_rows is not None and sliding.size:
            part = a[sliding]
            add_sliding_n1_row(part, wo.inner_rows, x, key[3], base_sliding[None], co.zeta1[sliding],
                               co.zeta2[sliding])
            a[sliding] = part
        yield j, int(n), a


def compute_mode_determinants(problem: CapPathProblem, z: np.ndarray, idx: np.ndarray, modes: np.ndarray,
                              coefficients: ModeCoefficients | None = None,
                              screen: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Return ``(sign, log|det|)`` of the reduced stability matrices, shape ``(k, len(modes))``.

    The determinant is that of ``A − B S⁻¹ C``: the full one divided by the state-independent
    ``det S``, so its sign changes and log-differences along a path are those of the full one.
    Each state is analysed on its :func:`select_stability_nodes` grid (fixed per cap, so
    determinants of one cap's states stay comparable).

    Parameters
    ----------
    z
        ``(k, 2M+1)`` axisymmetric states.
    idx
        ``(k,)`` problem indices of the states.
    modes
        Wave numbers ``n ≥ 1``.
    coefficients
        Precomputed :func:`compute_mode_coefficients` of the same states, if at hand (their
        grid is used for every state).
    screen
        Apex-force states on the screening grid (:func:`select_stability_nodes`, filtered
        interpolant) instead of the stability grid: an approximation that only tells the scan
        where to look (:mod:`.scan`).
    """
    sign = np.empty((z.shape[0], len(modes)))
    logdet = np.empty_like(sign)
    for rows, co in _group_coefficients(problem, z, idx, coefficients, screen):
        for j, _, a in _reduced_matrices(problem, co, modes):
            small = a.shape[1] <= SMALL_LU_NODES
            sign[rows, j], logdet[rows, j] = slogdet_in_place(a) if small else np.linalg.slogdet(a)
    return sign, logdet


def _group_coefficients(problem: CapPathProblem, z: np.ndarray, idx: np.ndarray,
                        coefficients: ModeCoefficients | None = None,
                        screen: bool = False):  # type: ignore[no-untyped-def]
    """Yield ``(rows, coefficients)`` per stability grid of the states."""
    if coefficients is not None:
        yield np.arange(z.shape[0]), coefficients
        return
    nodes = select_stability_nodes(problem, idx, screen)
    for size in np.unique(nodes):
        rows = np.nonzero(nodes == size)[0]
        yield rows, compute_mode_coefficients(problem, z[rows], idx[rows], int(size), screen)


def count_unstable_modes(problem: CapPathProblem, z: np.ndarray, idx: np.ndarray, modes: np.ndarray) -> np.ndarray:
    """Return how many eigenvalues of each ``cos nθ`` stability operator are negative, ``(k, len(modes))``.

    The eigenproblem is ``x²(L_n w) = σ x² w`` with ``L_n`` the linearised operator (stress
    function eliminated); its two edge rows are eliminated exactly, which leaves a standard
    eigenproblem on the interior nodes. A count, unlike a determinant's sign, also sees two
    eigenvalues of one wave number that became negative together. Each state is analysed on
    its :func:`select_stability_nodes` grid.
    """
    out = np.zeros((z.shape[0], len(modes)), dtype=int)
    for rows, co in _group_coefficients(problem, z, idx):
        size, g = co.f.shape[1], problem.grid
        x = g.x if size == problem.size else build_radial_grid(size, g.stretch, g.centre).x
        # rows of edge and interface conditions (a two-domain grid's ρ and its neighbours) are eliminated
        fixed = [0, 1, g.interface - 1, g.interface, g.interface + 1] if g.split and size == problem.size else [0, 1]
        keep = np.setdiff1d(np.arange(size), fixed)
        for j, n, a in _reduced_matrices(problem, co, modes):
            edge, edge_in = a[:, fixed][:, :, fixed], a[:, fixed][:, :, keep]
            inner = a[:, keep][:, :, keep] - a[:, keep][:, :, fixed] @ np.linalg.solve(edge, edge_in)
            mass = x[keep] ** ((1 if n == 1 else 2) + 2)
            sigma = np.linalg.eigvals(inner / mass[None, :, None])
            out[rows, j] = np.count_nonzero(sigma.real < 0.0, axis=1)
    return out
