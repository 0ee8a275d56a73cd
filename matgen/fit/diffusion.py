"""Vectorised fit of the normalised-diffusion profile (Christensen & Burley 2015) to ring tallies.

Units: radii and shape distances in mm, profiles in mm^-2.

The fit conserves the measured total diffuse reflectance A (by default) and finds the shape distance d
that minimises the error-weighted squared difference between the model's exact ring averages and the
tallies, each ring weighted by 1 / stderr^2. The search runs on log d for all profiles at once: a coarse
log grid brackets the minimum, then golden-section search narrows it to a relative width of 1e-12.

``fit_residual`` is the relative weighted RMS misfit
sqrt(sum ((model - data) / stderr)^2 / sum (data / stderr)^2) (0 = perfect; independent of the photon
count for a model error, unlike chi-square), and ``chi2_reduced`` the reduced chi-square.
"""

from __future__ import annotations

import numpy as np

from matgen.errors import FitError
from matgen.fit.models import burley2015_rings

#: Golden-section iterations: each shrinks the bracket by 0.618; 42 take the 2-step grid bracket (about 1.8
#: in log d for the default rings) below 3e-9, i.e. d to a relative 1.5e-9.
_GOLDEN_ITERATIONS = 42
#: Points of the coarse log-d grid that brackets the minimum (the misfit is unimodal in log d for profiles
#: of the normalised-diffusion family; the grid only has to land in the right basin).
_GRID_POINTS = 24


def validate_profiles(ring_edges_mm, radial_per_mm2, radial_stderr, albedo_multiple=None, *, what="profile"):
    """Check ring edges, profiles, errors and albedos; return them as float64 arrays.

    Parameters
    ----------
    ring_edges_mm : array_like, shape (R+1,)
        Ring edges in mm: finite, ascending, first >= 0, at least two rings.
    radial_per_mm2, radial_stderr : array_like, shape (N, R)
        Ring tallies and standard errors in mm^-2: finite and >= 0.
    albedo_multiple : array_like, shape (N,), optional
        Total diffuse reflectance: each strictly inside (0, 1).
    what : str
        Name of the input for messages.

    Returns
    -------
    tuple of ndarray
        ``(edges, radial, stderr, albedo)`` (albedo None when not given).

    Raises
    ------
    FitError
        Naming the input, the profile index and the ring at fault.

    """
    e = np.asarray(ring_edges_mm, dtype=np.float64)
    if e.ndim != 1 or e.size < 3:
        raise FitError(f"{what}: ring_edges_mm must list at least 3 edges (2 rings); got shape {e.shape}")
    if not np.all(np.isfinite(e)) or e[0] < 0 or np.any(np.diff(e) <= 0):
        raise FitError(f"{what}: ring_edges_mm must be finite, ascending and start at >= 0 mm")
    y = np.atleast_2d(np.asarray(radial_per_mm2, dtype=np.float64))
    s = np.atleast_2d(np.asarray(radial_stderr, dtype=np.float64))
    n_rings = e.size - 1
    if y.shape[-1] != n_rings or s.shape != y.shape:
        raise FitError(
            f"{what}: profile shape {y.shape} and stderr shape {s.shape} must both end in {n_rings} rings "
            f"(from {e.size} ring edges)"
        )
    for name, arr in (("radial_per_mm2", y), ("radial_stderr", s)):
        bad = ~np.isfinite(arr) | (arr < 0)
        if bad.any():
            idx = np.unravel_index(int(np.argmax(bad)), arr.shape)
            raise FitError(
                f"{what}: {name}[{', '.join(map(str, idx))}] is {arr[idx]!r}; "
                "ring values must be finite and >= 0"
            )
    empty = ~np.any(y > 0, axis=-1)
    if empty.any():
        i = int(np.argmax(empty.reshape(-1)))
        raise FitError(f"{what}: profile {i} is empty (no ring above 0); nothing to fit")
    a = None
    if albedo_multiple is not None:
        a = np.atleast_1d(np.asarray(albedo_multiple, dtype=np.float64))
        if a.shape != y.shape[:-1]:
            raise FitError(f"{what}: albedo_multiple shape {a.shape} does not match profiles {y.shape[:-1]}")
        bad = ~np.isfinite(a) | (a <= 0) | (a >= 1)
        if bad.any():
            i = int(np.argmax(bad.reshape(-1)))
            raise FitError(
                f"{what}: albedo_multiple[{i}] = {a.reshape(-1)[i]!r}; must lie strictly in (0, 1)"
            )
    return e, y, s, a


def ring_weights(radial_per_mm2, radial_stderr):
    """Inverse standard errors 1 / stderr of each ring (the square root of the fit weight).

    Rings with zero error carry weight 0 (no photon reached them); values are capped at 1e150 so that the
    weighted residuals (model - data) / stderr stay finite. Raises :class:`FitError` if a profile has fewer
    than two rings with a nonzero error.
    """
    s = np.asarray(radial_stderr, dtype=np.float64)
    with np.errstate(divide="ignore", over="ignore"):
        inv = np.where(s > 0, np.minimum(1.0 / np.where(s > 0, s, 1.0), 1e150), 0.0)
    few = np.count_nonzero(s > 0, axis=-1) < 2
    if few.any():
        i = int(np.argmax(few.reshape(-1)))
        raise FitError(
            f"profile {i} has fewer than 2 rings with a nonzero standard error; cannot fit a shape"
        )
    return inv


def _weighted_misfit(model, y, inv):
    return np.sum(((model - y) * inv) ** 2, axis=-1)


def golden_log_search(cost, grid, n):
    """Minimise ``cost(x)`` (x, cost: shape (n,)) for n independent problems on a shared 1-D grid.

    A coarse pass over ``grid`` brackets each minimum between the neighbours of the best node, then
    golden-section search (one new evaluation per step, :data:`_GOLDEN_ITERATIONS` steps) narrows it.

    Returns
    -------
    tuple
        ``(x_min (n,), at_edge (n,) bool)``; ``at_edge`` marks minima found at the grid's ends (the true
        minimum may lie outside the searched range).

    """
    costs = np.empty((n, grid.size))
    for k, g in enumerate(grid):
        costs[:, k] = cost(np.full(n, g))
    best = np.argmin(costs, axis=1)
    left = grid[np.clip(best - 1, 0, grid.size - 1)]
    right = grid[np.clip(best + 1, 0, grid.size - 1)]
    at_edge = (best == 0) | (best == grid.size - 1)
    invphi = (np.sqrt(5.0) - 1.0) / 2.0
    x1 = right - invphi * (right - left)
    x2 = left + invphi * (right - left)
    f1 = cost(x1)
    f2 = cost(x2)
    for _ in range(_GOLDEN_ITERATIONS):
        go_left = f1 < f2  # minimum in [left, x2]
        right = np.where(go_left, x2, right)
        left = np.where(go_left, left, x1)
        x_new = np.where(go_left, right - invphi * (right - left), left + invphi * (right - left))
        f_new = cost(x_new)
        x2, f2, x1, f1 = (
            np.where(go_left, x1, x_new),
            np.where(go_left, f1, f_new),
            np.where(go_left, x_new, x2),
            np.where(go_left, f_new, f2),
        )
    return 0.5 * (left + right), at_edge


def fit_burley2015(
    ring_edges_mm, radial_per_mm2, radial_stderr, albedo_multiple, *, conserve_albedo=True, backend="numba"
):
    """Fit the normalised-diffusion profile to N ring profiles at once.

    Parameters
    ----------
    ring_edges_mm : array_like, shape (R+1,)
        Ring edges in mm (log-spaced after a first edge at 0, as the transport engine writes them).
    radial_per_mm2 : array_like, shape (N, R)
        Diffuse reflectance per unit area of each ring, mm^-2.
    radial_stderr : array_like, shape (N, R)
        Standard errors of the ring values, mm^-2 (weights 1/stderr^2; zero-error rings are ignored).
    albedo_multiple : array_like, shape (N,)
        Measured total diffuse reflectance A of each profile, strictly in (0, 1).
    conserve_albedo : bool
        True (default): A is held at the measured value and only d is fitted. False: A is fitted too
        (for each trial d the best A is the weighted linear least-squares amplitude).
    backend : {"numba", "numpy"}
        ``"numba"`` (default): the parallel kernel of :mod:`matgen.fit.kernels`; ``"numpy"``: its pure-Python
        twin (same steps, vectorised over profiles).

    Returns
    -------
    dict of ndarray, each shape (N,)
        ``shape_distance_mm`` (d), ``albedo_multiple`` (A used or fitted), ``fit_residual`` (relative weighted
        RMS misfit), ``chi2_reduced`` (chi-square per degree of freedom), ``at_search_edge`` (bool: the
        minimum lay at an end of the searched d range, 1e-2 x the first ring edge to 1e2 x the last).

    Raises
    ------
    FitError
        For NaN or negative rings, empty or single-ring profiles, A outside (0, 1).

    References
    ----------
    ``Christensen2015`` (the model); the weighted least-squares fit is matgen's own.

    """
    e, y, s, a = validate_profiles(
        ring_edges_mm, radial_per_mm2, radial_stderr, albedo_multiple, what="fit_burley2015"
    )
    w = ring_weights(y, s)
    n = y.shape[0]
    # coarse grid of d across the radial range of the rings
    r_pos = e[e > 0]
    lo = np.log(r_pos[0] * 1e-2)
    hi = np.log(e[-1] * 1e2)
    grid = np.linspace(lo, hi, _GRID_POINTS)

    def misfit(log_d):
        d = np.exp(log_d)
        unit = burley2015_rings(e, np.ones_like(d), d)  # (N, R) ring averages for A = 1
        if conserve_albedo:
            amp = a
        else:
            num = np.sum((unit * w) * (y * w), axis=-1)
            den = np.sum((unit * w) ** 2, axis=-1)
            amp = np.where(den > 0, num / np.where(den > 0, den, 1.0), 0.0)
        return _weighted_misfit(amp[:, None] * unit, y, w), amp

    if backend == "numba":
        from matgen.fit.kernels import fit_burley_kernel

        log_d = np.empty(n)
        amp = np.empty(n)
        cost = np.empty(n)
        at_edge = np.empty(n, dtype=np.bool_)
        a_in = a if a is not None else np.ones(n)
        fit_burley_kernel(
            e,
            np.ascontiguousarray(y),
            np.ascontiguousarray(w),
            np.ascontiguousarray(a_in),
            bool(conserve_albedo),
            grid,
            _GOLDEN_ITERATIONS,
            log_d,
            amp,
            cost,
            at_edge,
        )
    elif backend == "numpy":
        log_d, at_edge = golden_log_search(lambda x: misfit(x)[0], grid, n)
        cost, amp = misfit(log_d)
    else:
        raise FitError(f"unknown backend {backend!r}; use 'numba' or 'numpy'")
    d = np.exp(log_d)
    norm = np.sum((y * w) ** 2, axis=-1)
    residual = np.sqrt(cost / norm)
    dof = np.maximum(np.count_nonzero(s > 0, axis=-1) - (1 if conserve_albedo else 2), 1)
    out = {
        "shape_distance_mm": d,
        "albedo_multiple": amp.copy(),
        "fit_residual": residual,
        "chi2_reduced": cost / dof,
        "at_search_edge": at_edge,
    }
    return out


def fit_burley2015_result(result, *, conserve_albedo=True):
    """Fit the normalised-diffusion profile to one :class:`~matgen.transport.results.TransportResult`.

    Parameters
    ----------
    result : TransportResult
        A transport result with a radial profile (``ring_edges_mm``, ``radial_reflectance_per_mm2``,
        ``radial_stderr_per_mm2``) and its ``diffuse_reflectance``.
    conserve_albedo : bool
        Hold A at the measured diffuse reflectance (default).

    Returns
    -------
    dict of float
        ``shape_distance_mm``, ``albedo_multiple``, ``fit_residual``, ``chi2_reduced``.

    References
    ----------
    ``Christensen2015``.

    """
    if np.asarray(result.ring_edges_mm).size == 0:
        raise FitError("the transport result has no radial profile; run the simulation with a profile")
    out = fit_burley2015(
        result.ring_edges_mm,
        np.asarray(result.radial_reflectance_per_mm2)[None, :],
        np.asarray(result.radial_stderr_per_mm2)[None, :],
        np.array([result.diffuse_reflectance.value]),
        conserve_albedo=conserve_albedo,
    )
    return {k: (bool(v[0]) if v.dtype == bool else float(v[0])) for k, v in out.items()}
