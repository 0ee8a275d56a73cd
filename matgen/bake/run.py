"""The bake engine: plan a bake, check its inputs, and compute its outputs strip by strip.

A :class:`BakePlan` ties a :class:`~matgen.bake.config.BakeConfig` to a lookup table: which table axis is
fed by which map or constant, which UDIM tiles exist and their sizes, and which outputs (with channel names,
units and file stems) the bake writes. :func:`check_inputs` reads every map once and refuses NaN/inf texels
and (by option) values outside the encoding range, naming the file, tile, count and first texel.
:func:`iter_strips` yields, for one tile, strips of rows with every output's texels (float32), so memory
stays near one strip of every input and output plus the table. Writing the files is the job of
:mod:`matgen.export`. Units: parameters in their fields' units; lengths in mm except the renderer-target
maps, which are in scene units (``metres_per_scene_unit``).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np

from matgen.bake.config import BakeConfig
from matgen.bake.lookup import TexelLookup
from matgen.bake.maps import MapReader, discover_tiles, map_info, scan_map, tile_path
from matgen.bake.tiles import rows_per_strip
from matgen.color.curves import resolve_pass_entry
from matgen.errors import BandError, ClampWarning, ConfigError, ImageError
from matgen.limits import check_udim_tiles
from matgen.spectra.bands import BandSet
from matgen.targets import TargetOptions, get_target
from matgen.targets.solve import cached_inverter, media_request, table_ior, texel_media

#: Units of the spectral and RGB quantities, for channel metadata and the descriptor.
QUANTITY_UNITS = {
    "albedo_multiple": "1",
    "albedo_multiple_stderr": "1",
    "albedo_single": "1",
    "mean_free_path_mm": "mm",
    "shape_distance_mm": "mm",
    "anisotropy": "1",
    "fit_residual": "1",
}


def spectral_channel_name(wavelength_nm: float, prefix: str = "T") -> str:
    """Channel name of the spectral OpenEXR layout: ``T.550,000000nm`` (Fichet, Pacanowski & Wilkie 2021).

    Parameters
    ----------
    wavelength_nm : float
        Band centre in nm.
    prefix : str
        ``"T"`` for reflective (transmission-like) quantities, ``"S0"`` for emissive ones.

    References
    ----------
    Fichet2021

    """
    number = f"{float(wavelength_nm):.6f}".replace(".", ",")
    return f"{prefix}.{number}nm"


@dataclass(frozen=True)
class OutputSpec:
    """One output texture of a bake.

    Attributes
    ----------
    key : str
        Unique output name, e.g. ``"spectral/albedo_multiple"``; it is also the file stem inside the folder.
    kind : str
        ``spectral``, ``rgb``, ``target``, ``pass`` or ``qa``.
    quantity : str
        What the texels hold (a table quantity, a target input, a pass name).
    channels : tuple of str
        Channel names in order.
    unit : str
        Unit of the texel values ("1" for dimensionless, "mm", "scene_unit").
    description : str
        One line for the descriptor.

    """

    key: str
    kind: str
    quantity: str
    channels: tuple
    unit: str
    description: str
    wavelengths_nm: tuple = ()
    pixel_type: str | None = None  # "float" forces float32 whatever the config's pixel type
    target: str | None = None  # the renderer target (matgen.targets) that owns this map
    colour: bool = False  # a target map that is a colour of the working space (colour-managed), else data

    def file_name(self, tile: int | None) -> str:
        """Relative file path of this output for UDIM ``tile`` (or a single texture)."""
        return f"{self.key}.{int(tile)}.exr" if tile is not None else f"{self.key}.exr"


@dataclass
class TileInputs:
    """The map files of one UDIM tile (or of a single-texture bake) and the output size in texels."""

    tile: int | None
    width: int
    height: int
    maps: dict  # parameter name -> MapInfo


@dataclass
class BakePlan:
    """Everything a bake will read and write, checked before any texel is computed."""

    config: BakeConfig
    table: object
    axis_sources: tuple  # ParameterSource per table axis, in axis order
    tiles: list  # TileInputs
    outputs: list  # OutputSpec
    spectral_index: np.ndarray  # table band indices of the spectral stacks
    spectral_bands: BandSet
    pass_weights: dict  # pass name -> (B,) weights over the table's bands
    request: dict = field(default_factory=dict)
    derived: dict = field(default_factory=dict)  # name -> grid array (grid_shape + (C,)) made from the table
    single_tile: int | None = None  # the one UDIM tile of a farm bake (``--tile``), else None
    target_options: TargetOptions = field(default_factory=TargetOptions)
    inverter: object = None  # matgen.targets.solve.TexelInverter at the table's index, when targets are baked
    pass_curves: dict = field(default_factory=dict)  # pass name -> curve records (matgen.color.curves)

    @property
    def tile_numbers(self) -> list:
        """UDIM numbers of the tiles (``[None]`` for a single texture)."""
        return [t.tile for t in self.tiles]

    def tile_inputs(self, tile: int | None) -> TileInputs:
        """Return the inputs of UDIM ``tile``; :class:`ConfigError` if the set has no such tile."""
        for t in self.tiles:
            if t.tile == tile:
                return t
        have = ", ".join(str(t.tile) for t in self.tiles)
        raise ConfigError(f"UDIM tile {tile} is not part of this bake; its tiles are {have}")

    @property
    def texels(self) -> int:
        """Total texels over all tiles."""
        return sum(t.width * t.height for t in self.tiles)


def _spectral_subset(table_bands: BandSet, spec: str):
    wanted = BandSet.parse(spec)
    idx = []
    for c in wanted.centre_nm:
        hit = np.nonzero(np.abs(table_bands.centre_nm - c) < 1e-6)[0]
        if hit.size == 0:
            centres = table_bands.centre_nm
            near = sorted(centres[np.argsort(np.abs(centres - c))[:2]].tolist())
            steps = np.unique(np.round(np.diff(centres), 6))
            every = f" every {steps[0]:g} nm" if steps.size == 1 else ""
            raise BandError(
                f"outputs.spectral_bands lists {c:g} nm, which is no band centre of the table; nearest: "
                f"{', '.join(f'{x:g}' for x in near)} nm (the table has {centres.size} bands "
                f"{centres[0]:g}-{centres[-1]:g} nm{every})"
            )
        idx.append(int(hit[0]))
    idx = np.array(idx, dtype=np.int64)
    return idx, table_bands.subset(idx)


def _resolve_passes(config: BakeConfig, bands: BandSet, allow_outside: bool) -> tuple:
    """Pass name -> weights (B,), and pass name -> curve records (path, SHA-256; matgen.color.curves)."""
    weights, curves = {}, {}
    for entry in config.outputs.passes or ():
        name, w, records = resolve_pass_entry(entry, config.base_dir, bands, allow_outside=allow_outside)
        if name in weights:
            raise ConfigError(f"outputs.passes: two entries make pass '{name}'; give each a distinct name")
        weights[name] = np.asarray(w, dtype=np.float64)
        curves[name] = records
    return weights, curves


def plan_bake(config: BakeConfig, table, *, tile: int | None = None, allow_outside: bool = False) -> BakePlan:
    """Check a config against a table and the files on disk, and list every output.

    Parameters
    ----------
    config : BakeConfig
        The material config.
    table : matgen.tables.store.Table
        The lookup table (its axes are the parameters the maps must feed).
    tile : int, optional
        Bake only this UDIM tile (farm use); None bakes every tile.
    allow_outside : bool
        Allow pass-response paths outside the config's folder.

    Returns
    -------
    BakePlan

    Raises
    ------
    ConfigError, ImageError, BandError
        Naming the parameter, file, tile or band at fault.

    """
    axis_names = [a.name for a in table.axes]
    given = [p.name for p in config.parameters]
    extra = [n for n in given if n not in axis_names]
    if extra:
        raise ConfigError(
            f"parameters {extra} are not axes of the table (its axes: {axis_names}); a table only "
            "varies along its axes"
        )
    missing = [n for n in axis_names if n not in given]
    if missing:
        raise ConfigError(
            f"the config gives no map or value for table axes {missing}; add "
            f"[parameters.{missing[0]}] with map = ... or value = ..."
        )
    sources = tuple(config.parameter(n) for n in axis_names)
    for ax, src in zip(table.axes, sources, strict=True):
        if src.value is not None and not (ax.values[0] <= src.value <= ax.values[-1]):
            raise ConfigError(
                f"parameters.{ax.name}.value = {src.value} lies outside the table axis "
                f"[{ax.values[0]:g}, {ax.values[-1]:g}]"
            )
    for what, want, have in (
        ("working_space", config.working_space, table.working_space),
        ("illuminant", config.illuminant, table.illuminant),
    ):
        if want is not None and want != have:
            raise ConfigError(
                f"scene.{what} is '{want}' but the table's RGB quantities are in '{have}'; use a "
                f"table built for '{want}' or set scene.{what} = '{have}'"
            )
    # tiles
    udim = [p for p in config.map_parameters if p.is_udim]
    if udim:
        if config.udim_tiles:
            tiles = list(config.udim_tiles)
        else:
            # the set is the union of every UDIM map's tiles: a tile that one map has and another lacks is
            # then named as missing below, instead of being skipped because the first map lacks it
            found = sorted({t for p in udim for t in discover_tiles(p.map_pattern)})
            if not found:
                patterns = ", ".join(f"{p.map_pattern} (parameter '{p.name}')" for p in udim)
                raise ImageError(f"no UDIM tiles found for any UDIM map: {patterns}")
            tiles = found
        check_udim_tiles(len(tiles), str(udim[0].map_pattern))
        if tile is not None:
            if tile not in tiles:
                patterns = ", ".join(str(p.map_pattern) for p in udim)
                raise ConfigError(f"UDIM tile {tile} is not in the set {tiles} of {patterns}")
            tiles = [tile]
    else:
        if tile is not None:
            raise ConfigError(f"--tile {tile} given, but no map of the config is a UDIM set")
        tiles = [None]
    tile_inputs = []
    for t in tiles:
        infos = {}
        for p in config.map_parameters:
            path = tile_path(p.map_pattern, t)
            if p.is_udim and not path.is_file():
                raise ImageError(
                    f"UDIM tile {t} of the map of parameter '{p.name}' is missing: {path} does not "
                    "exist (every UDIM map must have every tile of the set)"
                )
            infos[p.name] = map_info(
                path, t if p.is_udim else None, channel=p.channel, what=f"map of parameter '{p.name}'"
            )
        first = max(infos.values(), key=lambda i: i.width * i.height)  # resampling goes to the largest map
        for name, info in infos.items():
            if (info.width, info.height) != (first.width, first.height) and config.resample == "error":
                raise ImageError(
                    f"map of parameter '{name}' {info.path} is {info.width} x {info.height} texels but "
                    f"{first.path} is {first.width} x {first.height}; make them equal or set "
                    'input.resample = "bilinear"'
                )
        tile_inputs.append(TileInputs(t, first.width, first.height, infos))
    # bands and outputs
    bands = table.bands
    spectral_index, spectral_bands = _spectral_subset(bands, config.outputs.spectral_bands)
    passes, pass_curves = _resolve_passes(config, bands, allow_outside)
    outputs, request, derived = [], {}, {}
    names = tuple(spectral_channel_name(c) for c in spectral_bands.centre_nm)
    for q in config.outputs.spectral:
        request[q] = spectral_index
        outputs.append(
            OutputSpec(
                f"spectral/{q}",
                "spectral",
                q,
                names,
                QUANTITY_UNITS[q],
                f"{q} per band ({QUANTITY_UNITS[q]})",
                tuple(spectral_bands.centre_nm.tolist()),
            )
        )
    for q in config.outputs.rgb:
        request[f"rgb_{q}"] = None
        outputs.append(
            OutputSpec(
                f"rgb/{q}",
                "rgb",
                f"rgb_{q}",
                ("R", "G", "B"),
                QUANTITY_UNITS[q],
                f"{q} per channel of {table.working_space} ({QUANTITY_UNITS[q]})",
            )
        )
    options = TargetOptions(config.outputs.albedo_convention, config.outputs.anisotropy)
    inverter = None
    for name in config.outputs.targets:
        target_outputs, req, der = _target_outputs(name, table, options, spectral_index, spectral_bands)
        outputs += target_outputs
        request.update(req)
        derived.update(der)
        inverter = inverter or cached_inverter(table_ior(table))
    for name in passes:
        # w @ A is linear in the grid values, so it is formed on the grid once and interpolated like A
        a = np.asarray(table.quantities["albedo_multiple"], dtype=np.float64)
        derived[f"pass_{name}"] = (a @ passes[name])[..., None]
        outputs.append(
            OutputSpec(
                f"passes/{name}",
                "pass",
                name,
                ("Y",),
                "1",
                f"camera pass '{name}': response-weighted multiple-scattering albedo",
            )
        )
    if config.outputs.mitsuba_scene:
        need = {"albedo_single", "mean_free_path_mm"} - set(config.outputs.spectral)
        if need or "openpbr" not in config.outputs.targets:
            raise ConfigError(
                "outputs.mitsuba_scene needs spectral stacks albedo_single and mean_free_path_mm "
                f"(missing: {sorted(need)}) and the openpbr target for the anisotropy"
            )
    if config.outputs.qa:
        chans = ["table_clamped", "encoding_clamped"]
        if "rgb_fit_residual" in table.quantities:
            request["rgb_fit_residual"] = None
            chans.append("fit_residual")
        outputs.append(
            OutputSpec(
                "qa/qa",
                "qa",
                "qa",
                tuple(chans),
                "1",
                "QA: 1 where a parameter was clamped to the table / encoding range; largest RGB fit residual",
            )
        )
        outputs.append(
            OutputSpec(
                "qa/parameters",
                "qa",
                "parameters",
                tuple(axis_names),
                "1",
                "the decoded skin parameters of every texel, one channel per table axis (fields' units)",
                pixel_type="float",
            )
        )
    return BakePlan(
        config,
        table,
        sources,
        tile_inputs,
        outputs,
        spectral_index,
        spectral_bands,
        passes,
        request,
        derived,
        single_tile=tile,
        target_options=options,
        inverter=inverter,
        pass_curves=pass_curves,
    )


_LAYOUT_CHANNELS = {"rgb": ("R", "G", "B"), "y": ("Y",)}


def _target_outputs(name: str, table, options: TargetOptions, spectral_index, spectral_bands) -> tuple:
    """Return the OutputSpecs of one renderer target's maps and the table quantities its media need."""
    target = get_target(name)
    request, derived = media_request(table, target.channels, spectral_index)
    names = tuple(spectral_channel_name(c) for c in spectral_bands.centre_nm)
    outputs = []
    for m in target.maps(options):
        bands = m.layout == "bands"
        outputs.append(
            OutputSpec(
                f"{name}/{m.name}",
                "target",
                m.name,
                names if bands else _LAYOUT_CHANNELS[m.layout],
                m.unit,
                m.description + (f" (in {table.working_space})" if m.colour else ""),
                tuple(spectral_bands.centre_nm.tolist()) if bands else (),
                pixel_type="float",
                target=name,
                colour=m.colour,
            )
        )
    return outputs, request, derived


@dataclass
class InputReport:
    """What :func:`check_inputs` found: per (parameter, tile) texels clamped into the encoding range."""

    clamped: dict = field(default_factory=dict)

    @property
    def total_clamped(self) -> int:
        """Texels clamped into the encoding range, over all maps and tiles."""
        return int(sum(self.clamped.values()))


def _readers(plan: BakePlan, ti: TileInputs) -> dict:
    return {
        name: MapReader(
            info,
            plan.config.parameter(name).channel,
            (ti.width, ti.height),
            what=f"map of parameter '{name}'",
        )
        for name, info in ti.maps.items()
    }


def check_inputs(plan: BakePlan) -> InputReport:
    """Read every map of the plan once; refuse non-finite texels and (by option) out-of-range values.

    Raises
    ------
    ImageError
        Naming the file, tile, number of bad texels and the first one (x, y).

    """
    report = InputReport()
    for ti in plan.tiles:
        for name, reader in _readers(plan, ti).items():
            with reader:
                stats = scan_map(reader)
            where = f"{reader.info.path}" + (f" (UDIM tile {ti.tile})" if ti.tile is not None else "")
            if stats.nonfinite:
                x, y = stats.first_nonfinite
                raise ImageError(
                    f"map of parameter '{name}' {where}: {stats.nonfinite} texel(s) are NaN or "
                    f"infinite, the first at texel (x={x}, y={y}); fix the map"
                )
            if stats.out_of_range:
                x, y = stats.first_out_of_range
                msg = (
                    f"map of parameter '{name}' {where}: {stats.out_of_range} texel(s) lie outside the "
                    "encoding "
                    f"range [0, 1] (values {stats.minimum:g}..{stats.maximum:g}), the first at texel "
                    f"(x={x}, y={y})"
                )
                if plan.config.out_of_range == "error":
                    raise ImageError(msg + '; fix the map or set input.out_of_range = "clamp"')
                warnings.warn(msg + "; clamped", ClampWarning, stacklevel=2)
                report.clamped[(name, ti.tile)] = stats.out_of_range
    return report


@dataclass
class Strip:
    """Rows ``y0 .. y1-1`` of one tile: every output's texels (rows, width, channels).

    Float16 for half outputs, else float32.
    """

    tile: int | None
    y0: int
    y1: int
    values: dict
    table_clamped: int
    encoding_clamped: int


def _target_texels(plan: BakePlan, vals: dict) -> dict:
    """Every target map's texels for one strip: each target's media made once, then its conversion."""
    media, texels = {}, {}
    opts = plan.target_options
    for name in plan.config.outputs.targets:
        target = get_target(name)
        key = (target.channels, target.scalar_g)
        if key not in media:
            media[key] = texel_media(
                vals,
                target.channels,
                plan.inverter,
                scalar_g=target.scalar_g,
                isotropic=opts.anisotropy == "isotropic",
            )
        texels[name] = target.texel_inputs(media[key], plan.config.metres_per_scene_unit, opts)
    return texels


def _compute(plan: BakePlan, lookup: TexelLookup, params: np.ndarray, enc_flag: np.ndarray, shape) -> tuple:
    vals, clamped = lookup(params)
    h, w = shape
    out = {}
    targets = _target_texels(plan, vals) if plan.config.outputs.targets else {}
    for spec in plan.outputs:
        if spec.kind in ("spectral", "rgb"):
            v = vals[spec.quantity]
        elif spec.kind == "target":
            v = targets[spec.target][spec.quantity]
        elif spec.kind == "pass":
            v = vals[f"pass_{spec.quantity}"]
        elif spec.quantity == "parameters":
            v = params
        else:  # qa
            cols = [clamped.astype(np.float32), enc_flag.astype(np.float32)]
            if "fit_residual" in spec.channels:
                cols.append(vals["rgb_fit_residual"].max(axis=1))
            v = np.stack(cols, axis=1)
        # half outputs are rounded here (numpy's round-to-nearest-even cast); the writer passes them through.
        # A strided float32 view is first made contiguous: numpy's contiguous float32 -> float16 cast is
        # about 2.5x faster than casting the strided view directly (same values, same rounding).
        v = np.ascontiguousarray(np.asarray(v, dtype=np.float32).reshape(h, w, -1))
        out[spec.key] = v.astype(output_dtype(plan, spec), copy=False)
    return out, int(clamped.sum())


def output_dtype(plan: BakePlan, spec: OutputSpec):
    """Numpy dtype of an output's texels: float32 where the output or the config asks for float."""
    return np.float32 if (spec.pixel_type or plan.config.outputs.pixel_type) == "float" else np.float16


def output_pixel_type(plan: BakePlan, spec: OutputSpec) -> str:
    """EXR pixel type of an output ("half" or "float")."""
    return spec.pixel_type or plan.config.outputs.pixel_type


def iter_strips(
    plan: BakePlan,
    tile: int | None,
    *,
    lookup: TexelLookup | None = None,
    memory_budget_bytes: int = 256 << 20,
    rows: int | None = None,
):
    """Compute one tile's outputs strip by strip.

    Parameters
    ----------
    plan : BakePlan
        The checked plan (:func:`plan_bake`).
    tile : int or None
        UDIM tile (None for a single texture).
    lookup : TexelLookup, optional
        Prepared lookup (made from ``plan.request`` when omitted).
    memory_budget_bytes : int
        Bytes one strip of all outputs may take (float32); sets the strip height.
    rows : int, optional
        Strip height in rows, overriding the budget.

    Yields
    ------
    Strip

    """
    ti = plan.tile_inputs(tile)
    lookup = lookup or TexelLookup(plan.table, plan.request, derived=plan.derived)
    n_out = sum(len(s.channels) for s in plan.outputs) + lookup.channels + len(plan.axis_sources)
    step = rows or rows_per_strip(ti.width, ti.height, n_out, memory_budget_bytes)
    readers = _readers(plan, ti)
    for r in readers.values():
        r.__enter__()
    try:
        for y0 in range(0, ti.height, step):
            y1 = min(ti.height, y0 + step)
            n = (y1 - y0) * ti.width
            params = np.empty((n, len(plan.axis_sources)), dtype=np.float64)
            enc = np.zeros(n, dtype=bool)
            for i, src in enumerate(plan.axis_sources):
                if src.value is not None:
                    params[:, i] = src.value
                    continue
                raw = readers[src.name].read_rows(y0, y1).reshape(-1)
                if not np.all(np.isfinite(raw)):
                    bad = np.argwhere(~np.isfinite(raw))[0][0]
                    raise ImageError(
                        f"map of parameter '{src.name}' {readers[src.name].info.path}: texel "
                        f"(x={bad % ti.width}, y={y0 + bad // ti.width}) is not finite"
                    )
                outside = (raw < 0.0) | (raw > 1.0)
                if outside.any():
                    if plan.config.out_of_range == "error":
                        bad = int(np.argmax(outside))
                        raise ImageError(
                            f"map of parameter '{src.name}' {readers[src.name].info.path}: texel "
                            f"(x={bad % ti.width}, y={y0 + bad // ti.width}) = {raw[bad]:g} lies "
                            "outside the encoding range [0, 1]"
                        )
                    enc |= outside
                    raw = np.clip(raw, 0.0, 1.0)
                params[:, i] = src.decode(raw)
            values, n_clamped = _compute(plan, lookup, params, enc, (y1 - y0, ti.width))
            yield Strip(tile, y0, y1, values, n_clamped, int(enc.sum()))
    finally:
        for r in readers.values():
            r.close()
