"""Measure and classify wrinkle patterns of a periodic height field.

The classification rule (applied to the height w on a square periodic n × n grid):

1. **flat** when the rms height (about its mean) is at most ``flat_amplitude``.
2. Spectrum: power over unique wavevector pairs ±k. With k* the wavenumber of the
   strongest pair, the *fundamental band* holds the pairs with ``0.75 k* ≤ |k| ≤ 1.3 k*``
   (this leaves out the harmonics at √2 k* and 2k* that the nonlinearity generates).
   p₁ ≥ p₂ ≥ … are the shares of the band power of the strongest pairs.
3. Height field: the structure tensor J = ⟨∇w ⊗ ∇w⟩ smoothed by a Gaussian of standard
   deviation 0.4 λ* (λ* = 2π/k̄, k̄ the mean band wavenumber). Its *local coherence*
   ``|J_dev|/tr J`` is 1 where w is locally a straight wave and 0 where it is locally
   isotropic (two crossed waves). Its direction gives the local wavevector direction.
4. **stripes** when p₁ ≥ 0.8 (one straight wave carries the pattern).
5. **checkerboard** when the weighted mean local coherence is below 0.5 and p₁ + p₂ ≥ 0.6
   (two crossed waves superposed everywhere).
6. **herringbone** when the pattern is locally striped and its local directions
   concentrate in at most two families: at least 0.9 of the coherence-weighted direction
   histogram lies within ±10° of its two strongest directions (straight segments joined
   at kinks: zigzags, and their small-amplitude form, two oblique waves).
7. **labyrinth** otherwise (ridges meandering through all directions).

Thresholds are fixed here (they are part of the model version) and tested on synthetic
fields in ``tests/models/foundation_sheet/test_patterns.py``.

Pattern names follow Audoly & Boudaoud 2008 (JMPS 56:2401) and Cai, Breid, Crosby, Suo &
Hutchinson 2011 (JMPS 59:1094).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "PATTERN_NAMES",
    "PatternMeasures",
    "classify_pattern",
    "measure_pattern",
    "measure_peak_amplitude",
]

#: regime labels, in the order used for codes
PATTERN_NAMES = ("flat", "stripes", "checkerboard", "herringbone", "labyrinth")

BAND_LOW, BAND_HIGH = 0.75, 1.3
STRIPE_SHARE = 0.8
CHECKERBOARD_COHERENCE, CHECKERBOARD_SHARE = 0.5, 0.6
HERRINGBONE_CONCENTRATION, HERRINGBONE_WINDOW_DEG = 0.9, 10.0
SMOOTHING_WAVELENGTHS = 0.4
DIRECTION_BINS = 72


@dataclass(frozen=True)
class PatternMeasures:
    """Spectral measures of a height field (see the module docstring).

    Attributes
    ----------
    rms
        Rms height about the mean (units of the field).
    wavenumber
        Power-weighted mean wavenumber of the fundamental band, in cycles per cell side;
        NaN for a field without power.
    direction
        Direction of the strongest pair, radians in [0, π) from the x axis.
    shares
        Band-power shares of the strongest pairs, descending (at most 4).
    pair_angle
        Angle between the two strongest pairs, degrees in [0, 90].
    order
        Orientational order S₂ = |Σ p e^{2iθ}| of the band power, in [0, 1].
    coherence
        Weighted mean local coherence of the smoothed structure tensor, in [0, 1].
    concentration
        Share of the local-direction histogram within ±10° of its two strongest
        directions, in [0, 1].
    """

    rms: float
    wavenumber: float
    direction: float
    shares: tuple[float, ...]
    pair_angle: float
    order: float
    coherence: float
    concentration: float


def measure_pattern(height: np.ndarray) -> PatternMeasures:
    """Return the spectral measures of a periodic height field.

    Parameters
    ----------
    height
        Real square array (n × n), indexed ``[y, x]``, periodic over one cell.
    """
    h = np.asarray(height, dtype=float)
    n = h.shape[0]
    rms = float(np.sqrt(np.mean((h - h.mean()) ** 2)))
    F = np.fft.fft2(h) / h.size
    m = np.fft.fftfreq(n, 1.0 / n)
    my, mx = np.meshgrid(m, m, indexing="ij")
    # one representative per ±k pair (right half plane); Nyquist lines have no partner
    unique = ((mx > 0) | ((mx == 0) & (my > 0))) & (my != -n / 2)
    power = 2.0 * np.abs(F[unique]) ** 2
    kx, ky = mx[unique], my[unique]
    kk = np.hypot(kx, ky)
    if not np.any(power > 0):
        nan = float("nan")
        return PatternMeasures(rms, nan, nan, (), nan, nan, nan, nan)
    top = int(np.argmax(power))
    kstar = kk[top]
    band = (kk >= BAND_LOW * kstar) & (kk <= BAND_HIGH * kstar)
    pb, kxb, kyb, kkb = power[band], kx[band], ky[band], kk[band]
    total = float(pb.sum())
    order_desc = np.argsort(pb)[::-1]
    shares = tuple(float(s) for s in pb[order_desc[:4]] / total)
    theta = np.mod(np.arctan2(kyb, kxb), np.pi)
    order = float(np.abs(np.sum(pb * np.exp(2j * theta))) / total)
    if len(order_desc) > 1:
        d = abs(theta[order_desc[0]] - theta[order_desc[1]]) % np.pi
        pair_angle = float(np.degrees(min(d, np.pi - d)))
    else:
        pair_angle = float("nan")
    wavenumber = float(np.sum(pb * kkb) / total)
    coherence, concentration = _measure_local_order(F, mx, my, wavenumber)
    return PatternMeasures(rms=rms, wavenumber=wavenumber, direction=float(theta[order_desc[0]]),
                           shares=shares, pair_angle=pair_angle, order=order,
                           coherence=coherence, concentration=concentration)


def _measure_local_order(F: np.ndarray, mx: np.ndarray, my: np.ndarray,
                         wavenumber: float) -> tuple[float, float]:
    """Return (mean local coherence, direction concentration) from the spectrum F."""
    n = F.shape[0]
    kx, ky = 2 * np.pi * mx / n, 2 * np.pi * my / n
    hx = np.fft.ifft2(1j * kx * F).real
    hy = np.fft.ifft2(1j * ky * F).real
    width = SMOOTHING_WAVELENGTHS * n / wavenumber  # grid units
    smooth = np.exp(-0.5 * width**2 * (kx**2 + ky**2))
    stack = np.stack([hx * hx, hy * hy, hx * hy])
    jxx, jyy, jxy = np.fft.ifft2(smooth * np.fft.fft2(stack, axes=(-2, -1)), axes=(-2, -1)).real
    trace = jxx + jyy
    anisotropy = np.hypot(jxx - jyy, 2.0 * jxy)
    coherence = float(anisotropy.sum() / trace.sum())
    direction = np.mod(0.5 * np.arctan2(2.0 * jxy, jxx - jyy), np.pi)
    hist, _ = np.histogram(direction, bins=DIRECTION_BINS, range=(0.0, np.pi), weights=anisotropy)
    hist = hist / max(float(hist.sum()), 1e-300)
    half = round(HERRINGBONE_WINDOW_DEG / (180.0 / DIRECTION_BINS))
    offsets = np.arange(-half, half + 1)
    window = hist[(np.arange(DIRECTION_BINS)[:, None] + offsets) % DIRECTION_BINS].sum(axis=1)
    first = int(np.argmax(window))
    # the second family must not overlap the first window
    blocked = (first + np.arange(-2 * half, 2 * half + 1)) % DIRECTION_BINS
    rest = window.copy()
    rest[blocked] = -1.0
    second = int(np.argmax(rest))
    covered = np.union1d((first + offsets) % DIRECTION_BINS, (second + offsets) % DIRECTION_BINS)
    return coherence, float(hist[covered].sum())


def classify_pattern(measures: PatternMeasures, flat_amplitude: float) -> int:
    """Return the index into :data:`PATTERN_NAMES` of a measured pattern.

    Parameters
    ----------
    measures
        From :func:`measure_pattern`.
    flat_amplitude
        Rms height at or below which the field counts as flat (units of the field).
    """
    if not measures.rms > flat_amplitude or not measures.shares:
        return PATTERN_NAMES.index("flat")
    s = measures.shares
    if s[0] >= STRIPE_SHARE:
        return PATTERN_NAMES.index("stripes")
    if measures.coherence < CHECKERBOARD_COHERENCE and sum(s[:2]) >= CHECKERBOARD_SHARE:
        return PATTERN_NAMES.index("checkerboard")
    if measures.concentration >= HERRINGBONE_CONCENTRATION:
        return PATTERN_NAMES.index("herringbone")
    return PATTERN_NAMES.index("labyrinth")


def measure_peak_amplitude(height: np.ndarray, newton_steps: int = 6) -> float:
    """Return half the peak-to-valley height of the band-limited interpolant of a field.

    The grid extremes are refined by Newton steps on the Fourier series, so a crest that
    falls between grid points is not under-reported.

    Parameters
    ----------
    height
        Real square periodic array (n × n), indexed ``[y, x]``.
    newton_steps
        Newton iterations from each grid extreme.
    """
    h = np.asarray(height, dtype=float)
    n = h.shape[0]
    F = np.fft.fft2(h) / h.size
    m = np.fft.fftfreq(n, 1.0 / n)
    my, mx = np.meshgrid(m, m, indexing="ij")
    keep = (np.abs(mx) < n / 2) & (np.abs(my) < n / 2) & (np.abs(F) > 0)
    c, kx, ky = F[keep], 2 * np.pi * mx[keep] / n, 2 * np.pi * my[keep] / n

    def refine(iy: int, ix: int, sign: float) -> float:
        x, y = float(ix), float(iy)
        best = sign * float(h[iy, ix])
        # the series terms at the current point, reused by the next step's derivatives
        e = c * np.exp(1j * (kx * x + ky * y))
        for _ in range(newton_steps):
            gx, gy = float(np.sum(1j * kx * e).real), float(np.sum(1j * ky * e).real)
            hxx = float(np.sum(-kx * kx * e).real)
            hyy = float(np.sum(-ky * ky * e).real)
            hxy = float(np.sum(-kx * ky * e).real)
            # pseudo-inverse: a (nearly) straight crest has (almost) no curvature along itself
            step = -np.linalg.pinv(np.array([[hxx, hxy], [hxy, hyy]]), rcond=1e-3) @ np.array([gx, gy])
            dx, dy = float(step[0]), float(step[1])
            if abs(dx) > 1.0 or abs(dy) > 1.0:
                break
            x, y = x + dx, y + dy
            e = c * np.exp(1j * (kx * x + ky * y))
            value = sign * float(np.sum(e).real)
            best = max(best, value)
        return sign * best

    imax = np.unravel_index(int(np.argmax(h)), h.shape)
    imin = np.unravel_index(int(np.argmin(h)), h.shape)
    top = refine(int(imax[0]), int(imax[1]), 1.0)
    bottom = refine(int(imin[0]), int(imin[1]), -1.0)
    return 0.5 * (top - bottom)
