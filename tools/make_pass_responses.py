"""Write matgen's built-in single-channel pass responses (matgen/color/data/<name>.csv + provenance JSON).

The curves are illustrative generic shapes defined here, not measurements of any product: a light source
line (Gaussian of stated centre and full width at half maximum) times a filter edge (logistic) times a
sensor quantum-efficiency slope. Weights are relative (peak 1); matgen normalises them over the band set.

Run from the repository root:  python tools/make_pass_responses.py
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

OUT = Path(__file__).resolve().parents[1] / "matgen" / "color" / "data"


def gaussian(wl, centre_nm, fwhm_nm):
    sigma = fwhm_nm / (2.0 * np.sqrt(2.0 * np.log(2.0)))
    return np.exp(-0.5 * ((wl - centre_nm) / sigma) ** 2)


def logistic(wl, edge_nm, width_nm):
    return 1.0 / (1.0 + np.exp(-(wl - edge_nm) / width_nm))


def silicon_slope(wl):
    # illustrative silicon sensor quantum efficiency falling linearly from 1 at 700 nm to 0.2 at 1000 nm
    return np.clip(1.0 - 0.8 * (wl - 700.0) / 300.0, 0.0, 1.0)


CURVES = {
    "uv365": {
        "range_nm": (320.0, 420.0),
        "make": lambda wl: (
            gaussian(wl, 365.0, 10.0) * logistic(wl, 340.0, 3.0) * (1 - logistic(wl, 395.0, 3.0))
        ),
        "description": "365 nm inspection lamp line (Gaussian, FWHM 10 nm) through a UV band-pass filter "
        "(logistic edges at 340 and 395 nm, 3 nm scale) on a UV-sensitive sensor with flat response",
    },
    "nir850": {
        "range_nm": (750.0, 960.0),
        "make": lambda wl: gaussian(wl, 850.0, 40.0) * logistic(wl, 800.0, 5.0) * silicon_slope(wl),
        "description": "850 nm infrared illuminator (Gaussian, FWHM 40 nm) through a long-pass filter "
        "(logistic edge at 800 nm, 5 nm scale) on a silicon sensor "
        "(QE falling linearly 1 -> 0.2 over 700-1000 nm)",
    },
    "nir940": {
        "range_nm": (840.0, 1040.0),
        "make": lambda wl: gaussian(wl, 940.0, 40.0) * logistic(wl, 900.0, 5.0) * silicon_slope(wl),
        "description": "940 nm infrared illuminator (Gaussian, FWHM 40 nm) through a long-pass filter "
        "(logistic edge at 900 nm, 5 nm scale) on a silicon sensor "
        "(QE falling linearly 1 -> 0.2 over 700-1000 nm)",
    },
}


def main():
    OUT.mkdir(parents=True, exist_ok=True)
    for name, spec in CURVES.items():
        lo, hi = spec["range_nm"]
        wl = np.arange(lo, hi + 0.5, 1.0)
        w = spec["make"](wl)
        w = w / w.max()
        lines = ["wavelength_nm,weight"] + [f"{x:.1f},{y:.8f}" for x, y in zip(wl, w, strict=True)]
        (OUT / f"{name}.csv").write_text("\n".join(lines) + "\n")
        record = {
            "source": "illustrative generic response defined by matgen (not a measured product): "
            + spec["description"],
            "units": "wavelength_nm in nm; weight relative (peak 1), normalised by matgen over the band set",
            "license": "BSD-3-Clause (part of matgen)",
            "wavelength_range_nm": [lo, hi],
            "resampling": (
                "evaluated analytically every 1 nm; "
                "matgen integrates the piecewise-linear curve over each band"
            ),
            "generated_by": "tools/make_pass_responses.py",
        }
        (OUT / f"{name}.provenance.json").write_text(json.dumps(record, indent=2) + "\n")


if __name__ == "__main__":
    main()
