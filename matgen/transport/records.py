"""Per-photon records of a reference run, for absorption reweighting ("white Monte Carlo"). Units: mm.

One record per launched photon, in photon-index order (photons ended by roulette keep a record with
weight 0 and side 0, so that records of consecutive runs concatenate into the records of one long run):

=================  ===========  =====================================================================
field              dtype        meaning
=================  ===========  =====================================================================
``path_mm``        float32 (L)  geometric path length travelled in each layer (mm)
``weighted_path_``  float32 (L)  ``weighted_path_mm``: integral of w(s) / w_launch ds over the layer under
``mm``                           the reference absorption (mm); equals ``path_mm`` where mu_a_ref = 0
``exit_radius_mm`` float32      distance of the exit point from the entry point (mm)
``exit_cos``       float32      cosine of the exit direction in the ambient medium (0 if none)
``max_depth_mm``   float32      deepest point reached (mm)
``weight``         float32      weight at exit under the reference absorption (roulette included)
``side``           uint8        0 ended by roulette (or never escaping), 1 left through the top, 2 bottom
=================  ===========  =====================================================================

Memory: 8 L + 17 bytes per photon (57 bytes for 5 layers: 57 MB per 10^6 photons), plus a few hundred
bytes of metadata (the stack, reference absorption, seed, photon range, launch). The ``records_bytes``
ceiling of :mod:`matgen.limits` (environment variable ``MATGEN_MAX_RECORDS_BYTES``, default 8 GiB) bounds
it: a run, a concatenation or a records file that would need more is refused before anything is allocated.

References: ``Alerstam2008white``, ``Graaff1993condensed``.
"""

from __future__ import annotations

import json
import math
import zipfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from matgen import limits
from matgen.errors import DataError, MatgenError, ParameterError
from matgen.fsutil import atomic_path
from matgen.npzio import CORRUPT_ARCHIVE_ERRORS, declared_npz_bytes, read_npz_checked

_ARRAYS = ("path_mm", "weighted_path_mm", "exit_radius_mm", "exit_cos", "max_depth_mm", "weight", "side")
_DTYPES = {a: np.dtype(np.uint8 if a == "side" else np.float32) for a in _ARRAYS}
_FORMAT = "matgen.photon_records/1"


def bytes_per_photon(n_layers: int) -> int:
    """Memory of one photon record in bytes: 8 per layer plus 17."""
    return 8 * int(n_layers) + 17


def check_records_memory(photons: int, n_layers: int, what: str = "photon records") -> int:
    """Check the memory that records of ``photons`` photons on ``n_layers`` layers need, before allocating.

    Parameters
    ----------
    photons : int
        Photon records to hold (dimensionless).
    n_layers : int
        Layers of the stack (each adds two float32 path lengths per photon).
    what : str
        What the records are, for the message (a run, a file).

    Returns
    -------
    int
        The memory in bytes (``photons x bytes_per_photon(n_layers)``).

    Raises
    ------
    LimitError
        Above the ``records_bytes`` ceiling (``MATGEN_MAX_RECORDS_BYTES``).

    """
    per = bytes_per_photon(n_layers)
    need = int(photons) * per
    if need <= 0:
        return 0
    return limits.check_count(
        need,
        "records_bytes",
        f"the memory of {what} ({int(photons)} photons x {per} bytes for {n_layers} layers)",
    )


def _finite(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _check_meta(meta: dict, where: str, n_layers: int) -> None:
    """Check the metadata fields that reweighting and table tasks read, with their allowed ranges."""

    def bad(key: str, allowed: str):
        shown = json.dumps(meta.get(key), default=str)
        shown = shown if len(shown) <= 60 else shown[:57] + "..."
        raise DataError(f"photon records {where}: metadata '{key}' is {shown}; allowed: {allowed}")

    mu = meta.get("mu_a_ref")
    if not (isinstance(mu, list) and len(mu) == n_layers and all(_finite(v) and v >= 0 for v in mu)):
        bad("mu_a_ref", f"a list of {n_layers} finite absorption coefficients >= 0 (1/mm), one per layer")
    for key, lo, hi, what in (
        ("specular_reflectance", 0.0, 1.0, "a number in [0, 1]"),
        ("launch_weight", 0.0, 1.0, "a number in [0, 1]"),
        ("incidence_cos", 0.0, 1.0, "a number in (0, 1]"),
    ):
        v = meta.get(key)
        if not (_finite(v) and lo <= v <= hi) or (key == "incidence_cos" and v == 0):
            bad(key, what)
    v = meta.get("depth_scale_mm")
    if not (_finite(v) and v > 0):
        bad("depth_scale_mm", "a finite depth > 0 (mm)")
    for key in ("seed", "first_photon"):
        v = meta.get(key)
        if not (isinstance(v, int) and not isinstance(v, bool) and 0 <= v < 2**64):
            bad(key, "a whole number in [0, 2^64)")
    if not isinstance(meta.get("stack"), dict):
        bad("stack", "the reference stack as a JSON object")


@dataclass
class PhotonRecords:
    """Records of one reference run (see the module docstring for fields and memory).

    Attributes
    ----------
    path_mm, weighted_path_mm, exit_radius_mm, exit_cos, max_depth_mm, weight, side : ndarray
        Per-photon arrays (length N; ``path_mm`` and ``weighted_path_mm`` are (N, L)).
    meta : dict
        ``stack`` (the reference stack as :meth:`Stack.to_dict`), ``mu_a_ref`` (1/mm, L values),
        ``seed``, ``first_photon``, ``photons``, ``incidence_cos``, ``specular_reflectance``,
        ``launch_weight``, ``depth_scale_mm``.

    """

    path_mm: np.ndarray
    weighted_path_mm: np.ndarray
    exit_radius_mm: np.ndarray
    exit_cos: np.ndarray
    max_depth_mm: np.ndarray
    weight: np.ndarray
    side: np.ndarray
    meta: dict = field(default_factory=dict)

    @property
    def photons(self) -> int:
        """Photons launched (records held)."""
        return int(self.weight.size)

    @property
    def n_layers(self) -> int:
        """Layers of the reference stack."""
        return int(self.path_mm.shape[1])

    @property
    def mu_a_ref(self) -> np.ndarray:
        """Reference absorption per layer (1/mm)."""
        return np.asarray(self.meta["mu_a_ref"], dtype=np.float64)

    @property
    def nbytes(self) -> int:
        """Memory held by the per-photon arrays, in bytes."""
        return int(sum(getattr(self, a).nbytes for a in _ARRAYS))

    def save(self, path) -> None:
        """Write the records to an ``.npz`` file (uncompressed; metadata as JSON text)."""
        arrays = {a: getattr(self, a) for a in _ARRAYS}
        meta = dict(self.meta, format=_FORMAT)
        with atomic_path(path) as tmp:
            with open(tmp, "wb") as fh:
                np.savez(fh, meta=np.array(json.dumps(meta)), **arrays)

    @classmethod
    def load(cls, path) -> PhotonRecords:
        """Read records written by :meth:`save`.

        Raises
        ------
        DataError
            A malformed, truncated or corrupt file (the message names it).
        LimitError
            A file larger than the ``file_bytes`` ceiling, or whose arrays declare more memory than the
            ``records_bytes`` ceiling (checked on the ``.npy`` headers before any array is read).

        """
        p = Path(path)
        limits.check_file_size(p, "photon records file")
        try:
            declared = declared_npz_bytes(p)
        except MatgenError:
            raise
        except CORRUPT_ARCHIVE_ERRORS as exc:
            raise DataError(
                f"photon records file '{p}' is truncated or corrupt ({type(exc).__name__}: {exc})"
            ) from exc
        limits.check_count(
            max(declared, 1), "records_bytes", f"the memory the arrays of photon records file '{p}' declare"
        )
        try:
            z = read_npz_checked(p, "photon records file")  # declared shapes checked against limits first
            meta = json.loads(str(z["meta"]))
            arrays = {a: z[a] for a in _ARRAYS}
        except (
            OSError,
            KeyError,
            ValueError,
            TypeError,
            RecursionError,  # metadata JSON nested deeper than the parser's stack
            zipfile.BadZipFile,
            EOFError,
        ) as exc:
            raise DataError(f"photon records file '{p}' cannot be read: {exc}") from exc
        if not isinstance(meta, dict):
            raise DataError(
                f"photon records file '{p}': metadata is a JSON {type(meta).__name__}, not an object"
            )
        if meta.get("format") != _FORMAT:
            raise DataError(
                f"photon records file '{p}' has format {str(meta.get('format'))[:80]!r}, expected {_FORMAT}"
            )
        meta.pop("format")
        rec = cls(meta=meta, **arrays)
        rec._check(f"'{p}'")
        return rec

    def _check(self, where: str) -> None:
        """Check array dtypes and shapes and the metadata the reweighting reads (a file's, before use)."""
        for a in _ARRAYS:
            dt = getattr(self, a).dtype
            if dt != _DTYPES[a]:
                raise DataError(f"photon records {where}: field '{a}' has dtype {dt}, expected {_DTYPES[a]}")
        n = self.weight.size
        if self.path_mm.ndim != 2 or self.path_mm.shape[0] != n:
            raise DataError(f"photon records {where}: path_mm has shape {self.path_mm.shape} for {n} photons")
        if self.weighted_path_mm.shape != self.path_mm.shape:
            raise DataError(
                f"photon records {where}: weighted_path_mm has shape {self.weighted_path_mm.shape}"
            )
        for a in _ARRAYS[2:]:
            if getattr(self, a).shape != (n,):
                raise DataError(f"photon records {where}: field '{a}' has shape {getattr(self, a).shape}")
        for a in _ARRAYS[:-1]:
            v = getattr(self, a)
            bad = ~np.isfinite(v) | (v < 0)
            if a == "exit_cos":
                bad |= v > 1
            if bad.any():
                i = int(np.argwhere(bad)[0][0])
                allowed = "[0, 1]" if a == "exit_cos" else "finite, >= 0"
                raise DataError(
                    f"photon records {where}: field '{a}' of photon {i} is out of range ({allowed})"
                )
        if np.any(self.side > 2):
            raise DataError(f"photon records {where}: field 'side' holds values other than 0, 1 and 2")
        _check_meta(self.meta, where, self.path_mm.shape[1])

    @staticmethod
    def concatenate(parts) -> PhotonRecords:
        """Join records of runs on the same stack, reference absorption, seed and launch, in the order given.

        Runs covering consecutive photon ranges give exactly the records of one run over the whole range.
        """
        parts = list(parts)
        if not parts:
            raise ParameterError("concatenate needs at least one PhotonRecords")
        first = parts[0]
        keys = ("stack", "mu_a_ref", "seed", "incidence_cos", "launch_weight")
        for i, p in enumerate(parts[1:], start=1):
            for k in keys:
                if p.meta.get(k) != first.meta.get(k):
                    raise ParameterError(
                        f"photon records part {i} differs from part 0 in '{k}'; "
                        "only records of the same stack, absorption, seed and launch join"
                    )
        check_records_memory(
            sum(p.photons for p in parts), first.n_layers, f"the concatenation of {len(parts)} photon records"
        )
        arrays = {a: np.concatenate([getattr(p, a) for p in parts]) for a in _ARRAYS}
        meta = dict(first.meta)
        meta["photons"] = int(arrays["weight"].size)
        meta["photon_ranges"] = [[int(p.meta.get("first_photon", 0)), int(p.photons)] for p in parts]
        return PhotonRecords(meta=meta, **arrays)
