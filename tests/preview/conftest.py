"""A small baked material for the preview and report tests, made with the bake tests' kit (test data)."""

import importlib.util
from pathlib import Path

import pytest

_spec = importlib.util.spec_from_file_location(
    "_bake_testdata_preview", Path(__file__).parents[1] / "bake" / "conftest.py"
)
_kit = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(_kit)


@pytest.fixture(scope="session")
def baked_material(tmp_path_factory):
    """Descriptor path of a 48 x 64 bake of the kit's invented smooth table, with UV and IR pass maps."""
    from matgen.bake.config import load_config
    from matgen.export.job import bake

    root = tmp_path_factory.mktemp("baked")
    cfg = _kit.make_project(root, h=48, w=64)
    text = cfg.read_text().replace("passes = []", 'passes = ["uv365", "nir850"]')
    text = text.replace(
        'spectral = ["albedo_multiple", "mean_free_path_mm"]',
        'spectral = ["albedo_multiple", "shape_distance_mm"]',
    )
    text = text.replace('spectral_bands = "400:700:50"', 'spectral_bands = "300:1000:50"')
    cfg.write_text(text)
    result = bake(load_config(cfg), root / "out")
    return result.descriptor


@pytest.fixture(scope="session")
def test_table():
    return _kit.make_test_table()
