"""The demo end to end (reduced size), the scenario generator, and the documented example config."""

import json
from pathlib import Path

import numpy as np
import OpenImageIO as oiio
import pytest

from matgen.cli import main
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
    for name in ("swatch_srgb.png", "uv365.png", "nir850.png", "spectra.png", "overview.png"):
        inp = oiio.ImageInput.open(str(out / "preview" / name))
        assert inp is not None, name
        if name in ("swatch_srgb.png", "uv365.png", "nir850.png"):
            assert (inp.spec().width, inp.spec().height) == (size, size)
        inp.close()
    assert main(["inspect", str(out / "bake" / "material.json")]) == 0


def test_demo_end_to_end_with_a_test_table(tmp_path, kit, capsys):
    """Runs with the invented test table (tests/bake/conftest.py), so the pipeline is exercised on its own."""
    kit.make_test_table().save(tmp_path / "t.npz")
    out = tmp_path / "lowtide"
    assert main(["demo", "--out", str(out), "--size", "64", "--table", str(tmp_path / "t.npz")]) == 0
    text = capsys.readouterr().out
    assert "invented scenario" in text and str(out / "bake" / "material.json") in text
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
