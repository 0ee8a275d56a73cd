"""Band spectra to RGB against colour-science computed directly (colour-science 0.4.x)."""

import colour
import numpy as np
import pytest

from matgen.color import channel_weights, spectral_to_rgb, xyz_weights
from matgen.errors import ParameterError
from matgen.spectra.bands import BandSet, default_bands

CMFS = "CIE 1931 2 Degree Standard Observer"


def _colour_direct_xyz(values_nm, wl_nm, illuminant):
    cmfs = colour.MSDS_CMFS[CMFS]
    sd = colour.SpectralDistribution(dict(zip(wl_nm, values_nm, strict=True)))
    ill = colour.SDS_ILLUMINANTS[illuminant]
    return colour.sd_to_XYZ(sd, cmfs, ill, method="Integration") / 100.0


def test_perfect_reflector_rec709_d65_via_colour_matrix():
    """Perfect reflector under D65: colour.sd_to_XYZ then colour.XYZ_to_RGB to BT.709 (D65 white, no
    adaptation needed) gives (1, 1, 1) to 1e-3; matgen's weights give the same."""
    wl = np.arange(360, 831)
    xyz = _colour_direct_xyz(np.ones(wl.size), wl, "D65")
    rgb_colour = colour.XYZ_to_RGB(xyz, colour.RGB_COLOURSPACES["ITU-R BT.709"], apply_cctf_encoding=False)
    np.testing.assert_allclose(rgb_colour, 1.0, atol=1e-3)
    w = channel_weights(default_bands(), "rec709", "D65")
    np.testing.assert_allclose(w @ np.ones(len(default_bands())), 1.0, atol=1e-3)


def test_perfect_reflector_acescg_d65_with_cat02():
    """ACEScg (ACES white) under D65 with CAT02: colour.XYZ_to_RGB(..., illuminant=D65 xy,
    chromatic_adaptation_transform='CAT02') maps the perfect reflector to (1, 1, 1) to 1e-3; so does matgen.
    """
    wl = np.arange(360, 831)
    xyz = _colour_direct_xyz(np.ones(wl.size), wl, "D65")
    d65 = colour.CCS_ILLUMINANTS[CMFS]["D65"]
    rgb_colour = colour.XYZ_to_RGB(
        xyz,
        colour.RGB_COLOURSPACES["ACEScg"],
        illuminant=d65,
        chromatic_adaptation_transform="CAT02",
        apply_cctf_encoding=False,
    )
    np.testing.assert_allclose(rgb_colour, 1.0, atol=1e-3)
    for ill in ("D65", "E", "A"):
        np.testing.assert_allclose(
            channel_weights(default_bands(), "ACEScg", ill).sum(axis=1), 1.0, atol=1e-12
        )


@pytest.mark.parametrize("space", ["ACEScg", "ITU-R BT.709"])
@pytest.mark.parametrize("illuminant", ["D65", "A", "E"])
def test_spectrum_matches_colour_science_directly(space, illuminant):
    """A smooth reflectance on 1 nm bands (360-830 nm): matgen's RGB vs colour.sd_to_XYZ (integration
    method) + colour.chromatic_adaptation (Von Kries, CAT02, from the computed illuminant white to the
    space white) + the space's XYZ-to-RGB matrix, to 1e-4."""
    wl = np.arange(360.0, 831.0)
    refl = 0.3 + 0.25 * np.sin(wl / 40.0) + 0.2 * np.exp(-(((wl - 600) / 30) ** 2))
    bands = BandSet(wl, wl - 0.5, wl + 0.5)
    rgb = spectral_to_rgb(refl, bands, space, illuminant)
    xyz = _colour_direct_xyz(refl, wl, illuminant)
    white = _colour_direct_xyz(np.ones(wl.size), wl, illuminant)
    cs = colour.RGB_COLOURSPACES[space]
    adapted = colour.chromatic_adaptation(
        xyz, white, colour.xy_to_XYZ(cs.whitepoint), method="Von Kries", transform="CAT02"
    )
    ref = cs.matrix_XYZ_to_RGB @ (adapted / white[1])
    np.testing.assert_allclose(rgb, ref, atol=1e-4)


def test_bands_outside_cmf_range_get_zero_weight():
    bands = BandSet.regular(300.0, 1000.0, 10.0)
    w = xyz_weights(bands)
    outside = (bands.upper_nm <= 360.0) | (bands.lower_nm >= 830.0)
    assert np.all(w[:, outside] == 0.0)
    with pytest.raises(ParameterError, match="360-830"):
        xyz_weights(BandSet.regular(850.0, 950.0, 10.0))


def test_unknown_space_and_illuminant():
    with pytest.raises(ParameterError, match="working space 'ACEScc-x'"):
        channel_weights(default_bands(), "ACEScc-x")
    with pytest.raises(ParameterError, match="illuminant 'D99'"):
        channel_weights(default_bands(), "ACEScg", "D99")
