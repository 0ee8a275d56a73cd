"""Passes from separate lamp, filter and sensor curves: tolerant reading, products on the band set, records.

Reference for the weights: a literal dense-grid integration written here (0.002 nm rectangles of the product
of numpy.interp of each curve), independent of the module's grid and trapezoid rule.
"""

import hashlib
import importlib.util
from pathlib import Path

import numpy as np
import pytest

from matgen.bake.config import load_config
from matgen.cli import main
from matgen.color.curves import Curve, combined_weights, parse_curve, read_curve, resolve_pass_entry
from matgen.errors import DataError
from matgen.spectra.bands import BandSet

_spec = importlib.util.spec_from_file_location(
    "_bake_kit", Path(__file__).parents[1] / "bake" / "conftest.py"
)
_kit = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(_kit)

BANDS = BandSet.parse("300:1000:10")


def _curve(role, wl, val):
    return Curve(role, role, "0" * 64, np.asarray(wl, float), np.asarray(val, float), {})


def _reference_weights(curves, bands, step=0.002):
    x = np.arange(bands.lower_nm[0], bands.upper_nm[-1], step) + step / 2
    prod = np.ones_like(x)
    for c in curves:
        prod *= np.interp(x, c.wavelength_nm, c.values, left=0.0, right=0.0)
    edges = zip(bands.lower_nm, bands.upper_nm, strict=True)
    w = np.array([prod[(x >= lo) & (x < hi)].sum() * step for lo, hi in edges])
    return w / w.sum()


def test_vendor_style_csv_reads_like_the_plain_one():
    """Semicolons, decimal commas, bracketed units, percent and descending rows give the plain CSV's curve."""
    plain = "wavelength_nm,weight\n350,0.10\n365.5,0.80\n380,0.05\n"
    vendor = "# filter datasheet export\nWavelength [nm];Transmission [%]\n380;5,0\n365,5;80,0\n350;10,0\n"
    wl0, v0, _ = parse_curve(plain, "plain.csv")
    wl1, v1, units = parse_curve(vendor, "vendor.csv", "filter")
    np.testing.assert_allclose(wl1, wl0)
    np.testing.assert_allclose(v1, v0)
    assert units["value"].startswith("percent")


def test_micrometre_wavelengths_and_tabs_are_converted():
    wl, v, units = parse_curve("lambda (um)\tQE\n0.80\t0.5\n0.85\t0.4\n0.90\t0.2\n", "sensor.tsv", "sensor")
    np.testing.assert_allclose(wl, [800.0, 850.0, 900.0])
    np.testing.assert_allclose(v, [0.5, 0.4, 0.2])
    assert "converted to nm" in units["wavelength"]


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("wavelength,value\n350,0.1\n360,-0.2\n", "line 3.*negative"),
        ("350,0.1\n360,0.2\n", "no header"),
        ("colour,value\n350,0.1\n360,0.2\n", "no wavelength column"),
        ("wavelength [furlong],value\n350,0.1\n360,0.2\n", "unit 'furlong'"),
        ("wavelength,value\n350,0\n360,0\n", "every value is 0"),
        ("wavelength,value\n350,0.1\n340,0.2\n360,0.3\n", "ascending"),
    ],
)
def test_bad_curves_are_refused_naming_file_and_reason(text, match):
    with pytest.raises(DataError, match=match):
        parse_curve(text, "bad.csv")


def test_product_of_three_curves_matches_dense_reference():
    """Lamp x filter x sensor on 10 nm bands: the module's weights equal the dense literal integration."""
    lamp = _curve("lamp", [355, 360, 365, 370, 375], [0.0, 0.4, 1.0, 0.5, 0.0])
    filt = _curve("filter", [300, 350, 362, 368, 400], [0.0, 0.2, 0.9, 0.7, 0.0])
    sensor = _curve("sensor", [300, 1000], [0.3, 1.0])
    w = combined_weights([lamp, filt, sensor], BANDS)
    ref = _reference_weights([lamp, filt, sensor], BANDS)
    assert w.sum() == pytest.approx(1.0)
    np.testing.assert_allclose(w, ref, atol=2e-5)
    assert w[np.argmin(abs(BANDS.centre_nm - 360))] > 0.4  # most of the product lies in 355-365 nm


def test_each_curve_is_optional_and_a_missing_one_counts_as_one():
    lamp = _curve("lamp", [800, 850, 900], [0.0, 1.0, 0.0])
    assert np.allclose(combined_weights([lamp], BANDS), _reference_weights([lamp], BANDS), atol=2e-5)
    flat = _curve("sensor", [250, 1100], [1.0, 1.0])
    np.testing.assert_allclose(combined_weights([lamp, flat], BANDS), combined_weights([lamp], BANDS))


def test_curves_without_overlap_are_refused_naming_their_ranges():
    lamp = _curve("lamp", [360, 370], [1.0, 1.0])
    filt = _curve("filter", [800, 900], [1.0, 1.0])
    with pytest.raises(DataError, match="lamp lamp 360-370 nm; filter filter 800-900 nm"):
        combined_weights([lamp, filt], BANDS)
    with pytest.raises(DataError, match="band set"):
        combined_weights([_curve("lamp", [1200, 1300], [1, 1])], BANDS)


def test_pass_entry_records_path_and_sha256(tmp_path):
    (tmp_path / "curves").mkdir()
    lamp = tmp_path / "curves" / "lamp.csv"
    lamp.write_text("Wavelength (nm);Relative power\n355;0\n365;1\n375;0\n")
    name, w, records = resolve_pass_entry({"name": "uv_lamp", "lamp": "curves/lamp.csv"}, tmp_path, BANDS)
    assert name == "uv_lamp" and w.sum() == pytest.approx(1.0)
    assert records == [
        {
            "role": "lamp",
            "path": "curves/lamp.csv",
            "sha256": hashlib.sha256(lamp.read_bytes()).hexdigest(),
            "units": {"wavelength": "nm", "value": "relative"},
            "wavelength_range_nm": [355.0, 375.0],
        }
    ]
    with pytest.raises(DataError, match="names none of lamp, filter, sensor"):
        resolve_pass_entry({"name": "empty"}, tmp_path, BANDS)


def test_read_curve_missing_file(tmp_path):
    with pytest.raises(DataError, match="does not exist"):
        read_curve(tmp_path / "nope.csv", "lamp")


def _project(tmp_path, curve_text):
    cfg = _kit.make_project(tmp_path / "p", 4, 4)
    (tmp_path / "p" / "lamp.csv").write_text(curve_text)
    cfg.write_text(
        cfg.read_text().replace(
            "passes = []", 'passes = [{name = "inspection", lamp = "lamp.csv", filter = "filter.csv"}]'
        )
    )
    (tmp_path / "p" / "filter.csv").write_text("wavelength_nm;transmission\n300;0,9\n800;0,9\n")
    return cfg


def test_bake_records_curves_and_inspect_sees_a_changed_curve(tmp_path, capsys):
    """The descriptor keeps each curve's path and SHA-256; editing a curve afterwards fails matgen inspect."""
    cfg = _project(tmp_path, "wavelength [nm],power\n440,0\n450,1\n460,0\n")
    out = tmp_path / "out"
    assert main(["bake", str(cfg), "--out", str(out)]) == 0
    import json

    doc = json.loads((out / "material.json").read_text())
    rec = {r["role"]: r for r in doc["passes"]["inspection"]["curves"]}
    assert rec["lamp"]["sha256"] == hashlib.sha256((tmp_path / "p" / "lamp.csv").read_bytes()).hexdigest()
    assert rec["filter"]["path"] == "filter.csv"
    assert (out / "passes" / "inspection.exr").is_file()
    assert main(["inspect", str(out / "material.json"), "--config", str(cfg)]) == 0
    (tmp_path / "p" / "lamp.csv").write_text("wavelength [nm],power\n440,0\n450,2\n460,0\n")
    capsys.readouterr()
    assert main(["inspect", str(out / "material.json"), "--config", str(cfg)]) == 1
    assert "lamp curve lamp.csv changed after the bake" in capsys.readouterr().out


def test_bake_with_negative_curve_is_one_message_and_status_2(tmp_path, capsys):
    cfg = _project(tmp_path, "wavelength [nm],power\n440,0\n450,-1\n460,0\n")
    assert main(["bake", str(cfg), "--out", str(tmp_path / "out"), "--dry-run"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "lamp.csv, line 3: value -1 is negative" in err
    load_config(cfg)  # the config itself is valid; only the curve is not


def test_misspelt_builtin_pass_suggests_the_name(tmp_path):
    with pytest.raises(DataError, match="neither a built-in pass.*did you mean 'uv365'"):
        resolve_pass_entry("uv366", tmp_path, BANDS)
