"""Python entry point of the layered Monte Carlo: :func:`simulate`. Units: mm, 1/mm, fractions of weight.

``simulate(stack, photons, seed)`` validates its inputs, launches ``photons`` packets with global indices
``first_photon .. first_photon + photons - 1`` and returns a
:class:`~matgen.transport.results.TransportResult`.
Photon i's random stream depends only on (seed, first_photon + i) and tallies are summed in integer fixed
point, so the same seed gives bit-identical tallies for any thread count, and runs over consecutive photon
ranges add up exactly to one run over the union (:func:`combine`). The kernels are in
:mod:`matgen.transport.kernels`; the method and its references are described there.

Specular reflectance is the Fresnel reflection at the first interface (exact, zero standard error); light
that returns through clear top layers without scattering is counted in the diffuse reflectance.

References: ``Wang1995mcml``, ``Alerstam2008white``.
"""

from __future__ import annotations

import hashlib
import math
import time

import numba
import numpy as np

from matgen import limits
from matgen.errors import LimitError, ParameterError, StackError
from matgen.transport import kernels as K
from matgen.transport.boundary import fresnel
from matgen.transport.records import PhotonRecords, check_records_memory
from matgen.transport.results import TransportResult
from matgen.transport.stack import Stack
from matgen.transport.tallies import result_from_tallies

__all__ = ["simulate", "default_ring_edges_mm", "default_exit_cos_edges", "PhotonRecords", "combine"]

#: Fixed-point tallies hold 2^32 per unit weight in int64: exact below 2^31 photons per run.
FIXED_POINT_PHOTON_CEILING = 2**31 - 1

#: Chunks per thread (load balance of the parallel loop; results do not depend on it).
CHUNKS_PER_THREAD = 16


def default_ring_edges_mm() -> np.ndarray:
    """Default radial ring edges in mm: 0, then 51 log-spaced edges from 0.001 mm to 100 mm (10 per decade).

    The first ring is the disc [0, 0.001) mm; the rings after it span [10^(k/10 - 3), 10^((k+1)/10 - 3)) mm,
    k = 0..49. Light exiting beyond 100 mm counts in the diffuse reflectance but in no ring.
    """
    return np.concatenate(([0.0], np.logspace(-3.0, 2.0, 51)))


def default_exit_cos_edges() -> np.ndarray:
    """Default exit-cosine bin edges: 0, 0.1, ..., 1.0 (10 bins of equal width in cos(theta))."""
    return np.linspace(0.0, 1.0, 11)


def _check_edges(edges, name: str, lower: float, upper: float | None) -> np.ndarray:
    try:
        e = np.asarray(edges, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise ParameterError(f"{name} is not numeric ({exc})") from exc
    if e.ndim != 1 or e.size < 2:
        raise ParameterError(f"{name} must be a 1-D array of at least 2 edges, got shape {e.shape}")
    if not np.all(np.isfinite(e)):
        raise ParameterError(f"{name} holds NaN or infinite values")
    if np.any(np.diff(e) <= 0):
        raise ParameterError(f"{name} must increase strictly")
    if e[0] < lower or (upper is not None and e[-1] > upper):
        rng = f"[{lower}, {upper}]" if upper is not None else f">= {lower}"
        raise ParameterError(f"{name} must lie in {rng}; got {e[0]} .. {e[-1]}")
    return e


def _check_int(value, name: str, lo: int, hi: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise ParameterError(f"{name} is {value!r}; give a whole number in [{lo}, {hi}]")
    v = int(value)
    if not lo <= v <= hi:
        raise ParameterError(f"{name} is {v}; allowed range [{lo}, {hi}]")
    return v


def resolve_threads(threads) -> int:
    """Threads to use: None -> all numba threads; else a whole number in [1, NUMBA_NUM_THREADS]."""
    most = int(numba.config.NUMBA_NUM_THREADS)
    if threads is None:
        return most
    return _check_int(threads, "threads", 1, most)


def layer_table(stack: Stack) -> np.ndarray:
    """Build the (L, 8) layer table of the kernels: z_top, z_bot (mm), n, n above, n below, mu_a, mu_s, g."""
    n_layers = stack.n_layers
    edges = np.concatenate(([0.0], np.cumsum(stack.thickness_mm)))
    lay = np.empty((n_layers, K.LAYER_COLUMNS), dtype=np.float64)
    lay[:, K.Z_TOP] = edges[:-1]
    lay[:, K.Z_BOT] = edges[1:]
    lay[:, K.N_LAYER] = stack.n
    lay[:, K.N_UP] = np.concatenate(([stack.n_above], stack.n[:-1]))
    lay[:, K.N_DOWN] = np.concatenate((stack.n[1:], [stack.n_below]))
    lay[:, K.MU_A] = stack.mu_a
    lay[:, K.MU_S] = stack.mu_s
    lay[:, K.G] = stack.g
    return lay


def launch(stack: Stack, incidence_cos: float):
    """Specular reflectance at entry and the launch state (weight, ux, uz) of a collimated beam.

    ``incidence_cos`` is the cosine of the beam's angle to the surface normal in the ambient medium above.
    The beam refracts into layer 0 by Snell's law; its weight is 1 - R_sp (Fresnel, BornWolf1999).
    """
    cos_i = float(incidence_cos)
    r_sp, cos_t = fresnel(stack.n_above, float(stack.n[0]), cos_i)
    sin_i = math.sqrt(max(0.0, 1.0 - cos_i * cos_i))
    ux0 = sin_i * stack.n_above / float(stack.n[0])
    uz0 = cos_t
    return float(r_sp), 1.0 - float(r_sp), float(ux0), float(uz0)


def simulate(
    stack,
    photons,
    seed=0,
    *,
    threads=None,
    first_photon=0,
    ring_edges_mm=None,
    exit_cos_edges=None,
    incidence_cos=1.0,
    records=False,
):
    """Run the layered Monte Carlo on one stack (one band).

    Parameters
    ----------
    stack : Stack
        Layers (thickness in mm, n, mu_a and mu_s in 1/mm, g) and ambient indices.
    photons : int
        Photon packets to launch (1 .. the ``photons`` ceiling of :mod:`matgen.limits`, at most 2^31 - 1).
    seed : int
        Run seed in [0, 2^64 - 1].
    threads : int, optional
        Threads (default: all numba threads). Results do not depend on it.
    first_photon : int
        Global index of the first photon (for splitting one run into chunks or across machines).
    ring_edges_mm : array_like, optional
        Radial ring edges in mm (default :func:`default_ring_edges_mm`).
    exit_cos_edges : array_like, optional
        Exit-cosine bin edges in [0, 1] (default :func:`default_exit_cos_edges`).
    incidence_cos : float
        Cosine of the incidence angle of the collimated beam in the ambient medium above, in (0, 1].
    records : bool
        Also return :class:`PhotonRecords` for absorption reweighting.

    Returns
    -------
    TransportResult, or (TransportResult, PhotonRecords) when ``records`` is True.

    Raises
    ------
    StackError, ParameterError, LimitError
        For a malformed stack, bad settings, a photon count above the ceiling, or (with ``records``) photon
        records needing more memory than the ``records_bytes`` ceiling (checked before allocating them).

    Notes
    -----
    Source: Wang1995mcml (layered Monte Carlo), Alerstam2008white (continuous absorption weighting).

    """
    if not isinstance(stack, Stack):
        raise StackError(f"simulate needs a matgen.transport.stack.Stack, got {type(stack).__name__}")
    n = limits.check_photons(photons)
    if n > FIXED_POINT_PHOTON_CEILING:
        raise LimitError(
            f"the photon count {n} exceeds {FIXED_POINT_PHOTON_CEILING}, the most one run's "
            "fixed-point tallies hold exactly; split the run with first_photon and combine()"
        )
    if records:  # before anything of the run is allocated
        check_records_memory(n, stack.n_layers, f"the photon records of a {n}-photon run")
    seed = _check_int(seed, "seed", 0, 2**64 - 1)
    first = _check_int(first_photon, "first_photon", 0, 2**62)
    nthreads = resolve_threads(threads)
    rings = _check_edges(
        default_ring_edges_mm() if ring_edges_mm is None else ring_edges_mm, "ring_edges_mm", 0.0, None
    )
    coss = _check_edges(
        default_exit_cos_edges() if exit_cos_edges is None else exit_cos_edges, "exit_cos_edges", 0.0, 1.0
    )
    try:
        cos_i = float(incidence_cos)
    except (TypeError, ValueError):
        raise ParameterError(f"incidence_cos is {incidence_cos!r}; give a number in (0, 1]") from None
    if not (0.0 < cos_i <= 1.0):
        raise ParameterError(f"incidence_cos is {cos_i}; allowed range (0, 1]")
    r_sp, w0, ux0, uz0 = launch(stack, cos_i)
    lay = layer_table(stack)
    depth_scale = float(lay[-1, K.Z_BOT])
    n_chunks = max(1, min(n, nthreads * CHUNKS_PER_THREAD))
    old_threads = numba.get_num_threads()
    numba.set_num_threads(nthreads)
    try:
        t0 = time.perf_counter()
        with np.errstate(
            over="ignore"
        ):  # only matters with NUMBA_DISABLE_JIT: uint64 wrap-around is intended
            if records:
                L = stack.n_layers
                rec = PhotonRecords(
                    path_mm=np.empty((n, L), dtype=np.float32),
                    weighted_path_mm=np.empty((n, L), dtype=np.float32),
                    exit_radius_mm=np.empty(n, dtype=np.float32),
                    exit_cos=np.empty(n, dtype=np.float32),
                    max_depth_mm=np.empty(n, dtype=np.float32),
                    weight=np.empty(n, dtype=np.float32),
                    side=np.empty(n, dtype=np.uint8),
                )
                tally = K.run_tallies_records(
                    lay,
                    w0,
                    ux0,
                    uz0,
                    np.uint64(seed),
                    first,
                    n,
                    n_chunks,
                    rings,
                    coss,
                    1.0 / depth_scale,
                    rec.path_mm,
                    rec.weighted_path_mm,
                    rec.exit_radius_mm,
                    rec.exit_cos,
                    rec.max_depth_mm,
                    rec.weight,
                    rec.side,
                )
            else:
                tally = K.run_tallies(
                    lay, w0, ux0, uz0, np.uint64(seed), first, n, n_chunks, rings, coss, 1.0 / depth_scale
                )
        elapsed = time.perf_counter() - t0
    finally:
        numba.set_num_threads(old_threads)
    extra = {
        "seed": seed,
        "first_photon": first,
        "incidence_cos": cos_i,
        "stack_key": stack_key(stack),
        "tally_fixed_point": tally,
    }
    result = result_from_tallies(
        tally,
        n,
        stack.n_layers,
        rings,
        coss,
        r_sp,
        depth_scale,
        extra=extra,
        photons_per_second=n / elapsed if elapsed > 0 else 0.0,
    )
    if not records:
        return result
    rec.meta = {
        "stack": stack.to_dict(),
        "mu_a_ref": [float(v) for v in stack.mu_a],
        "seed": seed,
        "first_photon": first,
        "photons": n,
        "incidence_cos": cos_i,
        "specular_reflectance": r_sp,
        "launch_weight": w0,
        "depth_scale_mm": depth_scale,
    }
    return result, rec


def stack_key(stack: Stack) -> str:
    """Short SHA-256 of everything in a stack that a run depends on (its layer arrays and ambient indices)."""
    h = hashlib.sha256()
    for arr in (stack.thickness_mm, stack.n, stack.mu_a, stack.mu_s, stack.g, [stack.n_above, stack.n_below]):
        h.update(np.ascontiguousarray(arr, dtype=np.float64).tobytes())
    return h.hexdigest()[:16]


def _check_combinable(results, stack: Stack) -> None:
    """Refuse results that are not runs of one simulation over disjoint photon ranges (ParameterError)."""
    first = results[0]
    own_key = stack_key(stack)
    for i, r in enumerate(results):
        if r.extra.get("stack_key", own_key) != own_key:
            raise ParameterError(f"combine: result {i} was run on another stack than the one given")
        if "tally_fixed_point" not in r.extra:
            raise ParameterError(
                f"combine: result {i} carries no integer tallies (was it read back from JSON?)"
            )
        for key in ("seed", "incidence_cos"):
            if r.extra.get(key) != first.extra.get(key):
                raise ParameterError(
                    f"combine: result {i} has {key} {r.extra.get(key)!r}, result 0 {first.extra.get(key)!r}; "
                    "only runs of the same simulation can be combined"
                )
        same_bins = np.array_equal(r.ring_edges_mm, first.ring_edges_mm) and np.array_equal(
            r.exit_cos_edges, first.exit_cos_edges
        )
        if not same_bins or np.shape(r.extra["tally_fixed_point"]) != np.shape(
            first.extra["tally_fixed_point"]
        ):
            raise ParameterError(f"combine: result {i} uses other bins or another layer count than result 0")
        if r.specular_reflectance.value != first.specular_reflectance.value:
            raise ParameterError(f"combine: result {i} has another specular reflectance: not the same stack")
    ranges = sorted((int(r.extra.get("first_photon", 0)), int(r.photons)) for r in results)
    for (a0, na), (b0, _) in zip(ranges, ranges[1:], strict=False):
        if b0 < a0 + na:
            raise ParameterError(
                f"combine: photon ranges [{a0}, {a0 + na}) and [{b0}, ...) overlap; the same photons would "
                "count twice"
            )


def combine(results, stack: Stack) -> TransportResult:
    """Combine results of runs with the same seed, stack and bins over disjoint photon ranges.

    The integer tallies add exactly, so consecutive ranges give bit-identically the result of one run.
    """
    results = list(results)
    if not results:
        raise ParameterError("combine needs at least one TransportResult")
    _check_combinable(results, stack)
    tally = sum(np.asarray(r.extra["tally_fixed_point"], dtype=np.int64) for r in results)
    n = sum(r.photons for r in results)
    first = results[0]
    depth_scale = stack.total_thickness_mm
    extra = {
        "seed": first.extra.get("seed"),
        "first_photon": min(r.extra.get("first_photon", 0) for r in results),
        "incidence_cos": first.extra.get("incidence_cos"),
        "stack_key": stack_key(stack),
        "tally_fixed_point": tally,
    }
    return result_from_tallies(
        tally,
        n,
        stack.n_layers,
        first.ring_edges_mm,
        first.exit_cos_edges,
        first.specular_reflectance.value,
        depth_scale,
        extra=extra,
    )
