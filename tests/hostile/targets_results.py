"""Fuzz targets over result files read back by matgen: validation results, photon-records members.

Registered in :data:`targets.TARGETS` when :mod:`targets` is imported. Photon records are an uncompressed
``.npz`` whose members carry CRCs, so byte mutations of the whole file stop at the checksum; these targets
mutate one member (the metadata JSON, or one array with its ``.npy`` header) and rebuild the archive.
"""

from __future__ import annotations

import json
from pathlib import Path

from targets import _npz_from_members, _records_seeds, target


def validation_doc() -> dict:
    """A 'matgen validate --json' result of the shape ValidationRun.to_dict writes (invented numbers)."""
    row = {
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
    }
    failing = dict(row, label="850 nm", wavelength_nm=850.0, difference=0.02, passed=False, note="x")
    return {
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
                "rows": [row, failing],
            }
        ],
    }


@target(
    "validation_json",
    lambda d: [json.dumps(validation_doc(), indent=1).encode(), json.dumps({"passed": True}).encode()],
    requires=("matgen.preview.report",),
    notes="load_validation, then the report's validation section (table and figure) of what loaded",
)
def _validation_json(data: bytes, scratch: Path):
    from matgen.preview.report import _validation_section, load_validation

    p = scratch / "validation.json"
    p.write_bytes(data)
    doc = load_validation(p)
    html = _validation_section(doc, scratch)
    assert "Validation against" in html


def _records_members() -> dict:
    """Members of a valid records file (300 photons, 2 layers), made once per process."""
    if "members" not in _RECORDS:
        import tempfile
        import zipfile

        with tempfile.TemporaryDirectory() as d:
            p = Path(d) / "rec.npz"
            p.write_bytes(_records_seeds(Path(d))[0])
            with zipfile.ZipFile(p) as zf:
                _RECORDS["members"] = {n: zf.read(n) for n in zf.namelist()}
    return _RECORDS["members"]


_RECORDS: dict = {}


def _load_and_reweight(members: dict, scratch: Path):
    import numpy as np

    from matgen.transport.records import PhotonRecords
    from matgen.transport.reweight import reweight

    p = scratch / "rec.npz"
    p.write_bytes(_npz_from_members(members))
    rec = PhotonRecords.load(p)
    reweight(rec, np.array([[0.5, 0.05]]), threads=1)


def _records_meta_seeds(_d: Path) -> list:
    import io

    import numpy as np

    meta = np.lib.format.read_array(io.BytesIO(_records_members()["meta.npy"]))
    return [str(meta).encode("utf-8")]


@target(
    "photon_records_meta",
    _records_meta_seeds,
    requires=("matgen.transport.records", "matgen.transport.reweight"),
    notes="PhotonRecords.load + reweighting of a valid records file whose metadata JSON is mutated",
)
def _photon_records_meta(data: bytes, scratch: Path):
    import io

    import numpy as np

    buf = io.BytesIO()
    np.lib.format.write_array(buf, np.array(data.decode("utf-8", "surrogateescape")), allow_pickle=False)
    _load_and_reweight({**_records_members(), "meta.npy": buf.getvalue()}, scratch)


_RECORD_ARRAYS = (
    "path_mm",
    "weighted_path_mm",
    "exit_radius_mm",
    "exit_cos",
    "max_depth_mm",
    "weight",
    "side",
)


@target(
    "photon_records_array",
    lambda d: [bytes([i]) + _records_members()[f"{a}.npy"] for i, a in enumerate(_RECORD_ARRAYS)],
    requires=("matgen.transport.records", "matgen.transport.reweight"),
    notes="PhotonRecords.load + reweighting with one .npy member replaced (first byte picks the array; "
    "shape, dtype and values mutated)",
)
def _photon_records_array(data: bytes, scratch: Path):
    if not data:
        return
    name = _RECORD_ARRAYS[data[0] % len(_RECORD_ARRAYS)]
    _load_and_reweight({**_records_members(), f"{name}.npy": data[1:]}, scratch)
