"""Fits of the other profile models, and one entry point for a transport result. Units: mm, mm^-2, 1/mm.

- :func:`fit_gaussians_dEon2007`: non-negative weights of Gaussians of fixed variance (d'Eon & Luebke
  2007), by non-negative least squares (``LawsonHanson1974``, ``scipy.optimize.nnls``) on error-weighted
  rings; with ``conserve_albedo`` a heavily weighted extra row holds the weight sum at the measured A.
- :func:`fit_dipole_Jensen2001`: effective mu_a and mu_s' of the classical dipole. The measured A fixes the
  reduced albedo alpha' through the dipole's total reflectance (Jensen et al. 2001, Eq. 11); the scale
  mu_t' = mu_a + mu_s' is then fitted to the ring profile (1-D search on log mu_t').
- :func:`fit_profile`: any model by name, for a :class:`~matgen.transport.results.TransportResult`.

Every fit returns ``fit_residual``, the relative weighted RMS misfit (see :mod:`matgen.fit.diffusion`).
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import brentq, nnls

from matgen.errors import FitError, ParameterError
from matgen.fit.diffusion import fit_burley2015, golden_log_search, ring_weights, validate_profiles
from matgen.fit.models import (
    GAUSSIAN_VARIANCES_DEON2007_MM2,
    dipole_rings_Jensen2001,
    dipole_total_Jensen2001,
    gaussian_rings,
)

#: Profile models accepted by :func:`fit_profile`.
PROFILE_MODELS = ("Christensen2015", "dEon2007", "Jensen2001")

#: Weight of the albedo-conservation row in the Gaussian fit, relative to the norm of the weighted data: a
#: relative error delta of the weight sum costs as much as a misfit of (1e3 delta) x the data norm.
_CONSERVE_ROW_WEIGHT = 1.0e3


def fit_gaussians_dEon2007(
    ring_edges_mm,
    radial_per_mm2,
    radial_stderr,
    albedo_multiple=None,
    *,
    variances_mm2=GAUSSIAN_VARIANCES_DEON2007_MM2,
    conserve_albedo=True,
):
    """Non-negative weights of a fixed-variance sum of Gaussians fitted to N ring profiles.

    Parameters
    ----------
    ring_edges_mm : array_like, shape (R+1,)
        Ring edges in mm.
    radial_per_mm2, radial_stderr : array_like, shape (N, R)
        Ring values and standard errors in mm^-2.
    albedo_multiple : array_like, shape (N,), optional
        Measured A; required when ``conserve_albedo``.
    variances_mm2 : array_like, shape (G,)
        Gaussian variances in mm^2 (default: d'Eon & Luebke 2007).
    conserve_albedo : bool
        Hold sum(weights) at A.

    Returns
    -------
    dict of ndarray
        ``weights`` (N, G) (dimensionless; their sum is the model's total reflectance),
        ``variances_mm2`` (G,), ``fit_residual`` (N,).

    References
    ----------
    ``dEon2007``, Sec. 14.4; ``LawsonHanson1974`` (NNLS).

    """
    if conserve_albedo and albedo_multiple is None:
        raise FitError("fit_gaussians_dEon2007: conserve_albedo needs the measured albedo_multiple")
    e, y, s, a = validate_profiles(
        ring_edges_mm, radial_per_mm2, radial_stderr, albedo_multiple, what="fit_gaussians"
    )
    w = ring_weights(y, s)
    v = np.asarray(variances_mm2, dtype=np.float64)
    basis = gaussian_rings(e, v).T  # (R, G)
    weights = np.zeros((y.shape[0], v.size))
    residual = np.zeros(y.shape[0])
    for i in range(y.shape[0]):
        sw = w[i]
        m = basis * sw[:, None]
        rhs = y[i] * sw
        if conserve_albedo:
            k = _CONSERVE_ROW_WEIGHT * np.linalg.norm(rhs) / a[i]
            m = np.vstack([m, np.full(v.size, k)])
            rhs = np.concatenate([rhs, [k * a[i]]])
        sol, _ = nnls(m, rhs, maxiter=50 * v.size)
        weights[i] = sol
        model = basis @ sol
        residual[i] = np.sqrt(np.sum(((model - y[i]) * sw) ** 2) / np.sum((y[i] * sw) ** 2))
    return {"weights": weights, "variances_mm2": v.copy(), "fit_residual": residual}


def _reduced_albedo_for(total, n_relative):
    """Solve dipole_total(alpha') = total for alpha' (monotone; brentq on [0, 1])."""
    top = float(dipole_total_Jensen2001(1.0, n_relative))
    if not 0.0 < total < top:
        raise FitError(
            f"albedo_multiple = {total:.6g} is outside the range the dipole reaches (0, {top:.6g}) "
            f"for eta = {n_relative:g}"
        )
    return brentq(lambda x: float(dipole_total_Jensen2001(x, n_relative)) - total, 0.0, 1.0, xtol=1e-14)


def fit_dipole_Jensen2001(ring_edges_mm, radial_per_mm2, radial_stderr, albedo_multiple, *, n_relative=1.0):
    """Effective mu_a and mu_s' of the classical dipole fitted to N ring profiles, conserving A.

    Parameters
    ----------
    ring_edges_mm : array_like, shape (R+1,)
        Ring edges in mm.
    radial_per_mm2, radial_stderr : array_like, shape (N, R)
        Ring values and standard errors in mm^-2.
    albedo_multiple : array_like, shape (N,)
        Measured A, strictly in (0, 1).
    n_relative : float
        Relative refractive index of the boundary (1 = index matched).

    Returns
    -------
    dict of ndarray, each (N,)
        ``mu_a_per_mm``, ``mu_s_reduced_per_mm`` (1/mm), ``albedo_reduced``, ``fit_residual``,
        ``at_search_edge``.

    References
    ----------
    ``Farrell1992``, Eq. 12; ``Jensen2001``, Eqs. 4, 5 and 11.

    """
    e, y, s, a = validate_profiles(
        ring_edges_mm, radial_per_mm2, radial_stderr, albedo_multiple, what="fit_dipole"
    )
    if not np.isfinite(n_relative) or n_relative < 1.0:
        raise ParameterError(f"n_relative = {n_relative!r}; must be >= 1")
    w = ring_weights(y, s)
    ap = np.array([_reduced_albedo_for(float(x), float(n_relative)) for x in a])
    r_pos = e[e > 0]
    grid = np.linspace(np.log(1e-2 / e[-1]), np.log(1e2 / r_pos[0]), 48)  # log mu_t' in log(1/mm)

    def cost(log_mut):
        mut = np.exp(log_mut)
        model = dipole_rings_Jensen2001(e, (1.0 - ap) * mut, ap * mut, n_relative)
        return np.sum(((model - y) * w) ** 2, axis=-1)

    log_mut, at_edge = golden_log_search(cost, grid, y.shape[0])
    mut = np.exp(log_mut)
    residual = np.sqrt(cost(log_mut) / np.sum((y * w) ** 2, axis=-1))
    return {
        "mu_a_per_mm": (1.0 - ap) * mut,
        "mu_s_reduced_per_mm": ap * mut,
        "albedo_reduced": ap,
        "fit_residual": residual,
        "at_search_edge": at_edge,
    }


def fit_profile(result, model="Christensen2015", **options):
    """Fit one profile model to a transport result's radial profile, conserving its diffuse reflectance.

    Parameters
    ----------
    result : TransportResult
        Result with a radial profile.
    model : str
        One of :data:`PROFILE_MODELS`.
    **options
        Passed to the model's fit (e.g. ``n_relative`` for the dipole).

    Returns
    -------
    dict
        The fit's outputs for this one profile (floats, or a list for the Gaussian weights).

    References
    ----------
    ``Christensen2015``; ``dEon2007``; ``Jensen2001``.

    """
    if model not in PROFILE_MODELS:
        raise ParameterError(f"unknown profile model {model!r}; use one of {', '.join(PROFILE_MODELS)}")
    edges = np.asarray(result.ring_edges_mm)
    if edges.size == 0:
        raise FitError("the transport result has no radial profile; simulate with a profile")
    args = (
        edges,
        np.asarray(result.radial_reflectance_per_mm2)[None, :],
        np.asarray(result.radial_stderr_per_mm2)[None, :],
        np.array([result.diffuse_reflectance.value]),
    )
    if model == "Christensen2015":
        out = fit_burley2015(*args, **options)
    elif model == "dEon2007":
        out = fit_gaussians_dEon2007(*args, **options)
    else:
        out = fit_dipole_Jensen2001(*args, **options)
    single = {}
    for k, v in out.items():
        v = np.asarray(v)
        if k == "variances_mm2":
            single[k] = v.tolist()
        elif v.ndim == 2:
            single[k] = v[0].tolist()
        else:
            single[k] = bool(v[0]) if v.dtype == bool else float(v[0])
    return single
