"""The HTML report is self-contained and loads in headless Chromium (Debian's ``chromium``) without console
messages; every embedded image decodes."""

import re
import shutil
import subprocess
from pathlib import Path

import pytest

from matgen.cli import main
from matgen.preview.report import build_report

CHROMIUM = Path("/usr/bin/chromium")
FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--enable-logging=stderr",
    "--v=0",
    "--virtual-time-budget=5000",
]

_VALIDATION = {
    "quick": True,
    "passed": False,
    "seconds": 1.0,
    "skipped": {"collapse": "example: not run"},
    "allowances": {"tracer": 0.001, "collapse": 0.02, "sigma_bound": 3.0},
    "comparisons": [
        {
            "name": "layered",
            "title": "example table",
            "tested_label": "matgen",
            "reference_label": "tracer",
            "passed": False,
            "max_abs_difference": 0.02,
            "seconds": 1.0,
            "rows": [
                {
                    "label": "550 nm",
                    "wavelength_nm": 550.0,
                    "tested": {"value": 0.40, "stderr": 0.001},
                    "reference": {"value": 0.401, "stderr": 0.001},
                    "difference": -0.001,
                    "combined_stderr": 0.0014,
                    "allowance": 0.001,
                    "bound": 0.0052,
                    "passed": True,
                    "note": "",
                },
                {
                    "label": "850 nm",
                    "wavelength_nm": 850.0,
                    "tested": {"value": 0.52, "stderr": 0.001},
                    "reference": {"value": 0.50, "stderr": 0.001},
                    "difference": 0.02,
                    "combined_stderr": 0.0014,
                    "allowance": 0.001,
                    "bound": 0.0052,
                    "passed": False,
                    "note": "x",
                },
            ],
        }
    ],
}


def _chromium(tmp_path, url, *extra):
    if not CHROMIUM.exists():
        pytest.skip("headless Chromium (/usr/bin/chromium, Debian package 'chromium') is not installed")
    profile = tmp_path / f"profile-{len(list(tmp_path.iterdir()))}"
    cmd = [str(CHROMIUM), *FLAGS, f"--user-data-dir={profile}", *extra, url]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    shutil.rmtree(profile, ignore_errors=True)
    return proc


def _console_lines(stderr):
    return [line for line in stderr.splitlines() if ":CONSOLE" in line]


def test_console_check_catches_errors(tmp_path):
    """The check is not vacuous: a page with a script error and a missing image is caught."""
    bad = tmp_path / "bad.html"
    bad.write_text("<html><body><img src='missing.png'><script>undefinedFunction();</script></body></html>")
    proc = _chromium(tmp_path, bad.as_uri(), "--dump-dom")
    assert any("undefinedFunction" in line for line in _console_lines(proc.stderr)), proc.stderr[-2000:]


def test_report_loads_in_headless_chromium(tmp_path, baked_material):
    out = build_report(baked_material, tmp_path / "report.html", validation=_VALIDATION)
    text = out.read_text()
    # self-contained: every image is a data URI, nothing is fetched from anywhere
    srcs = re.findall(r"""src=["']([^"']+)["']""", text)
    assert len(srcs) >= 4 and all(s.startswith("data:image/png;base64,") for s in srcs)
    assert not re.search(r"""(href|src)=["'](https?:|file:|//)""", text)
    # what it must show
    for needle in (
        "Inputs",
        "Provenance",
        "Previews",
        "QA",
        "Validation",
        "fit residual",
        "texels clamped to the table",
        "FAIL",
        "not run",
    ):
        assert needle in text, needle
    proc = _chromium(tmp_path, out.as_uri(), "--dump-dom")
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert _console_lines(proc.stderr) == [], _console_lines(proc.stderr)
    body = re.search(r"<body[^>]*>", proc.stdout).group(0)
    assert 'data-images-ok="true"' in body, body
    n = int(re.search(r'data-images="(\d+)"', body).group(1))
    assert n == len(srcs)
    shot = tmp_path / "shot.png"
    proc = _chromium(tmp_path, out.as_uri(), f"--screenshot={shot}", "--window-size=1200,2400")
    assert shot.is_file() and shot.stat().st_size > 10000


def test_report_command(tmp_path, baked_material, capsys):
    from matgen.cautions import IMAGERY_ONLY

    out = tmp_path / "r.html"
    assert main(["report", str(baked_material), "--out", str(out)]) == 0
    assert out.stat().st_size > 10000 and "No validation results attached" in out.read_text()
    # the caution: one line on the terminal, and in the report, deferring to licensed practice
    assert IMAGERY_ONLY in capsys.readouterr().err
    assert "licensed practice under local regulations and codes" in out.read_text()
    assert main(["report", str(tmp_path / "missing.json")]) == 2


def test_preview_command_for_a_preset(tmp_path):
    """``matgen preview --preset`` runs matgen's pipeline on a few bands and writes the images."""
    from matgen.preview import images

    out = tmp_path / "pv"
    rc = main(
        [
            "preview",
            "--preset",
            "cheek",
            "--bands",
            "300:1000:100:10",
            "--photons",
            "4000",
            "--method",
            "builtin",
            "--out",
            str(out),
        ]
    )
    assert rc == 0
    for name in ("spectra.png", "profiles.png", "patch.png"):
        assert not images.image_check(out / name)["blank"], name


def test_preview_command_for_a_descriptor_and_a_table_slice(tmp_path, baked_material, test_table):
    """``matgen preview --descriptor ... --table ... --slice X Y``: the contact sheet of the baked maps, the
    spectra of three texels and the table heat map, each a real (non-blank) image of a sensible size."""
    from matgen.preview import images

    table_path = test_table.save(tmp_path / "t.npz")
    out = tmp_path / "pv"
    rc = main(
        [
            "preview",
            "--descriptor",
            str(baked_material),
            "--table",
            str(table_path),
            "--slice",
            "melanin_fraction",
            "blood_fraction",
            "--out",
            str(out),
        ]
    )
    assert rc == 0
    names = [
        "contact_sheet.png",
        "texel_spectra.png",
        "table_albedo_multiple_melanin_fraction_blood_fraction.png",
    ]
    for name in names:
        info = images.image_check(out / name)
        assert info["width"] >= 400 and info["height"] >= 300, (name, info)
        assert not info["blank"], name
    # a slice over an axis the table does not have is one error line and exit status 2
    assert (
        main(
            [
                "preview",
                "--table",
                str(table_path),
                "--slice",
                "melanin",
                "blood_fraction",
                "--out",
                str(tmp_path / "bad"),
            ]
        )
        == 2
    )
