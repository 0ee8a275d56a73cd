"""Small pipeline fixes: band requests that miss the table say which bands it has."""

import pytest

from matgen.bake.config import load_config
from matgen.bake.run import plan_bake
from matgen.errors import BandError


def test_spectral_band_missing_from_table_names_the_nearest_and_the_table_bands(tmp_path, kit, test_table):
    cfg = kit.make_project(tmp_path / "p", 4, 4)
    cfg.write_text(cfg.read_text().replace('spectral_bands = "400:700:50"', 'spectral_bands = "365,850"'))
    with pytest.raises(BandError) as info:
        plan_bake(load_config(cfg), test_table)
    msg = str(info.value)
    assert "365 nm" in msg and "nearest: 360, 370 nm" in msg
    assert "71 bands 300-1000 nm every 10 nm" in msg


def test_schema_example_band_spec_works_with_a_10_nm_table(tmp_path, kit, test_table):
    """The schema's own example ('360,550,850') is accepted by a table of 10 nm bands."""
    import json
    from importlib import resources

    schema = json.loads(
        resources.files("matgen.bake").joinpath("schema", "material_config.schema.json").read_text()
    )
    text = schema["properties"]["outputs"]["properties"]["spectral_bands"]["description"]
    example = text.split("or '")[1].split("'")[0]
    cfg = kit.make_project(tmp_path / "p", 4, 4)
    cfg.write_text(cfg.read_text().replace('spectral_bands = "400:700:50"', f'spectral_bands = "{example}"'))
    plan = plan_bake(load_config(cfg), test_table)
    assert plan.spectral_bands.centre_nm.tolist() == [360.0, 550.0, 850.0]
