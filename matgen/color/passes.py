"""Single-channel UV and IR pass weights from camera + filter + source response curves. Units: nm.

A pass value is ``sum_b w_b A_b`` with weights ``w_b`` proportional to the integral of the response curve
over band b (the curve is piecewise linear between its samples and zero outside them), normalised to sum 1.

Built-in responses (illustrative generic shapes defined by matgen, see ``color/data/<name>.provenance.json``
and ``tools/make_pass_responses.py``): ``uv365`` (365 nm lamp through a UV band-pass), ``nir850`` and
``nir940`` (infrared illuminators through long-pass filters on a silicon sensor). User curves are CSV files
with a header ``wavelength_nm,weight`` and one sample per line, wavelengths strictly ascending, weights >= 0.
"""

from __future__ import annotations

import csv
import io
import json
from importlib import resources
from pathlib import Path

import numpy as np

from matgen import limits
from matgen.errors import DataError

#: Names of the built-in pass responses.
BUILTIN_PASSES = ("uv365", "nir850", "nir940")


def read_response_csv(text: str, source: str):
    """Parse response-curve CSV text; return ``(wavelength_nm, weight)`` arrays.

    Parameters
    ----------
    text : str
        CSV text with header ``wavelength_nm,weight``.
    source : str
        File name or label for messages.

    Returns
    -------
    tuple of ndarray
        Wavelengths (nm, ascending) and weights (>= 0).

    Raises
    ------
    DataError
        Naming the file and line at fault.

    """
    reader = csv.reader(io.StringIO(text))
    try:
        rows = [r for r in reader if r and not r[0].lstrip().startswith("#")]
    except csv.Error as exc:  # e.g. a lone carriage return inside a field
        raise DataError(f"response curve {source}, line {reader.line_num}: not CSV ({exc})") from None
    if not rows:
        raise DataError(f"response curve {source}: file is empty; expected a header 'wavelength_nm,weight'")
    header = [h.strip().lower() for h in rows[0]]
    if header[:2] != ["wavelength_nm", "weight"]:
        raise DataError(f"response curve {source}: header is {rows[0]!r}; expected 'wavelength_nm,weight'")
    wl, w = [], []
    for i, row in enumerate(rows[1:], start=2):
        try:
            x, y = float(row[0]), float(row[1])
        except (ValueError, IndexError):
            raise DataError(f"response curve {source}, line {i}: {row!r} is not two numbers") from None
        if not (np.isfinite(x) and np.isfinite(y)) or y < 0 or x <= 0:
            raise DataError(
                f"response curve {source}, line {i}: need wavelength > 0 nm and finite weight >= 0"
            )
        wl.append(x)
        w.append(y)
    wl, w = np.array(wl), np.array(w)
    if wl.size < 2:
        raise DataError(f"response curve {source}: needs at least 2 samples")
    if np.any(np.diff(wl) <= 0):
        i = int(np.argmax(np.diff(wl) <= 0)) + 3
        raise DataError(f"response curve {source}, line {i}: wavelengths must be strictly ascending")
    if not np.any(w > 0):
        raise DataError(f"response curve {source}: every weight is 0")
    return wl, w


def load_response(name_or_csv_path):
    """Built-in response by name, or a user CSV by path; returns ``(wavelength_nm, weight, source)``."""
    key = str(name_or_csv_path)
    if key in BUILTIN_PASSES:
        text = resources.files("matgen.color").joinpath("data", f"{key}.csv").read_text()
        return (*read_response_csv(text, f"built-in '{key}'"), f"built-in '{key}'")
    path = Path(key)
    if not path.is_file():
        raise DataError(
            f"response curve {key!r} is neither a built-in pass ({', '.join(BUILTIN_PASSES)}) "
            "nor a readable CSV file"
        )
    try:
        text = limits.read_text_limited(path, "response curve")
    except OSError as exc:
        raise DataError(f"cannot read response curve {path.name}: {exc}") from exc
    return (*read_response_csv(text, path.name), path.name)


def response_provenance(name: str) -> dict:
    """Provenance record of a built-in pass response."""
    if name not in BUILTIN_PASSES:
        raise DataError(f"no built-in pass named {name!r}; known: {', '.join(BUILTIN_PASSES)}")
    return json.loads(resources.files("matgen.color").joinpath("data", f"{name}.provenance.json").read_text())


def pass_weights(name_or_csv_path, bands):
    """Normalised weights (B,) of a single-channel pass over the band set.

    Parameters
    ----------
    name_or_csv_path : str or path
        A built-in pass name (``uv365``, ``nir850``, ``nir940``) or a CSV path (``wavelength_nm,weight``).
    bands : BandSet
        The band set (nm).

    Returns
    -------
    ndarray, shape (B,)
        Weights >= 0 summing to 1; the pass value of a band spectrum A is ``weights @ A``.

    Raises
    ------
    DataError
        If the curve cannot be read or does not overlap the band set.

    References
    ----------
    Built-in curves: illustrative shapes defined by matgen (``tools/make_pass_responses.py``).

    """
    wl, w, source = load_response(name_or_csv_path)
    lower, upper = np.asarray(bands.lower_nm), np.asarray(bands.upper_nm)
    out = np.zeros(lower.size)
    for b, (lo, hi) in enumerate(zip(lower, upper, strict=True)):
        lo_c, hi_c = max(lo, wl[0]), min(hi, wl[-1])
        if hi_c <= lo_c:
            continue
        inner = (wl > lo_c) & (wl < hi_c)
        x = np.concatenate(([lo_c], wl[inner], [hi_c]))
        out[b] = np.trapezoid(np.interp(x, wl, w), x)
    total = out.sum()
    if not total > 0:
        raise DataError(
            f"response curve {source} ({wl[0]:g}-{wl[-1]:g} nm) does not overlap the band set "
            f"({lower[0]:g}-{upper[-1]:g} nm) where its weight is nonzero"
        )
    return out / total
