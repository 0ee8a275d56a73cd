"""The estimate job: plan (every check that needs no texel), scan every input, solve strip by strip, write.

Units: pigment values in their fields' units (volume fractions, shares in [0, 1]); residuals in CIEDE2000.

Outputs (``--out DIR``), written into a hidden staging folder and moved into place only when every texel
was solved, the summary last:

``maps/<axis>[.<UDIM>].exr``
    One float channel ``Y`` per estimated axis, the axis value itself (the bake's ``fraction`` encoding).
``qa/residual_de2000[.<UDIM>].exr``, ``qa/out_of_gamut[.<UDIM>].exr``
    CIEDE2000 between the input and the estimate's colour; 1 where the table reproduces no colour within
    the gamut tolerance (the nearest skin colour found is kept).
``material.toml``
    A material config ``matgen bake`` accepts as it is: the estimated maps, the held values, the table.
``estimate.json``
    The summary: what was estimated, held and regularised, histograms, share out of gamut, residual
    percentiles, checksums and the caution that estimated pigments describe an image, not a person.
"""

from __future__ import annotations

import os
import shutil
import time
import uuid
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from matgen.bake.config import UDIM_TOKEN, config_from_dict
from matgen.bake.tiles import rows_per_strip
from matgen.color import pass_weights
from matgen.color.passes import load_response
from matgen.errors import BandError, ImageError, ParameterError, TableError
from matgen.estimate import inputs
from matgen.estimate.solver import DEFAULT_GAMUT_TOLERANCE, DEFAULT_ITERATIONS, build_model
from matgen.estimate.summary import SummaryAccumulator
from matgen.export.exr import StreamingExr
from matgen.fsutil import FolderLock, pid_alive
from matgen.provenance import sha256_file

#: The caution every command, summary and report about estimated pigments carries.
CAUTION = (
    "Estimated pigments describe an image, not a person: they are a fit of a skin model to colours for "
    "imagery only, with no clinical, diagnostic or dosimetric use."
)

#: Lock file and staging prefix of an estimate's output folder.
ESTIMATE_LOCK = ".matgen-estimate.lock"
STAGING_PREFIX = ".matgen-staging-"

#: Share of a capture's response that must fall inside the table's bands.
CAPTURE_COVERAGE_MIN = 0.99


@dataclass
class EstimateRequest:
    """What to estimate from which files (paths as given; ``<UDIM>`` in a file name makes a set)."""

    albedo: Path
    colour_space: str | None = None
    transfer: str = "auto"
    estimate: tuple | None = None
    held: dict = field(default_factory=dict)
    priors: dict = field(default_factory=dict)
    captures: dict = field(default_factory=dict)  # name -> (response name or CSV path, image pattern)
    gamut_tolerance: float = DEFAULT_GAMUT_TOLERANCE
    iterations: int = DEFAULT_ITERATIONS
    name: str = "estimated_skin"


@dataclass
class EstimateTile:
    """Files of one UDIM tile (or of a single texture)."""

    tile: int | None
    width: int
    height: int
    albedo: object
    captures: dict


@dataclass
class EstimatePlan:
    """A checked request: table, inverse model, input colour space, tiles."""

    request: EstimateRequest
    table: object
    table_source: str | None
    model: object
    space: object
    tiles: list

    @property
    def texels(self) -> int:
        """Texels over every tile."""
        return sum(t.width * t.height for t in self.tiles)

    def output_name(self, stem: str, tile) -> str:
        """Relative file of output ``stem`` for ``tile``."""
        return f"{stem}.{int(tile)}.exr" if tile is not None else f"{stem}.exr"

    @property
    def map_stems(self) -> list:
        """(axis, stem) of every estimated map."""
        return [(a, f"maps/{a}") for a in self.model.estimated]

    def files(self) -> list:
        """Every file the estimate writes, summary last."""
        stems = [s for _, s in self.map_stems] + ["qa/residual_de2000", "qa/out_of_gamut"]
        out = [self.output_name(s, t.tile) for t in self.tiles for s in stems]
        if self.table_source is not None:
            out += [f"table/{Path(self.table_source).name}", f"table/{Path(self.table_source).stem}.json"]
        return out + ["material.toml", "estimate.json"]


def _capture_weights(name: str, response: str, bands) -> np.ndarray:
    """Weights of a capture's response over the table's bands, refusing a response the bands do not cover."""
    wl, w, source = load_response(response)
    total = np.trapezoid(w, wl)
    lo, hi = float(bands.lower_nm[0]), float(bands.upper_nm[-1])
    inside = (wl > lo) & (wl < hi)
    x = np.concatenate(([max(lo, wl[0])], wl[inside], [min(hi, wl[-1])]))
    covered = np.trapezoid(np.interp(x, wl, w), x) if x[-1] > x[0] else 0.0
    if not total > 0 or covered / total < CAPTURE_COVERAGE_MIN:
        share = 0.0 if not total > 0 else covered / total
        raise BandError(
            f"capture '{name}': response {source} ({wl[0]:g}-{wl[-1]:g} nm) lies {100 * (1 - share):.1f} % "
            f"outside the table's bands ({lo:g}-{hi:g} nm); use a table whose bands cover it"
        )
    return pass_weights(response, bands)


def _space(req: EstimateRequest, info, working_space: str):
    if req.colour_space:
        return inputs.resolve_input_space(
            req.colour_space, "option --colour-space", working_space, req.transfer
        )
    if info.colorspace:
        return inputs.resolve_input_space(
            info.colorspace, f"file tag of {info.path}", working_space, req.transfer
        )
    raise ParameterError(
        f"albedo {info.path} carries no colour-space tag; declare it with --colour-space "
        "(e.g. acescg, lin_rec709, srgb)"
    )


def plan_estimate(req: EstimateRequest, table, table_source=None) -> EstimatePlan:
    """Check a request against the table and the files' headers (no texel is read).

    Raises
    ------
    ImageError, ParameterError, BandError, TableError
        Naming the file, tile, axis or band at fault.

    """
    captures = {}
    for name, (response, _) in req.captures.items():
        captures[name] = _capture_weights(name, response, table.bands)
    model = build_model(
        table,
        estimate=req.estimate,
        held=req.held,
        priors=req.priors,
        captures=captures,
        gamut_tolerance=req.gamut_tolerance,
        iterations=req.iterations,
    )
    tiles = []
    for t in inputs.tiles_of(req.albedo):
        info = inputs.open_albedo(inputs.tile_file(req.albedo, t), t)
        caps = {}
        for name, (_, pattern) in req.captures.items():
            if UDIM_TOKEN in Path(pattern).name and t is None:
                raise ImageError(f"capture '{name}' {pattern} is a UDIM set but the albedo is a single file")
            path = inputs.tile_file(pattern, t if UDIM_TOKEN in Path(pattern).name else None)
            caps[name] = inputs.open_capture(path, t, name, (info.width, info.height))
        tiles.append(EstimateTile(t, info.width, info.height, info, caps))
    space = _space(req, tiles[0].albedo, table.working_space)
    for ti in tiles:
        inputs.warn_if_linear_8bit(ti.albedo, space)
    return EstimatePlan(req, table, table_source, model, space, tiles)


def check_estimate_inputs(plan: EstimatePlan) -> None:
    """Read every input once: refuse NaN/inf, negative and above-1 texels (counts and first texel)."""
    for ti in plan.tiles:
        inputs.scan_file(ti.albedo, 3, "albedo")
        for name, info in ti.captures.items():
            inputs.scan_file(info, 1, f"capture '{name}'")


@dataclass
class EstimateStrip:
    """Rows ``y0 .. y1-1`` of one tile: pigment values (h, w, k), residual (h, w), out-of-gamut (h, w)."""

    tile: int | None
    y0: int
    y1: int
    values: np.ndarray
    de2000: np.ndarray
    capture_dl: np.ndarray
    out_of_gamut: np.ndarray


def iter_estimate_strips(
    plan: EstimatePlan, tile, *, memory_budget_bytes: int = 256 << 20, jobs=None, rows=None
):
    """Solve one tile strip by strip; yields :class:`EstimateStrip`."""
    ti = next(t for t in plan.tiles if t.tile == tile)
    model = plan.model
    per_texel = 3 + 2 * model.n_features + 4 * len(model.estimated) + 8
    step = rows or rows_per_strip(ti.width, ti.height, per_texel, memory_budget_bytes)
    readers = [inputs.RowReader(ti.albedo, 3, "albedo")]
    readers += [inputs.RowReader(info, 1, f"capture '{n}'") for n, info in ti.captures.items()]
    for r in readers:
        r.__enter__()
    try:
        for y0 in range(0, ti.height, step):
            y1 = min(ti.height, y0 + step)
            rgb_in = plan.space.decode(readers[0].read_rows(y0, y1).reshape(-1, 3))
            caps = [r.read_rows(y0, y1).reshape(-1) for r in readers[1:]]
            target = model.features_of(rgb_in, np.stack(caps, axis=1) if caps else None, plan.space.matrix)
            sol = model.solve(target, jobs=jobs)
            h, w = y1 - y0, ti.width
            yield EstimateStrip(
                tile,
                y0,
                y1,
                sol.values.reshape(h, w, -1).astype(np.float32),
                sol.de2000.reshape(h, w).astype(np.float32),
                sol.capture_dl.reshape(h, w, -1),
                sol.out_of_gamut.reshape(h, w),
            )
    finally:
        for r in readers:
            r.__exit__()


def material_config(plan: EstimatePlan) -> dict:
    """Return the material config (as a TOML-ready mapping) that bakes the estimated maps."""
    udim = any(t.tile is not None for t in plan.tiles)
    params = {}
    for ax in plan.table.axes:
        if ax.name in plan.model.estimated:
            name = f"maps/{ax.name}" + (f".{UDIM_TOKEN}" if udim else "") + ".exr"
            params[ax.name] = {"map": name, "channel": 0, "encoding": "fraction"}
        else:
            params[ax.name] = {"value": float(plan.model.held[ax.name])}
    table = "default" if plan.table_source is None else f"table/{Path(plan.table_source).name}"
    return {
        "format_version": 1,
        "name": plan.request.name,
        "table": {"path": table},
        "scene": {"working_space": plan.table.working_space, "illuminant": plan.table.illuminant},
        "parameters": params,
    }


def _remove_stale_staging(out_dir: Path) -> None:
    for entry in out_dir.glob(STAGING_PREFIX + "*"):
        try:
            pid = int(entry.name[len(STAGING_PREFIX) :].split("-")[0])
        except ValueError:
            continue
        if not pid_alive(pid):
            shutil.rmtree(entry, ignore_errors=True)


def _open_writers(plan: EstimatePlan, ti, staging: Path) -> dict:
    specs = [(stem, f"{axis} (axis unit: fraction)", axis) for axis, stem in plan.map_stems]
    specs += [("qa/residual_de2000", "CIEDE2000 input vs estimate", "de2000")]
    specs += [("qa/out_of_gamut", "1 where no table colour is within the gamut tolerance", "out_of_gamut")]
    writers = {}
    for stem, what, quantity in specs:
        rel = plan.output_name(stem, ti.tile)
        (staging / rel).parent.mkdir(parents=True, exist_ok=True)
        writers[quantity] = (
            rel,
            StreamingExr(
                staging / rel,
                ti.width,
                ti.height,
                ("Y",),
                pixel_type="float",
                compression="zip",
                attributes={"matgen:quantity": quantity, "matgen:description": what},
            ),
        )
    return writers


def _write_tile(plan, ti, staging, acc, progress, done, budget, jobs) -> int:
    writers = _open_writers(plan, ti, staging)
    try:
        for strip in iter_estimate_strips(plan, ti.tile, memory_budget_bytes=budget, jobs=jobs):
            for i, axis in enumerate(plan.model.estimated):
                writers[axis][1].write_rows(strip.y0, strip.values[:, :, i : i + 1])
            writers["de2000"][1].write_rows(strip.y0, strip.de2000[:, :, None])
            writers["out_of_gamut"][1].write_rows(strip.y0, strip.out_of_gamut[:, :, None].astype(np.float32))
            acc.add(strip)
            done += strip.values.shape[0] * strip.values.shape[1]
            if progress:
                progress(done, plan.texels)
        for _, w in writers.values():
            w.close()
    except BaseException:
        for _, w in writers.values():
            w.abort()
        raise
    return done


@dataclass
class EstimateResult:
    """What an estimate wrote: files (relative), the summary, texels and seconds."""

    out_dir: Path
    files: list
    summary: dict
    texels: int
    seconds: float


def estimate(plan: EstimatePlan, out_dir, *, progress=None, memory_budget_bytes: int = 256 << 20, jobs=None):
    """Run a checked plan into ``out_dir`` (inputs scanned first; nothing is written on a refusal)."""
    import json

    import tomli_w

    t0 = time.perf_counter()
    check_estimate_inputs(plan)
    out_dir = Path(out_dir)
    from matgen.export.job import check_writable

    check_writable(out_dir)
    with FolderLock(out_dir, ESTIMATE_LOCK, purpose="estimate"):
        _remove_stale_staging(out_dir)
        staging = out_dir / f"{STAGING_PREFIX}{os.getpid()}-{uuid.uuid4().hex[:8]}"
        staging.mkdir()
        try:
            acc = SummaryAccumulator(plan.model)
            done = 0
            for ti in plan.tiles:
                done = _write_tile(plan, ti, staging, acc, progress, done, memory_budget_bytes, jobs)
            config = material_config(plan)
            config_from_dict(config, staging, where="estimated material config")  # the bake's own check
            (staging / "material.toml").write_text(tomli_w.dumps(config))
            if plan.table_source is not None:
                (staging / "table").mkdir(exist_ok=True)
                src = Path(plan.table_source)
                shutil.copyfile(src, staging / "table" / src.name)
                shutil.copyfile(src.with_suffix(".json"), staging / "table" / f"{src.stem}.json")
            files = plan.files()
            seconds = time.perf_counter() - t0
            summary = acc.summary(
                plan, CAUTION, {rel: sha256_file(staging / rel) for rel in files[:-1]}, seconds
            )
            (staging / "estimate.json").write_text(json.dumps(summary, indent=1) + "\n")
            for rel in files:
                dst = out_dir / rel
                dst.parent.mkdir(parents=True, exist_ok=True)
                os.replace(staging / rel, dst)
        finally:
            shutil.rmtree(staging, ignore_errors=True)
    return EstimateResult(out_dir, files, summary, plan.texels, seconds)


def load_table_for(table_path):
    """Load the table of ``table_path`` (None: the shipped default); return it and its path (or None)."""
    from matgen.tables.store import Table, load_default_table

    if table_path in (None, "default"):
        return load_default_table(), None
    path = Path(table_path)
    table = Table.load(path)
    if not path.with_suffix(".json").is_file():
        raise TableError(f"table {path} has no manifest {path.with_suffix('.json').name} beside it")
    return table, str(path)
