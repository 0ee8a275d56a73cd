"""The table quantities of N parameter sets from their band transport tallies: :func:`summarize`.

Units: lengths in mm, profiles in mm^-2, albedos dimensionless. Quantity names are fixed (the lookup
tables store them; bake and export read them):

- spectral, last axis B: ``albedo_multiple`` (total diffuse reflectance A at normal incidence),
  ``albedo_multiple_stderr``, ``shape_distance_mm`` (normalised-diffusion d, fitted with A conserved),
  ``albedo_single`` and ``mean_free_path_mm`` (effective homogeneous half-space, 1 / sigma_t),
  ``anisotropy`` (its g), ``fit_residual`` (relative weighted RMS misfit of the profile fit);
- RGB, last axis 3 (working space): ``rgb_albedo_multiple``, ``rgb_shape_distance_mm``,
  ``rgb_albedo_single``, ``rgb_mean_free_path_mm``, ``rgb_fit_residual``;
- ``ior``, last axis 1: the boundary refractive index of the effective medium.
"""

from __future__ import annotations

import numpy as np

from matgen.errors import FitError, ParameterError
from matgen.fit.channels import channel_anisotropy, channel_profiles, rgb_weights
from matgen.fit.diffusion import fit_burley2015
from matgen.fit.inversion import INVERSION_METHODS, effective_medium, has_default_table

#: Quantity names and their channel counts ("B" = one per band).
TABLE_QUANTITIES = {
    "albedo_multiple": "B",
    "albedo_multiple_stderr": "B",
    "shape_distance_mm": "B",
    "albedo_single": "B",
    "mean_free_path_mm": "B",
    "anisotropy": "B",
    "fit_residual": "B",
    "rgb_albedo_multiple": 3,
    "rgb_shape_distance_mm": 3,
    "rgb_albedo_single": 3,
    "rgb_mean_free_path_mm": 3,
    "rgb_fit_residual": 3,
    "ior": 1,
}


def resolve_inversion(inversion=None) -> str:
    """Return the inversion method :func:`summarize` uses.

    ``inversion`` if given, else ``"boundary_table"`` when the shipped table is present, else
    ``"OpenPBR2024"``. Record this name beside stored results.
    """
    if inversion is None:
        return "boundary_table" if has_default_table() else "OpenPBR2024"
    if inversion not in INVERSION_METHODS:
        raise ParameterError(
            f"unknown inversion method {inversion!r}; use one of {', '.join(INVERSION_METHODS)}"
        )
    return inversion


def summarize(
    bands,
    ring_edges_mm,
    albedo_multiple,
    albedo_multiple_stderr,
    radial_per_mm2,
    radial_stderr,
    g,
    n,
    *,
    working_space="ACEScg",
    illuminant="D65",
    inversion=None,
    table=None,
):
    """Fit, invert and reduce the band tallies of N parameter sets to the table quantities.

    Parameters
    ----------
    bands : BandSet
        The B bands (nm).
    ring_edges_mm : ndarray, shape (R+1,)
        Ring edges in mm.
    albedo_multiple, albedo_multiple_stderr : ndarray, shape (N, B)
        Total diffuse reflectance A per band and its standard error.
    radial_per_mm2, radial_stderr : ndarray, shape (N, B, R)
        Radial profiles and standard errors in mm^-2.
    g : ndarray, shape (N, B) or (B,), or float
        Anisotropy given to the effective medium per band.
    n : float
        Refractive index of the effective medium's boundary (air outside).
    working_space, illuminant : str
        RGB working space and illuminant (colour-science names or matgen aliases).
    inversion : str, optional
        Inversion method (see :func:`resolve_inversion`).
    table : InversionTable, optional
        Table for ``"boundary_table"`` (default: the shipped one). g or n outside its nodes are clamped to
        its range with a :class:`~matgen.errors.ClampWarning`.

    Returns
    -------
    dict of str -> ndarray
        Exactly the keys of :data:`TABLE_QUANTITIES`; spectral arrays (N, B), RGB arrays (N, 3), ``ior``
        (N, 1); float64.

    Raises
    ------
    FitError, ParameterError
        For malformed inputs (naming the input), unknown space / illuminant / method.

    References
    ----------
    ``Christensen2015`` (profile fit); ``Chiang2016``, ``OpenPBR2024`` (closed-form inversion);
    ``CIE2004``, ``Moroney2002`` (RGB weights).

    """
    method = resolve_inversion(inversion)
    if method == "boundary_table":
        # g or n outside the table's nodes: clamp with a ClampWarning rather than fail a table build
        import copy

        from matgen.fit.inversion import default_inversion_table

        table = copy.copy(table if table is not None else default_inversion_table())
        table.out_of_range = "clamp"
    a = np.asarray(albedo_multiple, dtype=np.float64)
    if a.ndim != 2 or a.shape[1] != len(bands):
        raise FitError(
            f"albedo_multiple has shape {a.shape}; expected (N, {len(bands)}) for N parameter sets"
        )
    nset, nb = a.shape
    a_err = np.asarray(albedo_multiple_stderr, dtype=np.float64)
    if a_err.shape != a.shape:
        raise FitError(f"albedo_multiple_stderr has shape {a_err.shape}; expected {a.shape}")
    y = np.asarray(radial_per_mm2, dtype=np.float64)
    s = np.asarray(radial_stderr, dtype=np.float64)
    e = np.asarray(ring_edges_mm, dtype=np.float64)
    if y.shape[:2] != (nset, nb) or y.ndim != 3:
        raise FitError(f"radial_per_mm2 has shape {y.shape}; expected ({nset}, {nb}, R)")
    gg = np.asarray(g, dtype=np.float64)
    if gg.shape not in ((), (nb,), (nset, nb)):
        raise FitError(f"g has shape {gg.shape}; expected a scalar, ({nb},) or ({nset}, {nb})")
    gg = np.broadcast_to(gg, (nset, nb))
    try:
        n_val = float(n)
    except (TypeError, ValueError):
        raise ParameterError(f"n must be one refractive index (float); got {n!r}") from None
    if not np.isfinite(n_val) or n_val < 1.0:
        raise ParameterError(f"n = {n_val!r}; the effective medium's refractive index must be >= 1")

    # spectral fits, all bands of all sets at once
    fit = fit_burley2015(e, y.reshape(nset * nb, -1), s.reshape(nset * nb, -1), a.reshape(-1))
    d = fit["shape_distance_mm"].reshape(nset, nb)
    med = effective_medium(a, d, gg, n_val, method=method, table=table)

    # RGB reduction
    w = rgb_weights(bands, working_space, illuminant)
    rgb_a = a @ w.T
    prof, err, _neg = channel_profiles(w, y, s)
    rgb_fit = fit_burley2015(e, prof.reshape(nset * 3, -1), err.reshape(nset * 3, -1), rgb_a.reshape(-1))
    rgb_d = rgb_fit["shape_distance_mm"].reshape(nset, 3)
    rgb_g = channel_anisotropy(w, a, gg)
    rgb_med = effective_medium(rgb_a, rgb_d, rgb_g, n_val, method=method, table=table)

    return {
        "albedo_multiple": a.copy(),
        "albedo_multiple_stderr": a_err.copy(),
        "shape_distance_mm": d,
        "albedo_single": np.asarray(med["albedo_single"], dtype=np.float64).reshape(nset, nb),
        "mean_free_path_mm": np.asarray(med["mean_free_path_mm"], dtype=np.float64).reshape(nset, nb),
        "anisotropy": np.array(gg, dtype=np.float64),
        "fit_residual": fit["fit_residual"].reshape(nset, nb),
        "rgb_albedo_multiple": rgb_a,
        "rgb_shape_distance_mm": rgb_d,
        "rgb_albedo_single": np.asarray(rgb_med["albedo_single"], dtype=np.float64).reshape(nset, 3),
        "rgb_mean_free_path_mm": np.asarray(rgb_med["mean_free_path_mm"], dtype=np.float64).reshape(nset, 3),
        "rgb_fit_residual": rgb_fit["fit_residual"].reshape(nset, 3),
        "ior": np.full((nset, 1), n_val),
    }
