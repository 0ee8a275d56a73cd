"""The default memory budget of texture = true bakes fits the mip-maps of a 2048 x 2048 tile of 31 bands."""

import argparse

import numpy as np

from matgen.bake.config import load_config
from matgen.bake.run import plan_bake
from matgen.cli.bake import MEMORY_MB, TEXTURE_MEMORY_MB, memory_budget_mb
from matgen.export.job import check_texture_memory, texture_memory_bytes


def test_texture_default_fits_a_2k_tile_of_31_bands(tmp_path, kit, test_table):
    cfg = kit.make_project(tmp_path / "p", 8, 8)
    (tmp_path / "p" / "maps").mkdir(exist_ok=True)
    big = np.full((2048, 2048), 0.3, dtype=np.float32)
    for name in ("melanin.exr", "eumelanin.exr"):
        kit.write_map(tmp_path / "p" / "maps" / name, big)
    import OpenImageIO as oiio

    kit.write_map(tmp_path / "p" / "maps" / "blood.png", big, oiio.UINT16)
    text = cfg.read_text().replace('spectral_bands = "400:700:50"', 'spectral_bands = "400:700:10"')
    cfg.write_text(text.replace('pixel_type = "float"', 'pixel_type = "half"\ntexture = true'))
    config = load_config(cfg)
    plan = plan_bake(config, test_table)
    assert max(len(s.channels) for s in plan.outputs) == 31
    need = texture_memory_bytes(plan)
    assert MEMORY_MB << 20 < need <= TEXTURE_MEMORY_MB << 20  # the old default could not, the new one can
    budget = memory_budget_mb(argparse.Namespace(memory_mb=None), config)
    assert budget == TEXTURE_MEMORY_MB
    check_texture_memory(plan, budget << 20)  # does not raise
    assert memory_budget_mb(argparse.Namespace(memory_mb=64), config) == 64
    plain = load_config(kit.make_project(tmp_path / "q", 4, 4))
    assert memory_budget_mb(argparse.Namespace(memory_mb=None), plain) == MEMORY_MB
