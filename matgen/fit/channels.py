"""RGB and single-channel reduction of spectral transport results. Units: mm, mm^-2; values dimensionless.

The RGB multiple-scattering colour is the spectral A weighted by the working-space channel weights
(:func:`matgen.color.channel_weights`). The per-channel profile is the channel-weighted sum of the band
profiles, P_c(r) = sum_b W_cb R_b(r), whose integral is the channel's A; it is fitted like a band profile
(the radius comes from the fit of that profile, never from averaging band radii). Channel weights of
wide-gamut conversions have small negative lobes; a ring whose weighted sum comes out negative (only
possible where the band profiles differ strongly) is set to 0 before the fit, and its count is returned.
Ring errors combine as sqrt(sum_b W_cb^2 stderr_b^2) (bands treated as independent runs).

The channel anisotropy is the mean of the band g weighted by |W_cb| A_b (the bands that make the channel).
"""

from __future__ import annotations

import numpy as np

from matgen.color import channel_weights, pass_weights
from matgen.errors import FitError


def channel_profiles(weights, radial_per_mm2, radial_stderr):
    """Channel-weighted radial profiles and their errors.

    Parameters
    ----------
    weights : ndarray, shape (C, B)
        Channel weights (rows: channels).
    radial_per_mm2, radial_stderr : ndarray, shape (N, B, R)
        Band ring profiles and standard errors in mm^-2.

    Returns
    -------
    tuple
        ``(profile (N, C, R), stderr (N, C, R), negative_rings (N, C))`` in mm^-2; negative rings are set
        to 0 and counted.

    References
    ----------
    ``CIE2004`` (linear weighting of spectra); matgen's own reduction.

    """
    w = np.asarray(weights, dtype=np.float64)
    y = np.asarray(radial_per_mm2, dtype=np.float64)
    s = np.asarray(radial_stderr, dtype=np.float64)
    prof = np.einsum("cb,nbr->ncr", w, y)
    err = np.sqrt(np.einsum("cb,nbr->ncr", w * w, s * s))
    negative = prof < 0
    count = negative.sum(axis=-1)
    prof = np.where(negative, 0.0, prof)
    return prof, err, count


def channel_anisotropy(weights, albedo_multiple, g):
    """Channel anisotropy: mean of band g weighted by |W_cb| A_b; shape (N, C).

    Parameters
    ----------
    weights : ndarray, shape (C, B)
        Channel weights.
    albedo_multiple : ndarray, shape (N, B)
        Band A.
    g : ndarray, shape (N, B) or (B,)
        Band anisotropy.

    Returns
    -------
    ndarray, shape (N, C)
        Channel g.

    References
    ----------
    matgen's own convention (documented in the module docstring).

    """
    a = np.asarray(albedo_multiple, dtype=np.float64)
    gg = np.broadcast_to(np.asarray(g, dtype=np.float64), a.shape)
    k = np.abs(np.asarray(weights, dtype=np.float64))[None, :, :] * a[:, None, :]  # (N, C, B)
    den = k.sum(axis=-1)
    if np.any(den <= 0):
        raise FitError("a channel has no weight on any band with nonzero albedo; cannot form its anisotropy")
    return np.einsum("ncb,nb->nc", k, gg) / den


def rgb_weights(bands, working_space="ACEScg", illuminant="D65"):
    """Channel weights (3, B) of the working space under the illuminant (see :mod:`matgen.color`)."""
    return channel_weights(bands, working_space, illuminant)


def pass_value(name_or_csv_path, bands, values):
    """Single-channel UV / IR pass value(s) ``weights @ values`` for band spectra (..., B).

    Parameters
    ----------
    name_or_csv_path : str
        Built-in pass (``uv365``, ``nir850``, ``nir940``) or CSV path.
    bands : BandSet
        Band set (nm).
    values : ndarray, shape (..., B)
        Band values (e.g. A).

    Returns
    -------
    ndarray, shape (...)
        Pass values.

    References
    ----------
    Built-in responses: illustrative curves of ``tools/make_pass_responses.py``.

    """
    w = pass_weights(name_or_csv_path, bands)
    v = np.asarray(values, dtype=np.float64)
    if v.shape[-1] != w.size:
        raise FitError(f"values have {v.shape[-1]} bands on the last axis; the band set has {w.size}")
    return v @ w
