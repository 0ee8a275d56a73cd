"""The demo end to end (reduced size), the scenario generator, and the documented example config."""

import json
from pathlib import Path

import numpy as np
import pytest

from matgen.cli import main
from matgen.preview.images import image_check
from matgen.scenario import MATERIAL_CONFIG_TOML, generate_maps
from matgen.tables.store import default_table_path

ROOT = Path(__file__).resolve().parents[2]


def _check_demo_folder(out, size):
    desc = json.loads((out / "bake" / "material.json").read_text())
    assert desc["name"] == "ferry_pilot_face" and desc["working_space"] == "ACEScg"
    assert {t["key"] for t in desc["textures"]} >= {
        "spectral/albedo_multiple",
        "spectral/albedo_single",
        "spectral/mean_free_path_mm",
        "spectral/shape_distance_mm",
        "spectral/fit_residual",
        "rgb/albedo_multiple",
        "passes/uv365",
        "passes/nir850",
        "openpbr/subsurface_color",
        "qa/qa",
    }
    assert len(desc["bands"]["spectral_stacks"]["centre_nm"]) == 31
    # every preview PNG the demo writes, with its size in pixels: the maps at the map size; the demo's
    # figures at 90 dpi (overview 16 x 4.2 in, spectra 6 x 4 in); the gallery's contact sheet (3 columns of
    # 300 px, 3 rows of 300 + 40 px for its nine panels: albedo, two passes, mean free path, shape distance,
    # radius, three QA maps), texel spectra (900 x 500 px) and one pass preview per pass (10 x 4.4 in at 100
    # dpi: the map with its albedo scale bar beside the pass curve)
    expected = {
        "swatch_srgb.png": (size, size),
        "uv365.png": (size, size),
        "nir850.png": (size, size),
        "overview.png": (1440, 378),
        "spectra.png": (540, 360),
        "contact_sheet.png": (900, 1020),
        "texel_spectra.png": (900, 500),
        "pass_uv365.png": (1000, 440),
        "pass_nir850.png": (1000, 440),
    }
    assert sorted(p.name for p in (out / "preview").glob("*.png")) == sorted(expected)
    for name, (w, h) in expected.items():
        check = image_check(out / "preview" / name)
        assert (check["width"], check["height"]) == (w, h), name
        assert not check["blank"], f"{name} is blank (variance {check['variance']:.2e})"
    assert main(["inspect", str(out / "bake" / "material.json")]) == 0


def test_demo_end_to_end_with_a_test_table(tmp_path, kit, capsys):
    """Runs with the invented test table (tests/bake/conftest.py), so the pipeline is exercised on its own."""
    kit.make_test_table().save(tmp_path / "t.npz")
    out = tmp_path / "lowtide"
    assert main(["demo", "--out", str(out), "--size", "64", "--table", str(tmp_path / "t.npz")]) == 0
    cap = capsys.readouterr()
    text = cap.out
    assert "invented scenario" in text and str(out / "bake" / "material.json") in text
    from matgen.cautions import IMAGERY_ONLY

    assert cap.err.count(IMAGERY_ONLY) == 1  # one caution line from the demo
    assert json.loads((out / "bake" / "material.json").read_text())["caution"] == IMAGERY_ONLY
    _check_demo_folder(out, 64)


@pytest.mark.skipif(
    not default_table_path().is_file(),
    reason="the shipped default table lut/default.npz is not built in this checkout",
)
def test_demo_end_to_end_with_the_default_table(tmp_path, capsys):
    out = tmp_path / "lowtide"
    assert main(["demo", "--out", str(out), "--size", "64"]) == 0
    capsys.readouterr()
    _check_demo_folder(out, 64)
    desc = json.loads((out / "bake" / "material.json").read_text())
    assert desc["provenance"]["table"] == "default.npz"


def test_scenario_is_seeded_and_shows_freckles_blush_and_scar():
    a = generate_maps(96, seed=5)
    b = generate_maps(96, seed=5)
    c = generate_maps(96, seed=6)
    np.testing.assert_array_equal(a["melanin"], b["melanin"])
    assert not np.array_equal(a["melanin"], c["melanin"])
    for k in ("melanin", "blood"):
        assert a[k].dtype == np.float32 and 0.0 <= a[k].min() and a[k].max() <= 1.0
    marks = {m.name: m for m in a["marked"]}
    mel, blood = a["melanin_fraction"], a["blood_fraction"]
    median_mel, median_blood = np.median(mel), np.median(blood)
    f, s, bl = marks["freckle"], marks["scar"], marks["blush"]
    assert mel[f.y, f.x] > 2 * median_mel  # a freckle is darker than the skin around it
    assert mel[s.y, s.x] < 0.6 * median_mel  # the scar has less melanin
    assert blood[bl.y, bl.x] > 2 * median_blood  # the blush holds more blood


def test_documented_example_config_matches_the_scenario():
    assert (ROOT / "scenes" / "low_tide_lantern" / "material.toml").read_text() == MATERIAL_CONFIG_TOML
