"""Strip heights: bounded by the memory budget, whole compression blocks when they fit."""

import pytest

from matgen.bake.tiles import ROWS_MULTIPLE, rows_per_strip, strips
from matgen.errors import ParameterError


def test_strip_height_respects_budget_and_block_multiple():
    rows = rows_per_strip(4096, 4096, 50, 256 << 20)  # 109 rows fit: rounded to whole blocks
    assert rows == 96 and rows % ROWS_MULTIPLE == 0
    assert rows * 4096 * 50 * 4 * 3 <= 256 << 20
    assert rows_per_strip(4096, 4096, 200, 256 << 20) == 27  # fewer than one block fit: kept as is
    assert rows_per_strip(4096, 4096, 200, 1) == 1  # never zero rows
    assert rows_per_strip(64, 10, 3, 1 << 30) == 10  # never more than the image


def test_strips_cover_the_rows_once():
    assert list(strips(70, 32)) == [(0, 32), (32, 64), (64, 70)]
    with pytest.raises(ParameterError):
        rows_per_strip(0, 10, 3, 100)
