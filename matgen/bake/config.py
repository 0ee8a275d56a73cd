"""Material config: which pigment maps feed which skin parameter, and what a bake writes.

A material config is a TOML file validated against ``matgen/bake/schema/material_config.schema.json``
(format version 1). Parameter names are :class:`~matgen.tissue.parameters.SkinParameters` field names and
must be axes of the lookup table; a parameter comes either from a map (``map``, ``channel``, ``encoding``,
``range``) or is a constant (``value``). Map paths are relative to the config's folder and may not leave it
unless ``allow_outside=True`` is given explicitly. Units: parameter values in the field's own unit
(fractions in [0, 1], thickness scale dimensionless); scene lengths through ``metres_per_scene_unit``.

Example (the documented one is ``scenes/low_tide_lantern/material.toml``)::

    format_version = 1
    name = "pilot_face"
    [table]
    path = "default"
    [parameters.melanin_fraction]
    map = "maps/melanin.<UDIM>.exr"
    encoding = "linear"
    range = [0.01, 0.30]
    [parameters.oxygen_saturation]
    value = 0.75
"""

from __future__ import annotations

import json
import math
import tomllib
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

import jsonschema

from matgen.bake.config_messages import schema_error_message
from matgen.errors import ConfigError
from matgen.fsutil import resolve_inside
from matgen.limits import not_a_file, read_text_limited

#: Token in a map name that stands for the UDIM tile number (1001 + u + 10 v).
UDIM_TOKEN = "<UDIM>"

#: Spectral quantities a bake writes by default (one EXR stack each).
DEFAULT_SPECTRAL = (
    "albedo_multiple",
    "albedo_single",
    "mean_free_path_mm",
    "shape_distance_mm",
    "fit_residual",
)
#: RGB quantities (table working space) written by default.
DEFAULT_RGB = ("albedo_multiple", "mean_free_path_mm", "shape_distance_mm")
#: Renderer targets written by default.
DEFAULT_TARGETS = ("openpbr",)
#: Single-channel camera passes written by default (built-in names of :func:`matgen.color.pass_weights`).
DEFAULT_PASSES = ("uv365", "nir850")
#: Default band subset of the spectral stacks: 31 visible bands (centres 400-700 nm every 10 nm).
DEFAULT_SPECTRAL_BANDS = "400:700:10"

#: Allowed metres per scene unit, m: a micrometre to a kilometre per unit (scenes in mm, cm, inches and m
#: lie well inside; outside, mean free paths in scene units overflow half floats or round to zero).
METRES_PER_SCENE_UNIT_RANGE = (1e-6, 1e3)
#: Largest magnitude of any number in a config (parameter values, encoding ranges), in the field's unit.
#: Every skin parameter is a fraction, a thickness scale or a radius of order 1; 1e6 leaves room for any unit.
MAX_CONFIG_MAGNITUDE = 1e6
#: Smallest span hi - lo of a linear encoding range, in the field's unit: below it, neighbouring map values
#: (half floats step 2^-11 near 1) decode to the same parameter value.
MIN_RANGE_SPAN = 1e-9
#: Largest whole number a config may hold (channel indices, UDIM tiles): a C int.
MAX_CONFIG_INT = 2**31 - 1


def _schema() -> dict:
    text = resources.files("matgen.bake").joinpath("schema", "material_config.schema.json").read_text()
    return json.loads(text)


@dataclass(frozen=True)
class ParameterSource:
    """Where one skin parameter comes from.

    Attributes
    ----------
    name : str
        SkinParameters field name (a table axis).
    value : float or None
        Constant value (field's unit) when no map is given.
    map_pattern : Path or None
        Resolved map path; contains ``<UDIM>`` for a UDIM set.
    map_text : str or None
        The map path as written in the config (relative).
    channel : int
        Channel of the map that holds the parameter.
    encoding : str
        ``"linear"`` (v in [0, 1] -> lo + v (hi - lo)) or ``"fraction"`` (v itself, in [0, 1]).
    range : tuple of float
        (lo, hi) of the linear encoding in the field's unit; (0, 1) for ``"fraction"``.

    """

    name: str
    value: float | None = None
    map_pattern: Path | None = None
    map_text: str | None = None
    channel: int = 0
    encoding: str = "linear"
    range: tuple = (0.0, 1.0)

    @property
    def is_map(self) -> bool:
        """True when the parameter is read from a map."""
        return self.map_pattern is not None

    @property
    def is_udim(self) -> bool:
        """True when the map is a UDIM set."""
        return self.map_text is not None and UDIM_TOKEN in self.map_text

    def decode(self, v):
        """Map values (float32 array) -> parameter values in the field's unit (float64)."""
        import numpy as np

        v = np.asarray(v, dtype=np.float64)
        if self.encoding == "fraction":
            return v
        lo, hi = self.range
        return lo + v * (hi - lo)


@dataclass(frozen=True)
class OutputOptions:
    """What a bake writes. See the schema for each field's meaning."""

    spectral: tuple = DEFAULT_SPECTRAL
    spectral_bands: str = DEFAULT_SPECTRAL_BANDS
    rgb: tuple = DEFAULT_RGB
    targets: tuple = DEFAULT_TARGETS
    passes: tuple = DEFAULT_PASSES
    qa: bool = True
    materialx: bool = True
    mitsuba_scene: bool = False
    pixel_type: str = "half"
    compression: str = "zip"
    texture: bool = False
    albedo_convention: str = "spec_remap"
    anisotropy: str = "hg"


@dataclass(frozen=True)
class BakeConfig:
    """A validated material config.

    Attributes
    ----------
    name : str
        Material name.
    base_dir : Path
        Folder relative paths are resolved against (the config's folder).
    table_path : str
        ``"default"`` or a resolved table file path (as text).
    metres_per_scene_unit : float
        Metres per scene unit of the target scene.
    working_space, illuminant : str or None
        Expected RGB working space / illuminant (checked against the table); None accepts the table's.
    parameters : tuple of ParameterSource
    out_of_range : str
        ``"clamp"`` or ``"error"`` for map values outside the encoding range [0, 1].
    resample : str
        ``"error"`` or ``"bilinear"`` for maps whose resolution differs from the first map's.
    udim_tiles : tuple of int or None
        Expected UDIM tiles, or None to discover them.
    outputs : OutputOptions
    source : dict
        The config as read (for provenance).
    table_out_of_range : str
        ``"clamp"`` or ``"error"`` for decoded parameters outside the table's axes
        (:mod:`matgen.bake.table_range`).

    """

    name: str
    base_dir: Path
    table_path: str
    metres_per_scene_unit: float
    working_space: str | None
    illuminant: str | None
    parameters: tuple
    out_of_range: str
    resample: str
    udim_tiles: tuple | None
    outputs: OutputOptions
    source: dict = field(default_factory=dict)
    table_out_of_range: str = "clamp"  # "clamp" / "error": parameters outside the table (bake.table_range)

    def parameter(self, name: str) -> ParameterSource:
        """Return the source of parameter ``name``; :class:`ConfigError` if the config does not give it."""
        for p in self.parameters:
            if p.name == name:
                return p
        raise ConfigError(f"the config gives no source for parameter '{name}'")

    @property
    def map_parameters(self) -> tuple:
        """The parameters read from maps, in config order."""
        return tuple(p for p in self.parameters if p.is_map)

    @property
    def is_udim(self) -> bool:
        """True when any map is a UDIM set."""
        return any(p.is_udim for p in self.parameters)


def _field(path: tuple) -> str:
    return ".".join(str(p) for p in path) or "(top level)"


def check_numbers(data, where: str, path: tuple = ()) -> None:
    """Refuse any non-finite or absurdly large number anywhere in a config mapping, naming its field.

    TOML reads ``nan``, ``inf`` and ``1e400`` (= inf) as floats and integers of any size; JSON schema's
    ``exclusiveMinimum`` lets NaN through. Floats must be finite with magnitude at most
    :data:`MAX_CONFIG_MAGNITUDE`, integers within +-:data:`MAX_CONFIG_INT`.

    Raises
    ------
    ConfigError
        Naming the file and the field.

    """
    if isinstance(data, dict):
        for k, v in data.items():
            check_numbers(v, where, path + (k,))
    elif isinstance(data, (list, tuple)):
        for i, v in enumerate(data):
            check_numbers(v, where, path + (i,))
    elif isinstance(data, bool):
        return
    elif isinstance(data, int):
        if abs(data) > MAX_CONFIG_INT:
            text = str(data) if data.bit_length() < 200 else f"a {data.bit_length()}-bit integer"
            raise ConfigError(
                f"{where}: field '{_field(path)}' is {text}; whole numbers must lie within +-{MAX_CONFIG_INT}"
            )
    elif isinstance(data, float):
        if not math.isfinite(data):
            raise ConfigError(f"{where}: field '{_field(path)}' is {data!r}; numbers must be finite")
        if abs(data) > MAX_CONFIG_MAGNITUDE:
            raise ConfigError(
                f"{where}: field '{_field(path)}' is {data!r}; numbers must lie within "
                f"+-{MAX_CONFIG_MAGNITUDE:g}"
            )


def pass_name(entry) -> str:
    """Name of a camera pass entry (:func:`matgen.color.curves.pass_entry_name`, the one rule)."""
    from matgen.color.curves import pass_entry_name

    return pass_entry_name(entry)


def _check_outputs(outputs: OutputOptions, where: str) -> None:
    """Refuse colliding pass names (each pass is one file, ``passes/<name>.exr``) and bakes of nothing."""
    seen: dict = {}
    for entry in outputs.passes:
        name = pass_name(entry)
        key = name.lower()  # case-insensitive file systems would give two such passes one file
        if key in seen:
            raise ConfigError(
                f"{where}: field 'outputs.passes': '{entry}' and '{seen[key]}' both make pass '{name}' "
                f"(file passes/{name}.exr); give each pass a distinct name"
            )
        if not name or name in (".", "..") or "/" in name or "\\" in name:
            raise ConfigError(f"{where}: field 'outputs.passes': '{entry}' gives no usable pass name")
        seen[key] = entry
    if not (outputs.spectral or outputs.rgb or outputs.targets or outputs.passes or outputs.qa):
        raise ConfigError(
            f"{where}: field 'outputs': every output list is empty and qa is off, so the bake would write "
            "no texture; ask for at least one of spectral, rgb, targets, passes or qa"
        )


def _check_scene(scene: dict, where: str) -> float:
    lo, hi = METRES_PER_SCENE_UNIT_RANGE
    m = float(scene.get("metres_per_scene_unit", 0.01))
    if not lo <= m <= hi:
        raise ConfigError(
            f"{where}: field 'scene.metres_per_scene_unit' is {m!r}; allowed {lo:g} .. {hi:g} m per unit"
        )
    return m


def _check_schema(data: dict, where: str) -> None:
    validator = jsonschema.Draft202012Validator(_schema())
    errors = sorted(validator.iter_errors(data), key=lambda e: list(e.absolute_path))
    if errors:
        raise ConfigError(schema_error_message(errors[0], where, _schema()))


def config_from_dict(
    data: dict, base_dir, *, where: str = "material config", allow_outside: bool = False
) -> BakeConfig:
    """Validate a config mapping (as read from TOML) and resolve its paths against ``base_dir``.

    Parameters
    ----------
    data : dict
        The config content.
    base_dir : str or Path
        Folder that relative paths refer to.
    where : str
        Name of the config for messages (its file path).
    allow_outside : bool
        Allow map and table paths that leave ``base_dir`` (``..``, absolute paths, symbolic links).

    Returns
    -------
    BakeConfig

    Raises
    ------
    ConfigError
        On a schema violation or an inconsistent entry (the message names the field).
    PathError
        On a path that leaves ``base_dir`` without ``allow_outside``.

    """
    if not isinstance(data, dict):
        raise ConfigError(f"{where}: the config must be a table of keys")
    check_numbers(data, where)
    _check_schema(data, where)
    base_dir = Path(base_dir)
    params = []
    for name, entry in data["parameters"].items():
        if "value" in entry:
            v = float(entry["value"])
            params.append(ParameterSource(name=name, value=v))
            continue
        text = entry["map"]
        encoding = entry.get("encoding", "linear")
        if encoding == "linear":
            if "range" not in entry:
                raise ConfigError(
                    f"{where}: field 'parameters.{name}': a linear encoding needs range = [lo, hi]"
                )
            lo, hi = (float(x) for x in entry["range"])
            if not hi - lo >= MIN_RANGE_SPAN:
                raise ConfigError(
                    f"{where}: field 'parameters.{name}.range': need lo < hi with hi - lo >= "
                    f"{MIN_RANGE_SPAN:g}; got [{lo!r}, {hi!r}]"
                )
            rng = (lo, hi)
        else:
            if "range" in entry:
                raise ConfigError(f"{where}: field 'parameters.{name}': a fraction encoding takes no range")
            rng = (0.0, 1.0)
        if text.count(UDIM_TOKEN) > 1:
            raise ConfigError(f"{where}: field 'parameters.{name}.map': '{UDIM_TOKEN}' may appear once")
        resolved = resolve_inside(
            base_dir,
            text.replace(UDIM_TOKEN, "1001"),
            f"map of parameter '{name}'",
            allow_outside=allow_outside,
        )
        pattern = (
            resolved.parent / resolved.name.replace("1001", UDIM_TOKEN) if UDIM_TOKEN in text else resolved
        )
        if UDIM_TOKEN in text and UDIM_TOKEN not in Path(text).name:
            raise ConfigError(
                f"{where}: field 'parameters.{name}.map': '{UDIM_TOKEN}' must be in the file name"
            )
        params.append(
            ParameterSource(
                name=name,
                map_pattern=pattern,
                map_text=text,
                channel=int(entry.get("channel", 0)),
                encoding=encoding,
                range=rng,
            )
        )
    if not any(p.is_map for p in params):
        raise ConfigError(f"{where}: field 'parameters': at least one parameter must come from a map")
    table = data.get("table", {}).get("path", "default")
    if table != "default":
        table = str(resolve_inside(base_dir, table, "table path", allow_outside=allow_outside))
    scene = data.get("scene", {})
    inp = data.get("input", {})
    out = data.get("outputs", {})
    exr = out.get("exr", {})
    outputs = OutputOptions(
        spectral=tuple(out.get("spectral", DEFAULT_SPECTRAL)),
        spectral_bands=out.get("spectral_bands", DEFAULT_SPECTRAL_BANDS),
        rgb=tuple(out.get("rgb", DEFAULT_RGB)),
        targets=tuple(out.get("targets", DEFAULT_TARGETS)),
        passes=tuple(out.get("passes", DEFAULT_PASSES)),
        qa=bool(out.get("qa", True)),
        materialx=bool(out.get("materialx", True)),
        mitsuba_scene=bool(out.get("mitsuba_scene", False)),
        pixel_type=exr.get("pixel_type", "half"),
        compression=exr.get("compression", "zip"),
        texture=bool(exr.get("texture", False)),
        albedo_convention=out.get("albedo_convention", "spec_remap"),
        anisotropy=out.get("anisotropy", "hg"),
    )
    _check_outputs(outputs, where)
    tiles = inp.get("udim_tiles")
    return BakeConfig(
        name=data.get("name", "material"),
        base_dir=base_dir,
        table_path=table,
        metres_per_scene_unit=_check_scene(scene, where),
        working_space=scene.get("working_space"),
        illuminant=scene.get("illuminant"),
        parameters=tuple(params),
        out_of_range=inp.get("out_of_range", "clamp"),
        resample=inp.get("resample", "error"),
        udim_tiles=tuple(sorted(set(tiles))) if tiles else None,
        outputs=outputs,
        source=data,
        table_out_of_range=inp.get("table_out_of_range", "clamp"),
    )


def load_config(path, *, allow_outside: bool = False) -> BakeConfig:
    """Read and validate a material config TOML file.

    Parameters
    ----------
    path : str or Path
        The TOML file; its folder is the base of relative paths.
    allow_outside : bool
        Allow paths that leave the config's folder.

    Returns
    -------
    BakeConfig

    """
    path = Path(path)
    why = not_a_file(path)
    if why is not None:
        raise ConfigError(f"material config {path} {why}")
    text = read_text_limited(path, "material config")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: not valid TOML ({exc})") from exc
    except RecursionError:  # nesting deeper than the parser's stack
        raise ConfigError(f"{path}: TOML nested too deeply to be a material config") from None
    return config_from_dict(data, path.resolve().parent, where=str(path), allow_outside=allow_outside)
