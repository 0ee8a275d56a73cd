"""Table spec parsing: valid specs, misspelt keys with the nearest valid key, malformed axes."""

import numpy as np
import pytest

from matgen.errors import ConfigError
from matgen.tables.spec import TableSpec, load_spec, parse_spec


def _doc(**over):
    doc = {
        "photons_per_band": 1000,
        "seed": 5,
        "bands": {"start_nm": 500.0, "stop_nm": 520.0, "step_nm": 10.0},
        "axes": {
            "melanin_fraction": {"spacing": "log", "start": 0.01, "stop": 0.1, "count": 3},
            "blood_fraction": {"values": [0.01, 0.02]},
        },
    }
    doc.update(over)
    return doc


def test_parse_valid_spec():
    s = parse_spec(_doc(), "t.toml")
    assert s.axis_names == ["melanin_fraction", "blood_fraction"]
    np.testing.assert_allclose(s.axes[0].values, [0.01, np.sqrt(0.001), 0.1])
    assert s.axes[0].values[0] == 0.01 and s.axes[0].values[-1] == 0.1  # ends exact
    assert s.axes[0].spacing == "log" and s.axes[1].spacing == "linear"
    assert len(s.bands) == 3 and s.grid_shape == (3, 2)
    again = TableSpec.from_dict(s.to_dict())
    assert again.spec_hash() == s.spec_hash()


def test_spec_hash_changes_with_content_only():
    a = parse_spec(_doc(), "a.toml")
    b = parse_spec(_doc(), "b.toml")
    c = parse_spec(_doc(seed=6), "a.toml")
    assert a.spec_hash() == b.spec_hash() != c.spec_hash()


@pytest.mark.parametrize(
    "doc, message",
    [
        (
            _doc(photons_per_bnd=5),
            "unknown key 'photons_per_bnd' in the top level; did you mean 'photons_per_band'",
        ),
        (
            _doc(bands={"start_nm": 500, "stop_nm": 520, "stepnm": 10}),
            "'stepnm' in \\[bands\\]; did you mean 'step_nm'",
        ),
        (_doc(axes={"melanin_fraction": {"spacng": "log", "values": [0.1, 0.2]}}), "did you mean 'spacing'"),
        (_doc(axes={"melanin_fraction": {"values": [0.1]}}), "at least 2 points"),
        (_doc(axes={"melanin_fraction": {"values": [0.1, 0.3, 0.2]}}), "increase strictly"),
        (_doc(axes={"melanin_fraction": {"start": 0.1, "stop": 0.2, "count": 1}}), "at least 2 points"),
        (
            _doc(axes={"melanin_fraction": {"spacing": "log", "values": [0.0, 0.2]}}),
            "log axes need values > 0",
        ),
        (_doc(axes={"melanin_fraction": {"spacing": "cubic", "values": [0.1, 0.2]}}), "spacing"),
        (_doc(seed=-1), "seed"),
        (_doc(photons_per_band=1.5), "whole number"),
        (_doc(transport={"reference_split": ["blood"]}), "reference_split names 'blood'"),
        ({"seed": 1}, "missing required key"),
        (_doc(targets=["openpbrr"]), "unknown target 'openpbrr' in targets; did you mean 'openpbr'"),
    ],
)
def test_bad_specs_name_the_problem(doc, message):
    with pytest.raises(ConfigError, match=message):
        parse_spec(doc, "bad.toml")


def test_unknown_axis_name_suggests_field():
    from matgen.tables.spec import skin_parameter_fields

    if skin_parameter_fields() is None:
        pytest.skip("tissue model not installed")
    with pytest.raises(ConfigError, match="did you mean 'melanin_fraction'"):
        parse_spec(_doc(axes={"melanin_fracton": {"values": [0.1, 0.2]}}), "bad.toml")


def test_load_spec_file_and_toml_errors(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text(
        "photons_per_band = 100\nseed = 1\n[bands]\ncentres_nm = [365.0, 550.0]\n"
        "[axes.melanin_fraction]\nvalues = [0.01, 0.1]\n"
    )
    s = load_spec(p)
    assert s.source == "s.toml" and np.array_equal(s.bands.centre_nm, [365.0, 550.0])
    p.write_text("photons_per_band = = 3\n")
    with pytest.raises(ConfigError, match="not valid TOML"):
        load_spec(p)


def test_shipped_specs_parse():
    from matgen.tables.store import lut_files

    root = lut_files().joinpath("specs")
    names = [e.name for e in root.iterdir() if e.name.endswith(".toml")]
    assert "default.toml" in names
    for name in names:
        s = load_spec(root.joinpath(name))
        assert len(s.axes) >= 1
    d = load_spec(root.joinpath("default.toml"))
    assert len(d.bands) == 71 and d.bands.centre_nm[0] == 300 and d.bands.centre_nm[-1] == 1000
    assert {"melanin_fraction", "eumelanin_share", "blood_fraction", "oxygen_saturation"} <= set(d.axis_names)
    spacing = {a.name: a.spacing for a in d.axes}
    assert spacing["melanin_fraction"] == "log" and spacing["blood_fraction"] == "log"
