"""EXR layout, descriptor schema and checksums, MaterialX validation, passes and the dry run.

Outside references: the spectral OpenEXR layout of Fichet, Pacanowski & Wilkie 2021 (JCGT 10(3)) as read by
colour-science 0.4.7's independent reader ``colour.io.read_spectral_image_Fichet2021``; OpenImageIO 3.2 for
reading headers back; MaterialX 1.39.5's ``Document.validate()`` with its standard data libraries; jsonschema
(draft 2020-12) for the descriptor schema. The table is test data (see tests/bake/conftest.py).
"""

import json
import re
import shutil
from pathlib import Path

import colour
import jsonschema
import numpy as np
import OpenImageIO as oiio
import pytest

from matgen.bake.config import load_config
from matgen.cli import main
from matgen.errors import ConfigError, DataError, PathError
from matgen.export.descriptor import descriptor_schema, inspect_descriptor, validate_descriptor
from matgen.export.exr import read_exr, write_exr
from matgen.export.job import bake
from matgen.export.materialx import material_document, validate_file
from matgen.tables.store import Table

PASSES_EXTRA = 'passes = ["uv365", "nir850"]\n'


def _texel_points(project):
    """Every texel's parameters in table-axis order, decoded as the test config does (row-major)."""

    def read(name):
        inp = oiio.ImageInput.open(str(project / "maps" / name))
        a = inp.read_image(oiio.FLOAT)[..., 0].astype(np.float64)
        inp.close()
        return a

    mel, eu, bl = read("melanin.exr"), read("eumelanin.exr"), read("blood.png")
    return np.stack([0.005 + mel * 0.445, eu, 0.002 + bl * 0.098, np.full_like(mel, 0.75)], -1).reshape(-1, 4)


@pytest.fixture(scope="module")
def baked(tmp_path_factory, kit):
    root = tmp_path_factory.mktemp("baked")
    cfg = kit.make_project(root / "p", 12, 10, pixel_type="float")
    cfg.write_text(cfg.read_text().replace("passes = []", PASSES_EXTRA.strip()))
    out = root / "out"
    res = bake(load_config(cfg), out)
    return root, out, res


def test_spectral_exr_layout_read_by_colour_science(baked):
    """colour-science 0.4.7 read_spectral_image_Fichet2021 finds the reflective component 'T', its bands."""
    _, out, _ = baked
    path = out / "spectral" / "albedo_multiple.exr"
    components, spec = colour.io.read_spectral_image_Fichet2021(str(path), additional_data=True)
    assert set(components) == {"T"}
    wl, values = components["T"]
    assert sorted(wl.tolist()) == [400.0, 450.0, 500.0, 550.0, 600.0, 650.0, 700.0]
    attrs = {a.name: a.value for a in spec.attributes}
    assert attrs["spectralLayoutVersion"] == "1.0"
    assert attrs["matgen:quantity"] == "albedo_multiple" and attrs["matgen:unit"] == "1"
    pix, chans, _ = read_exr(path)
    i550 = list(wl).index(550.0)
    np.testing.assert_array_equal(values[..., i550], pix[..., chans.index("T.550,000000nm")])


def test_exr_round_trip_header_and_compression(tmp_path):
    pix = np.random.default_rng(0).uniform(0, 1, (5, 7, 2)).astype(np.float32)
    write_exr(
        tmp_path / "a.exr",
        pix,
        ("T.400,000000nm", "T.410,000000nm"),
        pixel_type="float",
        compression="piz",
        attributes={"spectralLayoutVersion": "1.0"},
    )
    back, chans, attrs = read_exr(tmp_path / "a.exr")
    np.testing.assert_array_equal(back, pix)
    assert attrs["compression"] == "piz" and attrs["spectralLayoutVersion"] == "1.0"
    inp = oiio.ImageInput.open(str(tmp_path / "a.exr"))
    assert inp.spec().format == oiio.FLOAT
    inp.close()
    with pytest.raises(Exception, match="lossless"):
        write_exr(tmp_path / "b.exr", pix, ("a", "b"), compression="dwaa")


def test_textures_mipmapped_on_request(tmp_path, kit):
    cfg = kit.make_project(tmp_path / "p", 32, 32)
    cfg.write_text(cfg.read_text().replace('pixel_type = "float"', 'pixel_type = "half"\ntexture = true'))
    res = bake(load_config(cfg), tmp_path / "out")
    inp = oiio.ImageInput.open(str(tmp_path / "out" / "rgb" / "albedo_multiple.exr"))
    spec = inp.spec()
    levels = 0
    while inp.seek_subimage(0, levels):
        levels += 1
    inp.close()
    assert spec.tile_width == 64 and levels == 6  # 32, 16, 8, 4, 2, 1
    assert all(t["tiled_mipmapped"] for t in json.loads(res.descriptor.read_text())["textures"])


def test_spectral_layout_survives_tiled_mipmapped_stacks(tmp_path, kit):
    """With texture = true every mip level of a spectral stack keeps the layout's channel names and
    spectralLayoutVersion (read back with OpenImageIO 3.2 level by level, and by colour-science 0.4.7's
    read_spectral_image_Fichet2021); level 0 holds the same texels as the scanline bake."""
    cfg = kit.make_project(tmp_path / "p", 40, 24, pixel_type="half")
    bake(load_config(cfg), tmp_path / "plain")
    cfg.write_text(cfg.read_text().replace('pixel_type = "half"', 'pixel_type = "half"\ntexture = true'))
    bake(load_config(cfg), tmp_path / "tex")
    names = tuple(f"T.{c},000000nm" for c in (400, 450, 500, 550, 600, 650, 700))
    for q in ("albedo_multiple", "mean_free_path_mm"):
        path = tmp_path / "tex" / "spectral" / f"{q}.exr"
        inp = oiio.ImageInput.open(str(path))
        sizes = []
        while inp.seek_subimage(0, len(sizes)):
            spec = inp.spec()
            sizes.append((spec.width, spec.height))
            assert spec.tile_width == 64 and tuple(spec.channelnames) == names
            assert spec.get_string_attribute("spectralLayoutVersion") == "1.0"
            assert spec.get_string_attribute("matgen:quantity") == q
        inp.close()
        assert sizes == [(24, 40), (12, 20), (6, 10), (3, 5), (1, 2), (1, 1)]
        components, _ = colour.io.read_spectral_image_Fichet2021(str(path), additional_data=True)
        assert sorted(components["T"][0].tolist()) == [400.0, 450.0, 500.0, 550.0, 600.0, 650.0, 700.0]
        a, ca, _ = read_exr(path)
        b, cb, _ = read_exr(tmp_path / "plain" / "spectral" / f"{q}.exr")
        assert ca == cb
        np.testing.assert_array_equal(a, b)


def test_mipmapped_textures_refused_above_the_memory_budget(tmp_path, kit, capsys):
    """Making mip-maps reads a file whole, so texture = true is refused (naming the file, the MiB it needs
    and the budget) when that exceeds --memory-mb; nothing is written."""
    from matgen.bake.run import plan_bake
    from matgen.errors import LimitError
    from matgen.export.job import texture_memory_bytes

    cfg = kit.make_project(tmp_path / "p", 64, 64, pixel_type="half")
    cfg.write_text(cfg.read_text().replace('pixel_type = "half"', 'pixel_type = "half"\ntexture = true'))
    config = load_config(cfg)
    with pytest.raises(
        LimitError, match=r"spectral/albedo_multiple\.exr \(64 x 64 texels, 7 channels\).*MiB"
    ):
        bake(config, tmp_path / "out", memory_budget_bytes=8 << 20)
    assert not (tmp_path / "out").exists()
    assert main(["bake", str(cfg), "--out", str(tmp_path / "out"), "--memory-mb", "8", "--dry-run"]) == 2
    assert "--memory-mb" in capsys.readouterr().err
    need = texture_memory_bytes(plan_bake(config, Table.load(tmp_path / "p" / "table.npz")))
    bake(config, tmp_path / "out", memory_budget_bytes=need)  # exactly enough: accepted
    assert (tmp_path / "out" / "material.json").is_file()


@pytest.mark.skipif(not Path("/proc/self/status").is_file(), reason="needs Linux /proc (VmHWM)")
def test_texture_memory_estimate_bounds_the_measured_peak(tmp_path):
    """The memory the bake reserves for make_texture (texture_memory_bytes' formula) is at least the peak
    resident memory make_texture really takes, measured in a child process (rise of /proc VmHWM) on a
    1024 x 1024, 16-channel half file; and the peak holds the whole image (so the refusal is needed)."""
    import subprocess
    import sys

    from matgen.export.exr import StreamingExr
    from matgen.export.job import TEXTURE_MEMORY_FACTOR, TEXTURE_MEMORY_OVERHEAD_BYTES

    w, c = 1024, 16
    src = tmp_path / "src.exr"
    writer = StreamingExr(src, w, w, [f"T.{400 + 10 * i},000000nm" for i in range(c)], pixel_type="half")
    rng = np.random.default_rng(0)
    for y0 in range(0, w, 128):
        writer.write_rows(y0, rng.uniform(0, 1, (128, w, c)).astype(np.float16))
    writer.close()
    code = (
        "import sys\nfrom matgen.export.exr import make_texture\n"
        "def hwm():\n"
        "    line = [x for x in open('/proc/self/status') if x.startswith('VmHWM')][0]\n"
        "    return int(line.split()[1]) * 1024\n"
        "a = hwm()\nmake_texture(sys.argv[1], sys.argv[2])\nprint(hwm() - a)"
    )
    run = subprocess.run(
        [sys.executable, "-c", code, str(src), str(tmp_path / "dst.exr")], capture_output=True, text=True
    )
    assert run.returncode == 0, run.stderr
    peak = int(run.stdout.strip())
    image = w * w * c * 4
    assert image <= peak <= TEXTURE_MEMORY_FACTOR * image + TEXTURE_MEMORY_OVERHEAD_BYTES


def test_descriptor_validates_and_paths_are_relative_with_checksums(baked):
    _, out, res = baked
    doc = json.loads((out / "material.json").read_text())
    jsonschema.Draft202012Validator(descriptor_schema()).validate(doc)
    assert doc["units"]["metres_per_scene_unit"] == 0.01
    assert sorted(t["path"] for t in doc["textures"]) == sorted(f for f in res.files if f.endswith(".exr"))
    for t in doc["textures"]:
        assert not t["path"].startswith("/") and ".." not in t["path"]
        assert (out / t["path"]).is_file()
    assert doc["documents"]["materialx"]["path"] == "material.mtlx"
    assert (
        doc["provenance"]["table_sha256"]
        == json.loads((baked[0] / "p" / "table.json").read_text())["npz_sha256"]
    )
    bad = json.loads(json.dumps(doc))
    bad["textures"][0]["path"] = "../elsewhere.exr"
    with pytest.raises(ConfigError, match="textures.0.path"):
        validate_descriptor(bad)
    bad["textures"][0]["path"] = "/abs/elsewhere.exr"
    with pytest.raises((ConfigError, PathError)):
        validate_descriptor(bad)


def test_inspect_detects_modified_and_missing_texture(baked, tmp_path, capsys):
    _, out, _ = baked
    copy = tmp_path / "copy"
    shutil.copytree(out, copy)
    assert main(["inspect", str(copy / "material.json")]) == 0
    assert "OK" in capsys.readouterr().out
    target = copy / "rgb" / "albedo_multiple.exr"
    pix, chans, _ = read_exr(target)
    pix[0, 0, 0] += 0.25
    write_exr(target, pix, chans, pixel_type="float")
    rep = inspect_descriptor(copy / "material.json")
    assert rep.modified == ["rgb/albedo_multiple.exr"] and not rep.missing
    (copy / "qa" / "qa.exr").unlink()
    assert main(["inspect", str(copy / "material.json")]) == 1
    text = capsys.readouterr().out
    assert "MODIFIED rgb/albedo_multiple.exr" in text and "MISSING  qa/qa.exr" in text


def test_materialx_document_passes_materialx_validation(baked):
    _, out, _ = baked
    ok, msg = validate_file(out / "material.mtlx")
    assert ok, msg
    text = (out / "material.mtlx").read_text()
    for name in (
        "subsurface_color",
        "subsurface_radius",
        "subsurface_radius_scale",
        "subsurface_scatter_anisotropy",
        "specular_ior",
        "open_pbr_surface",
    ):
        assert name in text
    assert 'value="openpbr/subsurface_color.exr"' in text and 'colorspace="acescg"' in text


def test_materialx_only_subsurface_color_is_colour_managed(baked):
    """Only subsurface_color's image carries a colour space; the data maps (radius scale, a ratio of
    lengths; radius; g) are read raw. Checked on the file, and through MaterialX 1.39.5's own OSL shader
    generator with its default colour management and a renderer working space of lin_rec709: only the
    colour map gets an acescg -> lin_rec709 transform."""
    import MaterialX as mx
    import MaterialX.PyMaterialXGenOsl as mx_osl
    import MaterialX.PyMaterialXGenShader as mx_gen

    _, out, _ = baked
    lib = mx.createDocument()
    mx.loadLibraries(mx.getDefaultDataLibraryFolders(), mx.getDefaultDataSearchPath(), lib)
    doc = mx.createDocument()
    mx.readFromXmlFile(doc, str(out / "material.mtlx"))
    doc.setDataLibrary(lib)
    managed = {}
    for img in doc.getNodes("image"):
        space = img.getInput("file").getActiveColorSpace()
        if space not in ("", "none"):
            managed[img.getName()] = space
        if img.getType() in ("color3", "color4"):
            assert space not in ("", "none"), img.getName()
    assert managed == {"test_face_subsurface_color_image": "acescg"}
    gen = mx_osl.OslShaderGenerator.create()
    ctx = mx_gen.GenContext(gen)
    ctx.registerSourceCodeSearchPath(mx.getDefaultDataSearchPath())
    cms = mx_gen.DefaultColorManagementSystem.create(gen.getTarget())
    cms.loadLibrary(lib)
    gen.setColorManagementSystem(cms)
    ctx.getOptions().targetColorSpaceOverride = "lin_rec709"
    shader = doc.getNodes("open_pbr_surface")[0]
    transformed = {}
    for inp in shader.getInputs():
        node = inp.getConnectedNode()
        if node is not None:
            code = gen.generate(node.getName(), node, ctx).getSourceCode(mx_gen.PIXEL_STAGE)
            transformed[inp.getName()] = "acescg_to_lin_rec709" in code
    assert transformed == {
        "subsurface_color": True,
        "subsurface_radius": False,
        "subsurface_radius_scale": False,
        "subsurface_scatter_anisotropy": False,
    }
    assert shader.getInput("subsurface_radius_scale").getConnectedNode().getCategory() == "convert"


def test_materialx_validation_catches_a_misspelt_input():
    with pytest.raises(DataError, match="subsurface_colour"):
        material_document(
            "m", [("open_pbr_surface", {"subsurface_colour": {"value": 1.0, "type": "float"}})], "ACEScg"
        )


def test_pass_maps_are_response_weighted_albedo(baked):
    """A pass texel is w @ A over all table bands, with w from matgen.color.pass_weights (sum 1)."""
    root, out, _ = baked
    table = Table.load(root / "p" / "table.npz")
    doc = json.loads((out / "material.json").read_text())
    w = np.array(doc["passes"]["uv365"]["weights"])
    assert abs(w.sum() - 1) < 1e-12 and w.size == len(table.bands)
    uv, chans, _ = read_exr(out / "passes" / "uv365.exr")
    ir, _, _ = read_exr(out / "passes" / "nir850.exr")
    assert chans == ("Y",)
    from matgen.bake.run import plan_bake

    plan = plan_bake(load_config(root / "p" / "material.toml"), table)
    pts = _texel_points(root / "p")
    ref, _ = table.lookup(pts, ["albedo_multiple"])
    np.testing.assert_allclose(uv.reshape(-1), ref["albedo_multiple"].astype(np.float64) @ w, rtol=1e-6)
    w850 = np.array(doc["passes"]["nir850"]["weights"])
    np.testing.assert_allclose(ir.reshape(-1), ref["albedo_multiple"].astype(np.float64) @ w850, rtol=1e-6)
    assert plan.pass_weights.keys() == {"uv365", "nir850"}


def test_dry_run_lists_files_and_writes_nothing(tmp_path, kit, capsys):
    cfg = kit.make_project(tmp_path / "p", 8, 8, tiles=[1001, 1002])
    out = tmp_path / "out"
    assert main(["bake", str(cfg), "--out", str(out), "--dry-run"]) == 0
    text = capsys.readouterr().out
    assert "spectral/albedo_multiple.1002.exr" in text and "material.json" in text and "material.mtlx" in text
    assert not out.exists()
    deep = tmp_path / "a" / "b" / "c"  # a folder the bake would create: checked, not created
    assert main(["bake", str(cfg), "--out", str(deep), "--dry-run"]) == 0
    assert not (tmp_path / "a").exists()


def test_dry_run_checks_the_output_folder_without_creating_it(tmp_path, kit, capsys):
    cfg = kit.make_project(tmp_path / "p", 8, 8)
    blocker = tmp_path / "file.txt"
    blocker.write_text("x")
    for out, words in (
        (blocker, "not a folder"),
        (blocker / "sub" / "deeper", "cannot create output folder"),
    ):
        assert main(["bake", str(cfg), "--out", str(out), "--dry-run"]) == 2
        err = capsys.readouterr().err
        assert words in err and "file.txt" in err and err.count("\n") == 1
    assert sorted(p.name for p in tmp_path.iterdir()) == ["file.txt", "p"]


def test_dry_run_reports_a_held_lock(tmp_path, kit, capsys):
    import subprocess
    import sys

    cfg = kit.make_project(tmp_path / "p", 8, 8)
    out = tmp_path / "out"
    out.mkdir()
    holder = subprocess.Popen(
        [
            sys.executable,
            "-c",
            "import time\nfrom matgen.fsutil import FolderLock\n"
            f"l = FolderLock({str(out)!r}, name='.matgen-bake.lock'); l.acquire()\n"
            "print('held', flush=True); time.sleep(60)",
        ],
        stdout=subprocess.PIPE,
        text=True,
    )
    try:
        assert holder.stdout.readline().strip() == "held"
        assert main(["bake", str(cfg), "--out", str(out), "--dry-run"]) == 75  # busy: retry later
        err = capsys.readouterr().err
        assert ".matgen-bake.lock" in err and f"process {holder.pid}" in err
    finally:
        holder.kill()
        holder.wait()
        holder.stdout.close()
    assert main(["bake", str(cfg), "--out", str(out), "--dry-run"]) == 0  # the holder is gone: stale


def test_dry_run_builds_the_materialx_document_and_descriptor(tmp_path, kit, capsys):
    """A table whose working space has no MaterialX colour-space name, or a preview scene without the
    table's refractive index, fails the dry run as it would fail the bake, before any texel is computed."""
    cfg = kit.make_project(tmp_path / "p", 8, 8)
    odd = kit.make_test_table()
    odd.working_space = "Display P3"
    odd.save(tmp_path / "odd.npz")
    argv = [
        "bake",
        str(cfg),
        "--out",
        str(tmp_path / "out"),
        "--dry-run",
        "--table",
        str(tmp_path / "odd.npz"),
    ]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "Display P3" in err and "MaterialX" in err
    no_ior = kit.make_test_table()
    del no_ior.quantities["ior"]
    no_ior.save(tmp_path / "no_ior.npz")
    text = cfg.read_text().replace(
        'spectral = ["albedo_multiple", "mean_free_path_mm"]',
        'spectral = ["albedo_single", "mean_free_path_mm"]\nmitsuba_scene = true',
    )
    cfg.write_text(text)
    argv = [
        "bake",
        str(cfg),
        "--out",
        str(tmp_path / "out"),
        "--dry-run",
        "--table",
        str(tmp_path / "no_ior.npz"),
    ]
    assert main(argv) == 2
    assert "refractive index" in capsys.readouterr().err
    assert (
        main(["bake", str(cfg), "--out", str(tmp_path / "out"), "--dry-run"]) == 0
    )  # the test table has ior
    assert not (tmp_path / "out").exists()


def test_srgb_tagged_png_warns_and_is_read_as_data(tmp_path, kit):
    """PNG values are read as stored integer / 65535 (no sRGB decoding); OpenImageIO tags PNGs as sRGB."""
    from matgen.bake.maps import MapReader, map_info
    from matgen.errors import ColourSpaceWarning

    vals = np.linspace(0, 1, 16, dtype=np.float32).reshape(4, 4)
    kit.write_map(tmp_path / "m.png", vals, oiio.UINT16)
    with pytest.warns(ColourSpaceWarning, match="m.png"):
        r = MapReader(map_info(tmp_path / "m.png"), 0)
    with r:
        got = r.read_rows(0, 4)
    np.testing.assert_allclose(got, np.round(vals * 65535) / 65535, atol=1e-7)
    kit.write_map(tmp_path / "m8.png", vals, oiio.UINT8)
    with pytest.warns(ColourSpaceWarning), MapReader(map_info(tmp_path / "m8.png"), 0) as r8:
        np.testing.assert_allclose(r8.read_rows(0, 4), np.round(vals * 255) / 255, atol=1e-7)


def test_standard_surface_target_writes_its_own_maps_and_node(tmp_path, kit):
    """standard_surface gets its own maps (radius = per-channel mfp / scale, scale = largest mfp) and a
    real standard_surface node; read back through MaterialX's graph convention (mfp = radius x scale) the
    mean free path equals OpenPBR's (radius x radius_scale) texel by texel."""
    import MaterialX as mx

    cfg = kit.make_project(tmp_path / "p", 8, 8)
    cfg.write_text(
        cfg.read_text().replace("passes = []", 'passes = []\ntargets = ["openpbr", "standard_surface"]')
    )
    res = bake(load_config(cfg), tmp_path / "out")
    doc = json.loads(res.descriptor.read_text())
    assert set(doc["targets"]) == {"openpbr", "standard_surface"}
    inputs = doc["targets"]["standard_surface"]["inputs"]
    assert inputs["subsurface_radius"]["texture"] == "standard_surface/subsurface_radius.exr"
    assert inputs["subsurface_scale"]["texture"] == "standard_surface/subsurface_scale.exr"
    for entry in inputs.values():
        if "texture" in entry:
            assert (tmp_path / "out" / entry["texture"]).is_file()
    out = tmp_path / "out"
    ss = (
        read_exr(out / "standard_surface" / "subsurface_radius.exr")[0]
        * read_exr(out / "standard_surface" / "subsurface_scale.exr")[0]
    )
    op = (
        read_exr(out / "openpbr" / "subsurface_radius_scale.exr")[0]
        * read_exr(out / "openpbr" / "subsurface_radius.exr")[0]
    )
    np.testing.assert_allclose(ss, op, rtol=1e-6)
    mdoc = mx.createDocument()
    mx.readFromXmlFile(mdoc, str(out / "material.mtlx"))
    categories = sorted(n.getCategory() for n in mdoc.getNodes() if n.getType() == "surfaceshader")
    assert categories == ["open_pbr_surface", "standard_surface"]
    ok, message = validate_file(out / "material.mtlx")
    assert ok, message


def test_tiff_maps_read_as_data_without_colour_tag(tmp_path, kit):
    """16-bit TIFF values come back as integer / 65535; OpenImageIO reports no colour space for TIFFs."""
    import warnings

    from matgen.bake.maps import MapReader, map_info

    vals = np.linspace(0, 1, 20, dtype=np.float32).reshape(4, 5)
    kit.write_map(tmp_path / "m.tif", vals, oiio.UINT16)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with MapReader(map_info(tmp_path / "m.tif"), 0) as r:
            got = r.read_rows(0, 4)
    np.testing.assert_allclose(got, np.round(vals * 65535) / 65535, atol=1e-7)


def test_mitsuba_preview_scene_loads_and_renders(tmp_path, kit):
    """The preview scene loads in Mitsuba 3 (scalar_spectral variant, CPU) and renders finite radiance.

    Reference: mitsuba 3 as installed (``mitsuba.load_file``); a sphere of albedo < 1 under a unit sky must
    come out with radiance in (0, 1] (energy conservation; the dielectric boundary only redistributes).
    """
    mi = pytest.importorskip("mitsuba")
    mi.set_variant("scalar_spectral")
    cfg = kit.make_project(tmp_path / "p", 8, 8)
    text = cfg.read_text().replace(
        'spectral = ["albedo_multiple", "mean_free_path_mm"]',
        'spectral = ["albedo_single", "mean_free_path_mm"]\nmitsuba_scene = true',
    )
    cfg.write_text(text)
    res = bake(load_config(cfg), tmp_path / "out")
    assert "scene_mitsuba.xml" in res.files
    doc = json.loads(res.descriptor.read_text())
    assert doc["documents"]["mitsuba_scene"]["path"] == "scene_mitsuba.xml"
    scene = mi.load_file(str(tmp_path / "out" / "scene_mitsuba.xml"), width=16, spp=4)
    img = np.array(mi.render(scene, spp=4))
    assert np.all(np.isfinite(img)) and 0.0 < img.mean() <= 1.0 + 0.05


def test_user_csv_pass_and_progress_bar(tmp_path, kit, capsys):
    """A user response CSV becomes a pass map w @ A with w from matgen.color.pass_weights of that file."""
    from matgen.color import pass_weights

    cfg = kit.make_project(tmp_path / "p", 6, 5)
    (tmp_path / "p" / "cam.csv").write_text("wavelength_nm,weight\n600,0\n650,1\n700,0\n")
    cfg.write_text(cfg.read_text().replace("passes = []", 'passes = ["cam.csv", "nir940"]'))
    assert main(["bake", str(cfg), "--out", str(tmp_path / "out"), "--jobs", "1"]) == 0
    captured = capsys.readouterr()
    # the progress bar shows texels done, a texels/s rate and an ETA
    assert "100%" in captured.err and "30.0/30.0 texels" in captured.err
    assert re.search(r"\[\d+(\.\d+)?[kMG]? texels/s, elapsed \d\d:\d\d, ETA \d\d:\d\d\]", captured.err)
    table = Table.load(tmp_path / "p" / "table.npz")
    w = pass_weights(str(tmp_path / "p" / "cam.csv"), table.bands)
    doc = json.loads((tmp_path / "out" / "material.json").read_text())
    np.testing.assert_allclose(doc["passes"]["cam"]["weights"], w)
    cam, _, _ = read_exr(tmp_path / "out" / "passes" / "cam.exr")
    ref, _ = table.lookup(_texel_points(tmp_path / "p"), ["albedo_multiple"])
    np.testing.assert_allclose(cam.reshape(-1), ref["albedo_multiple"].astype(np.float64) @ w, rtol=1e-6)
    cfg.write_text(cfg.read_text().replace('"cam.csv"', '"../cam.csv"'))
    assert main(["bake", str(cfg), "--out", str(tmp_path / "out2"), "--quiet"]) == 2
    assert "outside" in capsys.readouterr().err


def test_provenance_names_the_table_actually_used(tmp_path, kit):
    cfg = kit.make_project(tmp_path / "p", 4, 4)
    other = kit.make_test_table()
    other.quantities["albedo_multiple"] *= 0.5
    other.save(tmp_path / "other.npz")
    res = bake(
        load_config(cfg),
        tmp_path / "a",
        table=Table.load(tmp_path / "other.npz"),
        table_source=tmp_path / "other.npz",
    )
    prov = json.loads(res.descriptor.read_text())["provenance"]
    assert prov["table"] == "other.npz"
    assert prov["table_sha256"] == json.loads((tmp_path / "other.json").read_text())["npz_sha256"]
    res2 = bake(load_config(cfg), tmp_path / "b", table=other)
    prov2 = json.loads(res2.descriptor.read_text())["provenance"]
    assert prov2["table"].startswith("in-memory") and prov2["table_sha256"] != prov["table_sha256"]
