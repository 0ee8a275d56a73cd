"""Mie theory for skin scatterers (spheres) through the optional ``miepython`` package. Units: nm, mm, 1/mm.

Used to derive mu_s and g of a particle population (melanosomes, organelles, fibre surrogates) for a chosen
size distribution, as an alternative to the published power laws of :mod:`matgen.spectra.scattering`.
Efficiencies come from ``miepython`` (Prahl2023miepython; Mie theory as in vandeHulst1957). Band values are
averages over each band: mu_s averaged over Gauss-Legendre points inside the band, g weighted by mu_s.
"""

from __future__ import annotations

import math

import numpy as np

from matgen._optional import require
from matgen.constants import NM_PER_MM
from matgen.errors import ParameterError
from matgen.spectra.bands import BandSet

#: Gauss-Legendre points per band, and points of the log-normal size quadrature.
BAND_POINTS = 4
SIZE_POINTS = 24


def _miepython():
    return require("miepython", "compute Mie scattering of spheres")


def sphere_efficiencies(diameter_nm, n_particle: complex, n_medium: float, wavelength_nm: float):
    """Scattering efficiency and anisotropy of spheres (Mie theory; vandeHulst1957, via miepython).

    Parameters
    ----------
    diameter_nm : float or ndarray, shape (D,)
        Sphere diameters in nm (> 0).
    n_particle : complex
        Complex refractive index of the sphere (absolute; imaginary part >= 0 absorbs).
    n_medium : float
        Refractive index of the surrounding medium (>= 1).
    wavelength_nm : float
        Vacuum wavelength in nm.

    Returns
    -------
    q_sca, g : ndarray, shape (D,)
        Scattering efficiency (cross-section / geometric cross-section) and mean cosine of scattering.

    """
    mp = _miepython()
    d = np.atleast_1d(np.asarray(diameter_nm, dtype=np.float64))
    if np.any(~np.isfinite(d)) or np.any(d <= 0):
        raise ParameterError(f"sphere diameters {d.tolist()} nm must be finite and > 0")
    if not (math.isfinite(n_medium) and n_medium >= 1.0):
        raise ParameterError(f"n_medium = {n_medium!r} must be finite and >= 1")
    m = complex(n_particle)
    if m.imag < 0 or m.real <= 0:
        raise ParameterError(
            f"n_particle = {n_particle!r}: real part > 0 and imaginary part >= 0 (absorbing)"
        )
    q = np.empty(d.size)
    g = np.empty(d.size)
    for i, di in enumerate(d):
        _, qsca, _, gi = mp.efficiencies(m, float(di), float(wavelength_nm), n_env=float(n_medium))
        q[i], g[i] = float(qsca), float(gi)
    return q, g


def population_scattering(
    bands: BandSet,
    volume_fraction: float,
    median_diameter_nm: float,
    n_particle: complex,
    n_medium: float,
    geometric_sigma: float = 1.0,
):
    """mu_s and g of a population of spheres with a log-normal number distribution of diameters.

    Parameters
    ----------
    bands : BandSet
        Bands in nm.
    volume_fraction : float
        Volume fraction of the spheres, in (0, 1).
    median_diameter_nm : float
        Median diameter of the number distribution, nm.
    n_particle : complex
        Sphere refractive index.
    n_medium : float
        Medium refractive index.
    geometric_sigma : float
        Geometric standard deviation of the log-normal (>= 1; 1 = all spheres alike).

    Returns
    -------
    mu_s : ndarray, shape (B,)
        Scattering coefficient, 1/mm (band average).
    g : ndarray, shape (B,)
        Anisotropy, scattering-weighted over sizes and the band.

    """
    if not (0.0 < volume_fraction < 1.0):
        raise ParameterError(f"volume_fraction = {volume_fraction!r} must lie in (0, 1)")
    if not (math.isfinite(median_diameter_nm) and median_diameter_nm > 0):
        raise ParameterError(f"median_diameter_nm = {median_diameter_nm!r} must be finite and > 0")
    if not (math.isfinite(geometric_sigma) and geometric_sigma >= 1.0):
        raise ParameterError(f"geometric_sigma = {geometric_sigma!r} must be >= 1")
    if geometric_sigma == 1.0:
        d = np.array([median_diameter_nm])
        w = np.array([1.0])
    else:  # Gauss-Hermite quadrature in ln d for the normal distribution of ln d
        x, wh = np.polynomial.hermite_e.hermegauss(SIZE_POINTS)
        d = median_diameter_nm * np.exp(math.log(geometric_sigma) * x)
        w = wh / wh.sum()
    d_mm = d * (1.0 / NM_PER_MM)
    mean_volume_mm3 = float(np.sum(w * np.pi * d_mm**3 / 6.0))
    number_per_mm3 = volume_fraction / mean_volume_mm3
    area_mm2 = np.pi * d_mm**2 / 4.0
    xg, wg = np.polynomial.legendre.leggauss(BAND_POINTS)
    mu_s = np.empty(len(bands))
    g_out = np.empty(len(bands))
    for b in range(len(bands)):
        lo, hi = bands.lower_nm[b], bands.upper_nm[b]
        wls = 0.5 * (lo + hi) + 0.5 * (hi - lo) * xg
        mus_pts = np.empty(BAND_POINTS)
        gm_pts = np.empty(BAND_POINTS)
        for j, wl in enumerate(wls):
            q, g = sphere_efficiencies(d, n_particle, n_medium, wl)
            sigma = w * q * area_mm2
            mus_pts[j] = number_per_mm3 * sigma.sum()
            gm_pts[j] = number_per_mm3 * np.sum(sigma * g)
        mu_s[b] = 0.5 * np.sum(wg * mus_pts)
        g_out[b] = 0.5 * np.sum(wg * gm_pts) / mu_s[b]
    return mu_s, g_out
