"""Colour-space tags of baked EXRs, read back from the consumer's side.

Outside references: OpenImageIO 3.2 reads the headers; OpenColorIO 2.6's built-in config ``ocio://default``
(cg-config v5.0.0, ACES 2.1) resolves the ``oiio:ColorSpace`` names and converts to "CIE XYZ-D65 -
Scene-referred"; colour-science 0.4.7 gives the primaries and the normalised primary matrix (SMPTE RP 177
construction) and the Bradford adaptation. The table is test data (tests/bake/conftest.py).
"""

import numpy as np
import OpenImageIO as oiio
import pytest

from matgen.bake.config import load_config
from matgen.color.tags import (
    SPACE_NAMES,
    exr_colour_attributes,
    materialx_name,
    space_names,
)
from matgen.errors import ParameterError
from matgen.export.job import bake
from matgen.export.materialx import MATERIALX_COLORSPACES

ocio = pytest.importorskip("PyOpenColorIO", reason="needs opencolorio (pip install opencolorio)")
colour = pytest.importorskip("colour")

XYZ_D65 = "CIE XYZ-D65 - Scene-referred"


def _config():
    return ocio.Config.CreateFromFile("ocio://default")


def _header(path):
    inp = oiio.ImageInput.open(str(path))
    assert inp is not None, oiio.geterror()
    spec = inp.spec()
    attrs = {a.name: a.value for a in spec.extra_attribs}
    inp.close()
    return attrs


@pytest.fixture(scope="module")
def baked(tmp_path_factory, kit):
    root = tmp_path_factory.mktemp("tags")
    cfg = kit.make_project(root / "p", 6, 5)
    cfg.write_text(cfg.read_text().replace("passes = []", 'passes = ["uv365"]'))
    out = root / "out"
    bake(load_config(cfg), out)
    return out


def _ocio_matrix(name):
    """RGB -> CIE XYZ (D65) matrix of an OCIO colour space, probed with the unit primaries."""
    proc = _config().getProcessor(name, XYZ_D65).getDefaultCPUProcessor()
    return np.array(
        [proc.applyRGB([1.0, 0.0, 0.0]), proc.applyRGB([0.0, 1.0, 0.0]), proc.applyRGB([0.0, 0.0, 1.0])]
    ).T


def _matrix_from_chromaticities(chrom):
    """RGB -> XYZ (D65) from an EXR ``chromaticities`` attribute, Bradford-adapted to D65."""
    c = np.asarray(chrom, dtype=np.float64).reshape(4, 2)
    npm = colour.normalised_primary_matrix(c[:3], c[3])
    d65 = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]["D65"]
    cat = colour.adaptation.matrix_chromatic_adaptation_VonKries(
        colour.xy_to_XYZ(c[3]), colour.xy_to_XYZ(d65), transform="Bradford"
    )
    return cat @ npm


@pytest.mark.parametrize("rel", ["rgb/albedo_multiple.exr", "openpbr/subsurface_color.exr"])
def test_colour_maps_resolve_in_ocio_and_their_chromaticities_agree(baked, rel):
    """The tag names an OCIO space whose RGB -> XYZ equals the one built from the file's chromaticities.

    OpenColorIO 2.6 ocio://default: ACEScg -> CIE XYZ-D65 (float32 processor); colour-science 0.4.7 NPM +
    Bradford. Agreement to 1e-6 (measured 2e-8: float32 arithmetic of the processor).
    """
    attrs = _header(baked / rel)
    name = attrs["oiio:ColorSpace"]
    cs = _config().getColorSpace(name)
    assert cs is not None, f"{name!r} does not resolve in ocio://default"
    assert not cs.isData()
    assert cs.getName() == "ACEScg"
    assert len(attrs["chromaticities"]) == 8
    np.testing.assert_allclose(attrs["adoptedNeutral"], attrs["chromaticities"][6:], atol=0)
    np.testing.assert_allclose(
        _matrix_from_chromaticities(attrs["chromaticities"]), _ocio_matrix(cs.getName()), atol=1e-6
    )


@pytest.mark.parametrize(
    "rel",
    [
        "spectral/albedo_multiple.exr",
        "rgb/mean_free_path_mm.exr",
        "openpbr/subsurface_radius.exr",
        "openpbr/subsurface_radius_scale.exr",
        "passes/uv365.exr",
    ],
)
def test_data_maps_are_non_colour_data_in_ocio(baked, rel):
    """OpenColorIO 2.6 ocio://default: the tag resolves to a space with isdata; no chromaticities."""
    attrs = _header(baked / rel)
    cs = _config().getColorSpace(attrs["oiio:ColorSpace"])
    assert cs is not None and cs.isData()
    assert "chromaticities" not in attrs
    assert "matgen:working_space" not in attrs


@pytest.mark.parametrize("space", sorted(SPACE_NAMES))
def test_every_known_space_resolves_in_ocio_with_matching_primaries(space):
    """Each name resolves in OpenColorIO 2.6 ocio://default by interop id and by name, same primaries."""
    cfg = _config()
    names = SPACE_NAMES[space]
    by_id, by_name = cfg.getColorSpace(names.interop_id), cfg.getColorSpace(names.ocio_name)
    assert by_id is not None and by_name is not None and by_id.getName() == by_name.getName()
    chrom = exr_colour_attributes(space)["chromaticities"]
    np.testing.assert_allclose(_matrix_from_chromaticities(chrom), _ocio_matrix(by_name.getName()), atol=2e-4)


def test_materialx_names_agree_with_the_materialx_writer():
    """The MaterialX document's names (matgen.export.materialx) are the tags' names for the same space."""
    for space, mx_name in MATERIALX_COLORSPACES.items():
        try:
            assert materialx_name(space) == mx_name
        except ParameterError:  # a writer alias that colour-science does not know ("Rec.709")
            continue


def test_unknown_space_is_refused_naming_the_known_ones():
    with pytest.raises(ParameterError, match="unknown to colour-science.*ACEScg"):
        space_names("no such space")
    with pytest.raises(ParameterError, match="no OpenColorIO name"):
        space_names("ProPhoto RGB")  # known to colour-science, not tagged by matgen


def test_bake_with_untaggable_table_space_fails_before_writing(tmp_path, kit, test_table):
    """A table whose working space cannot be tagged stops the bake with nothing written."""
    cfg = kit.make_project(tmp_path / "p", 4, 4)
    bad = test_table.__class__(
        test_table.axes,
        test_table.bands,
        test_table.quantities,
        "ProPhoto RGB",
        test_table.illuminant,
        test_table.manifest,
    )
    with pytest.raises(ParameterError, match="ProPhoto RGB"):
        bake(load_config(cfg), tmp_path / "out", table=bad, table_source="test")
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())


def test_demo_pigment_maps_are_tagged_as_data(tmp_path):
    """The invented scenario's pigment maps say they are non-colour data (OpenColorIO 2.6 ocio://default)."""
    from matgen.scenario import write_scenario

    write_scenario(tmp_path, 32, 1)
    for name in ("melanin", "blood"):
        attrs = _header(tmp_path / "maps" / f"{name}.exr")
        assert _config().getColorSpace(attrs["oiio:ColorSpace"]).isData()
