"""Factored absorption reweighting of photon records over a pigment grid. Units: mm, 1/mm, mm^-2.

A table task reweights one reference run (photon records of :func:`matgen.transport.simulate.simulate`) for
every pigment combination of its grid points. Photon p leaving through the top with reference weight
``w_p`` and path ``L_pj`` in layer j has, under absorption set k, the weight (Graaff et al. 1993; Alerstam,
Andersson-Engels & Svensson 2008, ``Graaff1993condensed``, ``Alerstam2008white``)

    w_p(k) = w_p exp(-sum_j (mu_a,j(k) - mu_a,ref,j) L_pj).

On a pigment grid the layers split into groups whose absorption depends on disjoint sets of axes (the
epidermis on melanin amount and type, the dermis on blood fraction and saturation). With two such groups
the weight factors, ``w_p(a, b) = w_p E1_pa E2_pb``, and every tally over K = K1 x K2 grid points is a sum of
outer products ``sum_p E1_pa (w_p E2_pb)``: K1 + K2 exponentials per photon instead of K. Where the layers
do not split, group 1 holds every axis and layer (K2 = 1) and the sums are the plain reweighting sums.

Tallies (K grid points): diffuse reflectance and its standard error, the radial profile on rings and its
standard error (same estimators as :func:`matgen.transport.reweight.reweight`, which the tests check them
against), and the weight-averaged path length of the reflected light in each layer,
``sum_p w_p(k) L_pj / sum_p w_p(k)`` (mm), from which the merge forms the effective anisotropy.

The kernel :func:`segment_outer_sums` (numba, parallel over segment x row) has the pure-Python twin
:func:`segment_outer_sums_python`. Photons are processed in blocks of :data:`BLOCK_PHOTONS` in index order
and every output element is summed by one thread in photon order, so results do not depend on thread count.
"""

from __future__ import annotations

import numba
import numpy as np

from matgen.errors import TableError
from matgen.transport.results import ring_areas_mm2
from matgen.transport.tallies import mean_and_stderr

#: Reflected photons per block (fixed: results do not depend on it changing between runs of one build).
BLOCK_PHOTONS = 32768


@numba.njit(cache=True, parallel=True)
def segment_outer_sums(x_t, y, seg, out):
    """Add ``sum_{p in segment s} x_t[a, p] * y[p, b]`` to ``out[s, a, b]`` (numba, parallel over (s, a)).

    Parameters
    ----------
    x_t : ndarray of float64, shape (K1, P)
        Row factors, photon index last.
    y : ndarray of float64, shape (P, M)
        Column factors.
    seg : ndarray of int64, shape (S+1,)
        Segment boundaries into the photon axis (photons sorted by segment).
    out : ndarray of float64, shape (S, K1, M)
        Accumulated in place.

    """
    n_seg = seg.size - 1
    k1 = x_t.shape[0]
    m = y.shape[1]
    for t in numba.prange(n_seg * k1):
        s = t // k1
        a = t - s * k1
        acc = np.zeros(m)
        for p in range(seg[s], seg[s + 1]):
            xa = x_t[a, p]
            for b in range(m):
                acc[b] += xa * y[p, b]
        for b in range(m):
            out[s, a, b] += acc[b]


def segment_outer_sums_python(x_t, y, seg, out):
    """Pure-Python twin of :func:`segment_outer_sums` (same arguments and summation order)."""
    n_seg = seg.size - 1
    k1 = x_t.shape[0]
    m = y.shape[1]
    for s in range(n_seg):
        for a in range(k1):
            acc = [0.0] * m
            for p in range(int(seg[s]), int(seg[s + 1])):
                xa = float(x_t[a, p])
                for b in range(m):
                    acc[b] += xa * float(y[p, b])
            for b in range(m):
                out[s, a, b] += acc[b]


def axis_groups(mu_a_grid: np.ndarray) -> tuple:
    """Split the free axes of a grid of absorption sets into two groups that factor the reweighting.

    Parameters
    ----------
    mu_a_grid : ndarray, shape (n_1, ..., n_m, L)
        Absorption (1/mm) of every layer on the task's sub-grid of free axes.

    Returns
    -------
    (g1, g2, layers1) : tuple of lists
        Axis positions of group 1 and group 2, and the layers whose absorption varies with group 1 (all other
        layers vary with group 2 only, or not at all). ``g2`` is empty where no split exists.

    """
    m = mu_a_grid.ndim - 1
    n_layers = mu_a_grid.shape[-1]
    deps = []
    for j in range(n_layers):
        arr = mu_a_grid[..., j]
        deps.append({t for t in range(m) if arr.shape[t] > 1 and np.any(np.diff(arr, axis=t) != 0)})
    # connected components of axes joined by layers that depend on several of them
    parent = list(range(m))

    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for d in deps:
        d = sorted(d)
        for t in d[1:]:
            parent[find(t)] = find(d[0])
    varying = sorted({t for d in deps for t in d})
    if not varying:
        return list(range(m)), [], []
    first = find(varying[0])
    g1 = [t for t in range(m) if find(t) == first and t in varying]
    g2 = [t for t in range(m) if t not in g1]
    layers1 = [j for j, d in enumerate(deps) if d and find(next(iter(d))) == first]
    if not g2:
        return list(range(m)), [], list(range(n_layers))
    return g1, g2, layers1


def _optical_depth(path_mm, layers, dmu):
    """sum_j dmu[:, j] * path[:, layer_j] as (P, K), summed layer by layer in a fixed order (no BLAS)."""
    out = np.zeros((path_mm.shape[0], dmu.shape[0]))
    for i, j in enumerate(layers):
        out += path_mm[:, j : j + 1] * dmu[None, :, i]
    return out


def factored_reweight(records, mu_a_sets, grid_shape, ring_edges_mm, *, backend: str = "numba") -> dict:
    """Reweighted reflectance tallies of photon records for every point of a pigment sub-grid.

    Parameters
    ----------
    records : matgen.transport.records.PhotonRecords
        Records of the reference run (reference absorption ``records.mu_a_ref`` in 1/mm).
    mu_a_sets : ndarray, shape (K, L)
        Absorption (1/mm) per grid point (C order over ``grid_shape``) and layer; each >= the reference.
    grid_shape : tuple of int
        Shape of the sub-grid (product K).
    ring_edges_mm : ndarray, shape (R+1,)
        Ring edges in mm.
    backend : {"numba", "python"}
        The compiled kernel or its pure-Python twin.

    Returns
    -------
    dict
        ``diffuse_reflectance``, ``diffuse_reflectance_stderr`` (K,); ``radial_reflectance_per_mm2``,
        ``radial_stderr_per_mm2`` (K, R) in mm^-2; ``reflected_path_mm`` (K, L), the weight-averaged path
        length of reflected light per layer in mm; ``groups`` (the axis split used).
        Source: ``Graaff1993condensed``, ``Alerstam2008white``.

    """
    kernel = segment_outer_sums if backend == "numba" else segment_outer_sums_python
    mu = np.asarray(mu_a_sets, dtype=np.float64)
    shape = tuple(int(s) for s in grid_shape)
    k_total, n_layers = mu.shape
    if int(np.prod(shape)) != k_total:
        raise TableError(f"{k_total} absorption sets do not fill a grid of shape {shape}")
    ref = records.mu_a_ref
    dmu = mu - ref[None, :]
    if np.any(dmu < 0):
        k, j = np.argwhere(dmu < 0)[0]
        raise TableError(
            f"absorption set {k} layer {j} lies below the reference absorption; weights would exceed 1"
        )
    grid = mu.reshape(shape + (n_layers,))
    g1, g2, layers1 = axis_groups(grid)
    layers2 = [j for j in range(n_layers) if j not in layers1]
    # per-group absorption offsets: group-1 layers vary along g1 only, the rest along g2 only
    order = g1 + g2
    perm = np.transpose(grid - ref, order + [len(shape)])
    k1 = int(np.prod([shape[t] for t in g1])) if g1 else 1
    k2 = int(np.prod([shape[t] for t in g2])) if g2 else 1
    flat = perm.reshape(k1, k2, n_layers)
    d1 = flat[:, 0, :][:, layers1]  # (K1, L1)
    d2 = flat[0, :, :][:, layers2]  # (K2, L2)
    recon = np.empty_like(flat)
    recon[:, :, layers1] = d1[:, None, :]
    recon[:, :, layers2] = d2[None, :, :]
    if not np.array_equal(recon, flat):
        raise TableError("internal: absorption sets do not factor along the detected axis groups")

    rings = np.asarray(ring_edges_mm, dtype=np.float64)
    n_rings = rings.size - 1
    refl = np.nonzero(records.side == 1)[0]
    path = records.path_mm[refl].astype(np.float64)
    weight = records.weight[refl].astype(np.float64)
    radius = records.exit_radius_mm[refl].astype(np.float64)
    ring = np.searchsorted(rings, radius, side="right") - 1
    ring[(radius < rings[0]) | (ring >= n_rings)] = n_rings  # outside every ring: its own segment
    n_seg = n_rings + 1
    m = 1 + n_layers
    sums = np.zeros((n_seg, k1, k2 * m))  # [w' | w' L_0 | ... | w' L_{L-1}] per (b)
    sums2 = np.zeros((n_seg, k1, k2))
    for start in range(0, refl.size, BLOCK_PHOTONS):
        sl = slice(start, min(refl.size, start + BLOCK_PHOTONS))
        o = np.argsort(ring[sl], kind="stable")
        pth, w, rg = path[sl][o], weight[sl][o], ring[sl][o]
        seg = np.searchsorted(rg, np.arange(n_seg + 1), side="left").astype(np.int64)
        e1 = np.exp(-_optical_depth(pth, layers1, d1))  # (P, K1)
        e2 = np.exp(-_optical_depth(pth, layers2, d2))  # (P, K2)
        we2 = w[:, None] * e2
        y = np.concatenate([we2] + [we2 * pth[:, j : j + 1] for j in range(n_layers)], axis=1)
        x_t = np.ascontiguousarray(e1.T)
        kernel(x_t, np.ascontiguousarray(y), seg, sums)
        kernel(np.ascontiguousarray(x_t * x_t), np.ascontiguousarray(we2 * we2), seg, sums2)
    n = records.photons
    # back to grid order: (S, K1, K2) in (g1, g2) order -> (S, K) in C order of grid_shape
    inv = np.argsort(order)

    def to_grid(a):  # a: (..., K1, K2) -> (..., K)
        lead = a.shape[:-2]
        g = a.reshape(lead + tuple(shape[t] for t in order))
        nl = len(lead)
        g = np.transpose(g, list(range(nl)) + [nl + i for i in inv])
        return g.reshape(lead + (k_total,))

    s_w = to_grid(sums[:, :, :k2].reshape(n_seg, k1, k2))  # (S, K)
    s_w2 = to_grid(sums2)
    s_path = np.stack(
        [to_grid(sums[:, :, k2 * (1 + j) : k2 * (2 + j)].sum(axis=0)) for j in range(n_layers)], -1
    )
    rd, rd_e = mean_and_stderr(s_w.sum(axis=0), s_w2.sum(axis=0), n)
    ring_mean, ring_e = mean_and_stderr(s_w[:n_rings].T, s_w2[:n_rings].T, n)
    area = ring_areas_mm2(rings)
    total_w = s_w.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        path_mean = np.where(total_w[:, None] > 0, s_path / total_w[:, None], 0.0)
    return {
        "diffuse_reflectance": rd,
        "diffuse_reflectance_stderr": rd_e,
        "radial_reflectance_per_mm2": ring_mean / area,
        "radial_stderr_per_mm2": ring_e / area,
        "reflected_path_mm": path_mean,
        "groups": {"group1_axes": g1, "group2_axes": g2, "group1_layers": layers1},
    }
