"""``matgen simulate`` and the README example of the transport section."""

import json
import re
from pathlib import Path

import pytest

from matgen.cli import main

ROOT = Path(__file__).resolve().parents[2]


def _write(tmp_path, doc, name="stack.json"):
    p = tmp_path / name
    p.write_text(json.dumps(doc) if not isinstance(doc, str) else doc)
    return str(p)


SLAB = {
    "n_above": 1.0,
    "n_below": 1.0,
    "layers": [{"thickness_mm": 0.2, "n": 1.0, "mu_a": 1.0, "mu_s": 9.0, "g": 0.75, "name": "slab"}],
}


def test_json_output_fields_and_values(tmp_path, capsys):
    rc = main(["simulate", _write(tmp_path, SLAB), "--photons", "20000", "--seed", "3", "--json"])
    assert rc == 0
    d = json.loads(capsys.readouterr().out)
    for key in ("specular_reflectance", "diffuse_reflectance", "transmittance"):
        assert set(d[key]) == {"value", "stderr"}
    assert d["photons"] == 20000 and d["photons_per_second"] > 0
    assert len(d["absorbed"]) == 1 and "profile" not in d
    # van de Hulst 1980 matched slab, R 0.09739, T 0.66096, within 3 standard errors
    assert abs(d["diffuse_reflectance"]["value"] - 0.09739) <= 3 * d["diffuse_reflectance"]["stderr"]
    assert abs(d["transmittance"]["value"] - 0.66096) <= 3 * d["transmittance"]["stderr"]


def test_bands_and_profile(tmp_path, capsys):
    doc = dict(SLAB, wavelength_nm=[550, 800])
    doc["layers"] = [dict(SLAB["layers"][0], mu_a=[1.0, 0.2], g=[0.75, 0.9])]
    rc = main(["simulate", _write(tmp_path, doc), "--photons", "2000", "--json", "--profile"])
    assert rc == 0
    d = json.loads(capsys.readouterr().out)
    assert [b["wavelength_nm"] for b in d["bands"]] == [550.0, 800.0]
    prof = d["bands"][0]["profile"]
    assert len(prof["ring_edges_mm"]) == len(prof["radial_reflectance_per_mm2"]) + 1
    # less absorption at 800 nm: less absorbed
    assert d["bands"][1]["absorbed"][0]["value"] < d["bands"][0]["absorbed"][0]["value"]


def test_table_output(tmp_path, capsys):
    assert main(["simulate", _write(tmp_path, SLAB), "--photons", "1000"]) == 0
    out = capsys.readouterr().out
    assert "diffuse_reflectance" in out and "absorbed in slab" in out


@pytest.mark.parametrize(
    "doc,match",
    [
        ("{not json", "not valid JSON"),
        ({"layers": []}, "non-empty"),
        (
            {"layers": [{"thickness_mm": 0.0, "n": 1.4, "mu_a": 0, "mu_s": 1, "g": 0}]},
            r"layer 0 .*thickness_mm",
        ),
        ({"layers": [{"thickness_mm": 1.0, "n": 1.4, "mu_a": -1, "mu_s": 1, "g": 0}]}, r"layer 0 .*mu_a"),
        ({"layers": [{"thickness_mm": 1.0, "n": 1.4, "mu_a": 0, "mu_s": 1, "g": 1.5}]}, r"layer 0 .*'g'"),
        ({"layers": [{"thickness_mm": 1.0, "n": 0.5, "mu_a": 0, "mu_s": 1, "g": 0}]}, r"layer 0 .*'n'"),
        ({"layers": [{"thickness_mm": 1.0, "n": 1.4, "mu_a": 0, "mu_s": 1}]}, "lacks 'g'"),
        (
            {"layers": [{"thickness_mm": 1.0, "n": 1.4, "mu_a": 0, "mu_s": 1, "g": 0, "colour": 1}]},
            "unknown keys",
        ),
        (
            {
                "wavelength_nm": [500, 600],
                "layers": [{"thickness_mm": 1.0, "n": 1.4, "mu_a": [0.1, float("nan")], "mu_s": 1, "g": 0}],
            },
            r"band 1 \(600 nm\).*mu_a",
        ),
    ],
)
def test_bad_stack_files_exit_2(tmp_path, capsys, doc, match):
    text = doc if isinstance(doc, str) else json.dumps(doc)
    rc = main(["simulate", _write(tmp_path, text), "--photons", "10"])
    assert rc == 2
    err = capsys.readouterr().err
    assert re.search(match, err), err
    assert "stack.json" in err


def test_absurd_photon_count_exit_2(tmp_path, capsys):
    assert main(["simulate", _write(tmp_path, SLAB), "--photons", str(10**15)]) == 2
    assert "photon count" in capsys.readouterr().err


def test_missing_file_exit_2(tmp_path, capsys):
    assert main(["simulate", str(tmp_path / "none.json")]) == 2


def test_readme_example_runs():
    text = (ROOT / "docs" / "readme" / "transport.md").read_text()
    code = re.search(r"```python\n(.*?)```", text, re.S).group(1)
    code = code.replace("200_000", "20_000")  # same code, fewer photons
    exec(compile(code, "docs/readme/transport.md", "exec"), {})


def test_simulate_takes_optics_json_as_it_is(tmp_path, capsys):
    """matgen optics --format json chains into matgen simulate: one run per band, layers as optics wrote."""
    assert main(["optics", "--preset", "cheek", "--wavelengths", "550,850", "--format", "json"]) == 0
    text = capsys.readouterr().out
    doc = json.loads(text)
    assert {"bands", "units", "parameters"} <= set(doc)
    path = _write(tmp_path, text, "optics.json")
    assert main(["simulate", path, "--photons", "2000", "--seed", "1", "--json"]) == 0
    out = capsys.readouterr().out
    assert out.count("550") >= 1 and out.count("850") >= 1
    doc["units"]["thickness"] = "cm"
    assert main(["simulate", _write(tmp_path, doc, "cm.json"), "--photons", "100"]) == 2
    assert "differ from matgen's" in capsys.readouterr().err
