"""Material-config messages that name the key and suggest the nearest one; table clamping counted or fatal.

The clamp count is checked against a literal count written here from the map read back by OpenImageIO and
against the count the bake itself reports while it looks texels up (matgen.bake.lookup). Table: test data.
"""

import json

import numpy as np
import OpenImageIO as oiio
import pytest

from matgen.bake.config import config_from_dict, load_config
from matgen.cli import main
from matgen.errors import ConfigError
from matgen.export.job import bake

VALUE = {"melanin_fraction": {"value": 0.1}}


@pytest.mark.parametrize(
    ("data", "expected"),
    [
        (
            {"parameters": {"melanin_fraction": {"map": "m.exr", "encodng": "linear", "range": [0, 1]}}},
            "field 'parameters.melanin_fraction': unknown key 'encodng'; did you mean 'encoding'?",
        ),
        (
            {"scene": {"meters_per_scene_unit": 0.01}, "parameters": VALUE},
            "unknown key 'meters_per_scene_unit'; did you mean 'metres_per_scene_unit'?",
        ),
        (
            {"input": {"table_out_of_range": "fail"}, "parameters": VALUE},
            "field 'input.table_out_of_range': 'fail' is not one of clamp, error",
        ),
        (
            {"input": {"out_of_range": "clip"}, "parameters": VALUE},
            "'clip' is not one of clamp, error; did you mean 'clamp'?",
        ),
        (
            {"parameters": {"melanin_fraction": {"mapp": "m.exr"}}},
            "needs one of the keys value, map (given: mapp); did you mean 'map'?",
        ),
        (
            {"outputs": {"passes": [{"name": "uv", "lamb": "l.csv"}]}, "parameters": VALUE},
            "field 'outputs.passes.0': unknown key 'lamb'; did you mean 'lamp'?",
        ),
        (
            {"output": {}, "parameters": VALUE},
            "unknown key 'output'; did you mean 'outputs'?",
        ),
    ],
)
def test_config_errors_name_the_key_and_suggest(data, expected, tmp_path):
    with pytest.raises(ConfigError) as info:
        config_from_dict({"format_version": 1, **data}, tmp_path, where="material.toml")
    msg = str(info.value)
    assert expected in msg and msg.startswith("material.toml: ")
    assert "given schemas" not in msg and "\n" not in msg


def test_no_suggestion_when_nothing_is_close(tmp_path):
    with pytest.raises(ConfigError) as info:
        config_from_dict({"format_version": 1, "zzzz": 1, "parameters": VALUE}, tmp_path)
    assert "unknown key 'zzzz'" in str(info.value) and "did you mean" not in str(info.value)


def _wide_project(tmp_path, kit, mode):
    cfg = kit.make_project(tmp_path / "p", 16, 12)
    text = cfg.read_text().replace("range = [0.005, 0.45]", "range = [0.005, 0.6]")
    text = text.replace("[outputs]", f'[input]\ntable_out_of_range = "{mode}"\n\n[outputs]')
    cfg.write_text(text)
    inp = oiio.ImageInput.open(str(tmp_path / "p" / "maps" / "melanin.exr"))
    mel = inp.read_image(oiio.FLOAT)[..., 0].astype(np.float64)
    inp.close()
    expected = int(np.count_nonzero(0.005 + mel * (0.6 - 0.005) > 0.45))  # table melanin axis ends at 0.45
    assert 0 < expected < mel.size
    return cfg, expected


def test_dry_run_counts_the_texels_that_would_clamp(tmp_path, kit, capsys):
    cfg, expected = _wide_project(tmp_path, kit, "clamp")
    res = bake(load_config(cfg), tmp_path / "out", dry_run=True)
    assert res.table_clamped == expected
    assert main(["bake", str(cfg), "--out", str(tmp_path / "out"), "--dry-run"]) == 0
    assert f"texels that would be clamped: {expected} to the table's range" in capsys.readouterr().out
    real = bake(load_config(cfg), tmp_path / "out")
    assert real.table_clamped == expected  # the lookup's own count agrees
    doc = json.loads((tmp_path / "out" / "material.json").read_text())
    assert doc["statistics"]["table_clamped_texels"] == expected


def test_table_out_of_range_error_refuses_before_writing(tmp_path, kit, capsys):
    cfg, expected = _wide_project(tmp_path, kit, "error")
    out = tmp_path / "out"
    assert main(["bake", str(cfg), "--out", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1
    assert f"{expected} of 192 texels" in err and "'melanin_fraction'" in err and "[0.005, 0.45]" in err
    assert not out.exists() or not any(p.name.endswith(".exr") for p in out.rglob("*"))
    assert main(["bake", str(cfg), "--out", str(out), "--dry-run"]) == 2
