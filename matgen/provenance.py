"""Provenance: where every number came from, and stable content hashes of inputs.

Each vendored dataset in ``matgen/spectra/data/`` has a JSON provenance record beside it
(``<name>.provenance.json``) with at least: ``source`` (citation), ``units``, ``license``,
``wavelength_range_nm``, ``resampling`` and ``generated_by`` (the script in ``tools/``).
"""

from __future__ import annotations

import hashlib
import json
from importlib import resources
from typing import Any

import numpy as np

from matgen import __version__
from matgen.errors import DataError

REQUIRED_PROVENANCE_KEYS = ("source", "units", "license", "wavelength_range_nm", "resampling", "generated_by")


def _canonical(obj: Any):
    if isinstance(obj, dict):
        return {str(k): _canonical(v) for k, v in sorted(obj.items(), key=lambda kv: str(kv[0]))}
    if isinstance(obj, (list, tuple)):
        return [_canonical(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _canonical(obj.tolist())
    if isinstance(obj, (np.floating,)):
        return float(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, float):
        return float.hex(obj)  # exact, platform-independent text of a double
    return obj


def hash_json(obj: Any) -> str:
    """SHA-256 (hex) of a JSON-like object in canonical form (sorted keys, exact floats)."""
    text = json.dumps(_canonical(obj), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def sha256_file(path, chunk_bytes: int = 1 << 20) -> str:
    """SHA-256 (hex) of a file's bytes, read in chunks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while True:
            block = fh.read(chunk_bytes)
            if not block:
                break
            h.update(block)
    return h.hexdigest()


def code_version() -> str:
    """Return the matgen version string that enters every content hash."""
    return __version__


def load_record(name: str) -> dict:
    """Load the provenance record of vendored dataset ``name`` (``spectra/data/<name>.provenance.json``)."""
    try:
        text = resources.files("matgen.spectra").joinpath("data", f"{name}.provenance.json").read_text()
    except FileNotFoundError as exc:
        raise DataError(f"no provenance record for dataset '{name}'") from exc
    record = json.loads(text)
    missing = [k for k in REQUIRED_PROVENANCE_KEYS if k not in record]
    if missing:
        raise DataError(f"provenance record of '{name}' lacks {missing}")
    return record


def data_hashes() -> dict[str, str]:
    """SHA-256 of every vendored data file in ``matgen/spectra/data`` (name -> hex digest)."""
    out = {}
    root = resources.files("matgen.spectra").joinpath("data")
    for entry in sorted(root.iterdir(), key=lambda p: p.name):
        if entry.is_file():
            out[entry.name] = hashlib.sha256(entry.read_bytes()).hexdigest()
    return out
