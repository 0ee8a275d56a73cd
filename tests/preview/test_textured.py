"""Textured spectral render (matgen render): the baked texture shows where it is, and the scene files rerun.

Outside reference: Mitsuba 3.9 (scalar_spectral, CPU), loading the scene.xml and .vol grids matgen wrote.
The stacks are test data: a bake of the invented test table whose albedo stack is then overwritten with a
quadrant pattern, so the expected picture is known. Comparisons are z-tests on quadrant means with the
standard error from the pixels' spread (independent samples per pixel).
"""

import importlib.util
import json
import sys
from pathlib import Path

import numpy as np
import pytest

from matgen.bake.config import load_config
from matgen.cli import main
from matgen.errors import DataError
from matgen.export.exr import read_exr, write_exr
from matgen.export.job import bake

mi = pytest.importorskip("mitsuba", reason="needs Mitsuba 3 (pip install mitsuba)")

_spec = importlib.util.spec_from_file_location(
    "_bake_kit_textured", Path(__file__).parents[1] / "bake" / "conftest.py"
)
kit = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(kit)

SMALL = {"pixels": 16, "spp": 16, "grid": 16, "patch_mm": 8.0}


@pytest.fixture(scope="module")
def quadrant_bake(tmp_path_factory):
    root = tmp_path_factory.mktemp("textured")
    cfg = kit.make_project(root / "p", 16, 16)
    text = cfg.read_text().replace('spectral_bands = "400:700:50"', 'spectral_bands = "550,850"')
    text = text.replace(
        'spectral = ["albedo_multiple", "mean_free_path_mm"]',
        'spectral = ["albedo_single", "mean_free_path_mm"]',
    )
    cfg.write_text(text)
    out = root / "out"
    bake(load_config(cfg), out)
    path = out / "spectral" / "albedo_single.exr"
    _, names, attrs = read_exr(path)
    pattern = np.full((16, 16, len(names)), 0.995, dtype=np.float32)
    pattern[:8, :8] = 0.3  # texture's top-left quadrant absorbs strongly
    write_exr(
        path,
        pattern,
        names,
        pixel_type="float",
        attributes={k: v for k, v in attrs.items() if isinstance(v, str) and k.startswith("matgen")},
    )
    mfp = out / "spectral" / "mean_free_path_mm.exr"
    write_exr(mfp, np.full((16, 16, len(names)), 0.1, dtype=np.float32), names, pixel_type="float")
    return out


def _quadrants(img):
    h = img.shape[0] // 2
    q = {
        "top_left": img[:h, :h],
        "top_right": img[:h, h:],
        "bottom_left": img[h:, :h],
        "bottom_right": img[h:, h:],
    }
    return {k: (float(v.mean()), float(v.std(ddof=1) / np.sqrt(v.size))) for k, v in q.items()}


def test_dark_quadrant_of_the_texture_is_dark_in_the_render(quadrant_bake, tmp_path):
    from matgen.preview.textured import render_band

    r = render_band(quadrant_bake / "material.json", 550.0, tmp_path, **SMALL)
    assert r.image.shape == (16, 16) and r.wavelength_nm == 550.0
    q = _quadrants(r.image)
    dark_mean, dark_se = q.pop("top_left")
    for name, (mean, se) in q.items():
        assert mean - dark_mean > 3 * np.hypot(se, dark_se), (name, mean, dark_mean)
    assert dark_mean > 0  # single scattering at albedo 0.3 still returns a little light


def test_written_scene_files_render_the_same_image(quadrant_bake, tmp_path):
    """The scene.xml and .vol grids left behind are what was rendered (same seed, same pixels)."""
    from matgen.preview.textured import render_band

    r = render_band(quadrant_bake / "material.json", 850.0, tmp_path, **SMALL)
    assert {p.name for p in r.scene.parent.iterdir()} == {"scene.xml", "albedo.vol", "sigma_t.vol"}
    mi.set_variant("scalar_spectral")
    again = np.asarray(mi.render(mi.load_file(str(r.scene))), dtype=np.float64)[..., 0] / (
        r.upper_nm - r.lower_nm
    )
    np.testing.assert_allclose(again, r.image, rtol=1e-6)
    grid = mi.VolumeGrid(str(r.scene.parent / "sigma_t.vol"))
    np.testing.assert_allclose(np.asarray(grid), 10.0, rtol=1e-6)  # 1 / (0.1 mm)


def test_render_command_writes_views_and_skips_missing_pass_bands(quadrant_bake, tmp_path, capsys):
    out = tmp_path / "r"
    argv = [
        "render",
        str(quadrant_bake / "material.json"),
        "--out",
        str(out),
        "--pixels",
        "8",
        "--spp",
        "4",
        "--grid",
        "8",
        "--patch-mm",
        "8",
    ]
    assert main(argv) == 0
    summary = json.loads((out / "render.json").read_text())
    assert [b["wavelength_nm"] for b in summary["bands"]] == [550.0, 850.0]  # visible 550 and the IR pass
    assert "uv365 365 nm" in summary["skipped"] and "fluorescence" in summary["not_modelled"]
    assert (out / "visible.png").is_file() and (out / "nir850.png").is_file()


def test_band_missing_from_stacks_is_one_message_and_status_2(quadrant_bake, tmp_path, capsys):
    argv = ["render", str(quadrant_bake / "material.json"), "--out", str(tmp_path / "r"), "--band", "365"]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "no band near 365 nm" in err and "550-850 nm" in err


def test_without_mitsuba_the_message_says_how_to_install(quadrant_bake, tmp_path, monkeypatch, capsys):
    monkeypatch.setitem(sys.modules, "mitsuba", None)  # importing mitsuba now raises ImportError
    argv = ["render", str(quadrant_bake / "material.json"), "--out", str(tmp_path / "r"), "--band", "550"]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and 'pip install "matgen[validate]"' in err


def test_missing_stack_names_what_to_bake(quadrant_bake, tmp_path):
    from matgen.preview.textured import stack_file

    doc = json.loads((quadrant_bake / "material.json").read_text())
    with pytest.raises(DataError, match='add "anisotropy" to outputs.spectral'):
        stack_file(quadrant_bake, doc, "anisotropy")


def test_dielectric_boundary_option_writes_a_rough_dielectric_of_the_material_index(quadrant_bake, tmp_path):
    from matgen.preview.textured import render_band

    r = render_band(
        quadrant_bake / "material.json",
        550.0,
        tmp_path,
        boundary="dielectric",
        pixels=4,
        spp=4,
        grid=4,
        patch_mm=8.0,
    )
    xml = r.scene.read_text()
    assert 'type="roughdielectric"' in xml and 'name="int_ior" value="1.4"' in xml
    assert np.all(np.isfinite(r.image)) and np.all(r.image >= 0)
