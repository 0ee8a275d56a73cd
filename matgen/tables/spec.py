"""Table build specs (TOML): the grid axes, bands, region, photons and seed of a lookup table. Units: nm, mm.

A spec file looks like this (every key shown; ``axes`` keep the order in which they are written)::

    format_version = 1
    name = "default"
    description = "what the table is for"
    region = "cheek"                 # matgen.tissue.presets name: the parameters the axes do not set
    packaging = "on"                 # pigment packaging correction of matgen.tissue.optics
    photons_per_band = 100000        # photon packets of each scattering simulation
    seed = 20261201                  # spec seed; each task's seed derives from it and the task's identity
    working_space = "ACEScg"         # RGB working space of the rgb_* quantities
    illuminant = "D65"
    targets = ["openpbr"]            # renderer targets the table is meant for (matgen.targets names)

    [bands]                          # either start_nm/stop_nm/step_nm[/width_nm] or centres_nm = [...]
    start_nm = 300.0
    stop_nm = 1000.0
    step_nm = 10.0

    [transport]
    ring_edges_mm = [0.0, 0.01, ...] # optional; default matgen.transport.simulate.default_ring_edges_mm()
    reference_split = ["melanin_fraction"]   # optional: axes whose values each get their own reference run
    target_relative_stderr = 0.01    # optional: add photons until stderr(A)/A <= this at every grid point
    max_photons_per_band = 2000000   # optional: ceiling of that (default 20 x photons_per_band)

    [axes.melanin_fraction]          # a SkinParameters field
    spacing = "log"                  # "linear" or "log"
    start = 0.002                    # with stop and count, or give values = [...]
    stop = 0.43
    count = 9

Misspelt or unknown keys raise :class:`~matgen.errors.ConfigError` naming the key and the nearest valid one.
"""

from __future__ import annotations

import difflib
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from matgen import limits
from matgen.errors import ConfigError, MatgenError
from matgen.provenance import hash_json
from matgen.spectra.bands import BandSet
from matgen.tables.store import Axis

#: Version of the spec layout this matgen reads.
SPEC_FORMAT_VERSION = 1

_TOP_KEYS = {
    "format_version",
    "name",
    "description",
    "region",
    "packaging",
    "photons_per_band",
    "seed",
    "working_space",
    "illuminant",
    "targets",
    "bands",
    "transport",
    "axes",
}
_REQUIRED_TOP = ("photons_per_band", "seed", "bands", "axes")
_BAND_KEYS = {"start_nm", "stop_nm", "step_nm", "width_nm", "centres_nm"}
_TRANSPORT_KEYS = {"ring_edges_mm", "reference_split", "target_relative_stderr", "max_photons_per_band"}
_AXIS_KEYS = {"spacing", "start", "stop", "count", "values"}


def _nearest(key: str, valid) -> str:
    near = difflib.get_close_matches(key, sorted(valid), n=1, cutoff=0.5)
    return f"; did you mean '{near[0]}'?" if near else f"; valid keys: {', '.join(sorted(valid))}"


def _check_keys(table: dict, valid, where: str, source: str) -> None:
    for key in table:
        if key not in valid:
            raise ConfigError(f"{source}: unknown key '{key}' in {where}{_nearest(key, valid)}")


def _number(value, where: str, source: str, integer: bool = False):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ConfigError(f"{source}: {where} is {value!r}; expected a number")
    if integer and not isinstance(value, int):
        raise ConfigError(f"{source}: {where} is {value!r}; expected a whole number")
    if not np.isfinite(value):
        raise ConfigError(f"{source}: {where} is {value!r}; must be finite")
    return value


def _check_colour_names(space: str, illuminant: str, source: str) -> None:
    """Refuse a working space or illuminant that colour-science does not know, before any task runs."""
    try:
        from matgen.color.colorimetry import resolve_illuminant, resolve_space
    except ImportError:  # pragma: no cover - colour-science missing: the first RGB quantity says so
        return
    for key, value, resolve in (
        ("working_space", space, resolve_space),
        ("illuminant", illuminant, resolve_illuminant),
    ):
        try:
            resolve(value)
        except MatgenError as exc:
            raise ConfigError(f"{source}: {key}: {exc}") from None


def _check_records(max_photons: int, source: str) -> None:
    """Refuse a photon count whose records would exceed the ``records_bytes`` ceiling in every task."""
    try:
        from matgen.tissue.layers import LAYER_NAMES
        from matgen.transport.records import check_records_memory
    except ImportError:  # pragma: no cover - tissue model not installed
        return
    try:
        check_records_memory(max_photons, len(LAYER_NAMES), "the photon records of one band of each task")
    except MatgenError as exc:
        raise ConfigError(f"{source}: photons_per_band / max_photons_per_band: {exc}") from None


def skin_parameter_fields() -> tuple | None:
    """Names of the SkinParameters fields, or None where the tissue model is not installed."""
    try:
        import dataclasses

        from matgen.tissue.parameters import SkinParameters
    except ImportError:
        return None
    return tuple(f.name for f in dataclasses.fields(SkinParameters))


def renderer_targets() -> tuple | None:
    """Names of the renderer targets of :mod:`matgen.targets`, or None where it is not installed."""
    try:
        from matgen.targets import TARGETS
    except ImportError:
        return None
    return tuple(TARGETS)


@dataclass(frozen=True)
class TableSpec:
    """A parsed, validated table build spec (see the module docstring for the file layout).

    Attributes
    ----------
    axes : tuple of Axis
        Grid axes in the file's order.
    bands : BandSet
        Bands in nm.
    photons_per_band : int
        Photon packets of each scattering simulation.
    seed : int
        Spec seed (>= 0).
    region, packaging, working_space, illuminant, name, description : str
    targets : tuple of str
    ring_edges_mm : ndarray or None
        Radial ring edges in mm (None = the transport default).
    reference_split : tuple of str
        Axes whose values each get their own reference simulation.
    target_relative_stderr : float or None
        Each task adds photons (in further runs of the same photon stream) until the relative standard error
        of A is at most this at every grid point of the task, or ``max_photons_per_band`` is reached. None: a
        fixed ``photons_per_band``.
    max_photons_per_band : int
        Photon ceiling of one task when ``target_relative_stderr`` is set.
    source : str
        Where the spec came from (a file name), for messages only; not part of the spec's identity.

    """

    axes: tuple
    bands: BandSet
    photons_per_band: int
    seed: int
    region: str = "cheek"
    packaging: str = "on"
    working_space: str = "ACEScg"
    illuminant: str = "D65"
    targets: tuple = ()
    name: str = ""
    description: str = ""
    ring_edges_mm: np.ndarray | None = None
    reference_split: tuple = ()
    target_relative_stderr: float | None = None
    max_photons_per_band: int = 0
    source: str = field(default="<spec>", compare=False)

    @property
    def axis_names(self) -> list:
        """Axis names in order."""
        return [a.name for a in self.axes]

    @property
    def grid_shape(self) -> tuple:
        """Grid size along each axis."""
        return tuple(a.values.size for a in self.axes)

    def to_dict(self) -> dict:
        """Canonical JSON form: everything that determines the table (not :attr:`source`)."""
        return {
            "format_version": SPEC_FORMAT_VERSION,
            "name": self.name,
            "description": self.description,
            "region": self.region,
            "packaging": self.packaging,
            "photons_per_band": int(self.photons_per_band),
            "seed": int(self.seed),
            "working_space": self.working_space,
            "illuminant": self.illuminant,
            "targets": list(self.targets),
            "bands": self.bands.to_dict(),
            "transport": {
                "ring_edges_mm": None
                if self.ring_edges_mm is None
                else np.asarray(self.ring_edges_mm).tolist(),
                "reference_split": list(self.reference_split),
                "target_relative_stderr": self.target_relative_stderr,
                "max_photons_per_band": int(self.max_photons_per_band),
            },
            "axes": [a.to_dict() for a in self.axes],
        }

    @classmethod
    def from_dict(cls, d: dict, source: str = "<job>") -> TableSpec:
        """Inverse of :meth:`to_dict`."""
        try:
            t = d["transport"]
            return cls(
                axes=tuple(Axis(a["name"], a["values"], a["spacing"]) for a in d["axes"]),
                bands=BandSet.from_dict(d["bands"]),
                photons_per_band=int(d["photons_per_band"]),
                seed=int(d["seed"]),
                region=d["region"],
                packaging=d["packaging"],
                working_space=d["working_space"],
                illuminant=d["illuminant"],
                targets=tuple(d["targets"]),
                name=d["name"],
                description=d["description"],
                ring_edges_mm=None if t["ring_edges_mm"] is None else np.asarray(t["ring_edges_mm"], float),
                reference_split=tuple(t["reference_split"]),
                target_relative_stderr=t["target_relative_stderr"],
                max_photons_per_band=int(t["max_photons_per_band"]),
                source=source,
            )
        except (KeyError, TypeError) as exc:
            raise ConfigError(f"{source}: stored spec is incomplete ({exc})") from exc

    def spec_hash(self) -> str:
        """SHA-256 of :meth:`to_dict`."""
        return hash_json(self.to_dict())


def _parse_axis(name: str, body, source: str) -> Axis:
    where = f"[axes.{name}]"
    if not isinstance(body, dict):
        raise ConfigError(f"{source}: {where} must be a table with spacing and values (or start/stop/count)")
    _check_keys(body, _AXIS_KEYS, where, source)
    spacing = body.get("spacing", "linear")
    if spacing not in ("linear", "log"):
        raise ConfigError(f"{source}: {where} spacing is {spacing!r}; use 'linear' or 'log'")
    if "values" in body:
        if any(k in body for k in ("start", "stop", "count")):
            raise ConfigError(f"{source}: {where} gives both values and start/stop/count; give one form")
        vals = body["values"]
        if not isinstance(vals, list):
            raise ConfigError(f"{source}: {where} values must be a list of numbers")
        values = np.array([_number(v, f"{where} values", source) for v in vals], dtype=np.float64)
    else:
        missing = [k for k in ("start", "stop", "count") if k not in body]
        if missing:
            raise ConfigError(
                f"{source}: {where} needs values = [...] or start, stop and count (missing {missing})"
            )
        start = float(_number(body["start"], f"{where} start", source))
        stop = float(_number(body["stop"], f"{where} stop", source))
        count = _number(body["count"], f"{where} count", source, integer=True)
        if count < 2:
            raise ConfigError(f"{source}: {where} count is {count}; an axis needs at least 2 points")
        limits.check_count(count, "axis_points", f"the point count of {where} of {source}")
        if spacing == "log":
            if start <= 0 or stop <= 0:
                raise ConfigError(f"{source}: {where} is log-spaced; start and stop must be > 0")
            values = np.geomspace(start, stop, count)
            values[0], values[-1] = start, stop
        else:
            values = np.linspace(start, stop, count)
    try:
        return Axis(name, values, spacing)
    except MatgenError as exc:
        raise ConfigError(f"{source}: {where}: {exc}") from exc


def parse_spec(doc: dict, source: str = "<spec>") -> TableSpec:
    """Validate a spec document (the parsed TOML) and return a :class:`TableSpec`.

    Raises
    ------
    ConfigError
        Unknown keys (naming the nearest valid one), missing keys, wrong types, axes with fewer than two
        points or non-increasing values, unknown axis names.

    """
    try:
        return _parse_spec(doc, source)
    except MatgenError:
        raise
    except (TypeError, ValueError, AttributeError, OverflowError) as exc:
        raise ConfigError(f"{source}: malformed spec ({type(exc).__name__}: {exc})") from exc


def _parse_spec(doc: dict, source: str) -> TableSpec:
    if not isinstance(doc, dict):
        raise ConfigError(f"{source}: a spec must be a TOML table")
    _check_keys(doc, _TOP_KEYS, "the top level", source)
    missing = [k for k in _REQUIRED_TOP if k not in doc]
    if missing:
        raise ConfigError(f"{source}: missing required key(s) {missing}")
    version = doc.get("format_version", SPEC_FORMAT_VERSION)
    if version != SPEC_FORMAT_VERSION:
        raise ConfigError(f"{source}: format_version is {version!r}; this matgen reads {SPEC_FORMAT_VERSION}")
    photons = _number(doc["photons_per_band"], "photons_per_band", source, integer=True)
    try:
        photons = limits.check_photons(photons)
    except MatgenError as exc:
        raise ConfigError(f"{source}: photons_per_band: {exc}") from exc
    seed = _number(doc["seed"], "seed", source, integer=True)
    if seed < 0:
        raise ConfigError(f"{source}: seed is {seed}; must be >= 0")
    strings = {}
    for key, default in (
        ("region", "cheek"),
        ("packaging", "on"),
        ("working_space", "ACEScg"),
        ("illuminant", "D65"),
        ("name", ""),
        ("description", ""),
    ):
        v = doc.get(key, default)
        if not isinstance(v, str):
            raise ConfigError(f"{source}: {key} is {v!r}; expected a string")
        strings[key] = v
    _check_colour_names(strings["working_space"], strings["illuminant"], source)
    targets = doc.get("targets", [])
    if not isinstance(targets, list) or not all(isinstance(t, str) for t in targets):
        raise ConfigError(f"{source}: targets must be a list of target names")
    known_targets = renderer_targets()
    if known_targets is not None:
        for t in targets:
            if t not in known_targets:
                raise ConfigError(f"{source}: unknown target '{t}' in targets{_nearest(t, known_targets)}")

    bands_doc = doc["bands"]
    if not isinstance(bands_doc, dict):
        raise ConfigError(f"{source}: [bands] must be a table")
    _check_keys(bands_doc, _BAND_KEYS, "[bands]", source)
    try:
        if "centres_nm" in bands_doc:
            if set(bands_doc) - {"centres_nm"}:
                raise ConfigError(f"{source}: [bands] gives centres_nm and start/stop/step; give one form")
            bands = BandSet.parse(",".join(repr(float(v)) for v in bands_doc["centres_nm"]))
        else:
            missing = [k for k in ("start_nm", "stop_nm", "step_nm") if k not in bands_doc]
            if missing:
                raise ConfigError(f"{source}: [bands] needs start_nm, stop_nm, step_nm (missing {missing})")
            bands = BandSet.regular(
                float(_number(bands_doc["start_nm"], "[bands] start_nm", source)),
                float(_number(bands_doc["stop_nm"], "[bands] stop_nm", source)),
                float(_number(bands_doc["step_nm"], "[bands] step_nm", source)),
                None
                if "width_nm" not in bands_doc
                else float(_number(bands_doc["width_nm"], "width_nm", source)),
            )
    except ConfigError:
        raise
    except MatgenError as exc:
        raise ConfigError(f"{source}: [bands]: {exc}") from exc

    transport = doc.get("transport", {})
    if not isinstance(transport, dict):
        raise ConfigError(f"{source}: [transport] must be a table")
    _check_keys(transport, _TRANSPORT_KEYS, "[transport]", source)
    ring = transport.get("ring_edges_mm")
    if ring is not None:
        ring = np.array([_number(v, "[transport] ring_edges_mm", source) for v in ring], dtype=np.float64)
        if ring.size < 2 or ring[0] != 0 or np.any(np.diff(ring) <= 0):
            raise ConfigError(f"{source}: [transport] ring_edges_mm must start at 0 and increase strictly")

    axes_doc = doc["axes"]
    if not isinstance(axes_doc, dict) or not axes_doc:
        raise ConfigError(f"{source}: [axes] must hold at least one [axes.<field>] table")
    fields = skin_parameter_fields()
    axes = []
    for name, body in axes_doc.items():
        if fields is not None and name not in fields:
            raise ConfigError(f"{source}: [axes.{name}] is not a skin parameter{_nearest(name, fields)}")
        axes.append(_parse_axis(name, body, source))
    split = transport.get("reference_split", [])
    if not isinstance(split, list):
        raise ConfigError(f"{source}: [transport] reference_split must be a list of axis names")
    for s in split:
        if s not in axes_doc:
            raise ConfigError(
                f"{source}: [transport] reference_split names '{s}', which is not an axis"
                f"{_nearest(str(s), axes_doc)}"
            )
    target = transport.get("target_relative_stderr")
    if target is not None:
        target = float(_number(target, "[transport] target_relative_stderr", source))
        if not 0 < target < 1:
            raise ConfigError(f"{source}: [transport] target_relative_stderr is {target}; must lie in (0, 1)")
    max_photons = transport.get(
        "max_photons_per_band", 20 * int(photons) if target is not None else int(photons)
    )
    max_photons = _number(max_photons, "[transport] max_photons_per_band", source, integer=True)
    if max_photons < photons:
        raise ConfigError(
            f"{source}: [transport] max_photons_per_band {max_photons} is below photons_per_band {photons}"
        )
    try:
        limits.check_photons(max_photons)
    except MatgenError as exc:
        raise ConfigError(f"{source}: [transport] max_photons_per_band: {exc}") from exc
    n_points = 1
    for a in axes:
        n_points *= int(a.values.size)  # Python ints: no overflow
    limits.check_table_entries(n_points * len(bands), f"the grid of {source}")
    _check_records(int(max_photons), source)
    return TableSpec(
        axes=tuple(axes),
        bands=bands,
        photons_per_band=int(photons),
        seed=int(seed),
        targets=tuple(targets),
        ring_edges_mm=ring,
        reference_split=tuple(split),
        target_relative_stderr=target,
        max_photons_per_band=int(max_photons),
        source=source,
        **strings,
    )


def load_spec(path) -> TableSpec:
    """Read and validate a spec file (TOML).

    Parameters
    ----------
    path : str or Path
        The ``.toml`` spec.

    Raises
    ------
    ConfigError
        Unreadable file, TOML syntax error, or any problem :func:`parse_spec` reports.

    """
    path = Path(path)
    text = limits.read_text_limited(path, "table spec")
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path.name}: not valid TOML ({exc})") from exc
    except RecursionError:  # nesting deeper than the parser's stack
        raise ConfigError(f"{path.name}: TOML nested too deeply to be a table spec") from None
    return parse_spec(doc, source=path.name)
