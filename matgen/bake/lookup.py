"""Per-texel table lookup for a bake: the table's multilinear kernel over whole rows of texels.

The table's grid is flattened once per bake into the layout of
:func:`matgen.tables.interpolate.run_prepared` (only the quantities and channels the outputs need), and each
strip of texels is interpolated by the numba kernel, parallel over texels on ``jobs`` threads. Axes are
interpolated in the coordinate the table was sampled in (``log(x)`` for a log-spaced axis, ``x`` for a linear
one), as :meth:`matgen.tables.store.Table.lookup` does; points outside an axis are clamped to its edge and
flagged per texel. Units: those of the table's axes and quantities (fractions; mm for lengths).
"""

from __future__ import annotations

import numba
import numpy as np

from matgen.errors import ParameterError, TableError
from matgen.tables.interpolate import prepare, run_prepared


def set_threads(jobs: int | None) -> int:
    """Set the number of kernel threads (None: all numba threads); returns the number in use."""
    limit = numba.config.NUMBA_NUM_THREADS
    n = limit if not jobs else max(1, min(int(jobs), limit))
    numba.set_num_threads(n)
    return n


class TexelLookup:
    """Interpolate chosen table quantities (and channel subsets) at many points.

    Parameters
    ----------
    table : matgen.tables.store.Table
        The lookup table (``axes``, ``quantities``).
    request : dict
        Quantity name -> channel indices to keep (int array) or None for all channels.
    derived : dict, optional
        Extra name -> grid array (``grid_shape + (C,)``) interpolated alongside, for quantities that are
        linear in the table's values (pass responses, band averages) and so can be formed on the grid once.
    backend : {"numba", "python"}
        The compiled kernel or its pure-Python twin (parity tests).

    """

    def __init__(self, table, request: dict, backend: str = "numba", derived: dict | None = None):
        self.axis_names = tuple(a.name for a in table.axes)
        self.axis_min = np.array([float(np.min(a.values)) for a in table.axes])
        self.axis_max = np.array([float(np.max(a.values)) for a in table.axes])
        self._axes = list(table.axes)
        coords = [a.coords for a in table.axes]
        blocks, self.slices = [], {}
        start = 0
        for name, channels in request.items():
            if name not in table.quantities:
                raise TableError(f"the table holds no quantity '{name}'; it has {sorted(table.quantities)}")
            q = np.asarray(table.quantities[name])
            if channels is not None:
                q = q[..., np.asarray(channels, dtype=np.int64)]
            blocks.append(q.astype(np.float32, copy=False))
            self.slices[name] = slice(start, start + q.shape[-1])
            start += q.shape[-1]
        for name, grid in (derived or {}).items():
            q = np.asarray(grid, dtype=np.float32)
            if q.shape[:-1] != tuple(a.values.size for a in table.axes):
                raise TableError(
                    f"derived grid '{name}' has shape {q.shape}; expected the table's grid + channels"
                )
            blocks.append(q)
            self.slices[name] = slice(start, start + q.shape[-1])
            start += q.shape[-1]
        values = np.concatenate(blocks, axis=-1)
        self.channels = start
        self.backend = backend
        self._prepared = prepare(coords, values)

    def __call__(self, points: np.ndarray):
        """Interpolate at ``points``.

        Parameters
        ----------
        points : ndarray of float64, shape (N, D)
            Parameter values in table-axis order, in the axes' own units; must be finite.

        Returns
        -------
        values : dict
            Quantity name -> float32 array (N, C_name).
        clamped : ndarray of bool, shape (N,)
            Texels with at least one parameter outside its table axis (clamped to the edge).

        """
        pts = np.asarray(points, dtype=np.float64)
        if pts.ndim != 2 or pts.shape[1] != len(self.axis_names):
            raise ParameterError(
                f"lookup points have shape {pts.shape}; expected (N, {len(self.axis_names)})"
            )
        clamped = np.any((pts < self.axis_min) | (pts > self.axis_max), axis=1)
        inside = np.empty_like(pts)
        for i, ax in enumerate(self._axes):
            inside[:, i] = ax.transform(np.clip(pts[:, i], self.axis_min[i], self.axis_max[i]))
        coords, offsets, strides, flat = self._prepared
        out, _ = run_prepared(
            coords, offsets, strides, flat, np.ascontiguousarray(inside), backend=self.backend
        )
        return {name: out[:, s] for name, s in self.slices.items()}, clamped
