"""``matgen optics``: outputs, plot, every parameter as an option, and bad input (exit 2, one message, no
file)."""

import csv
import io
import json

import numpy as np
import pytest

from matgen.cli import main
from matgen.spectra.bands import BandSet
from matgen.tissue.optics import skin_optics
from matgen.tissue.parameters import FIELD_SPECS
from matgen.tissue.presets import preset


def test_cheek_table_and_plot(tmp_path, capsys):
    png = tmp_path / "cheek.png"
    assert main(["optics", "--preset", "cheek", "--plot", str(png)]) == 0
    out = capsys.readouterr().out
    layers = ("stratum_corneum", "epidermis", "papillary_dermis", "reticular_dermis", "hypodermis", "muscle")
    for name in layers:
        assert name in out
    assert "packaging=on" in out
    assert len([ln for ln in out.splitlines() if ln.strip().startswith(("300.0", "1000.0"))]) == 2
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 10_000


def test_json_matches_library(capsys):
    assert (
        main(
            [
                "optics",
                "--preset",
                "forearm",
                "--blood-fraction",
                "0.05",
                "--format",
                "json",
                "--wavelengths",
                "400:700:50",
            ]
        )
        == 0
    )
    d = json.loads(capsys.readouterr().out)
    expect = skin_optics(
        preset("forearm").replace(blood_fraction=0.05), BandSet.parse("400:700:50")
    ).to_dict()
    assert d["wavelength_nm"] == [400.0, 450.0, 500.0, 550.0, 600.0, 650.0, 700.0]
    assert d["packaging"] == "on" and d["parameters"]["blood_fraction"] == 0.05
    for got, want in zip(d["layers"], expect["layers"], strict=True):
        assert got["name"] == want["name"] and got["thickness_mm"] == want["thickness_mm"]
        for key in ("mu_a", "mu_s", "g", "n"):
            assert np.allclose(got[key], want[key], rtol=1e-12)


def test_csv_long_format(capsys):
    assert main(["optics", "--format", "csv", "--wavelengths", "500,600", "--packaging", "off"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert len(rows) == 6 * 2  # six layers (five skin layers and muscle), two bands
    assert {r["packaging"] for r in rows} == {"off"}
    r = rows[0]
    assert float(r["mu_s_reduced_per_mm"]) == pytest.approx(
        float(r["mu_s_per_mm"]) * (1 - float(r["g"])), rel=1e-6
    )


def test_every_parameter_is_an_option(capsys):
    argv = ["optics", "--format", "json", "--wavelengths", "550"]
    values = {}
    for name, spec in FIELD_SPECS.items():
        v = spec.low + 0.1 * (spec.high - spec.low) if "fraction" in name else 0.5 * (spec.low + spec.high)
        values[name] = float(f"{v:.6g}")
        argv += ["--" + name.replace("_", "-"), str(values[name])]
    # keep the layer sums legal
    argv += ["--dermis-water-fraction", "0.5", "--hypodermis-water-fraction", "0.1"]
    values.update(dermis_water_fraction=0.5, hypodermis_water_fraction=0.1)
    assert main(argv) == 0
    assert json.loads(capsys.readouterr().out)["parameters"] == values


@pytest.mark.parametrize(
    "argv, needle",
    [
        (["--blood-fraction", "nan"], "blood_fraction"),
        (["--melanin-fraction", "inf"], "melanin_fraction"),
        (["--blood-fraction", "-0.01"], "[0, 0.2]"),
        (["--oxygen-saturation", "1.5"], "oxygen_saturation"),
        (["--melanin-fraction", "0.45", "--epidermis-water-fraction", "0.6"], "sum to"),
        (["--preset", "nose"], "unknown preset 'nose'"),
        (["--wavelengths", "600,500"], "not strictly increasing"),
        (["--wavelengths", ""], "band spec is empty"),
        (["--wavelengths", "400:700:10:20"], "band width 20.0 nm must be in (0, step=10.0]"),
        (["--wavelengths", "400:x:10"], "cannot read band spec"),
        (["--wavelengths", "1500"], "covers"),
    ],
)
def test_bad_input_exit_2_one_message_nothing_written(tmp_path, capsys, argv, needle):
    png = tmp_path / "never.png"
    assert main(["optics", *argv, "--plot", str(png)]) == 2
    cap = capsys.readouterr()
    assert cap.out == ""
    lines = cap.err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("matgen optics: error:") and needle in lines[0]
    assert "Traceback" not in cap.err
    assert not png.exists() and list(tmp_path.iterdir()) == []


def test_non_number_option_is_an_argparse_error(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["optics", "--blood-fraction", "lots"])
    assert exc.value.code == 2
    assert "'lots' is not a number" in capsys.readouterr().err


def test_plot_path_errors(tmp_path, capsys):
    assert main(["optics", "--plot", str(tmp_path / "missing" / "x.png")]) == 2
    assert main(["optics", "--plot", str(tmp_path / "x.jpg")]) == 2
    err = capsys.readouterr().err
    assert "does not exist" in err and "must end in .png" in err
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("fmt", ["table", "json", "csv"])
def test_every_format_prints_the_caution_on_stderr(fmt, capsys):
    """One caution line on standard error for every format; standard output stays machine-readable."""
    from matgen.cautions import IMAGERY_ONLY

    assert main(["optics", "--preset", "cheek", "--wavelengths", "550", "--format", fmt]) == 0
    cap = capsys.readouterr()
    assert cap.err.strip().splitlines() == [IMAGERY_ONLY]
    assert "licensed practice" in IMAGERY_ONLY and "local regulations" in IMAGERY_ONLY
    assert IMAGERY_ONLY not in cap.out
    if fmt == "json":
        json.loads(cap.out)
