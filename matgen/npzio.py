"""Reading ``.npz`` archives safely: declared array shapes are checked against :mod:`matgen.limits` first.

Shared by every stage that reads numpy archives it did not necessarily write itself (lookup tables, task
outputs, photon records), so that a hostile header cannot make numpy allocate before a ceiling is checked.
"""

from __future__ import annotations

import tokenize
import zipfile
import zlib
from pathlib import Path

import numpy as np

from matgen import limits
from matgen.errors import DataError, MatgenError

#: Exceptions that numpy, zipfile and zlib raise on a truncated, corrupt or hostile archive.
CORRUPT_ARCHIVE_ERRORS = (
    OSError,
    ValueError,
    KeyError,
    TypeError,
    AttributeError,
    IndexError,
    SyntaxError,
    EOFError,
    NotImplementedError,
    RuntimeError,
    zipfile.BadZipFile,
    zlib.error,
    tokenize.TokenError,
)


def _npy_header(zf: zipfile.ZipFile, member: str) -> tuple:
    """(shape, dtype) declared by the ``.npy`` header of a zip member, read without loading its data."""
    with zf.open(member) as fh:
        version = np.lib.format.read_magic(fh)
        if version == (1, 0):
            shape, _, dtype = np.lib.format.read_array_header_1_0(fh)
        else:
            shape, _, dtype = np.lib.format.read_array_header_2_0(fh)
    return tuple(shape), dtype


def declared_npz_bytes(path: Path) -> int:
    """Bytes the ``.npy`` members of an archive declare in their headers (no array data is read).

    Members that are not ``.npy`` are skipped (:func:`read_npz_checked` names them). Raises what zipfile and
    numpy raise on a corrupt archive (see :data:`CORRUPT_ARCHIVE_ERRORS`).
    """
    total = 0
    with zipfile.ZipFile(path) as zf:
        for member in zf.namelist():
            if not member.endswith(".npy"):
                continue
            shape, dtype = _npy_header(zf, member)
            count = 1
            for n in shape:
                count *= max(0, int(n))  # Python ints: no overflow on hostile shapes
            total += count * int(dtype.itemsize)
    return total


def read_npz_checked(path: Path, what: str, error: type[MatgenError] = DataError) -> dict:
    """Read every array of a deterministic npz after checking its size and declared shapes against limits."""
    limits.check_file_size(path, what)
    out = {}
    try:
        with zipfile.ZipFile(path) as zf:
            for member in zf.namelist():
                if not member.endswith(".npy"):
                    raise error(f"{what} {path} holds an unexpected member '{member}'")
                shape, _ = _npy_header(zf, member)
                if any(int(n) < 0 for n in shape):
                    raise error(f"{what} {path} array '{member}' declares a negative dimension {shape}")
                entries = 1
                for n in shape:
                    entries *= max(1, int(n))  # Python ints: no overflow on hostile shapes
                limits.check_table_entries(entries, f"{what} '{path}' array '{member}'")
                with zf.open(member) as fh:
                    out[member[:-4]] = np.lib.format.read_array(fh, allow_pickle=False)
    except MatgenError:
        raise
    except CORRUPT_ARCHIVE_ERRORS as exc:
        raise error(f"{what} {path} is truncated or corrupt ({type(exc).__name__}: {exc})") from exc
    return out
