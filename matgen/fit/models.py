"""Radial reflectance profile models. Units: radii in mm, profiles in mm^-2, coefficients in 1/mm.

Every model is given both as a point profile ``R(r)`` (reflectance per unit area at radius ``r``) and as
the exact fraction of the incident power leaving through each ring ``[r0, r1)``; fits compare the ring
fractions (divided by ring area) with the Monte Carlo ring tallies, so no ring-centre approximation enters.

Models
------
- normalised diffusion (Christensen & Burley 2015, ``Christensen2015``): two exponentials of shape distance
  ``d``; with its published scaling factors ``s(A)`` that relate ``d`` to a mean free path;
- a sum of Gaussians on the fixed variance set of d'Eon & Luebke 2007 (``dEon2007``);
- the classical dipole (Farrell, Patterson & Wilson 1992, ``Farrell1992``; Jensen et al. 2001,
  ``Jensen2001``) in effective mu_a and reduced scattering mu_s'.
"""

from __future__ import annotations

import numpy as np

from matgen.errors import ParameterError

# --------------------------------------------------------------------------------------------------------
# Normalised diffusion (Christensen & Burley 2015)
# --------------------------------------------------------------------------------------------------------


def burley2015_profile(radius_mm, albedo_multiple, shape_distance_mm):
    """Normalised-diffusion reflectance profile R(r) in mm^-2.

    R(r) = A (exp(-r/d) + exp(-r/(3 d))) / (8 pi d r), whose integral over the plane is A.

    Parameters
    ----------
    radius_mm : float or ndarray
        Radius from the point of incidence in mm (> 0).
    albedo_multiple : float or ndarray
        Total diffuse reflectance A (dimensionless, 0..1).
    shape_distance_mm : float or ndarray
        Shape distance d in mm (> 0).

    Returns
    -------
    ndarray
        Reflectance per unit area in mm^-2.

    References
    ----------
    ``Christensen2015``, Eq. 3 (the profile) and its normalisation.

    """
    r = np.asarray(radius_mm, dtype=np.float64)
    d = np.asarray(shape_distance_mm, dtype=np.float64)
    a = np.asarray(albedo_multiple, dtype=np.float64)
    return a * (np.exp(-r / d) + np.exp(-r / (3.0 * d))) / (8.0 * np.pi * d * r)


def burley2015_cdf(radius_mm, shape_distance_mm):
    """Fraction of the normalised-diffusion reflectance that leaves inside radius r (dimensionless).

    F(r) = 1 - (exp(-r/d) + 3 exp(-r/(3 d))) / 4, the integral of 2 pi r R(r) / A from 0 to r.

    Parameters
    ----------
    radius_mm : float or ndarray
        Radius in mm (>= 0).
    shape_distance_mm : float or ndarray
        Shape distance d in mm (> 0).

    Returns
    -------
    ndarray
        Cumulative fraction in [0, 1).

    References
    ----------
    ``Christensen2015`` (integral of Eq. 3; derived here in closed form).

    """
    r = np.asarray(radius_mm, dtype=np.float64)
    d = np.asarray(shape_distance_mm, dtype=np.float64)
    return 1.0 - 0.25 * (np.exp(-r / d) + 3.0 * np.exp(-r / (3.0 * d)))


def burley2015_rings(ring_edges_mm, albedo_multiple, shape_distance_mm):
    """Ring-averaged normalised-diffusion profile in mm^-2 (exact ring integral over ring area).

    Parameters
    ----------
    ring_edges_mm : ndarray, shape (R+1,)
        Ring edges in mm, ascending, first >= 0.
    albedo_multiple : ndarray, shape (...,)
        Total diffuse reflectance A.
    shape_distance_mm : ndarray, shape (...,)
        Shape distance d in mm.

    Returns
    -------
    ndarray, shape (..., R)
        Mean reflectance per unit area of each ring in mm^-2.

    References
    ----------
    ``Christensen2015``, Eq. 3, integrated over each annulus.

    """
    e = np.asarray(ring_edges_mm, dtype=np.float64)
    d = np.asarray(shape_distance_mm, dtype=np.float64)[..., None]
    a = np.asarray(albedo_multiple, dtype=np.float64)[..., None]
    r0, dr = e[:-1], np.diff(e)
    # F(r1) - F(r0) written without cancellation: e^{-r0/d} (1 - e^{-dr/d}) + 3 e^{-r0/3d} (1 - e^{-dr/3d})
    frac = 0.25 * (
        np.exp(-r0 / d) * -np.expm1(-dr / d) + 3.0 * np.exp(-r0 / (3.0 * d)) * -np.expm1(-dr / (3.0 * d))
    )
    area = np.pi * (e[1:] ** 2 - e[:-1] ** 2)
    return a * frac / area


#: Names of the published scaling-factor fits s(A) = l / d of Christensen & Burley 2015.
SHAPE_SCALING_METHODS = (
    "Christensen2015_searchlight_mfp",
    "Christensen2015_diffuse_mfp",
    "Christensen2015_searchlight_dmfp",
)


def shape_scaling_Christensen2015(albedo_multiple, configuration="searchlight_mfp"):
    """Scaling factor s(A) = l / d of the normalised-diffusion profile (dimensionless).

    Three empirical fits to Monte Carlo profiles, one per configuration:

    - ``"searchlight_mfp"``: s = 1.85 - A + 7 |A - 0.8|^3, l the mean free path 1 / sigma_t, normal
      (searchlight) illumination;
    - ``"diffuse_mfp"``: s = 1.9 - A + 3.5 (A - 0.8)^2, l the mean free path, diffuse surface transmission;
    - ``"searchlight_dmfp"``: s = 3.5 + 100 (A - 0.33)^4, l the diffuse mean free path
      1 / sigma_tr = 1 / sqrt(3 sigma_a sigma_t'), searchlight illumination.

    Which length each fit refers to was settled with matgen's own transport (``tests/fit/test_mc_fit.py``):
    on an index-matched isotropic half-space the fitted l / d follows the first form with l = 1 / sigma_t
    and the third with l = 1 / sigma_tr (both within about 5 % for 0.28 < A < 0.55).

    Parameters
    ----------
    albedo_multiple : float or ndarray
        Total diffuse reflectance A (0..1).
    configuration : {"searchlight_mfp", "diffuse_mfp", "searchlight_dmfp"}
        Which published fit.

    Returns
    -------
    ndarray
        s; the shape distance is d = l / s.

    References
    ----------
    ``Christensen2015``, Sec. 5 (coefficients recalled from memory of the paper, not re-read; the
    assignment of each fit to a length scale is the one matgen's transport confirms, see above).

    """
    a = np.asarray(albedo_multiple, dtype=np.float64)
    if configuration == "searchlight_mfp":
        return 1.85 - a + 7.0 * np.abs(a - 0.8) ** 3
    if configuration == "diffuse_mfp":
        return 1.9 - a + 3.5 * (a - 0.8) ** 2
    if configuration == "searchlight_dmfp":
        return 3.5 + 100.0 * (a - 0.33) ** 4
    raise ParameterError(
        f"unknown normalised-diffusion configuration {configuration!r}; use one of "
        "'searchlight_mfp', 'diffuse_mfp', 'searchlight_dmfp'"
    )


def shape_scaling(albedo_multiple, method="Christensen2015_searchlight_mfp"):
    """Dispatch to a published scaling factor s(A) = l / d by ``method`` (see :data:`SHAPE_SCALING_METHODS`).

    Parameters
    ----------
    albedo_multiple : float or ndarray
        Total diffuse reflectance A.
    method : str
        One of :data:`SHAPE_SCALING_METHODS`.

    Returns
    -------
    ndarray
        Dimensionless s.

    References
    ----------
    ``Christensen2015``.

    """
    if method not in SHAPE_SCALING_METHODS:
        raise ParameterError(
            f"unknown shape-scaling method {method!r}; use one of {', '.join(SHAPE_SCALING_METHODS)}"
        )
    return shape_scaling_Christensen2015(albedo_multiple, method.split("_", 1)[1])


# --------------------------------------------------------------------------------------------------------
# Sum of Gaussians (d'Eon & Luebke 2007)
# --------------------------------------------------------------------------------------------------------

#: Variances (mm^2) of the six Gaussians of d'Eon & Luebke 2007, GPU Gems 3 ch. 14, Table 14-1
#: (their three-layer skin fit); values recalled from memory of the chapter, not re-read.
GAUSSIAN_VARIANCES_DEON2007_MM2 = np.array([0.0064, 0.0484, 0.187, 0.567, 1.99, 7.41])


def gaussian_rings(ring_edges_mm, variances_mm2):
    """Ring-averaged profiles of unit-weight 2-D Gaussians, mm^-2.

    G(v, r) = exp(-r^2 / (2 v)) / (2 pi v) integrates to 1 over the plane.

    Parameters
    ----------
    ring_edges_mm : ndarray, shape (R+1,)
        Ring edges in mm.
    variances_mm2 : ndarray, shape (G,)
        Gaussian variances v in mm^2.

    Returns
    -------
    ndarray, shape (G, R)
        Mean of each Gaussian over each ring, in mm^-2.

    References
    ----------
    ``dEon2007``, Eq. 14-3 (the 2-D Gaussian of variance v).

    """
    e = np.asarray(ring_edges_mm, dtype=np.float64)
    v = np.asarray(variances_mm2, dtype=np.float64)[:, None]
    area = np.pi * (e[1:] ** 2 - e[:-1] ** 2)
    # e^{-r0^2/2v} - e^{-r1^2/2v} without cancellation
    frac = np.exp(-(e[:-1] ** 2) / (2.0 * v)) * -np.expm1(-area / (2.0 * np.pi * v))
    return frac / area


def gaussian_sum_profile(radius_mm, weights, variances_mm2=GAUSSIAN_VARIANCES_DEON2007_MM2):
    """Sum of 2-D Gaussians R(r) = sum_i w_i G(v_i, r) in mm^-2.

    Parameters
    ----------
    radius_mm : float or ndarray
        Radius in mm.
    weights : ndarray, shape (G,)
        Non-negative weights (their sum is the total diffuse reflectance).
    variances_mm2 : ndarray, shape (G,)
        Variances in mm^2 (default: d'Eon & Luebke 2007).

    Returns
    -------
    ndarray
        Reflectance per unit area in mm^-2.

    References
    ----------
    ``dEon2007``, Sec. 14.4.

    """
    r = np.asarray(radius_mm, dtype=np.float64)[..., None]
    v = np.asarray(variances_mm2, dtype=np.float64)
    w = np.asarray(weights, dtype=np.float64)
    return np.sum(w * np.exp(-(r**2) / (2.0 * v)) / (2.0 * np.pi * v), axis=-1)


# --------------------------------------------------------------------------------------------------------
# Classical dipole (Farrell, Patterson & Wilson 1992; Jensen et al. 2001)
# --------------------------------------------------------------------------------------------------------


def internal_diffuse_reflectance_Groenhuis1983(n_relative):
    """Compute the internal diffuse Fresnel reflectance F_dr of a boundary of relative index eta.

    F_dr = -1.440 / eta^2 + 0.710 / eta + 0.668 + 0.0636 eta (empirical fit).

    Parameters
    ----------
    n_relative : float
        Relative refractive index eta = n_inside / n_outside (>= 1).

    Returns
    -------
    float
        F_dr.

    References
    ----------
    ``Jensen2001``, Eq. 5 (citing Groenhuis et al. 1983; coefficients from memory).

    """
    eta = float(n_relative)
    return -1.440 / eta**2 + 0.710 / eta + 0.668 + 0.0636 * eta


def _dipole_geometry(mu_a_per_mm, mu_s_reduced_per_mm, n_relative):
    mu_a = np.asarray(mu_a_per_mm, dtype=np.float64)
    mus = np.asarray(mu_s_reduced_per_mm, dtype=np.float64)
    mu_t = mu_a + mus
    alpha = mus / mu_t
    mu_tr = np.sqrt(3.0 * mu_a * mu_t)
    f_dr = internal_diffuse_reflectance_Groenhuis1983(n_relative)
    a_b = (1.0 + f_dr) / (1.0 - f_dr)
    z_r = 1.0 / mu_t
    z_v = z_r * (1.0 + 4.0 * a_b / 3.0)
    return alpha, mu_tr, z_r, z_v, a_b


def dipole_profile_Jensen2001(radius_mm, mu_a_per_mm, mu_s_reduced_per_mm, n_relative=1.0):
    """Classical dipole diffuse reflectance profile R_d(r) in mm^-2.

    R_d(r) = alpha' / (4 pi) [z_r (sigma_tr + 1/d_r) e^{-sigma_tr d_r} / d_r^2
    + z_v (sigma_tr + 1/d_v) e^{-sigma_tr d_v} / d_v^2], d_{r,v} = sqrt(r^2 + z_{r,v}^2),
    z_r = 1 / mu_t', z_v = z_r (1 + 4 A / 3), A = (1 + F_dr) / (1 - F_dr).

    Parameters
    ----------
    radius_mm : float or ndarray
        Radius in mm.
    mu_a_per_mm, mu_s_reduced_per_mm : float or ndarray
        Absorption and reduced scattering coefficients in 1/mm.
    n_relative : float
        Relative refractive index of the boundary (1 = index matched).

    Returns
    -------
    ndarray
        Reflectance per unit area in mm^-2.

    References
    ----------
    ``Farrell1992``, Eq. 12; ``Jensen2001``, Eq. 4 (same dipole, Jensen's notation).

    """
    r = np.asarray(radius_mm, dtype=np.float64)
    alpha, mu_tr, z_r, z_v, _ = _dipole_geometry(mu_a_per_mm, mu_s_reduced_per_mm, n_relative)
    d_r = np.sqrt(r**2 + z_r**2)
    d_v = np.sqrt(r**2 + z_v**2)
    term_r = z_r * (mu_tr + 1.0 / d_r) * np.exp(-mu_tr * d_r) / d_r**2
    term_v = z_v * (mu_tr + 1.0 / d_v) * np.exp(-mu_tr * d_v) / d_v**2
    return alpha / (4.0 * np.pi) * (term_r + term_v)


def dipole_total_Jensen2001(albedo_reduced, n_relative=1.0):
    """Total diffuse reflectance of the classical dipole (dimensionless).

    R_d = (alpha'/2) (1 + exp(-(4/3) A sqrt(3 (1 - alpha')))) exp(-sqrt(3 (1 - alpha'))).

    Parameters
    ----------
    albedo_reduced : float or ndarray
        Reduced albedo alpha' = mu_s' / (mu_a + mu_s').
    n_relative : float
        Relative refractive index of the boundary.

    Returns
    -------
    ndarray
        R_d.

    References
    ----------
    ``Jensen2001``, Eq. 11 (the integral of Eq. 4 over the plane).

    """
    ap = np.asarray(albedo_reduced, dtype=np.float64)
    f_dr = internal_diffuse_reflectance_Groenhuis1983(n_relative)
    a_b = (1.0 + f_dr) / (1.0 - f_dr)
    root = np.sqrt(3.0 * (1.0 - ap))
    return 0.5 * ap * (1.0 + np.exp(-4.0 / 3.0 * a_b * root)) * np.exp(-root)


def dipole_cdf_Jensen2001(radius_mm, mu_a_per_mm, mu_s_reduced_per_mm, n_relative=1.0):
    """Reflectance of the classical dipole leaving inside radius r (dimensionless), in closed form.

    Each source contributes (alpha'/2) [1 - z e^{-sigma_tr sqrt(r^2+z^2)} / sqrt(r^2+z^2)] e^{...}; in
    full: the integral of 2 pi r R_d(r) from 0 to r is
    (alpha'/2) sum_{z in (z_r, z_v)} [e^{-sigma_tr z} - z e^{-sigma_tr d} / d], d = sqrt(r^2 + z^2).

    Parameters
    ----------
    radius_mm : float or ndarray
        Radius in mm.
    mu_a_per_mm, mu_s_reduced_per_mm : float or ndarray
        Coefficients in 1/mm.
    n_relative : float
        Relative refractive index.

    Returns
    -------
    ndarray
        Cumulative reflectance; at r -> infinity it equals :func:`dipole_total_Jensen2001`.

    References
    ----------
    ``Farrell1992``, Eq. 12 integrated over the disc (antiderivative of z (s + 1/d) e^{-s d} / d^2 r is
    -z e^{-s d} / d); ``Jensen2001``, Eq. 11 is its limit.

    """
    r = np.asarray(radius_mm, dtype=np.float64)
    alpha, mu_tr, z_r, z_v, _ = _dipole_geometry(mu_a_per_mm, mu_s_reduced_per_mm, n_relative)
    out = 0.0
    for z in (z_r, z_v):
        d = np.sqrt(r**2 + z**2)
        out = out + np.exp(-mu_tr * z) - z * np.exp(-mu_tr * d) / d
    return 0.5 * alpha * out


def dipole_rings_Jensen2001(ring_edges_mm, mu_a_per_mm, mu_s_reduced_per_mm, n_relative=1.0):
    """Ring-averaged classical dipole profile in mm^-2 (exact ring integral over ring area).

    Parameters
    ----------
    ring_edges_mm : ndarray, shape (R+1,)
        Ring edges in mm.
    mu_a_per_mm, mu_s_reduced_per_mm : ndarray, shape (...,)
        Coefficients in 1/mm.
    n_relative : float
        Relative refractive index.

    Returns
    -------
    ndarray, shape (..., R)
        Mean reflectance per unit area of each ring in mm^-2.

    References
    ----------
    ``Farrell1992``; ``Jensen2001``.

    """
    e = np.asarray(ring_edges_mm, dtype=np.float64)
    mu_a = np.asarray(mu_a_per_mm, dtype=np.float64)[..., None]
    mus = np.asarray(mu_s_reduced_per_mm, dtype=np.float64)[..., None]
    alpha, mu_tr, z_r, z_v, _ = _dipole_geometry(mu_a, mus, n_relative)
    r0, r1 = e[:-1], e[1:]
    frac = 0.0
    for z in (z_r, z_v):
        d0 = np.sqrt(r0**2 + z**2)
        d1 = np.sqrt(r1**2 + z**2)
        # z e^{-s d0} / d0 - z e^{-s d1} / d1 = T0 (1 - (d0/d1) e^{-s (d1 - d0)}), without cancellation
        t0 = z * np.exp(-mu_tr * d0) / d0
        frac = frac + t0 * -np.expm1(np.log(d0 / d1) - mu_tr * (d1 - d0))
    area = np.pi * (r1**2 - r0**2)
    return 0.5 * alpha * frac / area
