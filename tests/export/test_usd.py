"""material.usda read back through OpenUSD (usd-core 26.11, the ``pxr`` API) and checked against MaterialX.

Outside references: OpenUSD's stage, its UDIM resolver ``UsdShade.UdimUtils.ResolveUdimTilePaths``, its
shader registry (Sdr) for the UsdPreviewSurface / UsdUVTexture / UsdPrimvarReader_float2 node definitions,
and ``Gf.ColorSpaceNames``; MaterialX 1.39.5's standard library node definition
``ND_open_pbr_surface_surfaceshader`` for the OpenPBR inputs and types. The table is test data.
"""

import sys

import numpy as np
import OpenImageIO as oiio
import pytest

from matgen.bake.config import load_config
from matgen.cli import main
from matgen.errors import DataError
from matgen.export.descriptor import load_descriptor
from matgen.export.job import bake
from matgen.export.usd import usd_text, write_usd

pxr = pytest.importorskip("pxr", reason="needs usd-core (pip install usd-core)")
from pxr import Gf, Sdf, Sdr, Usd, UsdShade  # noqa: E402

mx = pytest.importorskip("MaterialX")

#: MaterialX type -> Sdf value type (OpenUSD's usdMtlx type mapping for these types).
MX_TO_SDF = {
    "float": Sdf.ValueTypeNames.Float,
    "color3": Sdf.ValueTypeNames.Color3f,
    "vector3": Sdf.ValueTypeNames.Float3,
    "filename": Sdf.ValueTypeNames.Asset,
}


@pytest.fixture(scope="module")
def usd_bake(tmp_path_factory, kit):
    root = tmp_path_factory.mktemp("usd")
    cfg = kit.make_project(root / "p", 6, 5, tiles=[1001, 1002, 1011])
    cfg.write_text(cfg.read_text().replace("passes = []", 'passes = ["uv365", "nir850"]'))
    out = root / "out"
    bake(load_config(cfg), out)
    assert main(["usd", str(out / "material.json")]) == 0
    stage = Usd.Stage.Open(str(out / "material.usda"))
    assert stage is not None
    return out, stage


def _material(stage):
    mats = [UsdShade.Material(p) for p in stage.Traverse() if p.IsA(UsdShade.Material)]
    assert len(mats) == 1
    return mats[0]


def _assets(stage):
    for prim in stage.Traverse():
        for attr in prim.GetAttributes():
            if attr.GetTypeName() == Sdf.ValueTypeNames.Asset:
                yield attr


def test_every_asset_path_resolves_to_the_baked_tiles(usd_bake):
    """Each asset (shader files, stack attributes) resolves through OpenUSD to existing files, every tile."""
    out, stage = usd_bake
    tiles = sorted(load_descriptor(out / "material.json")["udim_tiles"])
    layer = stage.GetRootLayer()
    attrs = list(_assets(stage))
    assert len(attrs) >= 8
    for attr in attrs:
        path = attr.Get().path
        assert "<UDIM>" in path, attr.GetPath()
        resolved = UsdShade.UdimUtils.ResolveUdimTilePaths(path, layer)
        assert sorted(int(t) for _, t in resolved) == tiles, attr.GetPath()
        for file, _ in resolved:
            inp = oiio.ImageInput.open(file)
            assert inp is not None, file
            inp.close()


def test_openpbr_shader_inputs_match_the_materialx_node_definition(usd_bake):
    """Inputs of the mtlx surface: names and types of MaterialX 1.39.5's ND_open_pbr_surface_surfaceshader."""
    _, stage = usd_bake
    mat = _material(stage)
    source = mat.ComputeSurfaceSource("mtlx")[0]
    assert source.GetIdAttr().Get() == "ND_open_pbr_surface_surfaceshader"
    lib = mx.createDocument()
    mx.loadLibraries(mx.getDefaultDataLibraryFolders(), mx.getDefaultDataSearchPath(), lib)
    nodedef = lib.getNodeDef("ND_open_pbr_surface_surfaceshader")
    assert nodedef is not None
    inputs = source.GetInputs()
    assert {i.GetBaseName() for i in inputs} >= {"subsurface_color", "subsurface_radius", "specular_ior"}
    for inp in inputs:
        mx_inp = nodedef.getActiveInput(inp.GetBaseName())
        assert mx_inp is not None, inp.GetBaseName()
        assert inp.GetTypeName() == MX_TO_SDF[mx_inp.getType()], inp.GetBaseName()
    # every image/convert node named by info:id exists in the MaterialX library, outputs typed alike
    for prim in stage.Traverse():
        sh = UsdShade.Shader(prim)
        if sh and sh.GetIdAttr().Get().startswith("ND_") and prim.GetName() != "OpenPBR":
            nd = lib.getNodeDef(sh.GetIdAttr().Get())
            assert nd is not None, sh.GetIdAttr().Get()
            for i in sh.GetInputs():
                assert nd.getActiveInput(i.GetBaseName()) is not None, (prim.GetName(), i.GetBaseName())


def test_preview_surface_is_valid_for_the_usd_shader_registry(usd_bake):
    """The universal surface is a UsdPreviewSurface whose inputs exist in OpenUSD's Sdr, same types."""
    _, stage = usd_bake
    mat = _material(stage)
    surf = mat.ComputeSurfaceSource()[0]
    assert surf.GetIdAttr().Get() == "UsdPreviewSurface"
    reg = Sdr.Registry()
    for prim in stage.Traverse():
        sh = UsdShade.Shader(prim)
        ident = sh.GetIdAttr().Get() if sh else None
        if not ident or ident.startswith("ND_"):
            continue
        node = reg.GetShaderNodeByIdentifier(ident)
        assert node is not None, ident
        for i in sh.GetInputs():
            sdr = node.GetShaderInput(i.GetBaseName())
            assert sdr is not None, (ident, i.GetBaseName())
            assert sdr.GetTypeAsSdfType().GetSdfType() == i.GetTypeName(), (ident, i.GetBaseName())
    tex = stage.GetPrimAtPath(mat.GetPath().AppendChild("preview_color"))
    assert UsdShade.Shader(tex).GetInput("wrapS").Get() == "clamp"


def test_colour_space_metadata_names_usd_colour_spaces(usd_bake):
    """Colour textures carry Gf.ColorSpaceNames.LinearAP1 (the ACEScg table), data textures Gf's Data."""
    _, stage = usd_bake
    colour = {a.GetPath().pathString: a.GetColorSpace() for a in _assets(stage)}
    for path, cs in colour.items():
        if path.endswith(("subsurface_color_image.inputs:file", "preview_color.inputs:file")):
            assert cs == Gf.ColorSpaceNames.LinearAP1, path
        else:
            assert cs == Gf.ColorSpaceNames.Data, path


def test_spectral_and_pass_attributes_match_the_files(usd_bake):
    """Wavelengths on the stack attributes equal the EXR channel names read back by OpenImageIO."""
    out, stage = usd_bake
    prim = _material(stage).GetPrim()
    attr = prim.GetAttribute("matgen:spectral:albedo_multiple:file")
    file = UsdShade.UdimUtils.ResolveUdimTilePaths(attr.Get().path, stage.GetRootLayer())[0][0]
    inp = oiio.ImageInput.open(file)
    names = inp.spec().channelnames
    inp.close()
    wl = [float(n[2:-2].replace(",", ".")) for n in names]
    np.testing.assert_allclose(prim.GetAttribute("matgen:spectral:albedo_multiple:wavelengths_nm").Get(), wl)
    assert prim.GetAttribute("matgen:pass:uv365:file").Get().path == "passes/uv365.<UDIM>.exr"


def test_without_openpbr_target_says_how_to_get_it(usd_bake):
    out, _ = usd_bake
    doc = load_descriptor(out / "material.json")
    doc["targets"] = {}
    with pytest.raises(DataError, match="openpbr"):
        usd_text(doc)


def test_missing_usd_core_is_one_message_and_status_2(usd_bake, monkeypatch, capsys):
    out, _ = usd_bake
    monkeypatch.setitem(sys.modules, "pxr.Usd", None)  # import of pxr.Usd now raises ImportError
    assert main(["usd", str(out / "material.json")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and 'pip install "matgen[usd]"' in err


def test_layer_outside_the_bake_folder_is_refused(usd_bake, tmp_path):
    out, _ = usd_bake
    with pytest.raises(DataError, match="bake folder"):
        write_usd(out / "material.json", tmp_path / "elsewhere.usda")


def _usd_project(tmp_path, kit):
    cfg = kit.make_project(tmp_path / "p", 4, 4)
    cfg.write_text(cfg.read_text().replace("[outputs]\n", "[outputs]\nusd = true\n"))
    return cfg


def test_config_switch_writes_the_layer_after_the_bake(tmp_path, kit):
    cfg = _usd_project(tmp_path, kit)
    out = tmp_path / "out"
    assert main(["bake", str(cfg), "--out", str(out), "--quiet"]) == 0
    stage = Usd.Stage.Open(str(out / "material.usda"))
    assert (
        _material(stage).ComputeSurfaceSource("mtlx")[0].GetIdAttr().Get()
        == "ND_open_pbr_surface_surfaceshader"
    )


def test_config_switch_without_usd_core_fails_before_baking(tmp_path, kit, monkeypatch, capsys):
    cfg = _usd_project(tmp_path, kit)
    monkeypatch.setitem(sys.modules, "pxr.Usd", None)
    out = tmp_path / "out"
    assert main(["bake", str(cfg), "--out", str(out), "--quiet"]) == 2
    assert 'pip install "matgen[usd]"' in capsys.readouterr().err
    assert not out.exists()
