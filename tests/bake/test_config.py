"""Material config: schema checks name the field; constants, encodings and axes checked against the table."""

import re

import pytest

from matgen.bake.config import config_from_dict, load_config
from matgen.bake.run import plan_bake
from matgen.errors import ConfigError, PathError


def _base():
    return {"format_version": 1, "parameters": {"melanin_fraction": {"map": "m.exr", "encoding": "fraction"}}}


@pytest.mark.parametrize(
    "change, field",
    [
        (lambda d: d.update(format_version=2), "format_version"),
        (lambda d: d.update(colour="red"), "(top level)"),
        (
            lambda d: d["parameters"]["melanin_fraction"].update(encoding="gamma"),
            "parameters.melanin_fraction",
        ),
        (lambda d: d.update(outputs={"spectral": ["albedo_multipel"]}), "outputs.spectral.0"),
        (lambda d: d.update(scene={"metres_per_scene_unit": 0}), "scene.metres_per_scene_unit"),
        (lambda d: d.update(outputs={"exr": {"compression": "dwaa"}}), "outputs.exr.compression"),
    ],
)
def test_schema_errors_name_the_field(tmp_path, change, field):
    d = _base()
    change(d)
    with pytest.raises(ConfigError, match="field '" + re.escape(field)):
        config_from_dict(d, tmp_path)


def test_linear_encoding_needs_range_and_decodes(tmp_path):
    d = _base()
    d["parameters"]["melanin_fraction"] = {"map": "m.exr", "encoding": "linear"}
    with pytest.raises(ConfigError, match="range"):
        config_from_dict(d, tmp_path)
    d["parameters"]["melanin_fraction"]["range"] = [0.02, 0.3]
    src = config_from_dict(d, tmp_path).parameter("melanin_fraction")
    assert src.decode(0.0) == pytest.approx(0.02) and src.decode(1.0) == pytest.approx(0.3)
    assert src.decode(0.5) == pytest.approx(0.16)


def test_absolute_and_escaping_paths_refused(tmp_path):
    d = _base()
    d["parameters"]["melanin_fraction"]["map"] = "/etc/m.exr"
    with pytest.raises(PathError, match="absolute"):
        config_from_dict(d, tmp_path)
    d["parameters"]["melanin_fraction"]["map"] = "sub/../../m.exr"
    with pytest.raises(PathError, match="outside"):
        config_from_dict(d, tmp_path)
    assert config_from_dict(d, tmp_path / "a", allow_outside=True)


def test_axes_without_source_and_unknown_parameters_named(tmp_path, kit, test_table):
    cfg = kit.make_project(tmp_path / "p", 4, 4)
    text = cfg.read_text()
    cfg.write_text(text.replace("[parameters.oxygen_saturation]\nvalue = 0.75\n", ""))
    with pytest.raises(ConfigError, match="oxygen_saturation"):
        plan_bake(load_config(cfg), test_table)
    cfg.write_text(text + "\n[parameters.water_fraction]\nvalue = 0.6\n")
    with pytest.raises(ConfigError, match="water_fraction"):
        plan_bake(load_config(cfg), test_table)
    cfg.write_text(text.replace("value = 0.75", "value = 1.5"))
    with pytest.raises(ConfigError, match=r"oxygen_saturation.value = 1.5.*\[0.5, 1\]"):
        plan_bake(load_config(cfg), test_table)


def test_band_subset_must_be_table_bands(tmp_path, kit, test_table):
    cfg = kit.make_project(tmp_path / "p", 4, 4)
    cfg.write_text(cfg.read_text().replace('"400:700:50"', '"405,555"'))
    with pytest.raises(Exception, match="405 nm"):
        plan_bake(load_config(cfg), test_table)


def test_example_scene_config_is_valid():
    from pathlib import Path

    cfg = load_config(Path(__file__).parents[2] / "scenes" / "low_tide_lantern" / "material.toml")
    assert cfg.is_udim is False and {p.name for p in cfg.map_parameters} >= {
        "melanin_fraction",
        "blood_fraction",
    }


def test_readme_config_example_is_valid(tmp_path):
    """The TOML example of docs/readme/bake.md validates against the config schema."""
    import tomllib
    from pathlib import Path

    text = (Path(__file__).parents[2] / "docs" / "readme" / "bake.md").read_text()
    block = text.split("```toml\n", 1)[1].split("```", 1)[0]
    cfg = config_from_dict(tomllib.loads(block), tmp_path)
    assert cfg.parameter("melanin_fraction").is_udim and cfg.parameter("blood_fraction").value == 0.02
    assert cfg.outputs.targets == ("openpbr",) and cfg.outputs.spectral_bands == "400:700:10"
