"""Multilinear interpolation on a rectilinear grid, in transformed coordinates. Units: those of the axes.

A table axis is interpolated in the coordinate it was sampled in: ``log(x)`` for a log-spaced axis, ``x``
for a linear one (the transform is applied by the caller, :meth:`matgen.tables.store.Table.lookup`). Inside
each grid
cell the value is the tensor-product linear blend of the cell's ``2**D`` corners. At a grid node the blend
weight of that node is exactly 1 and every other corner is skipped, so node values come back bit for bit.

The kernel :func:`multilinear_kernel` is compiled by numba (``parallel=True`` over query points); its twin
:func:`multilinear_python` is a literal pure-Python transcription used by the parity test and by
``NUMBA_DISABLE_JIT=1`` runs.
"""

from __future__ import annotations

from collections.abc import Sequence

import numba
import numpy as np

from matgen.errors import ParameterError

#: Query points per parallel work item of the kernel.
_BLOCK = 1024

#: Largest number of axes a table may have: the kernel visits 2**D corners per query.
MAX_AXES = 12


def _prepare(axis_coords: Sequence[np.ndarray], values: np.ndarray):
    """Flatten axis coordinates and grid values into the kernel's layout."""
    coords = [np.ascontiguousarray(np.asarray(c, dtype=np.float64)) for c in axis_coords]
    d = len(coords)
    if d == 0 or d > MAX_AXES:
        raise ParameterError(f"a grid needs 1 to {MAX_AXES} axes; got {d}")
    shape = tuple(c.size for c in coords)
    for i, c in enumerate(coords):
        if c.ndim != 1 or c.size < 2:
            raise ParameterError(f"grid axis {i} has {c.size} coordinates; needs at least 2")
        if not np.all(np.isfinite(c)) or np.any(np.diff(c) <= 0):
            raise ParameterError(f"grid axis {i} coordinates must be finite and strictly increasing")
    vals = np.asarray(values)
    if vals.shape[:d] != shape or vals.ndim != d + 1:
        raise ParameterError(f"grid values have shape {vals.shape}; expected {shape} + (channels,)")
    flat = np.ascontiguousarray(vals.reshape(-1, vals.shape[-1]), dtype=np.float32)
    offsets = np.zeros(d + 1, dtype=np.int64)
    offsets[1:] = np.cumsum(shape)
    strides = np.ones(d, dtype=np.int64)
    for i in range(d - 2, -1, -1):
        strides[i] = strides[i + 1] * shape[i + 1]
    return np.concatenate(coords), offsets, strides, flat


@numba.njit(cache=True, inline="always")
def _locate(coords, lo, hi, x):
    """Cell index and fraction of ``x`` on the axis ``coords[lo:hi]``; clamps; returns (cell, t, clamped)."""
    n = hi - lo
    if x <= coords[lo]:
        return 0, 0.0, x < coords[lo]
    if x >= coords[hi - 1]:
        return n - 2, 1.0, x > coords[hi - 1]
    # binary search for the last node <= x
    a = 0
    b = n - 1
    while b - a > 1:
        m = (a + b) // 2
        if coords[lo + m] <= x:
            a = m
        else:
            b = m
    x0 = coords[lo + a]
    x1 = coords[lo + a + 1]
    return a, (x - x0) / (x1 - x0), False


@numba.njit(cache=True, parallel=True)
def multilinear_kernel(coords, offsets, strides, values, points, out, clamped):
    """Multilinear blend of ``values`` at ``points`` (numba, parallel over points).

    Parameters
    ----------
    coords : ndarray of float64, shape (sum of axis lengths,)
        Axis coordinates (already transformed), axis i at ``coords[offsets[i]:offsets[i+1]]``.
    offsets : ndarray of int64, shape (D+1,)
        Start of each axis in ``coords``.
    strides : ndarray of int64, shape (D,)
        Row strides of the flattened C-order grid.
    values : ndarray of float32, shape (G, C)
        Grid values, one row per grid node.
    points : ndarray of float64, shape (N, D)
        Query points in the same transformed coordinates.
    out : ndarray of float32, shape (N, C)
        Filled with the interpolated values.
    clamped : ndarray of bool, shape (N,)
        Set True where any coordinate of the point lay outside its axis and was clamped to the edge.

    """
    n_points = points.shape[0]
    d = points.shape[1]
    n_ch = values.shape[1]
    n_blocks = (n_points + _BLOCK - 1) // _BLOCK
    n_corners = 1 << d
    for blk in numba.prange(n_blocks):
        # scratch arrays once per block of points, not per point
        wts = np.empty(n_corners, dtype=np.float64)
        rows = np.empty(n_corners, dtype=np.int64)
        acc = np.empty(n_ch, dtype=np.float64)
        for p in range(blk * _BLOCK, min(n_points, (blk + 1) * _BLOCK)):
            hit = False
            # corner weights and rows by doubling: corner bit i set = upper node along axis i; the weight is
            # the product over axes 0..D-1 in that order
            wts[0] = 1.0
            rows[0] = 0
            size = 1
            for i in range(d):
                c, t, cl = _locate(coords, offsets[i], offsets[i + 1], points[p, i])
                hit = hit or cl
                for k in range(size):
                    w = wts[k]
                    r = rows[k]
                    wts[k] = w * (1.0 - t)
                    rows[k] = r + c * strides[i]
                    wts[k + size] = w * t
                    rows[k + size] = r + (c + 1) * strides[i]
                size *= 2
            clamped[p] = hit
            acc[:] = 0.0
            for k in range(n_corners):
                w = wts[k]
                if w == 0.0:
                    continue  # exact node values; a NaN at a corner of zero weight does not leak
                row = rows[k]
                for ch in range(n_ch):
                    acc[ch] += w * values[row, ch]
            for ch in range(n_ch):
                out[p, ch] = acc[ch]


def multilinear_python(coords, offsets, strides, values, points, out, clamped):
    """Pure-Python twin of :func:`multilinear_kernel` (same arguments, same arithmetic order)."""
    n_points, d = points.shape
    n_ch = values.shape[1]
    for p in range(n_points):
        cell = [0] * d
        frac = [0.0] * d
        hit = False
        for i in range(d):
            lo, hi = int(offsets[i]), int(offsets[i + 1])
            x = float(points[p, i])
            n = hi - lo
            if x <= coords[lo]:
                c, t, cl = 0, 0.0, x < coords[lo]
            elif x >= coords[hi - 1]:
                c, t, cl = n - 2, 1.0, x > coords[hi - 1]
            else:
                a, b = 0, n - 1
                while b - a > 1:
                    m = (a + b) // 2
                    if coords[lo + m] <= x:
                        a = m
                    else:
                        b = m
                x0, x1 = float(coords[lo + a]), float(coords[lo + a + 1])
                c, t, cl = a, (x - x0) / (x1 - x0), False
            cell[i], frac[i] = c, t
            hit = hit or bool(cl)
        clamped[p] = hit
        wts, rows = [1.0], [0]
        for i in range(d):  # same doubling order as the kernel
            t, c, st = frac[i], cell[i], int(strides[i])
            wts = [w * (1.0 - t) for w in wts] + [w * t for w in wts]
            rows = [r + c * st for r in rows] + [r + (c + 1) * st for r in rows]
        acc = [0.0] * n_ch
        for w, row in zip(wts, rows, strict=True):
            if w == 0.0:
                continue
            for c in range(n_ch):
                acc[c] += w * float(values[row, c])
        for c in range(n_ch):
            out[p, c] = acc[c]


def multilinear(axis_coords, values, points, *, backend="numba"):
    """Interpolate grid ``values`` at ``points`` multilinearly, clamping outside the grid.

    Parameters
    ----------
    axis_coords : sequence of ndarray
        D strictly increasing coordinate vectors (transformed: pass ``log(x)`` for log axes).
    values : ndarray, shape (n_0, ..., n_{D-1}, C)
        Grid values (converted to float32).
    points : ndarray of float64, shape (N, D)
        Query points in the same coordinates as ``axis_coords``.
    backend : {"numba", "python"}
        The compiled kernel or its pure-Python twin.

    Returns
    -------
    out : ndarray of float32, shape (N, C)
        Interpolated values (accumulated in float64, rounded once to float32).
    clamped : ndarray of bool, shape (N,)
        Which points had at least one coordinate outside the grid (clamped to the edge).

    """
    coords, offsets, strides, flat = _prepare(axis_coords, values)
    pts = np.ascontiguousarray(np.asarray(points, dtype=np.float64))
    if pts.ndim != 2 or pts.shape[1] != offsets.size - 1:
        raise ParameterError(f"query points have shape {pts.shape}; expected (N, {offsets.size - 1})")
    if not np.all(np.isfinite(pts)):
        row = int(np.argmax(~np.all(np.isfinite(pts), axis=1)))
        raise ParameterError(f"query point {row} is not finite: {pts[row].tolist()}")
    return run_prepared(coords, offsets, strides, flat, pts, backend=backend)


def run_prepared(coords, offsets, strides, flat, pts, *, backend="numba"):
    """Run the kernel on arrays already in kernel layout (see :func:`_prepare`); returns (out, clamped)."""
    out = np.empty((pts.shape[0], flat.shape[1]), dtype=np.float32)
    clamped = np.zeros(pts.shape[0], dtype=np.bool_)
    if backend == "numba":
        multilinear_kernel(coords, offsets, strides, flat, pts, out, clamped)
    elif backend == "python":
        multilinear_python(coords, offsets, strides, flat, pts, out, clamped)
    else:
        raise ParameterError(f"unknown interpolation backend {backend!r}; use 'numba' or 'python'")
    return out, clamped


prepare = _prepare
