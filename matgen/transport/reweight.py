"""Absorption reweighting ("white Monte Carlo"): every tally of a reference run for many absorption sets.

Units: mu_a in 1/mm, path lengths and radii in mm, reflectances as fractions of launched weight.

Free paths of the reference run were sampled on mu_s alone and absorption applied as a continuous weight
(:mod:`matgen.transport.kernels`), so a photon's path does not depend on mu_a. Under another absorption set
``mu_a`` the photon's exit weight is exactly

    w' = w_ref * exp(-sum_i (mu_a,i - mu_a_ref,i) L_i)

with ``L_i`` its path length in layer ``i`` (Graaff et al. 1993; Alerstam, Andersson-Engels & Svensson
2008). Diffuse reflectance, transmittance, the radial profile, the exit-angle distribution and the mean
penetration depth are therefore unbiased estimates for the new set, with standard errors from the
per-photon variance of w'. Roulette factors are part of ``w_ref`` and stay unbiased. The variance grows
when the new absorption is *lower* than the reference (weights above 1): choose mu_a_ref at or below the
smallest absorption of interest (mu_a_ref = 0 is the classic white Monte Carlo).

Absorption per layer is not fixed by path totals (it depends on the order in which a path visits the
layers). matgen estimates the total absorbed weight of each photon exactly, ``a = w_launch - w'``
(``w' = 0`` for photons that did not escape), which is unbiased for 1 - R_sp - R_d - T, and splits ``a`` over
layers in proportion to ``mu_a,i Lambda_i``, where ``Lambda_i`` is the photon's weight-averaged path in
layer ``i`` under the reference absorption (the integral of w(s) / w_launch ds, recorded by the reference
run). This split is an approximation: it is exact for one layer, reproduces the direct per-layer tallies
photon by photon at the reference absorption itself (up to roulette), and is exact to first order in
mu_a - mu_a_ref. Far from the reference it can misplace absorption between layers (with mu_a_ref = 0 it
ignores that early layers of a path see more weight than late ones); run
:func:`matgen.transport.simulate.simulate` directly where per-layer absorption must be exact. The sum over
layers is always unbiased.

Sums run over fixed blocks of photons in index order, so results are bit-identical for any thread count.

References: ``Graaff1993condensed``, ``Alerstam2008white``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numba
import numpy as np
from numba import njit, prange

from matgen.errors import ParameterError
from matgen.transport.records import PhotonRecords
from matgen.transport.results import Estimate, TransportResult, ring_areas_mm2
from matgen.transport.simulate import (
    _check_edges,
    default_exit_cos_edges,
    default_ring_edges_mm,
    resolve_threads,
)
from matgen.transport.tallies import mean_and_stderr, projected_solid_angle_sr, ratio_and_stderr

__all__ = ["reweight", "ReweightedResults", "PhotonRecords"]

#: Photons per summation block (fixed, so sums do not depend on the thread count).
BLOCK_PHOTONS = 8192
#: Absorption sets handled per kernel call (bounds the memory of partial sums).
SETS_PER_BATCH = 64
#: Up to this many sets the set-major kernel is used (bit-identical sums; faster for few sets).
FEW_SETS = 4
#: Bin layouts whose per-photon preparation is cached on a records object.
PREPARED_CACHE_ENTRIES = 2

# scalar accumulators per set
_RD, _RD2, _TT, _TT2, _DA, _DA2, _DAW = range(7)
_NS = 7


@njit(cache=True, parallel=True)
def _reweight_kernel(
    path, wpath, weight, side, ring_bin, cos_bin, depth_frac, dmu_t, mu_t, launch_w, n_blocks, n_rings, n_cos
):
    """Partial sums (n_blocks, Q, K) of every tally for K absorption sets; see the module docstring.

    Photon-major: each block of photons is read once and all K sets are applied to each photon in
    loops over k that run over contiguous memory (``dmu_t`` and ``mu_t`` are (L, K); sums are (Q, K)).
    """
    n = weight.size
    n_layers = path.shape[1]
    n_sets = dmu_t.shape[1]
    o_abs = _NS
    o_ring = o_abs + 2 * n_layers
    o_cos = o_ring + 2 * n_rings
    size = o_cos + 2 * n_cos
    out = np.zeros((n_blocks, size, n_sets), dtype=np.float64)
    for b in prange(n_blocks):
        start = b * BLOCK_PHOTONS
        stop = min(n, start + BLOCK_PHOTONS)
        acc = out[b]
        e = np.empty(n_sets)
        wp = np.empty(n_sets)
        f = np.empty(n_sets)
        for i in range(start, stop):
            sd = side[i]
            if sd != 0:
                for k in range(n_sets):
                    e[k] = 0.0
                for j in range(n_layers):
                    lj = np.float64(path[i, j])
                    for k in range(n_sets):
                        e[k] += dmu_t[j, k] * lj
                w_ref = np.float64(weight[i])
                for k in range(n_sets):
                    wp[k] = w_ref * math.exp(-e[k])
                if sd == 1:
                    rb = ring_bin[i]
                    cb = cos_bin[i]
                    df = np.float64(depth_frac[i])
                    for k in range(n_sets):
                        v = wp[k]
                        v2 = v * v
                        acc[_RD, k] += v
                        acc[_RD2, k] += v2
                        a = v * df
                        acc[_DA, k] += a
                        acc[_DA2, k] += a * a
                        acc[_DAW, k] += a * v
                    if rb >= 0:
                        for k in range(n_sets):
                            acc[o_ring + rb, k] += wp[k]
                            acc[o_ring + n_rings + rb, k] += wp[k] * wp[k]
                    if cb >= 0:
                        for k in range(n_sets):
                            acc[o_cos + cb, k] += wp[k]
                            acc[o_cos + n_cos + cb, k] += wp[k] * wp[k]
                else:
                    for k in range(n_sets):
                        acc[_TT, k] += wp[k]
                        acc[_TT2, k] += wp[k] * wp[k]
            else:
                for k in range(n_sets):
                    wp[k] = 0.0
            # absorbed weight a = w_launch - w', split over layers in proportion to mu_a,j Lambda_j
            for k in range(n_sets):
                f[k] = 0.0
            for j in range(n_layers):
                lw = np.float64(wpath[i, j])
                for k in range(n_sets):
                    f[k] += mu_t[j, k] * lw
            for k in range(n_sets):
                d = f[k]
                a = launch_w - wp[k]
                if d > 0.0:
                    f[k] = a / d
                else:  # no absorbing path: all of it to the top layer
                    f[k] = 0.0
                    acc[o_abs, k] += a
                    acc[o_abs + n_layers, k] += a * a
            for j in range(n_layers):
                lw = np.float64(wpath[i, j])
                for k in range(n_sets):
                    aj = f[k] * mu_t[j, k] * lw
                    acc[o_abs + j, k] += aj
                    acc[o_abs + n_layers + j, k] += aj * aj
    return out


@njit(cache=True, parallel=True, error_model="numpy")
def _reweight_kernel_few(
    path, wpath, weight, side, ring_bin, cos_bin, depth_frac, dmu_t, mu_t, launch_w, n_blocks, n_rings, n_cos
):
    """Set-major twin of :func:`_reweight_kernel` for a few absorption sets (same arguments, same sums).

    Each block of photons is read once per set and the per-photon arithmetic is the photon-major kernel's,
    in the same order, so every partial sum is bit-identical to it; without the short loops over sets per
    photon it costs about as much per set as the photon-major kernel does with many sets.
    """
    n = weight.size
    n_layers = path.shape[1]
    n_sets = dmu_t.shape[1]
    o_abs = _NS
    o_ring = o_abs + 2 * n_layers
    o_cos = o_ring + 2 * n_rings
    size = o_cos + 2 * n_cos
    out = np.zeros((n_blocks, size, n_sets), dtype=np.float64)
    for b in prange(n_blocks):
        start = b * BLOCK_PHOTONS
        stop = min(n, start + BLOCK_PHOTONS)
        acc = out[b]
        ab = np.empty(2 * n_layers)
        for k in range(n_sets):
            # scalar sums in registers, in photon order: the same additions as the photon-major kernel
            rd = rd2 = tt = tt2 = da = da2 = daw = 0.0
            for j in range(2 * n_layers):
                ab[j] = 0.0
            for i in range(start, stop):
                sd = side[i]
                wp = 0.0
                if sd != 0:
                    e = 0.0
                    for j in range(n_layers):
                        e += dmu_t[j, k] * np.float64(path[i, j])
                    wp = np.float64(weight[i]) * math.exp(-e)
                    wp2 = wp * wp
                    if sd == 1:
                        rd += wp
                        rd2 += wp2
                        a = wp * np.float64(depth_frac[i])
                        da += a
                        da2 += a * a
                        daw += a * wp
                        rb = ring_bin[i]
                        if rb >= 0:
                            acc[o_ring + rb, k] += wp
                            acc[o_ring + n_rings + rb, k] += wp2
                        cb = cos_bin[i]
                        if cb >= 0:
                            acc[o_cos + cb, k] += wp
                            acc[o_cos + n_cos + cb, k] += wp2
                    else:
                        tt += wp
                        tt2 += wp2
                f = 0.0
                for j in range(n_layers):
                    f += mu_t[j, k] * np.float64(wpath[i, j])
                a = launch_w - wp
                if f > 0.0:
                    f = a / f
                else:
                    f = 0.0
                    ab[0] += a
                    ab[n_layers] += a * a
                for j in range(n_layers):
                    aj = f * mu_t[j, k] * np.float64(wpath[i, j])
                    ab[j] += aj
                    ab[n_layers + j] += aj * aj
            acc[_RD, k] = rd
            acc[_RD2, k] = rd2
            acc[_TT, k] = tt
            acc[_TT2, k] = tt2
            acc[_DA, k] = da
            acc[_DA2, k] = da2
            acc[_DAW, k] = daw
            for j in range(2 * n_layers):
                acc[o_abs + j, k] = ab[j]
    return out


@dataclass
class ReweightedResults:
    """Tallies for K absorption sets from one set of photon records (see :func:`reweight`).

    Arrays are over the K sets (first axis). Units: fractions of launched weight; radial profile in
    mm^-2 on rings ``ring_edges_mm`` (mm); exit-angle distribution in sr^-1 on ``exit_cos_edges``;
    penetration depth in mm.
    """

    mu_a_sets: np.ndarray
    diffuse_reflectance: np.ndarray
    diffuse_reflectance_stderr: np.ndarray
    transmittance: np.ndarray
    transmittance_stderr: np.ndarray
    radial_reflectance_per_mm2: np.ndarray
    radial_stderr_per_mm2: np.ndarray
    ring_edges_mm: np.ndarray
    absorbed: np.ndarray
    absorbed_stderr: np.ndarray
    exit_angle_per_sr: np.ndarray
    exit_angle_stderr_per_sr: np.ndarray
    exit_cos_edges: np.ndarray
    mean_penetration_depth_mm: np.ndarray
    mean_penetration_depth_stderr_mm: np.ndarray
    specular_reflectance: float
    photons: int
    extra: dict = field(default_factory=dict)

    def __len__(self) -> int:
        return int(self.diffuse_reflectance.size)

    def result(self, k: int) -> TransportResult:
        """Return the tallies of absorption set ``k`` as a :class:`TransportResult`."""
        k = int(k)
        if not 0 <= k < len(self):
            raise ParameterError(f"absorption set index {k} outside [0, {len(self) - 1}]")
        return TransportResult(
            photons=self.photons,
            specular_reflectance=Estimate(self.specular_reflectance, 0.0),
            diffuse_reflectance=Estimate(
                float(self.diffuse_reflectance[k]), float(self.diffuse_reflectance_stderr[k])
            ),
            transmittance=Estimate(float(self.transmittance[k]), float(self.transmittance_stderr[k])),
            absorbed=self.absorbed[k].copy(),
            absorbed_stderr=self.absorbed_stderr[k].copy(),
            ring_edges_mm=self.ring_edges_mm,
            radial_reflectance_per_mm2=self.radial_reflectance_per_mm2[k].copy(),
            radial_stderr_per_mm2=self.radial_stderr_per_mm2[k].copy(),
            exit_cos_edges=self.exit_cos_edges,
            exit_angle_per_sr=self.exit_angle_per_sr[k].copy(),
            exit_angle_stderr_per_sr=self.exit_angle_stderr_per_sr[k].copy(),
            mean_penetration_depth_mm=Estimate(
                float(self.mean_penetration_depth_mm[k]), float(self.mean_penetration_depth_stderr_mm[k])
            ),
            extra={"mu_a": self.mu_a_sets[k].tolist(), "reweighted": True, **self.extra},
        )


def prepared_bins(records: PhotonRecords, rings: np.ndarray, coss: np.ndarray, depth_scale: float):
    """Ring bin, exit-cosine bin (int32, -1 outside) and depth fraction (float64) of every photon, cached.

    The preparation does not depend on the absorption sets, so it is kept on the records object (keyed on
    the bin edges, the depth scale and the identity of the arrays it reads) and later calls with the same
    bins reuse it. The key is the bin edges and depth scale; an entry is used only while the records still
    hold the very arrays it was made from (replacing an array invalidates it; records are not edited in
    place). The cache holds 16 bytes per photon for each of at most :data:`PREPARED_CACHE_ENTRIES` bin
    layouts.
    """
    sources = (records.exit_radius_mm, records.exit_cos, records.max_depth_mm)
    key = (rings.tobytes(), coss.tobytes(), float(depth_scale))
    cache = records.__dict__.setdefault("_prepared_bins", {})
    hit = cache.get(key)
    # the entry holds its source arrays, so their identities cannot be reused by other arrays
    if hit is not None and all(a is b for a, b in zip(hit[0], sources, strict=True)):
        return hit[1]
    prepared = (
        _bins(rings, records.exit_radius_mm.astype(np.float64), include_last=False),
        _bins(coss, records.exit_cos.astype(np.float64), include_last=True),
        np.minimum(records.max_depth_mm.astype(np.float64) / depth_scale, 1.0),
    )
    cache.pop(key, None)
    while len(cache) >= PREPARED_CACHE_ENTRIES:
        cache.pop(next(iter(cache)))
    cache[key] = (sources, prepared)
    return prepared


def _bins(edges: np.ndarray, values: np.ndarray, include_last: bool) -> np.ndarray:
    k = np.searchsorted(edges, values, side="right") - 1
    m = edges.size - 1
    if include_last:
        k[(values == edges[-1])] = m - 1
    k[(values < edges[0]) | (k >= m)] = -1
    return k.astype(np.int32)


def reweight(
    records: PhotonRecords, mu_a_sets, *, ring_edges_mm=None, exit_cos_edges=None, threads=None
) -> ReweightedResults:
    """Tallies for many absorption sets from the photon records of one reference run.

    Parameters
    ----------
    records : PhotonRecords
        Records from ``simulate(..., records=True)``.
    mu_a_sets : array_like, shape (K, L) or (L,)
        Absorption coefficients per set and layer, in 1/mm (finite, >= 0).
    ring_edges_mm : array_like, optional
        Radial ring edges in mm (default :func:`matgen.transport.simulate.default_ring_edges_mm`).
    exit_cos_edges : array_like, optional
        Exit-cosine bin edges in [0, 1] (default :func:`matgen.transport.simulate.default_exit_cos_edges`).
    threads : int, optional
        Threads (default all numba threads); results do not depend on it.

    Returns
    -------
    ReweightedResults

    Notes
    -----
    Source: Graaff1993condensed, Alerstam2008white. Per-layer absorption is approximate (module docstring).

    """
    if not isinstance(records, PhotonRecords):
        raise ParameterError(f"reweight needs PhotonRecords, got {type(records).__name__}")
    try:
        mu = np.asarray(mu_a_sets, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise ParameterError(f"mu_a_sets is not numeric ({exc})") from exc
    if mu.ndim == 1:
        mu = mu[None, :]
    n_layers = records.n_layers
    if mu.ndim != 2 or mu.shape[1] != n_layers or mu.shape[0] < 1:
        raise ParameterError(f"mu_a_sets has shape {mu.shape}; expected (K, {n_layers}) in 1/mm")
    bad = ~np.isfinite(mu) | (mu < 0)
    if bad.any():
        k, j = np.argwhere(bad)[0]
        raise ParameterError(f"mu_a_sets[{k}, {j}] (layer {j}) is {mu[k, j]} 1/mm; must be finite and >= 0")
    rings = _check_edges(
        default_ring_edges_mm() if ring_edges_mm is None else ring_edges_mm, "ring_edges_mm", 0.0, None
    )
    coss = _check_edges(
        default_exit_cos_edges() if exit_cos_edges is None else exit_cos_edges, "exit_cos_edges", 0.0, 1.0
    )
    nthreads = resolve_threads(threads)
    n = records.photons
    meta = records.meta
    depth_scale = float(meta["depth_scale_mm"])
    ring_bin, cos_bin, depth_frac = prepared_bins(records, rings, coss, depth_scale)
    dmu = mu - records.mu_a_ref[None, :]
    n_blocks = max(1, -(-n // BLOCK_PHOTONS))
    n_rings, n_cos = rings.size - 1, coss.size - 1
    launch_w = float(meta["launch_weight"])
    parts = []
    kernel = _reweight_kernel_few if mu.shape[0] <= FEW_SETS else _reweight_kernel
    old = numba.get_num_threads()
    numba.set_num_threads(nthreads)
    try:
        for s in range(0, mu.shape[0], SETS_PER_BATCH):
            part = kernel(
                records.path_mm,
                records.weighted_path_mm,
                records.weight,
                records.side,
                ring_bin,
                cos_bin,
                depth_frac,
                np.ascontiguousarray(dmu[s : s + SETS_PER_BATCH].T),
                np.ascontiguousarray(mu[s : s + SETS_PER_BATCH].T),
                launch_w,
                n_blocks,
                n_rings,
                n_cos,
            )
            acc = np.zeros(part.shape[1:])
            for b in range(n_blocks):  # fixed order of blocks
                acc += part[b]
            parts.append(acc.T)
    finally:
        numba.set_num_threads(old)
    v = np.concatenate(parts, axis=0)
    L = n_layers
    rd, rd_e = mean_and_stderr(v[:, _RD], v[:, _RD2], n)
    tt, tt_e = mean_and_stderr(v[:, _TT], v[:, _TT2], n)
    o_abs = _NS
    ab, ab_e = mean_and_stderr(v[:, o_abs : o_abs + L], v[:, o_abs + L : o_abs + 2 * L], n)
    o_ring = o_abs + 2 * L
    ring, ring_e = mean_and_stderr(
        v[:, o_ring : o_ring + n_rings], v[:, o_ring + n_rings : o_ring + 2 * n_rings], n
    )
    area = ring_areas_mm2(rings)
    o_cos = o_ring + 2 * n_rings
    ang, ang_e = mean_and_stderr(v[:, o_cos : o_cos + n_cos], v[:, o_cos + n_cos : o_cos + 2 * n_cos], n)
    psa = projected_solid_angle_sr(coss)
    depth, depth_e = ratio_and_stderr(v[:, _DA], v[:, _DA2], v[:, _DAW], v[:, _RD], v[:, _RD2], n)
    return ReweightedResults(
        mu_a_sets=mu,
        diffuse_reflectance=rd,
        diffuse_reflectance_stderr=rd_e,
        transmittance=tt,
        transmittance_stderr=tt_e,
        radial_reflectance_per_mm2=ring / area,
        radial_stderr_per_mm2=ring_e / area,
        ring_edges_mm=rings,
        absorbed=ab,
        absorbed_stderr=ab_e,
        exit_angle_per_sr=ang / psa,
        exit_angle_stderr_per_sr=ang_e / psa,
        exit_cos_edges=coss,
        mean_penetration_depth_mm=depth * depth_scale,
        mean_penetration_depth_stderr_mm=depth_e * depth_scale,
        specular_reflectance=float(meta["specular_reflectance"]),
        photons=n,
        extra={"seed": meta.get("seed"), "mu_a_ref": list(meta["mu_a_ref"])},
    )
