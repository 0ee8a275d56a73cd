"""Pass previews: the baked pass map on a fixed albedo scale beside its curves; changed curves refused."""

import importlib.util
from pathlib import Path

import numpy as np
import OpenImageIO as oiio
import pytest

from matgen.bake.config import load_config
from matgen.cli import main
from matgen.errors import DataError
from matgen.export.job import bake
from matgen.preview.passes import pass_preview

_spec = importlib.util.spec_from_file_location(
    "_bake_kit_passes", Path(__file__).parents[1] / "bake" / "conftest.py"
)
kit = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(kit)


@pytest.fixture(scope="module")
def curve_bake(tmp_path_factory):
    root = tmp_path_factory.mktemp("passprev")
    cfg = kit.make_project(root / "p", 12, 12)
    (root / "p" / "lamp.csv").write_text("Wavelength [nm];Relative power\n355;0\n365;1\n375;0\n")
    (root / "p" / "filter.csv").write_text("wavelength,transmission (%)\n300,80\n400,80\n")
    cfg.write_text(
        cfg.read_text().replace(
            "passes = []", 'passes = ["nir850", {name = "uv_lamp", lamp = "lamp.csv", filter = "filter.csv"}]'
        )
    )
    bake(load_config(cfg), root / "out")
    return cfg, root / "out" / "material.json"


def _png(path):
    inp = oiio.ImageInput.open(str(path))
    px = inp.read_image(oiio.UINT8)
    inp.close()
    return px


def test_pass_preview_draws_map_and_curves(curve_bake, tmp_path):
    cfg, desc = curve_bake
    with_curves = pass_preview(tmp_path / "a.png", desc, "uv_lamp", config_path=cfg)
    weights_only = pass_preview(tmp_path / "b.png", desc, "uv_lamp")
    a, b = _png(with_curves), _png(weights_only)
    assert a.shape == b.shape and a.shape[0] > 300
    assert np.count_nonzero(np.any(a != b, axis=-1)) > 100  # the curves are drawn only with the config
    builtin = pass_preview(tmp_path / "c.png", desc, "nir850")  # built-in curves need no config
    assert _png(builtin).std() > 0


def test_changed_curve_is_refused_with_status_2(curve_bake, tmp_path, capsys):
    cfg, desc = curve_bake
    lamp = cfg.parent / "lamp.csv"
    original = lamp.read_text()
    lamp.write_text(original.replace("365;1", "365;2"))
    try:
        with pytest.raises(DataError, match="lamp curve lamp.csv changed after the bake"):
            pass_preview(tmp_path / "x.png", desc, "uv_lamp", config_path=cfg)
        argv = ["preview", "--descriptor", str(desc), "--config", str(cfg), "--out", str(tmp_path / "o")]
        assert main(argv) == 2
        assert "changed after the bake" in capsys.readouterr().err
    finally:
        lamp.write_text(original)


def test_unknown_pass_names_the_passes(curve_bake, tmp_path):
    _, desc = curve_bake
    with pytest.raises(DataError, match="has no pass 'uv365'; it has nir850, uv_lamp"):
        pass_preview(tmp_path / "x.png", desc, "uv365")


def test_examples_point_at_the_demo_descriptor():
    """The help examples name the descriptor where matgen demo writes it (lowtide/bake/material.json)."""
    from matgen.cli import build_parser

    parser = build_parser()
    sub = next(a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction")
    for name in ("preview", "report", "inspect", "render", "usd"):
        epilog = sub.choices[name].epilog
        assert "lowtide/material.json" not in epilog
        assert "lowtide/bake/material.json" in epilog


def test_report_embeds_one_figure_per_pass(curve_bake, tmp_path, capsys):
    cfg, desc = curve_bake
    out = tmp_path / "r.html"
    assert main(["report", str(desc), "--out", str(out), "--config", str(cfg)]) == 0
    html = out.read_text()
    assert "pass &#x27;uv_lamp&#x27;" in html or "pass 'uv_lamp'" in html
    assert html.count("Fluorescence is not modelled") >= 2  # one caption per pass (nir850, uv_lamp)
    # the textured render needs the albedo_single stack, which this bake lacks: one message, status 2
    assert main(["report", str(desc), "--out", str(out), "--textured"]) == 2
    assert "albedo_single" in capsys.readouterr().err
