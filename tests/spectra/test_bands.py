"""Band-spec parsing: each malformed spec is refused with a message naming what is wrong."""

import numpy as np
import pytest

from matgen.errors import BandError
from matgen.spectra.bands import BandSet


def test_regular_spec_reads_start_stop_step_and_width():
    bands = BandSet.parse("400:700:10:5")
    assert len(bands) == 31
    np.testing.assert_allclose(bands.width_nm, 5.0)
    np.testing.assert_allclose(bands.centre_nm[[0, -1]], [400.0, 700.0])


def test_width_wider_than_step_names_the_width():
    with pytest.raises(BandError) as err:
        BandSet.parse("400:700:10:20")
    msg = str(err.value)
    assert "width 20" in msg and "step=10" in msg, msg
    assert "cannot read" not in msg, msg
    assert "400:700:10:20" in msg, msg


@pytest.mark.parametrize(
    "spec, words",
    [("700:400:10", "below start"), ("400:700:0", "step is 0"), ("400:700:-5", "must be > 0")],
)
def test_other_readable_but_invalid_specs_name_their_fault(spec, words):
    with pytest.raises(BandError) as err:
        BandSet.parse(spec)
    assert words in str(err.value) and "cannot read" not in str(err.value)


@pytest.mark.parametrize("spec", ["a:b:c", "400:700", "400:700:10:5:1", "365,x,850"])
def test_unreadable_specs_say_how_to_write_one(spec):
    with pytest.raises(BandError, match="cannot read band spec"):
        BandSet.parse(spec)
