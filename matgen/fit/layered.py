"""What one homogeneous medium takes from a layered stack besides A and d: its anisotropy g.

Units: lengths in mm, coefficients in 1/mm, fractions of the launched weight.

A layered result is collapsed into one effective medium (:func:`matgen.fit.inversion.effective_medium`) from
its total diffuse reflectance A and profile width d; the medium's Henyey-Greenstein g is the mean g over the
scattering events of the light, i.e. each layer's g weighted by the number of scattering events in it,
``mu_s,i x l_i``, with ``l_i`` the weight-averaged path length of light in layer i. The table build takes
``l_i`` of reflected light from photon records (``Alerstam2008white``); a plain transport result gives the
path length of all light through the absorbed fraction of each layer, ``l_i = absorbed_i / mu_a,i`` (the
absorbed fraction is mu_a,i times the path length it integrates).
"""

from __future__ import annotations

import numpy as np

from matgen.errors import ParameterError


def layer_path_lengths_mm(mu_a_per_mm, absorbed, thickness_mm):
    """Weight-averaged path length of light in each layer, from the absorbed fractions.

    Parameters
    ----------
    mu_a_per_mm : array_like, shape (L,)
        Absorption coefficient of each layer, 1/mm.
    absorbed : array_like, shape (..., L)
        Fraction of the launched weight absorbed in each layer (matgen's transport tally).
    thickness_mm : array_like, shape (L,)
        Layer thickness, mm; stands in for the path length of a layer with mu_a = 0 (a clear or
        non-absorbing layer, whose path length the absorbed fraction cannot tell).

    Returns
    -------
    ndarray, shape (..., L)
        ``absorbed_i / mu_a,i`` in mm (``thickness_i`` where mu_a,i = 0).

    References
    ----------
    ``Alerstam2008white`` (absorbed weight = mu_a x path length).

    """
    mu_a = np.asarray(mu_a_per_mm, np.float64)
    ab = np.asarray(absorbed, np.float64)
    d = np.asarray(thickness_mm, np.float64)
    if mu_a.shape != d.shape or ab.shape[-1:] != mu_a.shape:
        raise ParameterError(
            f"layer path lengths: mu_a {mu_a.shape}, absorbed {ab.shape} and thickness {d.shape} "
            "must describe the same layers"
        )
    return np.where(mu_a > 0, ab / np.where(mu_a > 0, mu_a, 1.0), d)


def effective_anisotropy(g, mu_s_per_mm, path_mm):
    """Mean Henyey-Greenstein g over the scattering events of light in a layered stack.

    Parameters
    ----------
    g : array_like, shape (L,)
        Anisotropy of each layer.
    mu_s_per_mm : array_like, shape (L,)
        Scattering coefficient of each layer, 1/mm.
    path_mm : array_like, shape (..., L)
        Weight-averaged path length of light in each layer, mm (reflected light from photon records, or
        :func:`layer_path_lengths_mm`).

    Returns
    -------
    ndarray, shape (...)
        ``sum_i g_i mu_s,i l_i / sum_i mu_s,i l_i``; the plain mean of g where no light scattered.

    References
    ----------
    ``Alerstam2008white`` (path lengths per layer); the event-weighted mean is common practice.

    """
    g = np.asarray(g, np.float64)
    w = np.asarray(path_mm, np.float64) * np.asarray(mu_s_per_mm, np.float64)
    total = w.sum(axis=-1)
    g_eff = (w * g).sum(axis=-1) / np.where(total > 0, total, 1.0)
    return np.where(total > 0, g_eff, float(np.mean(g)))
