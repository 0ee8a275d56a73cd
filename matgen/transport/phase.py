"""Henyey-Greenstein phase function: eval, pdf and sampling of the scattering cosine. Units: sr^-1.

p(mu) = (1 - g^2) / (4 pi (1 + g^2 - 2 g mu)^(3/2)) per steradian, normalised over the sphere;
its density in mu = cos(theta) on [-1, 1] is 2 pi p(mu). Sampling inverts the cumulative distribution
(Henyey & Greenstein 1941; inversion as in Wang, Jacques & Zheng 1995, eq. 3.28).

References: ``HenyeyGreenstein1941``, ``Wang1995mcml``.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

#: |g| below which the phase function is sampled as isotropic (the inversion loses precision as g -> 0).
G_ISOTROPIC = 1.0e-6


def hg_eval_per_sr(mu, g):
    """Henyey-Greenstein phase function p(mu) in sr^-1 (normalised over 4 pi sr).

    Parameters
    ----------
    mu : float or ndarray
        Cosine of the scattering angle, in [-1, 1].
    g : float
        Anisotropy (mean cosine), in (-1, 1).

    Returns
    -------
    float or ndarray
        p(mu) in sr^-1. Source: HenyeyGreenstein1941.

    """
    mu = np.asarray(mu, dtype=np.float64)
    return (1.0 - g * g) / (4.0 * np.pi * (1.0 + g * g - 2.0 * g * mu) ** 1.5)


def hg_pdf_mu(mu, g):
    """Density of the scattering cosine mu on [-1, 1] (dimensionless; integrates to 1).

    Source: HenyeyGreenstein1941.
    """
    return 2.0 * np.pi * hg_eval_per_sr(mu, g)


def hg_cdf_mu(mu, g):
    """Cumulative distribution of mu on [-1, 1] in closed form (for binned tests).

    Source: HenyeyGreenstein1941.
    """
    mu = np.asarray(mu, dtype=np.float64)
    if abs(g) < G_ISOTROPIC:
        return 0.5 * (mu + 1.0)
    return (1.0 - g * g) / (2.0 * g) * (1.0 / np.sqrt(1.0 + g * g - 2.0 * g * mu) - 1.0 / (1.0 + g))


@njit(cache=True, inline="always")
def hg_constants(g):
    """Per-layer constants of the Henyey-Greenstein inversion for anisotropy ``g`` (dimensionless).

    Returns (isotropic, 1 - g^2, 1 - g, 2 g, 1 + g^2, 1 / (2 g)); ``isotropic`` is True for
    ``|g| < G_ISOTROPIC`` (the other values are then unused). Computed once per layer so that a scattering
    event costs one division instead of two. Source: Wang1995mcml eq. 3.28.
    """
    if abs(g) < G_ISOTROPIC:
        return True, 1.0, 1.0, 0.0, 1.0, 0.0
    return False, 1.0 - g * g, 1.0 - g, 2.0 * g, 1.0 + g * g, 1.0 / (2.0 * g)


@njit(cache=True, inline="always")
def hg_sample_mu_with(iso, one_minus_g2, one_minus_g, two_g, one_plus_g2, inv_two_g, u):
    """Sample the scattering cosine from a uniform ``u`` in [0, 1), given :func:`hg_constants`.

    mu = (1 + g^2 - t^2) / (2 g) with t = (1 - g^2) / (1 - g + 2 g u), clamped to [-1, 1]; isotropic
    2u - 1 where ``iso``. Source: Wang1995mcml eq. 3.28 (inversion of the Henyey-Greenstein cumulative
    distribution).
    """
    if iso:
        return 2.0 * u - 1.0
    t = one_minus_g2 / (one_minus_g + two_g * u)
    mu = (one_plus_g2 - t * t) * inv_two_g
    if mu > 1.0:
        return 1.0
    if mu < -1.0:
        return -1.0
    return mu


@njit(cache=True, inline="always")
def hg_sample_mu(g, u):
    """Sample the scattering cosine from a uniform ``u`` in [0, 1) (dimensionless).

    The same arithmetic as the transport kernels (:func:`hg_constants`, :func:`hg_sample_mu_with`).
    Source: Wang1995mcml eq. 3.28 (inversion of the Henyey-Greenstein cumulative distribution).
    """
    iso, c1, c2, c3, c4, c5 = hg_constants(g)
    return hg_sample_mu_with(iso, c1, c2, c3, c4, c5, u)


def hg_sample_mu_array(g: float, u: np.ndarray) -> np.ndarray:
    """Vectorised :func:`hg_sample_mu` over uniforms ``u`` (for tests)."""
    return np.array([hg_sample_mu(g, float(x)) for x in np.asarray(u, dtype=np.float64)])


@njit(cache=True, inline="always")
def spin(ux, uy, uz, mu, cos_phi, sin_phi):
    """Turn direction (ux, uy, uz) by polar cosine ``mu`` and azimuth (cos_phi, sin_phi).

    Returns the new unit direction. Source: Wang1995mcml eqs. 3.30-3.31.
    """
    sin_t = math.sqrt(max(0.0, 1.0 - mu * mu))
    if abs(uz) > 1.0 - 1.0e-12:
        return sin_t * cos_phi, sin_t * sin_phi, (mu if uz > 0.0 else -mu)
    tmp = math.sqrt(1.0 - uz * uz)
    f = sin_t / tmp
    nx = f * (ux * uz * cos_phi - uy * sin_phi) + ux * mu
    ny = f * (uy * uz * cos_phi + ux * sin_phi) + uy * mu
    nz = -sin_t * cos_phi * tmp + uz * mu
    return nx, ny, nz
