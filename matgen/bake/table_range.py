"""Texels whose parameters fall outside the lookup table's axes: counted before a bake, fatal on request.

The bake's lookup clamps a parameter outside its table axis to the axis edge (and flags the texel in
``qa/qa*.exr``). ``input.table_out_of_range`` decides what happens to such texels:

- ``"clamp"`` (default): they are clamped and counted (the count is in the descriptor's statistics);
- ``"error"``: the bake refuses before it writes anything, naming the parameter, the first texel, the
  count and the table's range.

:func:`check_table_range` reads every map once more (decoding as the bake does: encoding-range clamping
first, then the linear or fraction decoding), so ``matgen bake --dry-run`` can say how many texels would be
clamped. Constant parameters outside their axis clamp every texel. Units: each parameter in its field's own
unit.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from matgen.bake.maps import MapReader
from matgen.errors import ConfigError

#: Rows read at a time.
ROWS_PER_READ = 256


@dataclass
class TableRangeReport:
    """Texels outside the table's axes: in total, per parameter, and the first one of each parameter.

    Attributes
    ----------
    total : int
        Texels with at least one parameter outside its axis.
    texels : int
        Texels looked at.
    per_parameter : dict
        Parameter -> texels outside its axis.
    first : dict
        Parameter -> (tile, x, y, value) of the first such texel.
    ranges : dict
        Parameter -> (lo, hi) of its table axis.

    """

    total: int = 0
    texels: int = 0
    per_parameter: dict = field(default_factory=dict)
    first: dict = field(default_factory=dict)
    ranges: dict = field(default_factory=dict)

    @property
    def fraction(self) -> float:
        """Share of the texels that clamp (0 when there are none)."""
        return self.total / self.texels if self.texels else 0.0

    def summary(self) -> str:
        """One line: how many texels clamp, and the worst parameter with its first texel."""
        if not self.total:
            return f"no texel lies outside the table's range ({self.texels} texels)"
        name = max(self.per_parameter, key=self.per_parameter.get)
        tile, x, y, v = self.first[name]
        lo, hi = self.ranges[name]
        where = f"tile {tile}, " if tile is not None else ""
        return (
            f"{self.total} of {self.texels} texels ({100 * self.fraction:.1f} %) lie outside the table's "
            f"range; most from '{name}' ({self.per_parameter[name]} texels, table range [{lo:g}, {hi:g}], "
            f"first at {where}x={x}, y={y}: {v:g})"
        )


def _tile_flags(plan, ti, report, lo, hi):
    readers = {
        name: MapReader(
            info,
            plan.config.parameter(name).channel,
            (ti.width, ti.height),
            what=f"map of parameter '{name}'",
        )
        for name, info in ti.maps.items()
    }
    try:
        for r in readers.values():
            r.__enter__()
        for y0 in range(0, ti.height, ROWS_PER_READ):
            y1 = min(ti.height, y0 + ROWS_PER_READ)
            flag = np.zeros((y1 - y0) * ti.width, dtype=bool)
            for i, src in enumerate(plan.axis_sources):
                if src.value is not None:
                    vals = np.full(flag.size, float(src.value))
                else:
                    raw = readers[src.name].read_rows(y0, y1).reshape(-1)
                    vals = src.decode(np.clip(np.nan_to_num(raw, nan=0.0), 0.0, 1.0))
                out = (vals < lo[i]) | (vals > hi[i])
                if out.any():
                    n = int(out.sum())
                    report.per_parameter[src.name] = report.per_parameter.get(src.name, 0) + n
                    if src.name not in report.first:
                        k = int(np.argmax(out))
                        report.first[src.name] = (ti.tile, k % ti.width, y0 + k // ti.width, float(vals[k]))
                    flag |= out
            report.total += int(flag.sum())
            report.texels += flag.size
    finally:
        for r in readers.values():
            r.close()


def count_table_clamps(plan) -> TableRangeReport:
    """Count the texels of a plan whose parameters lie outside the table's axes (reads every map once)."""
    axes = plan.table.axes
    lo = np.array([float(a.values[0]) for a in axes])
    hi = np.array([float(a.values[-1]) for a in axes])
    report = TableRangeReport(ranges={a.name: (float(a.values[0]), float(a.values[-1])) for a in axes})
    for ti in plan.tiles:
        _tile_flags(plan, ti, report, lo, hi)
    return report


def check_table_range(plan) -> TableRangeReport:
    """Count as :func:`count_table_clamps`; with ``table_out_of_range = "error"`` refuse any such texel.

    Raises
    ------
    ConfigError
        Naming the parameter, its first texel, the count and the table's range.

    """
    report = count_table_clamps(plan)
    if report.total and getattr(plan.config, "table_out_of_range", "clamp") == "error":
        raise ConfigError(
            f"{report.summary()}; widen the table, narrow the parameter's range in the config, or set "
            'input.table_out_of_range = "clamp"'
        )
    return report
