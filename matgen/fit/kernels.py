"""Numba kernel of the normalised-diffusion fit.

Its pure-Python twin is the NumPy path of :func:`matgen.fit.diffusion.fit_burley2015` (``backend="numpy"``),
checked for parity in ``tests/fit/test_kernel_parity.py``. Units: radii and d in mm, profiles in mm^-2.

One profile per parallel iteration: coarse log-d grid, then golden-section search, each cost evaluated in
one fused loop over the rings (no temporaries). Same steps, same order of comparisons as the twin.
"""

from __future__ import annotations

import math

import numba
import numpy as np

_INVPHI = (math.sqrt(5.0) - 1.0) / 2.0


@numba.njit(cache=True)
def ring_fraction(r0, dr, d):
    """Fraction of the normalised-diffusion reflectance (A = 1) leaving through [r0, r0 + dr).

    ``Christensen2015``; radii and d in mm.
    """
    return 0.25 * (
        math.exp(-r0 / d) * -math.expm1(-dr / d)
        + 3.0 * math.exp(-r0 / (3.0 * d)) * -math.expm1(-dr / (3.0 * d))
    )


@numba.njit(cache=True)
def profile_cost(edges, area, y, inv, a, conserve, log_d):
    """Weighted squared misfit and amplitude of one profile at shape distance exp(log_d) mm."""
    d = math.exp(log_d)
    n = y.size
    if conserve:
        amp = a
    else:
        num = 0.0
        den = 0.0
        for k in range(n):
            u = ring_fraction(edges[k], edges[k + 1] - edges[k], d) / area[k] * inv[k]
            num += u * (y[k] * inv[k])
            den += u * u
        amp = num / den if den > 0.0 else 0.0
    cost = 0.0
    for k in range(n):
        u = ring_fraction(edges[k], edges[k + 1] - edges[k], d) / area[k]
        r = (amp * u - y[k]) * inv[k]
        cost += r * r
    return cost, amp


@numba.njit(parallel=True, cache=True)
def fit_burley_kernel(edges, y, inv, a, conserve, grid, iterations, out_log_d, out_amp, out_cost, out_edge):
    """Fit every row of ``y`` (N, R); results written to the ``out_*`` arrays (N,)."""
    area = np.empty(edges.size - 1)
    for k in range(area.size):
        area[k] = math.pi * (edges[k + 1] ** 2 - edges[k] ** 2)
    n_grid = grid.size
    for i in numba.prange(y.shape[0]):
        yi = y[i]
        wi = inv[i]
        best = 0
        best_cost = np.inf
        for k in range(n_grid):
            c, _ = profile_cost(edges, area, yi, wi, a[i], conserve, grid[k])
            if c < best_cost:
                best_cost = c
                best = k
        left = grid[max(best - 1, 0)]
        right = grid[min(best + 1, n_grid - 1)]
        out_edge[i] = best == 0 or best == n_grid - 1
        x1 = right - _INVPHI * (right - left)
        x2 = left + _INVPHI * (right - left)
        f1, _ = profile_cost(edges, area, yi, wi, a[i], conserve, x1)
        f2, _ = profile_cost(edges, area, yi, wi, a[i], conserve, x2)
        for _it in range(iterations):
            if f1 < f2:
                right = x2
                x2 = x1
                f2 = f1
                x1 = right - _INVPHI * (right - left)
                f1, _ = profile_cost(edges, area, yi, wi, a[i], conserve, x1)
            else:
                left = x1
                x1 = x2
                f1 = f2
                x2 = left + _INVPHI * (right - left)
                f2, _ = profile_cost(edges, area, yi, wi, a[i], conserve, x2)
        log_d = 0.5 * (left + right)
        c, amp = profile_cost(edges, area, yi, wi, a[i], conserve, log_d)
        out_log_d[i] = log_d
        out_amp[i] = amp
        out_cost[i] = c
