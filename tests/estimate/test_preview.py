"""The demo's scanned albedo is estimated back, previewed side by side and reported with the caution."""

import json
from html import escape as html_escape

from matgen.cli import main
from matgen.estimate.run import CAUTION
from matgen.preview.images import image_check


def test_demo_estimates_its_scanned_albedo_back(tmp_path, capsys):
    out = tmp_path / "lowtide"
    assert main(["demo", "--out", str(out), "--size", "48"]) == 0
    assert "estimated back" in capsys.readouterr().out
    summary = json.loads((out / "estimate" / "estimate.json").read_text())
    assert summary["caution"] == CAUTION
    # the scenario holds eumelanin share and saturation constant, so the estimate holds them at those values
    config = (out / "inputs" / "material.toml").read_text()
    for axis, value in summary["model"]["held"].items():
        assert f"[parameters.{axis}]" in config and f"value = {value}" in config
    res = summary["residual_de2000"]["in_gamut"]
    assert res["p50"] <= 0.5 and res["p95"] <= 1.0
    sheet = out / "estimate" / "preview" / "estimate_sheet.png"
    check = image_check(sheet)
    assert not check["blank"] and check["width"] > 600
    html = (out / "report.html").read_text()
    assert "Scanned albedo estimated back" in html and html_escape(CAUTION) in html
    assert main(["inspect", str(out / "estimate" / "bake" / "material.json")]) == 0
