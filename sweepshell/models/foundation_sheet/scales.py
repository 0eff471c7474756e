"""Linear-onset scales of a film on a substrate (the units of the scaled cell problem).

Half-space substrate: k₀h = (3Ē_s/Ē_f)^{1/3}, ε_c = ¼(3Ē_s/Ē_f)^{2/3}; Winkler bed K = Ē_s k_h/2:
k₀ = (K/D)^{1/4}, ε_c = 2√(DK)/(Ē_f h) (see :mod:`sweepshell.models.foundation_sheet.model`).
"""

from __future__ import annotations

import numpy as np

__all__ = ["MIN_MODES_PER_WAVELENGTH", "compute_sheet_scales"]

#: the smallest grid points per critical wavelength a point may use
MIN_MODES_PER_WAVELENGTH = 4


def compute_sheet_scales(film_thickness: np.ndarray, film_modulus: np.ndarray,
                         film_poisson_ratio: np.ndarray, substrate_modulus: np.ndarray,
                         substrate_poisson_ratio: np.ndarray,
                         substrate: np.ndarray) -> dict[str, np.ndarray]:
    """Return the linear-onset scales of each point (vectorised).

    Parameters
    ----------
    film_thickness
        h, m.
    film_modulus, substrate_modulus
        E_f, E_s, Pa.
    film_poisson_ratio, substrate_poisson_ratio
        ν_f, ν_s (1).
    substrate
        ``half_space`` or ``winkler`` per point.

    Returns
    -------
    dict
        ``critical_strain`` ε_c (1), ``wavenumber`` k₀ (1/m), ``critical_wavelength``
        2π/k₀ (m), ``height_scale`` b = √ε_c/k₀ (m), ``energy_scale`` Ē_f h ε_c² (J/m²),
        ``contrast`` Ē_f/Ē_s (1).
    """
    h = np.asarray(film_thickness, dtype=float)
    ef = np.asarray(film_modulus, dtype=float) / (1.0 - np.asarray(film_poisson_ratio, dtype=float) ** 2)
    es = np.asarray(substrate_modulus, dtype=float) / (
        1.0 - np.asarray(substrate_poisson_ratio, dtype=float) ** 2)
    contrast = ef / es
    kh_half = np.cbrt(3.0 / contrast)
    winkler = np.asarray(substrate).astype(str) == "winkler"
    # Winkler bed K = Ē_s k_h/2: (k₀h)⁴ = 12 K h/Ē_f = 6 k_h h/(Ē_f/Ē_s)
    kh = np.where(winkler, (6.0 * kh_half / contrast) ** 0.25, kh_half)
    eps_c = np.where(winkler, kh**2 / 6.0, kh**2 / 4.0)
    k0 = kh / h
    return {"critical_strain": eps_c, "wavenumber": k0, "critical_wavelength": 2 * np.pi / k0,
            "height_scale": np.sqrt(eps_c) / k0, "energy_scale": ef * h * eps_c**2,
            "contrast": contrast}
