"""Fresnel reflection and refraction at a plane boundary between two indices (unpolarised light).

R = (r_s^2 + r_p^2) / 2 with r_s = (n_i cos_i - n_t cos_t) / (n_i cos_i + n_t cos_t) and
r_p = (n_t cos_i - n_i cos_t) / (n_t cos_i + n_i cos_t); cos_t from Snell's law, total internal
reflection when (n_i / n_t) sin_i >= 1. Dimensionless.

References: ``BornWolf1999`` (sec. 1.5.2), as used by ``Wang1995mcml`` (eq. 3.36).
"""

from __future__ import annotations

import math

from numba import njit


@njit(cache=True, inline="always")
def fresnel(n_i, n_t, cos_i):
    """Unpolarised Fresnel reflectance and transmitted cosine.

    Parameters
    ----------
    n_i, n_t : float
        Refractive indices of the incident and transmitting media (dimensionless, >= 1).
    cos_i : float
        Cosine of the incidence angle, in [0, 1].

    Returns
    -------
    (float, float)
        Reflectance in [0, 1] and the cosine of the refraction angle (0 under total internal reflection).
        Source: BornWolf1999 sec. 1.5.2.

    """
    if n_i == n_t:
        return 0.0, cos_i
    ratio = n_i / n_t
    sin_t2 = ratio * ratio * (1.0 - cos_i * cos_i)
    if sin_t2 >= 1.0:
        return 1.0, 0.0
    cos_t = math.sqrt(1.0 - sin_t2)
    a = n_i * cos_i
    b = n_t * cos_t
    rs = (a - b) / (a + b)
    c = n_t * cos_i
    d = n_i * cos_t
    rp = (c - d) / (c + d)
    return 0.5 * (rs * rs + rp * rp), cos_t
