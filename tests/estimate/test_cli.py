"""``matgen estimate``: colour spaces, UDIM sets, outputs the bake accepts, refusals that write nothing."""

import json

import numpy as np
import OpenImageIO as oiio
import pytest

from matgen.cli import main
from matgen.estimate.run import CAUTION
from matgen.spectra.bands import BandSet
from matgen.tables.store import Axis, Table

HELD = {"eumelanin_share": 0.55, "oxygen_saturation": 0.8}


@pytest.fixture(scope="module")
def albedo(tmp_path_factory, ekit):
    """A baked ACEScg albedo of smooth synthetic pigments (32 x 24 texels) and its pass maps."""
    rng = np.random.default_rng(31)
    y, x = np.mgrid[0:24, 0:32] / 32.0
    maps = {
        "melanin_fraction": 0.01 + 0.2 * x + 0.002 * rng.uniform(size=x.shape),
        "blood_fraction": 0.005 + 0.06 * y,
    }
    folder = tmp_path_factory.mktemp("albedo")
    baked = ekit.bake_truth(folder, maps, HELD)
    return baked / "rgb" / "albedo_multiple.exr", baked, maps


def _run(capsys, *args):
    rc = main(["estimate", *map(str, args), "--quiet"])
    cap = capsys.readouterr()
    return rc, cap.out, cap.err


def _fix():
    return [a for k, v in HELD.items() for a in ("--fix", f"{k}={v}")]


def test_outputs_summary_and_config_baked_as_is(albedo, tmp_path, capsys, ekit):
    path, _, maps = albedo
    out = tmp_path / "est"
    rc, stdout, _ = _run(capsys, path, "--colour-space", "acescg", "--out", out, "--json", *_fix())
    assert rc == 0
    summary = json.loads(stdout)
    assert summary == json.loads((out / "estimate.json").read_text())
    assert summary["caution"] == CAUTION and "diagnostic" in CAUTION and "clinical" in CAUTION
    assert summary["model"]["estimated"] == ["melanin_fraction", "blood_fraction"]
    assert summary["model"]["held"] == HELD
    assert summary["texels"] == 32 * 24
    assert summary["out_of_gamut"]["share"] == 0.0
    assert summary["residual_de2000"]["in_gamut"]["p95"] < 0.05
    hist = summary["pigments"]["melanin_fraction"]["histogram"]
    assert sum(hist["counts"]) == 32 * 24 and len(hist["edges"]) == len(hist["counts"]) + 1
    for rel, sha in summary["files"].items():
        from matgen.provenance import sha256_file

        assert sha256_file(out / rel) == sha
    pixels = ekit.read(out / "maps" / "melanin_fraction.exr")
    assert pixels.shape == (24, 32, 1)
    assert np.max(np.abs(pixels[..., 0] / maps["melanin_fraction"] - 1)) < 0.01
    spec = oiio.ImageInput.open(str(out / "maps" / "melanin_fraction.exr"))
    assert spec.spec().format == "float"
    spec.close()
    assert main(["bake", str(out / "material.toml"), "--out", str(tmp_path / "bake"), "--quiet"]) == 0
    assert (tmp_path / "bake" / "material.json").is_file()
    assert not list(out.glob(".matgen-*"))  # no staging folder or lock left


def test_help_carries_the_caution(capsys):
    with pytest.raises(SystemExit):
        main(["estimate", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "no clinical, diagnostic or dosimetric use" in text


def test_colour_spaces_give_the_same_pigments(albedo, tmp_path, capsys, ekit):
    """Linear Rec.709 and 16-bit sRGB-encoded copies of an ACEScg albedo (converted by colour-science 0.4.7,
    CAT02) estimate to the same pigments as the ACEScg file; the sRGB PNG is read through its file tag."""
    import colour

    path, _, _ = albedo
    rgb = ekit.read(path).astype(np.float64)
    rec709 = colour.RGB_to_RGB(rgb, "ACEScg", "ITU-R BT.709", chromatic_adaptation_transform="CAT02")
    ekit.write_image(tmp_path / "rec709.exr", rec709)
    srgb = colour.RGB_COLOURSPACES["sRGB"].cctf_encoding(np.clip(rec709, 0, 1))
    ekit.write_image(tmp_path / "srgb.png", srgb, pixel_type=oiio.UINT16)
    runs = {
        "acescg": (path, "--colour-space", "acescg"),
        "rec709": (tmp_path / "rec709.exr", "--colour-space", "lin_rec709"),
        "srgb": (tmp_path / "srgb.png",),  # tagged by OpenImageIO as sRGB: decoded
    }
    got = {}
    for name, args in runs.items():
        rc, _, err = _run(capsys, *args, "--out", tmp_path / name, *_fix())
        assert rc == 0, err
        got[name] = ekit.read(tmp_path / name / "maps" / "melanin_fraction.exr")
    assert np.max(np.abs(got["rec709"] / got["acescg"] - 1)) < 1e-3
    assert np.max(np.abs(got["srgb"] / got["acescg"] - 1)) < 0.01  # 16-bit encoding of the values
    summary = json.loads((tmp_path / "srgb" / "estimate.json").read_text())
    assert summary["input"]["colour_space"]["source"].startswith("file tag")
    assert summary["input"]["colour_space"]["values"].startswith("encoded")


def test_udim_set_in_and_out(albedo, tmp_path, capsys, ekit):
    path, _, _ = albedo
    rgb = ekit.read(path)
    scan = tmp_path / "scan"
    scan.mkdir()
    ekit.write_image(scan / "albedo.1001.exr", rgb, colorspace="lin_ap1_scene")
    ekit.write_image(scan / "albedo.1002.exr", rgb[::-1].copy(), colorspace="lin_ap1_scene")
    out = tmp_path / "est"
    rc, _, err = _run(capsys, scan / "albedo.<UDIM>.exr", "--out", out, *_fix())
    assert rc == 0, err
    for tile in (1001, 1002):
        assert (out / "maps" / f"blood_fraction.{tile}.exr").is_file()
        assert (out / "qa" / f"out_of_gamut.{tile}.exr").is_file()
    a = ekit.read(out / "maps" / "blood_fraction.1001.exr")
    b = ekit.read(out / "maps" / "blood_fraction.1002.exr")
    assert np.allclose(a[::-1], b)
    assert 'map = "maps/blood_fraction.<UDIM>.exr"' in (out / "material.toml").read_text()
    assert main(["bake", str(out / "material.toml"), "--out", str(tmp_path / "bake"), "--quiet"]) == 0
    assert (tmp_path / "bake" / "rgb" / "albedo_multiple.1002.exr").is_file()


def test_eight_bit_srgb_declared_linear_warns_with_the_evidence(albedo, tmp_path, capsys, ekit):
    path, _, _ = albedo
    ekit.write_image(tmp_path / "a.png", np.clip(ekit.read(path), 0, 1) ** (1 / 2.2), pixel_type=oiio.UINT8)
    rc, _, err = _run(capsys, tmp_path / "a.png", "--colour-space", "lin_rec709", "--out", tmp_path / "o")
    assert rc == 0
    assert "warning" in err and "8-bit" in err and "tagged" in err and "--colour-space srgb" in err


def _refused(capsys, out, *args):
    rc, _, err = _run(capsys, *args, "--out", out)
    assert rc == 2
    assert not out.exists(), "nothing may be written on a refusal"
    lines = [ln for ln in err.strip().splitlines() if ln]
    assert len(lines) == 1 and lines[0].startswith("matgen estimate: error:"), err
    return lines[0]


@pytest.mark.parametrize(
    "value,label",
    [(np.nan, "non-finite"), (-0.1, "negative"), (1.5, "above 1")],
)
def test_bad_texels_are_counted_and_the_first_named(albedo, tmp_path, capsys, ekit, value, label):
    path, _, _ = albedo
    rgb = ekit.read(path).copy()
    rgb[5, 7, 1] = value
    rgb[9, 2, 0] = value
    ekit.write_image(tmp_path / "bad.exr", rgb)
    msg = _refused(capsys, tmp_path / "o", tmp_path / "bad.exr", "--colour-space", "acescg")
    assert "bad.exr" in msg and f"2 texel(s) {label}" in msg and "(x=7, y=5)" in msg


def test_refusals(albedo, tmp_path, capsys, ekit):
    path, baked, _ = albedo
    out = tmp_path / "o"
    msg = _refused(capsys, out, path, "--colour-space", "no-such-space")
    assert "no-such-space" in msg and "acescg" in msg
    untagged = tmp_path / "untagged.exr"  # baked colour maps carry their space's tags; this copy has none
    ekit.write_image(untagged, ekit.read(path)[..., :3])
    msg = _refused(capsys, out, untagged)  # untagged EXR, no option
    assert "no colour-space tag" in msg and str(untagged) in msg
    msg = _refused(capsys, out, path, "--colour-space", "acescg", "--fix", "eumelanin_share=2")
    assert "eumelanin_share = 2" in msg
    bad_curve = tmp_path / "swir.csv"
    bad_curve.write_text("wavelength_nm,weight\n1100,0\n1200,1\n1300,0\n")
    msg = _refused(
        capsys,
        out,
        path,
        "--colour-space",
        "acescg",
        "--capture",
        f"{bad_curve}={baked / 'passes' / 'uv365.exr'}",
    )
    assert "swir" in msg and "outside the table's bands" in msg
    small = tmp_path / "small.exr"
    ekit.write_image(small, np.full((4, 4), 0.3))
    msg = _refused(capsys, out, path, "--colour-space", "acescg", "--capture", f"uv365={small}")
    assert "small.exr" in msg and "4 x 4" in msg


def test_table_without_an_estimable_axis_is_refused(albedo, tmp_path, capsys):
    path, _, _ = albedo
    bands = BandSet.regular(400.0, 700.0, 100.0)
    table = Table(
        axes=[Axis("dermis_water_fraction", np.array([0.5, 0.7]))],
        bands=bands,
        quantities={"rgb_albedo_multiple": np.full((2, 3), 0.5, np.float32)},
    )
    table.save(tmp_path / "odd.npz")
    msg = _refused(capsys, tmp_path / "o", path, "--colour-space", "acescg", "--table", tmp_path / "odd.npz")
    assert "none of the axes colour can estimate" in msg


def test_srgb_tagged_capture_warns(albedo, tmp_path, capsys, ekit):
    path, baked, _ = albedo
    uv = ekit.read(baked / "passes" / "uv365.exr")
    ekit.write_image(tmp_path / "uv.png", uv, pixel_type=oiio.UINT16)
    rc, _, err = _run(
        capsys,
        path,
        "--colour-space",
        "acescg",
        "--capture",
        f"uv365={tmp_path / 'uv.png'}",
        "--out",
        tmp_path / "o",
    )
    assert rc == 0
    assert "capture 'uv365'" in err and "read as linear" in err
