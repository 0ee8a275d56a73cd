"""UV / IR pass weights: built-in illustrative curves and user CSV curves."""

import numpy as np
import pytest

from matgen.color import pass_weights
from matgen.color.passes import response_provenance
from matgen.errors import DataError
from matgen.spectra.bands import BandSet, default_bands


@pytest.mark.parametrize("name, peak_nm", [("uv365", 365.0), ("nir850", 850.0), ("nir940", 940.0)])
def test_builtin_passes_normalised_and_centred(name, peak_nm):
    b = default_bands()
    w = pass_weights(name, b)
    assert w.sum() == pytest.approx(1.0) and np.all(w >= 0)
    centroid = float(w @ b.centre_nm)
    assert abs(centroid - peak_nm) < 25.0
    rec = response_provenance(name)
    assert "illustrative" in rec["source"] and rec["generated_by"] == "tools/make_pass_responses.py"


def test_user_csv_and_box_integral(tmp_path):
    """A box response 540-560 nm over bands 535-545, 545-555, 555-565 ...: a quarter, a half, a quarter."""
    p = tmp_path / "box.csv"
    p.write_text("wavelength_nm,weight\n540,1\n560,1\n")
    b = BandSet.regular(500.0, 600.0, 10.0)
    w = pass_weights(str(p), b)
    expect = np.zeros(len(b))
    expect[[4, 5, 6]] = [0.25, 0.5, 0.25]
    np.testing.assert_allclose(w, expect, atol=1e-12)


def test_no_overlap_and_malformed(tmp_path):
    p = tmp_path / "far.csv"
    p.write_text("wavelength_nm,weight\n1200,1\n1300,1\n")
    with pytest.raises(DataError, match="does not overlap"):
        pass_weights(str(p), default_bands())
    bad = tmp_path / "bad.csv"
    bad.write_text("nm,w\n500,1\n")
    with pytest.raises(DataError, match="header"):
        pass_weights(str(bad), default_bands())
    bad.write_text("wavelength_nm,weight\n500,1\n490,1\n")
    with pytest.raises(DataError, match="ascending"):
        pass_weights(str(bad), default_bands())
    bad.write_text("wavelength_nm,weight\n500,-1\n510,1\n")
    with pytest.raises(DataError, match="line 2"):
        pass_weights(str(bad), default_bands())
    with pytest.raises(DataError, match="neither a built-in"):
        pass_weights("uv999", default_bands())
