"""The lookup-table file: a grid over skin-parameter axes holding every table quantity. Units: nm, mm, 1/mm.

A table is stored as two files side by side:

``NAME.npz``
    A zip of ``.npy`` arrays written deterministically (fixed member order, fixed timestamps, no pickles), so
    the same content always gives the same bytes: ``header.json`` (a uint8 array holding the format version,
    axes, bands, working space, illuminant and the manifest as built), ``axis_<i>`` (float64 axis values in
    their natural units, fractions in [0, 1]) and ``q_<name>`` (float32, shape ``grid_shape + (C,)``).
``NAME.json``
    The manifest in readable form plus the SHA-256 of ``NAME.npz`` (``npz_sha256``). It adds build statistics
    (wall time, CPU count) that vary between runs and so are kept out of the ``.npz``.

Quantities (names fixed across matgen): spectral, last axis = bands: ``albedo_multiple`` (total diffuse
reflectance A at normal incidence), ``albedo_multiple_stderr``, ``shape_distance_mm`` (Christensen-Burley d,
mm), ``albedo_single``, ``mean_free_path_mm`` (mm), ``anisotropy``, ``fit_residual``; RGB, last axis 3 in the
table's working space: ``rgb_albedo_multiple``, ``rgb_shape_distance_mm`` (mm), ``rgb_albedo_single``,
``rgb_mean_free_path_mm`` (mm), ``rgb_fit_residual``; scalar: ``ior`` (last axis 1).
"""

from __future__ import annotations

import difflib
import hashlib
import io
import re
import zipfile
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

import numpy as np

from matgen.errors import ConfigError, MatgenError, ParameterError, TableError
from matgen.fsutil import atomic_path, atomic_write_text, strict_json
from matgen.limits import (
    check_count,
    check_file_size,
    check_table_entries,
    get_limit,
    loads_json_checked,
    read_text_limited,
)
from matgen.npzio import CORRUPT_ARCHIVE_ERRORS
from matgen.npzio import read_npz_checked as _read_npz_checked
from matgen.provenance import sha256_file
from matgen.spectra.bands import BandSet
from matgen.tables import interpolate

#: Version of the table file layout; :meth:`Table.load` refuses other versions.
TABLE_FORMAT_VERSION = 1

SPECTRAL_QUANTITIES = (
    "albedo_multiple",
    "albedo_multiple_stderr",
    "shape_distance_mm",
    "albedo_single",
    "mean_free_path_mm",
    "anisotropy",
    "fit_residual",
)
RGB_QUANTITIES = (
    "rgb_albedo_multiple",
    "rgb_shape_distance_mm",
    "rgb_albedo_single",
    "rgb_mean_free_path_mm",
    "rgb_fit_residual",
)
SCALAR_QUANTITIES = ("ior",)
SPACINGS = ("linear", "log")
_ZIP_DATE = (1980, 1, 1, 0, 0, 0)


@dataclass(frozen=True)
class Axis:
    """One grid axis of a table.

    Attributes
    ----------
    name : str
        A :class:`matgen.tissue.parameters.SkinParameters` field (e.g. ``melanin_fraction``).
    values : ndarray of float64, shape (n,)
        Strictly increasing grid values in the field's unit (volume fractions, shares in [0, 1], a scale).
    spacing : {"linear", "log"}
        The coordinate the axis is sampled and interpolated in (``log`` needs values > 0).

    """

    name: str
    values: np.ndarray
    spacing: str = "linear"

    def __post_init__(self):
        v = np.atleast_1d(np.asarray(self.values, dtype=np.float64)).copy()
        if v.ndim != 1 or v.size < 2:
            raise ParameterError(f"axis '{self.name}' has {v.size} value(s); an axis needs at least 2 points")
        if not np.all(np.isfinite(v)):
            raise ParameterError(f"axis '{self.name}' holds non-finite values {v.tolist()}")
        if np.any(np.diff(v) <= 0):
            i = int(np.argmax(np.diff(v) <= 0))
            raise ParameterError(
                f"axis '{self.name}' values must increase strictly: {v[i + 1]!r} follows {v[i]!r}"
            )
        if self.spacing not in SPACINGS:
            raise ParameterError(f"axis '{self.name}' spacing is {self.spacing!r}; use one of {SPACINGS}")
        if self.spacing == "log" and v[0] <= 0:
            raise ParameterError(
                f"axis '{self.name}' is log-spaced but starts at {v[0]!r}; log axes need values > 0"
            )
        v.setflags(write=False)
        object.__setattr__(self, "values", v)

    @property
    def coords(self) -> np.ndarray:
        """The axis in its interpolation coordinate (``log`` of the values for a log axis)."""
        return np.log(self.values) if self.spacing == "log" else self.values.copy()

    def transform(self, x: np.ndarray) -> np.ndarray:
        """Map values (already inside the axis range) to the interpolation coordinate."""
        return np.log(x) if self.spacing == "log" else np.asarray(x, dtype=np.float64)

    def to_dict(self) -> dict:
        """JSON form."""
        return {"name": self.name, "values": self.values.tolist(), "spacing": self.spacing}


def _expected_channels(name: str, n_bands: int) -> int | None:
    if name in SPECTRAL_QUANTITIES:
        return n_bands
    if name in RGB_QUANTITIES:
        return 3
    if name in SCALAR_QUANTITIES:
        return 1
    return None


def _write_npz_deterministic(path: Path, arrays: dict[str, np.ndarray]) -> None:
    """Write ``arrays`` as a deflated npz with fixed member order and timestamps, atomically."""
    with atomic_path(path) as tmp:
        with zipfile.ZipFile(tmp, "w", compression=zipfile.ZIP_DEFLATED) as zf:
            for key in arrays:
                buf = io.BytesIO()
                np.lib.format.write_array(buf, np.ascontiguousarray(arrays[key]), allow_pickle=False)
                info = zipfile.ZipInfo(f"{key}.npy", date_time=_ZIP_DATE)
                info.compress_type = zipfile.ZIP_DEFLATED
                info.external_attr = 0o644 << 16
                zf.writestr(info, buf.getvalue(), compresslevel=6)


def write_json_atomic(path: Path, obj) -> None:
    """Write ``obj`` as indented strict JSON (no NaN / Infinity) to ``path`` through a temporary file."""
    atomic_write_text(path, strict_json(obj, f"JSON file {path}", indent=1) + "\n")


def read_npz_checked(path: Path, what: str) -> dict:
    """Read a table or task ``.npz``, limits checked first (:func:`matgen.npzio.read_npz_checked`)."""
    return _read_npz_checked(path, what, error=TableError)


def manifest_path(path) -> Path:
    """Return the JSON manifest path beside a table file (``x.npz`` -> ``x.json``)."""
    return Path(path).with_suffix(".json")


@dataclass
class Table:
    """A lookup table over skin-parameter axes.

    Attributes
    ----------
    axes : list of Axis
        Grid axes in storage order.
    bands : BandSet
        Wavelength bands (nm) of the spectral quantities.
    quantities : dict of str to ndarray
        Name -> float32 array of shape ``grid_shape + (C,)``.
    working_space, illuminant : str
        RGB working space and illuminant of the ``rgb_*`` quantities.
    manifest : dict
        Spec, provenance and QA (JSON-ready); stored in the ``.npz`` and the ``.json``.
    build_stats : dict
        Run-dependent build statistics (wall time, CPUs); stored only in the ``.json`` manifest.

    """

    axes: list
    bands: BandSet
    quantities: dict
    working_space: str = "ACEScg"
    illuminant: str = "D65"
    manifest: dict = field(default_factory=dict)
    build_stats: dict = field(default_factory=dict)
    #: SHA-256 of the file bytes this table was parsed from (:meth:`load`), None for a table built in memory.
    source_sha256: str | None = field(default=None, compare=False, repr=False)

    def __post_init__(self):
        self.axes = list(self.axes)
        names = [a.name for a in self.axes]
        if len(set(names)) != len(names):
            raise TableError(f"table axes repeat a name: {names}")
        shape = self.grid_shape
        q = {}
        for name, arr in self.quantities.items():
            a = np.asarray(arr)
            if a.shape[:-1] != shape or a.ndim != len(shape) + 1:
                raise TableError(
                    f"table quantity '{name}' has shape {a.shape}; expected {shape} + (channels,)"
                )
            want = _expected_channels(name, len(self.bands))
            if want is not None and a.shape[-1] != want:
                raise TableError(f"table quantity '{name}' has {a.shape[-1]} channels; expected {want}")
            q[name] = np.ascontiguousarray(a, dtype=np.float32)
        self.quantities = q
        self._prepared = {}

    # ------------------------------------------------------------------ shape
    @property
    def grid_shape(self) -> tuple:
        """Number of grid values along each axis."""
        return tuple(a.values.size for a in self.axes)

    @property
    def axis_names(self) -> list:
        """Axis names in storage order."""
        return [a.name for a in self.axes]

    @property
    def n_points(self) -> int:
        """Number of grid points."""
        return int(np.prod(self.grid_shape))

    def grid_points(self) -> np.ndarray:
        """All grid points, shape (n_points, D), in C order of the grid (last axis fastest)."""
        mesh = np.meshgrid(*[a.values for a in self.axes], indexing="ij")
        return np.stack([m.ravel() for m in mesh], axis=1)

    # ------------------------------------------------------------------ lookup
    def _check_names(self, names) -> list:
        if names is None:
            return list(self.quantities)
        if isinstance(names, str):
            names = [names]
        names = list(names)
        for n in names:
            if n not in self.quantities:
                near = difflib.get_close_matches(n, list(self.quantities), n=1)
                hint = f"; did you mean '{near[0]}'?" if near else ""
                raise TableError(f"table has no quantity '{n}'{hint} (it holds {sorted(self.quantities)})")
        return names

    def _kernel_arrays(self, names: tuple):
        key = tuple(names)
        if key not in self._prepared:
            stacked = np.concatenate([self.quantities[n] for n in names], axis=-1)
            self._prepared[key] = interpolate.prepare([a.coords for a in self.axes], stacked)
        return self._prepared[key]

    def lookup(self, points, names=None, out_of_range: str = "clamp", *, backend: str = "numba"):
        """Interpolate quantities at parameter points (multilinear in each axis' coordinate).

        Parameters
        ----------
        points : array_like of float64, shape (N, D)
            Points in axis order (:attr:`axis_names`), in the axes' natural units (volume fractions etc.).
        names : str or sequence of str, optional
            Quantities to return (default all).
        out_of_range : {"clamp", "error"}
            ``clamp`` moves coordinates outside an axis onto its nearest end and counts such points;
            ``error`` raises :class:`~matgen.errors.ParameterError` naming the first such point and axis.
        backend : {"numba", "python"}
            The compiled kernel or its pure-Python twin.

        Returns
        -------
        values : dict of str to ndarray of float32, shape (N, C)
        n_clamped : int
            Number of points with at least one coordinate clamped.

        """
        if out_of_range not in ("clamp", "error"):
            raise ParameterError(f"out_of_range is {out_of_range!r}; use 'clamp' or 'error'")
        names = self._check_names(names)
        pts = np.asarray(points, dtype=np.float64)
        d = len(self.axes)
        if pts.ndim == 1 and d == 1:
            pts = pts[:, None]
        if pts.ndim != 2 or pts.shape[1] != d:
            raise ParameterError(
                f"lookup points have shape {pts.shape}; expected (N, {d}) in order {self.axis_names}"
            )
        finite = np.isfinite(pts)
        if not finite.all():
            row, col = np.argwhere(~finite)[0]
            raise ParameterError(
                f"lookup point {row}: {self.axes[col].name} is {float(pts[row, col])!r}; must be finite"
            )
        out_mask = np.zeros(pts.shape[0], dtype=bool)
        q = np.empty_like(pts)
        for i, ax in enumerate(self.axes):
            lo, hi = ax.values[0], ax.values[-1]
            col = pts[:, i]
            bad = (col < lo) | (col > hi)
            if bad.any() and out_of_range == "error":
                row = int(np.argmax(bad))
                raise ParameterError(
                    f"lookup point {row}: {ax.name} = {float(col[row])!r} lies outside the table axis "
                    f"[{float(lo)!r}, {float(hi)!r}] "
                    f"({int(bad.sum())} point(s) out of range on this axis)"
                )
            out_mask |= bad
            q[:, i] = ax.transform(np.clip(col, lo, hi))
        coords, offsets, strides, flat = self._kernel_arrays(tuple(names))
        out, _ = interpolate.run_prepared(
            coords, offsets, strides, flat, np.ascontiguousarray(q), backend=backend
        )
        result = {}
        start = 0
        for n in names:
            c = self.quantities[n].shape[-1]
            result[n] = out[:, start : start + c]
            start += c
        return result, int(out_mask.sum())

    def interpolation_error(self, points, name: str) -> np.ndarray:
        """Estimate of the multilinear interpolation error of quantity ``name`` at ``points`` (same unit).

        Along each axis the error of linear interpolation inside a cell of width h (in the axis coordinate:
        log for log axes) at fraction t is ``t (1 - t) h^2 |f''| / 2`` (the remainder of linear interpolation,
        e.g. Burden & Faires, Numerical Analysis, Thm. 3.3; ``BurdenFaires2011``); ``f''`` is estimated by the
        second divided difference of the grid values at the cell's two end nodes (the larger of the two), and
        the per-axis estimates add. Axes with only two nodes carry no curvature information and contribute 0.
        This is an estimate from the table itself, not a bound; it is 0 at grid nodes.

        Parameters
        ----------
        points : array_like, shape (N, D)
            Points in axis order, natural units (clamped into the grid).
        name : str
            Table quantity.

        Returns
        -------
        ndarray of float64, shape (N, C)

        """
        self._check_names([name])
        pts = np.asarray(points, dtype=np.float64).reshape(-1, len(self.axes))
        f = self.quantities[name].astype(np.float64)
        total = np.zeros((pts.shape[0], f.shape[-1]))
        coords = [a.coords for a in self.axes]
        for i, ax in enumerate(self.axes):
            c = coords[i]
            if c.size < 3:
                continue
            x = ax.transform(np.clip(pts[:, i], ax.values[0], ax.values[-1]))
            fm = np.moveaxis(f, i, 0)
            slope = np.diff(fm, axis=0) / np.diff(c).reshape((-1,) + (1,) * (fm.ndim - 1))
            d2 = 2.0 * np.diff(slope, axis=0) / (c[2:] - c[:-2]).reshape((-1,) + (1,) * (fm.ndim - 1))
            d2 = np.abs(d2)
            curv = np.concatenate(
                [d2[:1], d2, d2[-1:]], axis=0
            )  # |f''| at every node (ends: nearest interior)
            cell_curv = np.maximum(curv[:-1], curv[1:])  # per cell along axis i
            h = np.diff(c).reshape((-1,) + (1,) * (fm.ndim - 1))
            cell_err = cell_curv * h**2 / 8.0  # the maximum over the cell (t = 1/2)
            cell = np.clip(np.searchsorted(c, x, side="right") - 1, 0, c.size - 2)
            t = (x - c[cell]) / (c[cell + 1] - c[cell])
            # cell_err along the other axes at the query's position: multilinear over them (own cell along i)
            other = [coords[j] for j in range(len(self.axes)) if j != i]
            q_other = (
                np.stack(
                    [
                        self.axes[j].transform(
                            np.clip(pts[:, j], self.axes[j].values[0], self.axes[j].values[-1])
                        )
                        for j in range(len(self.axes))
                        if j != i
                    ],
                    axis=1,
                )
                if other
                else None
            )
            est = np.empty_like(total)
            for ci in np.unique(cell):
                sel = cell == ci
                grid_vals = cell_err[ci]  # shape: other axes + (C,)
                if other:
                    vals, _ = interpolate.multilinear(other, grid_vals, q_other[sel])
                    est[sel] = vals
                else:
                    est[sel] = grid_vals
            total += 4.0 * (t * (1.0 - t))[:, None] * est
        return total

    # ------------------------------------------------------------------ files
    def header(self) -> dict:
        """Return the JSON header stored inside the ``.npz``."""
        return {
            "format": "matgen-table",
            "format_version": TABLE_FORMAT_VERSION,
            "axes": [{"name": a.name, "spacing": a.spacing, "size": int(a.values.size)} for a in self.axes],
            "bands": self.bands.to_dict(),
            "working_space": self.working_space,
            "illuminant": self.illuminant,
            "quantities": {n: int(v.shape[-1]) for n, v in self.quantities.items()},
            "manifest": self.manifest,
        }

    def save(self, path, build_stats: dict | None = None) -> Path:
        """Write ``path`` (``.npz``) and its manifest ``.json`` beside it, each atomically.

        Parameters
        ----------
        path : str or Path
            Table file; must end in ``.npz``.
        build_stats : dict, optional
            Run-dependent statistics recorded only in the ``.json`` manifest (default :attr:`build_stats`).

        Returns
        -------
        Path
            The table file written.

        """
        path = Path(path)
        if path.suffix != ".npz":
            raise TableError(f"table file {path} must end in .npz (the manifest goes beside it as .json)")
        if not path.parent.exists():
            raise TableError(f"cannot write table {path}: folder {path.parent} does not exist")
        header = strict_json(self.header(), f"header of table {path}", sort_keys=True, separators=(",", ":"))
        header = header.encode("utf-8")
        arrays = {"header.json": np.frombuffer(header, dtype=np.uint8)}
        for i, a in enumerate(self.axes):
            arrays[f"axis_{i}"] = a.values
        for n in sorted(self.quantities):
            arrays[f"q_{n}"] = self.quantities[n]
        # the old manifest goes first: a reader (or a kill) between the two renames then finds the new table
        # without a manifest (a complete table: the .npz holds its own header), never with the old one
        side = manifest_path(path)
        if side.is_dir():
            raise TableError(f"cannot write the manifest of {path}: {side} is a folder")
        try:
            side.unlink()
        except FileNotFoundError:
            pass
        except OSError as exc:
            raise TableError(f"cannot replace the manifest {side}: {exc.strerror or exc}") from None
        _write_npz_deterministic(path, arrays)
        doc = {k: v for k, v in self.header().items() if k != "manifest"}
        doc["npz_file"] = path.name
        doc["npz_sha256"] = sha256_file(path)
        doc["npz_bytes"] = path.stat().st_size
        doc["manifest"] = self.manifest
        doc["build_stats"] = self.build_stats if build_stats is None else build_stats
        write_json_atomic(manifest_path(path), doc)
        return path

    @classmethod
    def load(cls, path, verify: bool = True) -> Table:
        """Read a table written by :meth:`save`.

        Parameters
        ----------
        path : str or Path
            The ``.npz`` table file.
        verify : bool
            If the ``.json`` manifest is beside it, check the recorded SHA-256 of the ``.npz``.

        Raises
        ------
        TableError
            Missing, truncated or corrupt file, checksum mismatch, or another format version.

        """
        path = Path(path)
        if not path.is_file():
            raise TableError(f"table file {path} does not exist")
        data = _read_once(path)
        digest = hashlib.sha256(data).hexdigest()
        side = manifest_path(path)
        side_doc = None
        if side.is_file():
            try:
                side_doc = loads_json_checked(
                    read_text_limited(side, "table manifest"), f"table manifest {side}"
                )
            except ConfigError as exc:  # unreadable, not UTF-8, a non-finite number (a LimitError passes)
                raise TableError(str(exc)) from exc
            except (ValueError, RecursionError) as exc:  # RecursionError: nesting too deep to parse
                raise TableError(f"table manifest {side} is not valid JSON ({exc})") from exc
            if not isinstance(side_doc, dict):
                raise TableError(
                    f"table manifest {side} must hold a JSON object, not {type(side_doc).__name__}"
                )
            if verify and side_doc.get("npz_sha256") not in (None, digest):
                raise TableError(
                    f"table file {path} does not match the SHA-256 recorded in {side.name}: "
                    "the file is corrupt or was replaced without its manifest"
                )
        try:
            header, z = read_table_archive(data, path)
            axes = [Axis(a["name"], z[f"axis_{i}"], a["spacing"]) for i, a in enumerate(header["axes"])]
            quantities = {n: z[f"q_{n}"] for n in header["quantities"]}
            manifest = header.get("manifest", {})
            if not isinstance(manifest, dict):
                raise TableError(f"table {path}: the header's manifest is not a JSON object")
            build_stats = side_doc.get("build_stats", {}) if side_doc is not None else {}
            if not isinstance(build_stats, dict):
                raise TableError(f"table manifest {side}: build_stats is not a JSON object")
            return cls(
                axes=axes,
                bands=BandSet.from_dict(header["bands"]),
                quantities=quantities,
                working_space=str(header["working_space"]),
                illuminant=str(header["illuminant"]),
                manifest=dict(manifest),
                build_stats=dict(build_stats),
                source_sha256=digest,
            )
        except MatgenError:
            raise
        except CORRUPT_ARCHIVE_ERRORS as exc:
            raise TableError(
                f"table file {path} is truncated or corrupt ({type(exc).__name__}: {exc})"
            ) from exc


def _read_once(path: Path) -> bytes:
    """Return the bytes of a table file, read once after its size is checked (to hash and parse)."""
    size = check_file_size(path, "table")
    try:
        with open(path, "rb") as fh:
            data = fh.read(size + 1)
    except OSError as exc:
        raise TableError(f"cannot read table file {path}: {exc.strerror or exc}") from None
    if len(data) > size:
        raise TableError(f"table file {path} grew while it was read; it is being written by another process")
    return data


_MEMBER = re.compile(r"^(header\.json|axis_(\d{1,3})|q_([A-Za-z0-9_]{1,64}))\.npy$")


def _member_shape(zf: zipfile.ZipFile, info: zipfile.ZipInfo, path) -> tuple:
    """(shape, dtype) of a member's ``.npy`` header; its data is not read."""
    with zf.open(info) as fh:
        version = np.lib.format.read_magic(fh)
        fmt = np.lib.format
        read = fmt.read_array_header_1_0 if version == (1, 0) else fmt.read_array_header_2_0
        shape, _, dtype = read(fh)
    return tuple(int(n) for n in shape), dtype


def read_table_archive(data: bytes, path) -> tuple:
    """Parse the bytes of a table ``.npz``: every member is known and sized by the header before it is read.

    The member list must be exactly ``header.json``, ``axis_<i>`` for each axis of the header and
    ``q_<name>`` for each quantity it names (no other, no repeat); each declared shape must be the one the
    header implies (axis sizes, grid x channels) and the whole within the ``table_entries`` ceiling, so a
    small archive cannot make the reader allocate gigabytes. Returns ``(header, arrays)``.

    Raises
    ------
    TableError
        Naming the archive and the member at fault.
    LimitError
        When the grid the header declares exceeds a ceiling.

    """
    with zipfile.ZipFile(io.BytesIO(data)) as zf:
        infos = zf.infolist()
        names = [i.filename for i in infos]
        if len(names) != len(set(names)):
            raise TableError(f"table file {path} repeats an archive member")
        for n in names:
            if not _MEMBER.match(n):
                raise TableError(
                    f"table file {path} holds an unknown member '{n}'; a table holds header.json, "
                    "axis_<i> and q_<quantity> arrays only"
                )
        by_name = {i.filename: i for i in infos}
        if "header.json.npy" not in by_name:
            raise TableError(f"{path} is not a matgen table file (no header.json member)")
        hshape, hdtype = _member_shape(zf, by_name["header.json.npy"], path)
        if len(hshape) != 1 or hdtype != np.uint8 or hshape[0] > get_limit("text_bytes"):
            raise TableError(f"table file {path}: header.json is not a byte string within the text ceiling")
        with zf.open(by_name["header.json.npy"]) as fh:
            raw = np.lib.format.read_array(fh, allow_pickle=False)
        try:
            header = loads_json_checked(bytes(raw).decode("utf-8"), f"table file {path} header")
        except (ConfigError, ValueError, RecursionError):  # UnicodeDecodeError is a ValueError
            raise TableError(f"{path} is not a matgen table file (its header is not JSON)") from None
        if not isinstance(header, dict) or header.get("format") != "matgen-table":
            raise TableError(f"{path} is not a matgen table file (its header is not a matgen table header)")
        if header.get("format_version") != TABLE_FORMAT_VERSION:
            raise TableError(
                f"table {path} has format version {header.get('format_version')}; this matgen reads "
                f"version {TABLE_FORMAT_VERSION}; rebuild it with 'matgen table build'"
            )
        expected = _expected_members(header, path)
        if set(expected) != set(by_name):
            extra, missing = sorted(set(by_name) - set(expected)), sorted(set(expected) - set(by_name))
            raise TableError(
                f"table file {path}: members do not match its header (unexpected {extra}, missing {missing})"
            )
        out = {"header.json": raw}
        for member, shape in expected.items():
            if member == "header.json.npy":
                continue
            got, dtype = _member_shape(zf, by_name[member], path)
            if got != shape or dtype.kind != "f" or dtype.itemsize > 8:
                raise TableError(
                    f"table file {path}: array '{member}' declares shape {got} ({dtype}); its header implies "
                    f"{shape} of floats"
                )
            with zf.open(by_name[member]) as fh:
                out[member[:-4]] = np.lib.format.read_array(fh, allow_pickle=False)
    return header, out


def _expected_members(header: dict, path) -> dict:
    """Member name -> declared shape, from a table header (axis sizes, channels); ceilings checked."""
    axes, quantities = header.get("axes"), header.get("quantities")
    if not isinstance(axes, list) or not isinstance(quantities, dict) or not axes or len(axes) > 64:
        raise TableError(f"table file {path}: the header's axes or quantities are malformed")
    sizes = []
    for i, a in enumerate(axes):
        size = a.get("size") if isinstance(a, dict) else None
        if not (isinstance(size, int) and not isinstance(size, bool) and 1 <= size):
            raise TableError(f"table file {path}: axis {i} of the header has no valid size")
        check_count(size, "axis_points", f"the size of axis {i} of table '{path}'")
        sizes.append(size)
    grid = 1
    for n in sizes:
        grid *= n
    out = {"header.json.npy": None}
    out.update({f"axis_{i}.npy": (n,) for i, n in enumerate(sizes)})
    total = 0
    for name, channels in quantities.items():
        if not (isinstance(channels, int) and not isinstance(channels, bool) and 1 <= channels <= 100000):
            raise TableError(f"table file {path}: quantity '{name}' declares {channels!r} channels")
        total += grid * channels
        out[f"q_{name}.npy"] = tuple(sizes) + (channels,)
    check_table_entries(max(total, 1), f"table '{path}' (all quantities)")
    return out


def lut_files() -> Path:
    """Folder of the shipped tables and their specs.

    Installed, this is the package ``matgen.lut`` (the repository's top-level ``lut/`` folder, mapped by
    ``pyproject.toml``). Imported from a source checkout (``python -m pytest`` in the repository puts the
    checkout's ``matgen/`` first on ``sys.path``), ``matgen.lut`` does not exist as a subfolder, and the
    checkout's ``lut/`` beside ``matgen/`` is used instead.
    """
    try:
        return Path(str(resources.files("matgen.lut")))
    except ModuleNotFoundError:
        checkout = Path(__file__).resolve().parents[2] / "lut"
        if (checkout / "__init__.py").is_file():
            return checkout
        raise TableError(
            "the shipped tables cannot be found: neither the package matgen.lut is installed nor is there "
            f"a lut/ folder at {checkout}; reinstall matgen with 'pip install .'"
        ) from None


def default_table_path() -> Path:
    """Path of the shipped default table (``default.npz`` in :func:`lut_files`)."""
    return lut_files() / "default.npz"


def load_default_table() -> Table:
    """Load the shipped default table (built from ``lut/specs/default.toml``)."""
    path = default_table_path()
    if not path.is_file():
        raise TableError(
            f"the default table {path.name} is missing from {path.parent}; "
            "build one with 'matgen table build' and pass it explicitly"
        )
    return Table.load(path)
