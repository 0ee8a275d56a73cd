"""Pigment packaging: corrections of mu_a for absorbers confined in particles and vessels. Units: 1/mm, mm.

A pigment packed into discrete bodies absorbs less than the same amount spread evenly, because light crossing
a strongly absorbing body cannot be absorbed twice (the "sieve" or flattening effect). matgen applies two
published corrections, each a factor in (0, 1] multiplying the evenly-spread mu_a:

- melanosomes, Duysens 1956 flattening for spheres (Duysens1956): a sphere of diameter D and interior
  absorption mu absorbs the fraction Q(tau) = 1 + 2 ((1 + tau) e^-tau - 1) / tau^2 of the light crossing its
  cross-section, tau = mu D (ray optics, no refraction). With number density f / (pi D^3 / 6) the effective
  coefficient is f mu F(tau), F(tau) = 3 Q(tau) / (2 tau); F -> 1 - 3 tau / 8 for small tau.
- blood in vessels, van Veen et al. 2002 (vanVeen2002; after Svaasand1995 and Verkruysse 1997): vessels of
  radius R give C(x) = (1 - e^-x) / x with x = 2 mu_blood R.

``packaging`` selects which apply: ``"on"`` (both), ``"off"`` (neither), ``"melanin"``, ``"blood"``.
"""

from __future__ import annotations

import math

import numpy as np

from matgen.errors import ParameterError

PACKAGING_MODES = ("on", "off", "melanin", "blood")
#: Below this optical size tau = mu D the Duysens factor is evaluated from its power series.
SERIES_BELOW_TAU = 0.05


def check_packaging(packaging: str) -> str:
    """Validate a packaging mode name; returns it."""
    if packaging not in PACKAGING_MODES:
        raise ParameterError(f"packaging {packaging!r} is unknown; use one of {', '.join(PACKAGING_MODES)}")
    return packaging


def applies(packaging: str, pigment: str) -> bool:
    """Whether mode ``packaging`` corrects ``pigment`` (``"melanin"`` or ``"blood"``)."""
    check_packaging(packaging)
    return packaging == "on" or packaging == pigment


def duysens_sphere_factor(mu_a_particle_per_mm, diameter_mm):
    """Flattening factor F = 3 Q(tau) / (2 tau) of absorbing spheres (Duysens1956).

    Parameters
    ----------
    mu_a_particle_per_mm : float or ndarray
        Absorption coefficient inside the particle, 1/mm (>= 0).
    diameter_mm : float or ndarray
        Particle diameter, mm (> 0).

    Returns
    -------
    float or ndarray
        F in (0, 1]; mu_a,effective = F * (volume fraction) * mu_a,particle.

    """
    tau = np.asarray(mu_a_particle_per_mm, dtype=np.float64) * np.asarray(diameter_mm, dtype=np.float64)
    small = tau < SERIES_BELOW_TAU
    tau_safe = np.where(small, 1.0, tau)
    q = 1.0 + 2.0 * ((1.0 + tau_safe) * np.exp(-tau_safe) - 1.0) / tau_safe**2
    exact = 1.5 * q / tau_safe
    # the closed form loses digits to cancellation for small tau: use its power series there
    return np.where(small, duysens_sphere_factor_series(np.where(small, tau, 0.0)), exact)


def duysens_sphere_factor_series(tau):
    """Power series of the Duysens sphere factor F(tau) = 3 Q(tau) / (2 tau), terms to tau^8 (Duysens1956).

    From Q(tau) = sum_{k>=1} 2 (-1)^(k+1) (k + 1) tau^k / (k + 2)!, so F = 1 - 3 tau/8 + tau^2/10 - ...;
    truncation error below 1e-12 for tau < 0.05.
    """
    tau = np.asarray(tau, dtype=np.float64)
    f = np.zeros_like(tau)
    for k in range(1, 10):
        f = f + 3.0 * (-1.0) ** (k + 1) * (k + 1) * tau ** (k - 1) / math.factorial(k + 2)
    return f


def vessel_factor_vanVeen2002(mu_a_blood_per_mm, radius_mm):
    """Vessel packaging factor C = (1 - exp(-2 mu R)) / (2 mu R) (vanVeen2002; Svaasand1995).

    Parameters
    ----------
    mu_a_blood_per_mm : float or ndarray
        Absorption coefficient of whole blood, 1/mm (>= 0).
    radius_mm : float or ndarray
        Mean vessel radius, mm (> 0).

    Returns
    -------
    float or ndarray
        C in (0, 1]; mu_a,effective = C * (blood fraction) * mu_a,blood.

    """
    x = 2.0 * np.asarray(mu_a_blood_per_mm, dtype=np.float64) * np.asarray(radius_mm, dtype=np.float64)
    x_safe = np.where(x > 1e-8, x, 1.0)
    return np.where(x > 1e-8, -np.expm1(-x_safe) / x_safe, 1.0 - 0.5 * x)


def vessel_factor(mu_a_blood_per_mm, radius_mm, method: str = "vanVeen2002"):
    """Vessel packaging factor by published method; only ``"vanVeen2002"`` is implemented."""
    if method != "vanVeen2002":
        raise ParameterError(f"unknown vessel packaging method {method!r}; valid methods: vanVeen2002")
    return vessel_factor_vanVeen2002(mu_a_blood_per_mm, radius_mm)
