"""Compiled kernels of the albedo inverse: the table interpolant with its gradient, and damped Gauss-Newton.

Units: axis coordinates as the table samples them (``log`` of the value on log axes, the value on linear
axes); channel values dimensionless (linear RGB albedo in the working space, then response-weighted albedo
of each single-band capture); features in CIE units (L*, a*, b*, then the lightness L* of each capture).

The interpolant is the table's own multilinear blend (:mod:`matgen.tables.interpolate`) restricted to the
estimated axes: the held axes are blended first, once, into a sub-grid, which gives the same values because
a tensor-product linear blend does not depend on the order of its axes. Inside a cell the blend is linear
along each axis, so its gradient is exact (one-sided at a node, the cell's own side).

The solver minimises ``sum_f (w_f (F_f(x) - T_f))^2 + sum_j ((v_j(x) - mu_j) / sigma_j)^2`` over the box of
the axes, ``F`` the features, ``T`` the target's, ``v_j`` the value of axis j and ``(mu_j, sigma_j)`` an
optional Gaussian prior; the steps are Levenberg-Marquardt (Marquardt 1963, ``Marquardt1963``: a damped
Gauss-Newton step with the damping scaled to the diagonal of J^T J, raised tenfold after a rejected step and
lowered after an accepted one), each step clipped into the box (a projected step).

Every kernel's pure-Python twin is the same source run with ``NUMBA_DISABLE_JIT=1``
(``tests/estimate/test_kernels.py`` runs both and compares them).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from matgen.estimate.perceptual import lab_f

#: Texels per parallel work item (scratch arrays are allocated once per item).
BLOCK = 512

#: Damping of the first step and its bounds (Levenberg-Marquardt; ``Marquardt1963``).
DAMPING_START = 1e-3
DAMPING_MIN = 1e-9
DAMPING_MAX = 1e8

#: Cost (sum of squared residuals, CIE units squared) below which a texel counts as matched exactly.
COST_EXACT = 1e-8


@numba.njit(cache=True)
def _interp_grad(x, coords, offsets, strides, grid, vals, dvals, cell, t, h):
    """Multilinear value (C,) and gradient (C, k) at coordinates ``x`` (k,), already inside the grid."""
    k = x.shape[0]
    nc = grid.shape[1]
    for i in range(k):
        lo, hi = offsets[i], offsets[i + 1]
        j = 0
        while j < hi - lo - 2 and x[i] > coords[lo + j + 1]:
            j += 1
        c0, c1 = coords[lo + j], coords[lo + j + 1]
        cell[i] = j
        h[i] = c1 - c0
        t[i] = min(max((x[i] - c0) / h[i], 0.0), 1.0)
    for c in range(nc):
        vals[c] = 0.0
        for i in range(k):
            dvals[c, i] = 0.0
    for corner in range(1 << k):
        idx = 0
        w = 1.0
        for i in range(k):
            bit = (corner >> i) & 1
            idx += (cell[i] + bit) * strides[i]
            w *= t[i] if bit else 1.0 - t[i]
        for c in range(nc):
            vals[c] += w * grid[idx, c]
        for j in range(k):
            dw = 1.0 if (corner >> j) & 1 else -1.0
            dw /= h[j]
            for i in range(k):
                if i != j:
                    dw *= t[i] if (corner >> i) & 1 else 1.0 - t[i]
            for c in range(nc):
                dvals[c, j] += dw * grid[idx, c]


@numba.njit(cache=True)
def _features(vals, dvals, m_norm, feat, jac):
    """Features (F,) and their Jacobian (F, k) from channel values: CIELAB of RGB, then L* per capture."""
    k = dvals.shape[1]
    x = m_norm[0, 0] * vals[0] + m_norm[0, 1] * vals[1] + m_norm[0, 2] * vals[2]
    y = m_norm[1, 0] * vals[0] + m_norm[1, 1] * vals[1] + m_norm[1, 2] * vals[2]
    z = m_norm[2, 0] * vals[0] + m_norm[2, 1] * vals[1] + m_norm[2, 2] * vals[2]
    fx, dfx = lab_f(x)
    fy, dfy = lab_f(y)
    fz, dfz = lab_f(z)
    feat[0] = 116.0 * fy - 16.0
    feat[1] = 500.0 * (fx - fy)
    feat[2] = 200.0 * (fy - fz)
    for j in range(k):
        dx = m_norm[0, 0] * dvals[0, j] + m_norm[0, 1] * dvals[1, j] + m_norm[0, 2] * dvals[2, j]
        dy = m_norm[1, 0] * dvals[0, j] + m_norm[1, 1] * dvals[1, j] + m_norm[1, 2] * dvals[2, j]
        dz = m_norm[2, 0] * dvals[0, j] + m_norm[2, 1] * dvals[1, j] + m_norm[2, 2] * dvals[2, j]
        jac[0, j] = 116.0 * dfy * dy
        jac[1, j] = 500.0 * (dfx * dx - dfy * dy)
        jac[2, j] = 200.0 * (dfy * dy - dfz * dz)
    for c in range(3, vals.shape[0]):
        f, df = lab_f(vals[c])
        feat[c] = 116.0 * f - 16.0
        for j in range(k):
            jac[c, j] = 116.0 * df * dvals[c, j]


@numba.njit(cache=True, parallel=True)
def forward_kernel(x, coords, offsets, strides, grid, m_norm, out):
    """Features (N, F) of points ``x`` (N, k) in axis coordinates (clipped into the grid)."""
    n, k = x.shape
    nc = grid.shape[1]
    nblocks = (n + BLOCK - 1) // BLOCK
    for b in numba.prange(nblocks):
        xi = np.empty(k)
        vals = np.empty(nc)
        dvals = np.empty((nc, k))
        jac = np.empty((nc, k))
        cell = np.empty(k, dtype=np.int64)
        t = np.empty(k)
        h = np.empty(k)
        for p in range(b * BLOCK, min(n, (b + 1) * BLOCK)):
            for i in range(k):
                xi[i] = min(max(x[p, i], coords[offsets[i]]), coords[offsets[i + 1] - 1])
            _interp_grad(xi, coords, offsets, strides, grid, vals, dvals, cell, t, h)
            _features(vals, dvals, m_norm, out[p], jac)


@numba.njit(cache=True)
def _residual(feat, jac, target, weights, xi, is_log, prior_mu, prior_isig, r, jr):
    """Stack the weighted feature residuals and the prior rows; returns the cost sum r^2."""
    nf = feat.shape[0]
    k = xi.shape[0]
    cost = 0.0
    for f in range(nf):
        r[f] = weights[f] * (feat[f] - target[f])
        for j in range(k):
            jr[f, j] = weights[f] * jac[f, j]
        cost += r[f] * r[f]
    for j in range(k):
        row = nf + j
        for i in range(k):
            jr[row, i] = 0.0
        if prior_isig[j] > 0.0:
            v = math.exp(xi[j]) if is_log[j] else xi[j]
            r[row] = prior_isig[j] * (v - prior_mu[j])
            jr[row, j] = prior_isig[j] * (v if is_log[j] else 1.0)
        else:
            r[row] = 0.0
        cost += r[row] * r[row]
    return cost


@numba.njit(cache=True)
def _damped_step(jr, r, lam, a, g, dx):
    """Solve (J^T J + lam diag(J^T J)) dx = -J^T r by Gaussian elimination with partial pivoting."""
    k = dx.shape[0]
    m = r.shape[0]
    for i in range(k):
        g[i] = 0.0
        for q in range(m):
            g[i] -= jr[q, i] * r[q]
        for j in range(k):
            s = 0.0
            for q in range(m):
                s += jr[q, i] * jr[q, j]
            a[i, j] = s
    for i in range(k):
        a[i, i] += lam * a[i, i] + 1e-12
    for col in range(k):
        piv = col
        for row in range(col + 1, k):
            if abs(a[row, col]) > abs(a[piv, col]):
                piv = row
        if piv != col:
            for j in range(k):
                a[col, j], a[piv, j] = a[piv, j], a[col, j]
            g[col], g[piv] = g[piv], g[col]
        for row in range(col + 1, k):
            f = a[row, col] / a[col, col]
            for j in range(col, k):
                a[row, j] -= f * a[col, j]
            g[row] -= f * g[col]
    for i in range(k - 1, -1, -1):
        s = g[i]
        for j in range(i + 1, k):
            s -= a[i, j] * dx[j]
        dx[i] = s / a[i, i]


@numba.njit(cache=True, parallel=True)
def solve_kernel(
    target,
    x0,
    coords,
    offsets,
    strides,
    grid,
    m_norm,
    weights,
    is_log,
    prior_mu,
    prior_isig,
    n_iter,
    out_x,
    out_feat,
    out_cost,
):
    """Per texel, the axis coordinates (k,) whose features best match ``target`` (F,), from ``x0``.

    Longer than the house's 80 lines because numba needs the scratch arrays allocated once per work item
    and the accept / reject bookkeeping of each step inline.

    Parameters
    ----------
    target : ndarray (N, F)
        Features of the input texels (CIE units).
    x0 : ndarray (N, k)
        Starting coordinates (from the inverse grid).
    coords, offsets, strides, grid
        The estimated axes' sub-grid in the layout of :func:`matgen.tables.interpolate.prepare`
        (``grid`` float64 (P, C)).
    m_norm : ndarray (3, 3)
        Working-space RGB -> white-normalised XYZ.
    weights : ndarray (F,)
        Weight of each feature residual.
    is_log : ndarray of bool (k,)
        Axes whose coordinate is the log of the value.
    prior_mu, prior_isig : ndarray (k,)
        Prior mean (axis unit) and 1 / sigma (0: no prior).
    n_iter : int
        Largest number of Levenberg-Marquardt steps.
    out_x, out_feat, out_cost : ndarray (N, k), (N, F), (N,)
        Receive the solution's coordinates, its features and its cost.

    """
    n, k = x0.shape
    nc = grid.shape[1]
    m = nc + k
    nblocks = (n + BLOCK - 1) // BLOCK
    for b in numba.prange(nblocks):
        xi = np.empty(k)
        xn = np.empty(k)
        vals = np.empty(nc)
        dvals = np.empty((nc, k))
        feat = np.empty(nc)
        jac = np.empty((nc, k))
        fn = np.empty(nc)
        jn = np.empty((nc, k))
        r = np.empty(m)
        jr = np.empty((m, k))
        rn = np.empty(m)
        jrn = np.empty((m, k))
        a = np.empty((k, k))
        g = np.empty(k)
        dx = np.empty(k)
        cell = np.empty(k, dtype=np.int64)
        t = np.empty(k)
        h = np.empty(k)
        lo = np.empty(k)
        hi = np.empty(k)
        for i in range(k):
            lo[i] = coords[offsets[i]]
            hi[i] = coords[offsets[i + 1] - 1]
        for p in range(b * BLOCK, min(n, (b + 1) * BLOCK)):
            for i in range(k):
                xi[i] = min(max(x0[p, i], lo[i]), hi[i])
            _interp_grad(xi, coords, offsets, strides, grid, vals, dvals, cell, t, h)
            _features(vals, dvals, m_norm, feat, jac)
            cost = _residual(feat, jac, target[p], weights, xi, is_log, prior_mu, prior_isig, r, jr)
            lam = DAMPING_START
            for _ in range(n_iter):
                if cost < COST_EXACT:
                    break
                _damped_step(jr, r, lam, a, g, dx)
                moved = 0.0
                for i in range(k):
                    xn[i] = min(max(xi[i] + dx[i], lo[i]), hi[i])
                    moved = max(moved, abs(xn[i] - xi[i]))
                if moved < 1e-7:
                    break
                _interp_grad(xn, coords, offsets, strides, grid, vals, dvals, cell, t, h)
                _features(vals, dvals, m_norm, fn, jn)
                cost_n = _residual(fn, jn, target[p], weights, xn, is_log, prior_mu, prior_isig, rn, jrn)
                if cost_n < cost:
                    cost = cost_n
                    for i in range(k):
                        xi[i] = xn[i]
                    for q in range(m):
                        r[q] = rn[q]
                        for i in range(k):
                            jr[q, i] = jrn[q, i]
                    for f in range(nc):
                        feat[f] = fn[f]
                    lam = max(lam * 0.1, DAMPING_MIN)
                    if moved < 1e-6:
                        break
                else:
                    lam = min(lam * 10.0, DAMPING_MAX)
            for i in range(k):
                out_x[p, i] = xi[i]
            for f in range(nc):
                out_feat[p, f] = feat[f]
            out_cost[p] = cost


@numba.njit(cache=True, parallel=True)
def grid_guess_kernel(target, origin, step, counts, index, cand_x, out_x):
    """Look up starting coordinates in the inverse grid: the candidate stored for the target's Lab cell.

    ``origin``, ``step`` (3,) and ``counts`` (3,) describe a regular grid over L*, a*, b*; ``index`` (cells,)
    holds per cell the row of ``cand_x`` (M, k) nearest to its centre. Targets outside use the nearest cell.
    """
    n = target.shape[0]
    k = cand_x.shape[1]
    for p in numba.prange(n):
        flat = 0
        for d in range(3):
            c = int(math.floor((target[p, d] - origin[d]) / step[d]))
            c = min(max(c, 0), counts[d] - 1)
            flat = flat * counts[d] + c
        row = index[flat]
        for i in range(k):
            out_x[p, i] = cand_x[row, i]
