"""Smooth forward model A(alpha, g, n) of a half-space under a dielectric boundary, and its exact inverse.

Units: all quantities dimensionless. A is the diffuse reflectance at normal incidence of a semi-infinite
homogeneous medium of single-scattering albedo alpha, Henyey-Greenstein anisotropy g and refractive index
n under air, as a fraction of the incident power (specular reflection excluded).

The grid holds y = ln(A / alpha) at nodes of van de Hulst's similarity parameter
s = sqrt((1 - alpha) / (1 - g alpha)) (``vandeHulst1980``), of g and of n. y is smooth and finite over the
whole range: at s = 0 (alpha = 1) it is ln(1 - R_specular(n)); at s = 1 (alpha -> 0) it tends to the
single-scattering limit of A / alpha. A lookup

1. interpolates y at every s node to the query's (g, n) with 4-point Lagrange cubics in g and in the
   cosine of the critical angle c = sqrt(1 - 1/n^2) (A is smooth in c but not in n near n = 1, where
   total internal reflection sets in: dA/dn changes by half between n = 1 and 1.05);
2. passes a monotone cubic (``FritschCarlson1980``, with the derivative rule of ``FritschButland1984``
   as in PCHIP) through those values in s;
3. returns A = alpha(s, g) exp(y(s)).

Since alpha(s) is strictly decreasing and the monotone cubic keeps the monotonicity of its data, A is
strictly decreasing in s wherever the interpolated node values decrease, and :meth:`AlbedoGrid.similarity_of`
inverts it exactly (bisection inside the bracketing interval). Nodes come from adding-doubling
(``tools/make_inversion_table.py``; ``Prahl1993iad``).
"""

from __future__ import annotations

import numpy as np

from matgen.errors import DataError, FitError, ParameterError

#: Queries handled per block (bounds the (block, K) work arrays).
_BLOCK = 65536
#: Bisection steps inside one node interval (width <= 0.1): resolution below 1e-14 in s.
_BISECTION_STEPS = 48


def lagrange_weights(nodes, values):
    """Return indices (Q, m) and weights (Q, m) of local Lagrange interpolation on ascending ``nodes``.

    m = min(4, len(nodes)): a cubic through the four nodes around each value (the stencil slides inward
    at the ends), exact at the nodes. Values must lie inside [nodes[0], nodes[-1]].
    """
    x = np.asarray(nodes, dtype=np.float64)
    v = np.asarray(values, dtype=np.float64).reshape(-1)
    m = min(4, x.size)
    if m == 1:
        return np.zeros((v.size, 1), dtype=np.int64), np.ones((v.size, 1))
    i = np.clip(np.searchsorted(x, v, side="right") - 1, 0, x.size - 2)
    j0 = np.clip(i - (m // 2 - 1), 0, x.size - m)
    idx = j0[:, None] + np.arange(m)[None, :]
    xs = x[idx]
    w = np.ones((v.size, m))
    for a in range(m):
        for b in range(m):
            if a != b:
                w[:, a] *= (v - xs[:, b]) / (xs[:, a] - xs[:, b])
    return idx, w


def pchip_slopes(x, y):
    """Return the slopes (Q, K) of the monotone cubic through rows y (Q, K) on ascending nodes x (K,).

    Interior: weighted harmonic mean of the neighbouring secants, zero where they differ in sign
    (``FritschButland1984``); ends: the three-point formula limited to keep monotonicity (as in
    SciPy's ``PchipInterpolator``).
    """
    h = np.diff(x)
    delta = np.diff(y, axis=1) / h
    d = np.zeros_like(y)
    if x.size == 2:
        d[:, 0] = d[:, 1] = delta[:, 0]
        return d
    w1 = 2.0 * h[1:] + h[:-1]
    w2 = h[1:] + 2.0 * h[:-1]
    same = np.sign(delta[:, :-1]) * np.sign(delta[:, 1:]) > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        harm = (w1 + w2) / (w1 / delta[:, :-1] + w2 / delta[:, 1:])
    d[:, 1:-1] = np.where(same, harm, 0.0)
    d[:, 0] = _edge_slope(h[0], h[1], delta[:, 0], delta[:, 1])
    d[:, -1] = _edge_slope(h[-1], h[-2], delta[:, -1], delta[:, -2])
    return d


def _edge_slope(h0, h1, m0, m1):
    d = ((2.0 * h0 + h1) * m0 - h0 * m1) / (h0 + h1)
    d = np.where(np.sign(d) != np.sign(m0), 0.0, d)
    return np.where((np.sign(m0) != np.sign(m1)) & (np.abs(d) > 3.0 * np.abs(m0)), 3.0 * m0, d)


def _hermite(x, y, d, k, s):
    """Cubic Hermite value on interval k (Q,) at s (Q,), rows y, d (Q, K)."""
    rows = np.arange(s.size)
    h = x[k + 1] - x[k]
    t = (s - x[k]) / h
    t2, t3 = t * t, t * t * t
    return (
        (2 * t3 - 3 * t2 + 1) * y[rows, k]
        + (t3 - 2 * t2 + t) * h * d[rows, k]
        + (-2 * t3 + 3 * t2) * y[rows, k + 1]
        + (t3 - t2) * h * d[rows, k + 1]
    )


def critical_cosine(n):
    """Return c = sqrt(1 - 1/n^2), the cosine of the critical angle in a medium of index n >= 1 under air."""
    n = np.asarray(n, dtype=np.float64)
    return np.sqrt(np.clip(1.0 - 1.0 / (n * n), 0.0, None))


def _alpha_of_similarity(s, g):
    s2 = s * s
    return (1.0 - s2) / (1.0 - g * s2)


class AlbedoGrid:
    """ln(A / alpha) on nodes of (s, g, n), with a smooth forward lookup and its exact inverse.

    Attributes
    ----------
    similarity : ndarray, shape (K,)
        Similarity nodes s = sqrt((1 - alpha)/(1 - g alpha)), ascending, 0 first and 1 last.
    g, n : ndarray
        Anisotropy and refractive-index nodes, ascending.
    log_ratio : ndarray, shape (K, Ng, Nn)
        y = ln(A / alpha) (at s = 1 the limit alpha -> 0).
    provenance : dict
        How the nodes were computed.

    """

    def __init__(self, similarity, g, n, log_ratio, provenance=None):
        self.similarity = np.asarray(similarity, dtype=np.float64)
        self.g = np.asarray(g, dtype=np.float64)
        self.n = np.asarray(n, dtype=np.float64)
        self.log_ratio = np.asarray(log_ratio, dtype=np.float64)
        self.provenance = dict(provenance or {})
        shape = (self.similarity.size, self.g.size, self.n.size)
        if self.log_ratio.shape != shape:
            raise DataError(f"albedo grid: log_ratio has shape {self.log_ratio.shape}, expected {shape}")
        for name in ("similarity", "g", "n"):
            v = getattr(self, name)
            if v.ndim != 1 or v.size < 1 or np.any(np.diff(v) <= 0) or not np.all(np.isfinite(v)):
                raise DataError(f"albedo grid: {name} nodes must be finite and strictly ascending")
        if self.similarity[0] != 0.0 or self.similarity[-1] != 1.0 or self.similarity.size < 3:
            raise DataError("albedo grid: similarity nodes must run from 0 to 1 (at least 3 nodes)")
        if self.g[0] <= -1 or self.g[-1] >= 1 or self.n[0] < 1:
            raise DataError("albedo grid: g nodes must lie in (-1, 1) and n nodes be >= 1")
        if not np.all(np.isfinite(self.log_ratio)):
            raise DataError("albedo grid: log_ratio has non-finite values")
        a = _alpha_of_similarity(self.similarity[:, None, None], self.g[None, :, None]) * np.exp(
            self.log_ratio
        )
        if np.any(np.diff(a, axis=0) >= 0):
            raise DataError("albedo grid: A is not strictly decreasing along s for some (g, n) node")

    def _check_range(self, g, n):
        for name, v, nodes in (("anisotropy g", g, self.g), ("refractive index n", n, self.n)):
            out = (v < nodes[0] - 1e-12) | (v > nodes[-1] + 1e-12)
            if out.any():
                i = int(np.argmax(out))
                raise ParameterError(
                    f"{name} = {v[i]!r} lies outside the albedo grid [{nodes[0]:g}, {nodes[-1]:g}]"
                )
        return np.clip(g, self.g[0], self.g[-1]), np.clip(n, self.n[0], self.n[-1])

    def node_curves(self, g, n):
        """Return y at every s node for each query (g, n): (Q, K), and its monotone-cubic slopes (Q, K)."""
        g, n = self._check_range(np.asarray(g, np.float64).reshape(-1), np.asarray(n, np.float64).reshape(-1))
        gi, gw = lagrange_weights(self.g, g)
        ni, nw = lagrange_weights(critical_cosine(self.n), critical_cosine(n))
        y = np.zeros((g.size, self.similarity.size))
        for a in range(gi.shape[1]):
            for b in range(ni.shape[1]):
                y += (gw[:, a] * nw[:, b])[:, None] * self.log_ratio[:, gi[:, a], ni[:, b]].T
        return y, pchip_slopes(self.similarity, y)

    def _interval(self, s):
        return np.clip(np.searchsorted(self.similarity, s, side="right") - 1, 0, self.similarity.size - 2)

    def albedo_multiple_of(self, albedo_single, g, n):
        """A(alpha, g, n); arrays broadcast together, result of their shape."""
        a, g, n = np.broadcast_arrays(*(np.asarray(v, dtype=np.float64) for v in (albedo_single, g, n)))
        shape = a.shape
        a, g, n = a.reshape(-1), g.reshape(-1), n.reshape(-1)
        out = np.empty(a.size)
        for lo in range(0, a.size, _BLOCK):
            sl = slice(lo, lo + _BLOCK)
            y, d = self.node_curves(g[sl], n[sl])
            gg = np.clip(g[sl], self.g[0], self.g[-1])
            s = np.sqrt(np.clip((1.0 - a[sl]) / (1.0 - gg * a[sl]), 0.0, 1.0))
            out[sl] = a[sl] * np.exp(_hermite(self.similarity, y, d, self._interval(s), s))
        return out.reshape(shape)

    def similarity_of(self, albedo_multiple, g, n):
        """Return the s in [0, 1] with A(alpha(s, g), g, n) = A.

        FitError where A >= A(s = 0) = 1 - R_specular(n).
        """
        A, g, n = np.broadcast_arrays(*(np.asarray(v, dtype=np.float64) for v in (albedo_multiple, g, n)))
        shape = A.shape
        A, g, n = A.reshape(-1), g.reshape(-1), n.reshape(-1)
        out = np.empty(A.size)
        x = self.similarity
        for lo in range(0, A.size, _BLOCK):
            sl = slice(lo, lo + _BLOCK)
            y, d = self.node_curves(g[sl], n[sl])
            gg = np.clip(g[sl], self.g[0], self.g[-1])[:, None]
            a_nodes = _alpha_of_similarity(x[None, :], gg) * np.exp(y)  # decreasing along s
            target = A[sl]
            over = target >= a_nodes[:, 0]
            if over.any():
                i = int(np.argmax(over))
                raise FitError(
                    f"albedo_multiple[{lo + i}] = {target[i]:.6g} is not reachable by a half-space of index "
                    f"{n[lo + i]:g}: at most {a_nodes[i, 0]:.6g} (1 - normal specular reflectance)"
                )
            k = np.clip(np.sum(a_nodes > target[:, None], axis=1) - 1, 0, x.size - 2)
            s_lo, s_hi = x[k], x[k + 1]
            for _ in range(_BISECTION_STEPS):
                mid = 0.5 * (s_lo + s_hi)
                f = _alpha_of_similarity(mid, gg[:, 0]) * np.exp(_hermite(x, y, d, k, mid))
                above = f > target
                s_lo = np.where(above, mid, s_lo)
                s_hi = np.where(above, s_hi, mid)
            out[sl] = 0.5 * (s_lo + s_hi)
        return out.reshape(shape)
