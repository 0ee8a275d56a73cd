"""Inputs the fuzz harness found that once broke the contract (kept as regression tests).

Each test names the exact input. Fixed bugs pass; open bugs are xfail(strict=True) so they turn the suite red
the day they are fixed without the test being updated.
"""

import pytest

from matgen.errors import BandError, MatgenError, PathError


def test_band_spec_with_overflowing_count_is_band_error():
    """'300:1e308:1e-308' asked for an infinite band count: OverflowError from int(inf) before the guard."""
    from matgen.spectra.bands import BandSet

    with pytest.raises(BandError):
        BandSet.parse("300:1e308:1e-308")
    with pytest.raises(BandError):
        BandSet.regular(0.0, 1e308, 1e-308)


@pytest.mark.parametrize(
    "table",
    [
        {"centre_nm": ["a"], "lower_nm": [1], "upper_nm": [2]},
        {"centre_nm": [[1], [2, 3]], "lower_nm": [1], "upper_nm": [2]},
    ],
)
def test_band_table_with_non_numeric_entries_is_band_error(table):
    """A JSON band table with strings or ragged lists raised a bare ValueError from numpy."""
    from matgen.spectra.bands import BandSet

    with pytest.raises(BandError, match="band"):
        BandSet.from_dict(table)


def test_band_table_keeps_the_specific_message():
    """The guard above must not swallow BandSet's own precise messages (unsorted bands, etc.)."""
    from matgen.spectra.bands import BandSet

    with pytest.raises(BandError, match="not sorted"):
        BandSet.from_dict({"centre_nm": [500, 400], "lower_nm": [495, 395], "upper_nm": [505, 405]})


def test_path_with_nul_byte_is_path_error(tmp_path):
    """'\\x00aps/melanin.exr' (a texture path with a NUL byte) raised ValueError from os.path.realpath."""
    from matgen.fsutil import resolve_inside

    with pytest.raises(PathError, match="NUL"):
        resolve_inside(tmp_path, "\x00aps/melanin.exr", "texture path")


@pytest.mark.xfail(strict=True, reason="open: Stack.__post_init__ calls tuple(names) unguarded (matgen/transport/stack.py)")
def test_stack_names_not_a_sequence_is_stack_error():
    """Stack(names=5) (a layer-name field from a hostile STACK.json) raised TypeError."""
    from matgen.transport.stack import Stack

    with pytest.raises(MatgenError):
        Stack([1.0], [1.4], [0.1], [1.0], [0.5], names=5)
