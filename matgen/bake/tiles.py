"""Strips and tiles of a bake: how many rows are processed at once so that memory stays bounded.

A bake walks each texture (one UDIM tile, or a single texture) from the top row down in strips of whole rows.
The strip height is chosen so that one strip of every input and output channel, as float32, fits a memory
budget in bytes; memory then stays near (one strip of each input and output + the table) whatever the
texture size. Units: texels, bytes.
"""

from __future__ import annotations

from matgen.errors import ParameterError

#: Bytes per channel value while a strip is computed (float32).
BYTES_PER_VALUE = 4

#: Strip heights are rounded down to a multiple of this many rows when the budget allows: OpenEXR compresses
#: zip in blocks of 16 scanlines and piz in blocks of 32 (OpenEXR file-layout documentation, from memory).
ROWS_MULTIPLE = 32

#: Working copies a strip needs besides its outputs (lookup result, conversions to float64): a safety factor.
STRIP_OVERHEAD_FACTOR = 3


def rows_per_strip(width: int, height: int, channels: int, memory_budget_bytes: int) -> int:
    """Strip height (rows) so that ``width x rows x channels`` float32 values fit the budget.

    Parameters
    ----------
    width, height : int
        Texture size in texels.
    channels : int
        Channels of all inputs and outputs together.
    memory_budget_bytes : int
        Bytes one strip may take.

    Returns
    -------
    int
        Between 1 and ``height``; a multiple of :data:`ROWS_MULTIPLE` when at least that many rows fit.

    """
    if width < 1 or height < 1 or channels < 1:
        raise ParameterError(f"strip of {width} x {height} texels and {channels} channels: all must be >= 1")
    if memory_budget_bytes < 1:
        raise ParameterError(f"memory budget is {memory_budget_bytes} bytes; must be > 0")
    per_row = width * channels * BYTES_PER_VALUE * STRIP_OVERHEAD_FACTOR
    rows = max(1, min(height, int(memory_budget_bytes // per_row)))
    if ROWS_MULTIPLE <= rows < height:
        rows -= rows % ROWS_MULTIPLE  # whole compression blocks per write: nothing buffered between strips
    return rows


def strips(height: int, rows: int):
    """Row ranges ``(y0, y1)`` covering ``0 .. height`` in steps of ``rows``."""
    if rows < 1:
        raise ParameterError(f"strip height is {rows} rows; must be >= 1")
    for y0 in range(0, height, rows):
        yield y0, min(height, y0 + rows)
