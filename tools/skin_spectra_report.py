"""Light, medium and dark skin reflectance of a table beside colour-science's ColorChecker skin patches.

Prints, at 450, 550, 650, 700 and 800 nm, the diffuse reflectance A (specular excluded) that a table holds for
three pigmentations of its region (interpolated by ``Table.lookup``), and the spectral reflectance of the
"light skin" and "dark skin" patches of ``colour.SDS_COLOURCHECKERS["BabelColor Average"]`` (painted
patches: a check of shape and level, not a fit target).

    python tools/skin_spectra_report.py lut/default.npz [--json OUT]
"""

from __future__ import annotations

import argparse
import json

import numpy as np

from matgen.tables.store import Table

WAVELENGTHS_NM = (450.0, 550.0, 650.0, 700.0, 800.0)
#: melanin volume fractions of light, medium and dark skin (Jacques 1998 spans 1.3-6.3 %, 11-16 %, 18-43 %,
#: from memory); the rest as the cheek preset (eumelanin share 0.7, blood 0.8 %, saturation 0.75).
SKIN = {"light": 0.03, "medium": 0.12, "dark": 0.30}
OTHER = {"eumelanin_share": 0.7, "blood_fraction": 0.008, "oxygen_saturation": 0.75}


def table_rows(path):
    table = Table.load(path)
    centres = table.bands.centre_nm
    cols = [int(np.argmin(np.abs(centres - w))) for w in WAVELENGTHS_NM]
    rows = {}
    for name, mel in SKIN.items():
        values = {"melanin_fraction": mel, **OTHER}
        point = np.array([[values[a] for a in table.axis_names]])
        a = table.lookup(point, "albedo_multiple")[0]["albedo_multiple"][0]
        rows[name] = [round(float(a[c]), 3) for c in cols]
    return rows


def colourchecker_rows():
    import colour

    cc = colour.SDS_COLOURCHECKERS["BabelColor Average"]
    return {p: [round(float(cc[p][w]), 3) for w in WAVELENGTHS_NM] for p in ("light skin", "dark skin")}


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("table")
    ap.add_argument("--json", metavar="OUT")
    args = ap.parse_args()
    rows = {**table_rows(args.table), **colourchecker_rows()}
    print("wavelength_nm   " + "  ".join(f"{w:6.0f}" for w in WAVELENGTHS_NM))
    for name, vals in rows.items():
        print(f"{name:<15} " + "  ".join(f"{v:6.3f}" for v in vals))
    if args.json:
        with open(args.json, "w") as fh:
            json.dump({"wavelength_nm": WAVELENGTHS_NM, "rows": rows}, fh, indent=2)


if __name__ == "__main__":
    main()
