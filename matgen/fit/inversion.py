"""Effective homogeneous medium: multiple-scattering albedo A to single-scattering albedo and mean free path.

Units: lengths in mm; albedos dimensionless. A is the total diffuse reflectance of a semi-infinite medium
at normal incidence, as a fraction of the incident power (the specular Fresnel reflection excluded).

Methods (``method=`` of :func:`albedo_single` and :func:`albedo_multiple`):

- ``"ChiangKutzBurley2016"``: the closed-form inversion alpha = 1 - s^2 of ``Chiang2016``, isotropic and
  index matched;
- ``"OpenPBR2024"``: its anisotropic form alpha = (1 - s^2) / (1 - g s^2) as given in the OpenPBR Surface
  specification v0.4 (``OpenPBR2024``, Subsurface section), the inverse of van de Hulst's
  A = (1 - s)(1 - 0.139 s) / (1 + 1.17 s), s = sqrt((1 - alpha) / (1 - g alpha)) (``vandeHulst1980``);
  index matched;
- ``"boundary_table"``: matgen's boundary-aware inversion for a homogeneous half-space under a smooth
  boundary of index n against air (``tools/make_inversion_table.py``; file ``fit/data/inversion_table.npz``
  with its provenance record): A(alpha, g, n) from adding-doubling nodes (``Prahl1993iad``) through a
  smooth, monotone interpolant (:class:`matgen.fit.albedo_grid.AlbedoGrid`), inverted exactly, and the
  profile scaling l / d from matgen's transport engine.

The mean free path of the effective medium follows from the fitted shape distance d: l = s d with the
scaling factor s of Christensen & Burley's searchlight mean-free-path fit s = 1.85 - A + 7 |A - 0.8|^3
(closed-form methods) or of the table.
"""

from __future__ import annotations

import json
import warnings
from functools import lru_cache
from importlib import resources

import numpy as np

from matgen.errors import ClampWarning, DataError, FitError, ParameterError
from matgen.fit.albedo_grid import AlbedoGrid
from matgen.fit.models import shape_scaling_Christensen2015

#: Names accepted by ``method=``.
INVERSION_METHODS = ("ChiangKutzBurley2016", "OpenPBR2024", "boundary_table")

TABLE_FILE = "inversion_table.npz"

#: Bisection steps of the table inversion on s in [0, 1]: 2^-52 resolution.
_BISECTION_STEPS = 52
TABLE_PROVENANCE = "inversion_table.provenance.json"


def specular_reflectance_normal(n_medium, n_outside=1.0):
    """Fresnel reflectance of a smooth boundary at normal incidence, ((n1 - n2) / (n1 + n2))^2.

    Parameters
    ----------
    n_medium, n_outside : float or ndarray
        Refractive indices (dimensionless).

    Returns
    -------
    ndarray
        Reflectance (dimensionless).

    References
    ----------
    ``BornWolf1999``, Sec. 1.5 (Fresnel formulae at normal incidence).

    """
    n1 = np.asarray(n_medium, dtype=np.float64)
    return ((n1 - n_outside) / (n1 + n_outside)) ** 2


def _check_unit_interval(name, values, open_low=True, open_high=True):
    v = np.asarray(values, dtype=np.float64)
    bad = ~np.isfinite(v)
    bad |= (v <= 0) if open_low else (v < 0)
    bad |= (v >= 1) if open_high else (v > 1)
    if bad.any():
        i = int(np.argmax(bad.reshape(-1)))
        lo = "(0" if open_low else "[0"
        hi = "1)" if open_high else "1]"
        raise FitError(f"{name}[{i}] = {v.reshape(-1)[i]!r}; must lie in {lo}, {hi}")
    return v


def _check_g(g):
    gv = np.asarray(g, dtype=np.float64)
    bad = ~np.isfinite(gv) | (gv <= -1) | (gv >= 1)
    if bad.any():
        i = int(np.argmax(bad.reshape(-1)))
        raise ParameterError(f"anisotropy g[{i}] = {gv.reshape(-1)[i]!r}; must lie in (-1, 1)")
    return gv


# --------------------------------------------------------------------------------------------------------
# Closed forms
# --------------------------------------------------------------------------------------------------------


def albedo_multiple_vanDeHulst1980(albedo_single, g=0.0):
    """Multiple-scattering albedo of a half-space from van de Hulst's approximation (dimensionless).

    A = (1 - s)(1 - 0.139 s) / (1 + 1.17 s), s = sqrt((1 - alpha) / (1 - g alpha)).

    Parameters
    ----------
    albedo_single : float or ndarray
        Single-scattering albedo alpha in [0, 1].
    g : float or ndarray
        Henyey-Greenstein anisotropy in (-1, 1).

    Returns
    -------
    ndarray
        A in [0, 1].

    References
    ----------
    ``vandeHulst1980`` as quoted in ``OpenPBR2024`` (Subsurface section, v0.4).

    """
    a = np.asarray(albedo_single, dtype=np.float64)
    gv = np.asarray(g, dtype=np.float64)
    s = np.sqrt((1.0 - a) / (1.0 - gv * a))
    return (1.0 - s) * (1.0 - 0.139 * s) / (1.0 + 1.17 * s)


def _ckb_s(albedo_multiple):
    c = np.asarray(albedo_multiple, dtype=np.float64)
    return 4.09712 + 4.20863 * c - np.sqrt(9.59217 + 41.6808 * c + 17.7126 * c * c)


def albedo_single_ChiangKutzBurley2016(albedo_multiple):
    """Single-scattering albedo from multiple-scattering albedo, isotropic and index matched.

    alpha = 1 - (4.09712 + 4.20863 A - sqrt(9.59217 + 41.6808 A + 17.7126 A^2))^2.

    Parameters
    ----------
    albedo_multiple : float or ndarray
        A in [0, 1].

    Returns
    -------
    ndarray
        alpha in [0, 1].

    References
    ----------
    ``Chiang2016`` (coefficients as re-read in ``OpenPBR2024``, which gives the same expression).

    """
    s = _ckb_s(albedo_multiple)
    return 1.0 - s * s


def albedo_single_OpenPBR2024(albedo_multiple, g=0.0):
    """Single-scattering albedo from multiple-scattering albedo with anisotropy, index matched.

    alpha = (1 - s^2) / (1 - g s^2), s = 4.09712 + 4.20863 A - sqrt(9.59217 + 41.6808 A + 17.7126 A^2).

    Parameters
    ----------
    albedo_multiple : float or ndarray
        A in [0, 1] (OpenPBR's subsurface_color C).
    g : float or ndarray
        Henyey-Greenstein anisotropy in (-1, 1).

    Returns
    -------
    ndarray
        alpha in [0, 1].

    References
    ----------
    ``OpenPBR2024``, Subsurface section (v0.4, 2024-04-30), inverse of ``vandeHulst1980``.

    """
    s2 = _ckb_s(albedo_multiple) ** 2
    gv = np.asarray(g, dtype=np.float64)
    return (1.0 - s2) / (1.0 - gv * s2)


# --------------------------------------------------------------------------------------------------------
# Boundary-aware table
# --------------------------------------------------------------------------------------------------------


class InversionTable:
    """Table of A(alpha, g, n) and of the profile scaling l/d for a homogeneous half-space.

    With an ``albedo_grid`` (the shipped table has one), A and its inverse come from that smooth
    adding-doubling model and the arrays below serve the scaling l/d (their A is matgen's transport at the
    same nodes, kept as a cross-check); without one, A is interpolated from ``albedo_multiple`` linearly
    in the similarity parameter.

    Attributes
    ----------
    albedo_single : ndarray, shape (Na,)
        Single-scattering albedo nodes, ascending, 0 first and 1 last (both analytic: A(0) = 0,
        A(1) = 1 - R_specular(n)).
    g : ndarray, shape (Ng,)
        Anisotropy nodes, ascending.
    n : ndarray, shape (Nn,)
        Refractive-index nodes of the medium (air above), ascending.
    albedo_multiple, albedo_multiple_stderr : ndarray, shape (Na, Ng, Nn)
        Diffuse reflectance at normal incidence (fraction of incident power) and its standard error.
    shape_scaling, shape_scaling_stderr : ndarray, shape (Na, Ng, Nn)
        l / d, the mean free path over the fitted normalised-diffusion shape distance (NaN at the analytic
        end nodes, where no profile exists; interpolation there uses the neighbouring node).
    provenance : dict
        How the table was made.
    albedo_grid : AlbedoGrid or None
        Smooth forward model of A used for lookups and inversion when present.

    """

    def __init__(
        self,
        albedo_single,
        g,
        n,
        albedo_multiple,
        albedo_multiple_stderr,
        shape_scaling,
        shape_scaling_stderr,
        provenance=None,
        *,
        albedo_grid=None,
    ):
        self.albedo_single = np.asarray(albedo_single, dtype=np.float64)
        self.g = np.asarray(g, dtype=np.float64)
        self.n = np.asarray(n, dtype=np.float64)
        self.albedo_multiple = np.asarray(albedo_multiple, dtype=np.float64)
        self.albedo_multiple_stderr = np.asarray(albedo_multiple_stderr, dtype=np.float64)
        self.shape_scaling = np.asarray(shape_scaling, dtype=np.float64)
        self.shape_scaling_stderr = np.asarray(shape_scaling_stderr, dtype=np.float64)
        self.provenance = dict(provenance or {})
        shape = (self.albedo_single.size, self.g.size, self.n.size)
        for name in ("albedo_multiple", "albedo_multiple_stderr", "shape_scaling", "shape_scaling_stderr"):
            if getattr(self, name).shape != shape:
                raise DataError(
                    f"inversion table: {name} has shape {getattr(self, name).shape}, expected {shape}"
                )
        if np.any(np.diff(self.albedo_multiple, axis=0) <= 0):
            raise DataError(
                "inversion table: A(alpha) is not strictly increasing along alpha for some (g, n)"
            )
        # fill the analytic end nodes' scaling from their neighbours for interpolation
        s = self.shape_scaling.copy()
        if np.isnan(s[0]).any():
            s[0] = np.where(np.isnan(s[0]), s[1], s[0])
        if np.isnan(s[-1]).any():
            s[-1] = np.where(np.isnan(s[-1]), s[-2], s[-1])
        if np.isnan(s).any():
            raise DataError("inversion table: shape_scaling has NaN at interior nodes")
        self._scaling_filled = s
        self.albedo_grid = albedo_grid
        lo_g, hi_g, lo_n, hi_n = self.g[0], self.g[-1], self.n[0], self.n[-1]
        if albedo_grid is not None:
            lo_g, hi_g = max(lo_g, albedo_grid.g[0]), min(hi_g, albedo_grid.g[-1])
            lo_n, hi_n = max(lo_n, albedo_grid.n[0]), min(hi_n, albedo_grid.n[-1])
        #: Covered (g, n) domain: the intersection of both grids.
        self.g_range = (float(lo_g), float(hi_g))
        self.n_range = (float(lo_n), float(hi_n))

    # -- io --------------------------------------------------------------------------------------------
    def save(self, path_npz, path_provenance=None):
        """Write the table (``.npz``) and, if given, its provenance record (JSON)."""
        grid = {}
        if self.albedo_grid is not None:
            grid = {
                "grid_similarity": self.albedo_grid.similarity,
                "grid_g": self.albedo_grid.g,
                "grid_n": self.albedo_grid.n,
                "grid_log_ratio": self.albedo_grid.log_ratio,
            }
        np.savez_compressed(
            path_npz,
            **grid,
            albedo_single=self.albedo_single,
            g=self.g,
            n=self.n,
            albedo_multiple=self.albedo_multiple,
            albedo_multiple_stderr=self.albedo_multiple_stderr,
            shape_scaling=self.shape_scaling,
            shape_scaling_stderr=self.shape_scaling_stderr,
        )
        if path_provenance is not None:
            with open(path_provenance, "w") as fh:
                json.dump(self.provenance, fh, indent=2, sort_keys=True)
                fh.write("\n")

    @classmethod
    def load(cls, path_npz, path_provenance=None):
        """Read a table written by :meth:`save`."""
        try:
            with np.load(path_npz) as z:
                arrays = {k: z[k] for k in z.files}
        except (OSError, ValueError) as exc:
            raise DataError(f"cannot read inversion table {path_npz}: {exc}") from exc
        prov = {}
        if path_provenance is not None:
            with open(path_provenance) as fh:
                prov = json.load(fh)
        grid = None
        keys = ("grid_similarity", "grid_g", "grid_n", "grid_log_ratio")
        if any(k in arrays for k in keys):
            try:
                parts = [arrays.pop(k) for k in keys]
            except KeyError as exc:
                raise DataError(f"inversion table {path_npz} lacks the albedo grid array {exc}") from exc
            grid = AlbedoGrid(*parts, provenance=prov.get("albedo_grid"))
        try:
            return cls(provenance=prov, albedo_grid=grid, **arrays)
        except TypeError as exc:
            raise DataError(f"inversion table {path_npz} lacks arrays ({exc})") from exc

    # -- lookup ----------------------------------------------------------------------------------------
    #: What to do with g or n outside the table: "error" (ParameterError) or "clamp" (ClampWarning).
    out_of_range = "error"

    def _corner_weights(self, g, n):
        """Bilinear weights over the (g, n) grid: index arrays (4, K) into g and n, weights (4, K)."""
        g = np.asarray(g, dtype=np.float64).reshape(-1)
        n = np.asarray(n, dtype=np.float64).reshape(-1)
        for name, v, (lo, hi) in (("anisotropy g", g, self.g_range), ("refractive index n", n, self.n_range)):
            out = (v < lo - 1e-12) | (v > hi + 1e-12)
            if out.any():
                i = int(np.argmax(out))
                msg = f"{name} = {v[i]!r} lies outside the boundary-aware inversion table [{lo:g}, {hi:g}]"
                if self.out_of_range != "clamp":
                    raise ParameterError(msg + "; use a closed-form method or extend the table")
                warnings.warn(
                    f"boundary-aware inversion table: {msg}; clamped to the table's range "
                    f"({int(out.sum())} values)",
                    ClampWarning,
                    stacklevel=4,
                )
        g = np.clip(g, *self.g_range)
        n = np.clip(n, *self.n_range)

        def axis(v, nodes):
            if nodes.size == 1:
                z = np.zeros(v.size, dtype=np.int64)
                return z, z, np.zeros(v.size)
            i = np.clip(np.searchsorted(nodes, v, side="right") - 1, 0, nodes.size - 2)
            t = np.clip((v - nodes[i]) / (nodes[i + 1] - nodes[i]), 0.0, 1.0)
            return i, i + 1, t

        g0, g1, tg = axis(g, self.g)
        n0, n1, tn = axis(n, self.n)
        gi = np.stack([g0, g1, g0, g1])
        ni = np.stack([n0, n0, n1, n1])
        w = np.stack([(1 - tg) * (1 - tn), tg * (1 - tn), (1 - tg) * tn, tg * tn])
        return gi, ni, w

    def _similarity_nodes(self, gi):
        """Similarity parameter s = sqrt((1 - alpha) / (1 - g alpha)) of every alpha node at g nodes gi.

        Returns (K, Na), decreasing along alpha (s = 1 at alpha = 0, 0 at alpha = 1).
        """
        a = self.albedo_single[None, :]
        g = self.g[gi][:, None]
        return np.sqrt(np.clip((1.0 - a) / (1.0 - g * a), 0.0, None))

    def _corner_interp(self, x, nodes_x, values):
        """Per row, linear interpolation of values (K, Na) at x (K,) on ascending nodes_x (K, Na)."""
        k = np.clip(np.sum(nodes_x < x[:, None], axis=1) - 1, 0, nodes_x.shape[1] - 2)
        rows = np.arange(x.size)
        x0, x1 = nodes_x[rows, k], nodes_x[rows, k + 1]
        t = np.clip((x - x0) / (x1 - x0), 0.0, 1.0)
        return values[rows, k] + t * (values[rows, k + 1] - values[rows, k])

    def _blend_at_similarity(self, table, s, gi, ni, w):
        """Blend the four corners' values of ``table`` (Na, Ng, Nn) interpolated at similarity s (K,)."""
        out = np.zeros(s.size)
        for c in range(4):
            nodes = self._similarity_nodes(gi[c])[:, ::-1]  # ascending s
            vals = table[:, gi[c], ni[c]].T[:, ::-1]
            out += w[c] * self._corner_interp(s, nodes, vals)
        return out

    def _prepare(self, values, g, n):
        v = np.asarray(values, dtype=np.float64)
        shape = v.shape
        g = np.broadcast_to(np.asarray(g, dtype=np.float64), shape).reshape(-1)
        n = np.broadcast_to(np.asarray(n, dtype=np.float64), shape).reshape(-1)
        gi, ni, w = self._corner_weights(g, n)
        return v.reshape(-1), shape, np.clip(g, *self.g_range), np.clip(n, *self.n_range), gi, ni, w

    def albedo_multiple_of(self, albedo_single, g, n):
        """A(alpha, g, n) by interpolation.

        With an albedo grid: its smooth model (:meth:`AlbedoGrid.albedo_multiple_of`). Otherwise, at each
        of the four (g, n) corner nodes A is interpolated linearly in van de Hulst's similarity parameter
        s = sqrt((1 - alpha) / (1 - g alpha)) (``vandeHulst1980``) and the corner values are blended
        bilinearly in g and n.
        """
        a, shape, g, n, gi, ni, w = self._prepare(albedo_single, g, n)
        if self.albedo_grid is not None:
            return self.albedo_grid.albedo_multiple_of(a, g, n).reshape(shape)
        s = np.sqrt(np.clip((1.0 - a) / (1.0 - g * a), 0.0, None))
        return self._blend_at_similarity(self.albedo_multiple, s, gi, ni, w).reshape(shape)

    def invert(self, albedo_multiple, g, n):
        """Return alpha and the scaling l/d that reproduce A for each (g, n); arrays of A's shape.

        Exact inverse of :meth:`albedo_multiple_of` (bisection on the similarity parameter s, on which the
        interpolated A is monotone), alpha = (1 - s^2) / (1 - g s^2); l/d interpolated the same way.
        Raises :class:`FitError` where A exceeds the largest diffuse reflectance the boundary allows,
        1 - R_specular(n).
        """
        a, shape, g, n, gi, ni, w = self._prepare(albedo_multiple, g, n)
        if self.albedo_grid is not None:
            s = self.albedo_grid.similarity_of(a, g, n)
            alpha = (1.0 - s**2) / (1.0 - g * s**2)
            scale = self._blend_at_similarity(self._scaling_filled, s, gi, ni, w)
            return alpha.reshape(shape), scale.reshape(shape)
        top = np.einsum("ck,ck->k", self.albedo_multiple[-1][gi, ni], w)
        over = a >= top
        if over.any():
            i = int(np.argmax(over))
            raise FitError(
                f"albedo_multiple[{i}] = {a[i]:.6g} is not reachable by a half-space of index "
                f"{n[i]:g}: at most {top[i]:.6g} "
                "(1 - normal specular reflectance)"
            )
        lo = np.zeros(a.size)  # s = 0: alpha = 1, largest A
        hi = np.ones(a.size)  # s = 1: alpha = 0, A = 0
        for _ in range(_BISECTION_STEPS):
            mid = 0.5 * (lo + hi)
            above = self._blend_at_similarity(self.albedo_multiple, mid, gi, ni, w) > a
            lo = np.where(above, mid, lo)
            hi = np.where(above, hi, mid)
        s = 0.5 * (lo + hi)
        alpha = (1.0 - s**2) / (1.0 - g * s**2)
        scale = self._blend_at_similarity(self._scaling_filled, s, gi, ni, w)
        return alpha.reshape(shape), scale.reshape(shape)


@lru_cache(maxsize=1)
def default_inversion_table() -> InversionTable:
    """Load the shipped boundary-aware inversion table (``matgen/fit/data/inversion_table.npz``)."""
    root = resources.files("matgen.fit").joinpath("data")
    npz = root.joinpath(TABLE_FILE)
    prov = root.joinpath(TABLE_PROVENANCE)
    if not npz.is_file():
        raise DataError(
            "the boundary-aware inversion table fit/data/inversion_table.npz is missing; build it with "
            "tools/make_inversion_table.py or use method='OpenPBR2024'"
        )
    return InversionTable.load(str(npz), str(prov) if prov.is_file() else None)


def has_default_table() -> bool:
    """Whether the shipped boundary-aware inversion table is present."""
    return resources.files("matgen.fit").joinpath("data", TABLE_FILE).is_file()


# --------------------------------------------------------------------------------------------------------
# Dispatchers
# --------------------------------------------------------------------------------------------------------


def _check_method(method):
    if method not in INVERSION_METHODS:
        raise ParameterError(
            f"unknown inversion method {method!r}; use one of {', '.join(INVERSION_METHODS)}"
        )


def albedo_single(albedo_multiple, g=0.0, n=1.0, *, method="boundary_table", table=None):
    """Single-scattering albedo of the homogeneous half-space whose diffuse reflectance is A.

    Parameters
    ----------
    albedo_multiple : float or ndarray
        A, strictly in (0, 1).
    g : float or ndarray
        Henyey-Greenstein anisotropy in (-1, 1) (ignored by ``"ChiangKutzBurley2016"``).
    n : float or ndarray
        Refractive index of the medium against air (used by ``"boundary_table"`` only; the closed forms
        assume an index-matched boundary).
    method : str
        One of :data:`INVERSION_METHODS`.
    table : InversionTable, optional
        Table for ``"boundary_table"`` (default: the shipped one).

    Returns
    -------
    ndarray
        alpha in (0, 1).

    References
    ----------
    ``Chiang2016``; ``OpenPBR2024``; ``vandeHulst1980``; the table: matgen's own transport.

    """
    _check_method(method)
    a = _check_unit_interval("albedo_multiple", albedo_multiple)
    gv = _check_g(g)
    if method == "ChiangKutzBurley2016":
        return albedo_single_ChiangKutzBurley2016(a)
    if method == "OpenPBR2024":
        return albedo_single_OpenPBR2024(a, gv)
    tab = table if table is not None else default_inversion_table()
    return tab.invert(a, gv, n)[0]


def albedo_multiple(albedo_single_value, g=0.0, n=1.0, *, method="boundary_table", table=None):
    """Diffuse reflectance A of a homogeneous half-space of single-scattering albedo alpha.

    Parameters
    ----------
    albedo_single_value : float or ndarray
        alpha in [0, 1].
    g, n : float or ndarray
        Anisotropy and medium refractive index (n used by the table only).
    method : str
        ``"ChiangKutzBurley2016"`` (van de Hulst with g = 0), ``"OpenPBR2024"`` (van de Hulst with g),
        ``"boundary_table"``.
    table : InversionTable, optional
        Table for ``"boundary_table"``.

    Returns
    -------
    ndarray
        A.

    References
    ----------
    ``vandeHulst1980``; ``OpenPBR2024``; the table: matgen's own transport.

    """
    _check_method(method)
    a = _check_unit_interval("albedo_single", albedo_single_value, open_low=False, open_high=False)
    gv = _check_g(g)
    if method == "ChiangKutzBurley2016":
        return albedo_multiple_vanDeHulst1980(a, 0.0)
    if method == "OpenPBR2024":
        return albedo_multiple_vanDeHulst1980(a, gv)
    tab = table if table is not None else default_inversion_table()
    return tab.albedo_multiple_of(a, gv, n).reshape(np.shape(a))


def effective_medium(
    albedo_multiple_value, shape_distance_mm, g=0.0, n=1.0, *, method="boundary_table", table=None
):
    """Single-scattering albedo and mean free path of the half-space matching A and the profile width d.

    Parameters
    ----------
    albedo_multiple_value : ndarray
        A, strictly in (0, 1).
    shape_distance_mm : ndarray
        Fitted normalised-diffusion shape distance d in mm (> 0).
    g, n : float or ndarray
        Anisotropy and refractive index of the effective medium.
    method : str
        One of :data:`INVERSION_METHODS`.
    table : InversionTable, optional
        For ``"boundary_table"``.

    Returns
    -------
    dict of ndarray
        ``albedo_single``, ``mean_free_path_mm`` (l = s d), ``shape_scaling`` (s = l / d).

    References
    ----------
    ``Christensen2015`` (s(A) for mean free path, closed-form methods); ``Chiang2016``; ``OpenPBR2024``.

    """
    _check_method(method)
    a = _check_unit_interval("albedo_multiple", albedo_multiple_value)
    d = np.asarray(shape_distance_mm, dtype=np.float64)
    if np.any(~np.isfinite(d) | (d <= 0)):
        raise FitError("shape_distance_mm must be finite and > 0 mm")
    gv = _check_g(g)
    if method == "boundary_table":
        tab = table if table is not None else default_inversion_table()
        alpha, s = tab.invert(a, gv, n)
    else:
        alpha = albedo_single(a, gv, n, method=method)
        s = shape_scaling_Christensen2015(a, "searchlight_mfp")
    return {
        "albedo_single": alpha,
        "mean_free_path_mm": s * d,
        "shape_scaling": np.broadcast_to(s, np.shape(a)).copy(),
    }
