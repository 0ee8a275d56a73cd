"""A bake into an output folder: lock, check, compute strip by strip, write, checksum, commit; tile assembly.

:func:`bake` is the Python entry point behind ``matgen bake``. It holds a lock on the output folder, reads
and checks every map before it computes anything, writes every texture into a hidden staging folder inside
the output folder, validates the MaterialX document and the descriptor, and only then publishes them through
the journalled commit of :mod:`matgen.export.publish` (old descriptor removed first, files moved into place,
the new descriptor last; a commit cut short is finished by the next process that takes the lock). A bake that
fails or is killed part-way therefore leaves no partial output file, and no reader ever finds a descriptor
beside textures it does not describe. Outputs never replace an input of the bake.

Locks: a whole bake (and a tile assembly) holds ``.matgen-bake.lock``, a one-tile farm bake
``.matgen-bake.<tile>.lock``. Each takes its own lock first and then looks at the others, so a whole bake
refuses while a live one-tile bake works in the folder and a one-tile bake refuses while a whole bake does,
whichever started first; one-tile bakes of different tiles share a folder. :func:`assemble_tiles` turns the
one-tile descriptors of a UDIM set into the set's ``material.json`` and ``material.mtlx``.
Units: lengths in mm; renderer-target lengths in scene units; memory in bytes.
"""

from __future__ import annotations

import hashlib
import math
import os
import re
import time
from concurrent.futures import ThreadPoolExecutor, wait
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from matgen import __version__
from matgen.bake.config import BakeConfig
from matgen.bake.lookup import TexelLookup, set_threads
from matgen.bake.run import BakePlan, check_inputs, iter_strips, plan_bake
from matgen.bake.table_range import check_table_range
from matgen.color.tags import exr_attributes, exr_colour_attributes, exr_data_attributes, space_names
from matgen.errors import DataError, LimitError, LockError, PathError
from matgen.export.descriptor import (
    build_descriptor,
    descriptor_json,
    renderer_targets,
    shader_inputs,
    texture_entry,
)
from matgen.export.exr import SPECTRAL_LAYOUT_VERSION, StreamingExr, make_texture, set_io_threads
from matgen.export.publish import (
    check_targets,
    commit,
    recover_commits,
    remove_stale_staging,
    staging_folder,
)
from matgen.fsutil import FolderLock, live_lock_owner
from matgen.provenance import sha256_file
from matgen.tables.store import Table, default_table_path, load_default_table
from matgen.targets.solve import table_ior

#: Lock file of a whole bake or a tile assembly in its output folder.
BAKE_LOCK = ".matgen-bake.lock"

_TILE_LOCK = re.compile(r"^\.matgen-bake\.(\d+)\.lock$")

#: Outputs whose texel sums make the preview scene's mean texel.
SCENE_KEYS = ("spectral/albedo_single", "spectral/mean_free_path_mm", "openpbr/subsurface_scatter_anisotropy")

#: Peak memory of :func:`matgen.export.exr.make_texture` per byte of one file's whole image as float32
#: (width x height x channels x 4): measured 2.01-2.03 with a constant ~3 MiB for 31-channel half files of
#: 1024 x 1024 and 2048 x 2048 texels (OpenImageIO 3.2; peak RSS of a child process).
TEXTURE_MEMORY_FACTOR = 2.0
#: Constant part of that peak, bytes (rounded up from the measured ~3 MiB).
TEXTURE_MEMORY_OVERHEAD_BYTES = 16 << 20


def tile_lock_name(tile: int) -> str:
    """Lock file name of a one-tile bake of UDIM ``tile``."""
    return f".matgen-bake.{int(tile)}.lock"


def load_table(config: BakeConfig):
    """Load the table a config names: the shipped default table, or a table file."""
    if config.table_path == "default":
        return load_default_table()
    return Table.load(config.table_path)


def _table_identity(table, table_source) -> tuple:
    """(name, SHA-256) of the table used: of its file when known, else of its content (axes, quantities)."""
    if table_source is not None and getattr(table, "source_sha256", None):
        return Path(table_source).name, table.source_sha256  # the bytes the table was parsed from
    if table_source is not None and Path(table_source).is_file():
        return Path(table_source).name, sha256_file(table_source)
    h = hashlib.sha256()
    for a in table.axes:
        h.update(
            a.name.encode() + a.spacing.encode() + np.ascontiguousarray(a.values, dtype=np.float64).tobytes()
        )
    for name in sorted(table.quantities):
        h.update(name.encode() + np.ascontiguousarray(table.quantities[name], dtype=np.float32).tobytes())
    return "in-memory table (content hash)", h.hexdigest()


def _spectra_provenance(table) -> object:
    man = table.manifest or {}
    for key in ("spectra", "provenance", "spectra_provenance"):
        if key in man:
            return man[key]
    return "not recorded in the table manifest"


@dataclass
class BakeResult:
    """What :func:`bake` did: output folder, descriptor, files written (relative), counts and timing."""

    out_dir: Path
    descriptor: Path | None
    files: list = field(default_factory=list)
    texels: int = 0
    table_clamped: int = 0
    encoding_clamped: int = 0
    seconds: float = 0.0
    dry_run: bool = False


def check_writable(out_dir: Path, create: bool = True) -> None:
    """Refuse an output folder that exists as a file or cannot be created or written.

    With ``create=False`` (a dry run) nothing is created: the nearest existing folder on the way to
    ``out_dir`` must be a writable folder.
    """
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise PathError(f"output folder {out_dir} exists and is not a folder")
    if not create:
        base = out_dir.absolute()
        while not base.exists() and base != base.parent:
            base = base.parent
        if not base.is_dir():
            raise PathError(f"cannot create output folder {out_dir}: {base} is not a folder")
        if not os.access(base, os.W_OK | os.X_OK):
            what = (
                "is not writable"
                if base == out_dir.absolute()
                else f"cannot be created: {base} is not writable"
            )
            raise PathError(f"output folder {out_dir} {what}")
        return
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise PathError(f"cannot create output folder {out_dir}: {exc.strerror or exc}") from exc
    if not os.access(out_dir, os.W_OK | os.X_OK):
        raise PathError(f"output folder {out_dir} is not writable")


def _conflicting_locks(out_dir: Path, tile: int | None) -> list:
    """Live locks in ``out_dir`` that exclude a bake of ``tile`` (None: a whole bake or an assembly)."""
    if tile is None:
        names = sorted(p.name for p in out_dir.iterdir() if _TILE_LOCK.match(p.name))
    else:
        names = [BAKE_LOCK]
    held = [(out_dir / n, live_lock_owner(out_dir / n)) for n in names]
    return [(p, o) for p, o in held if o is not None]


def _locked_error(out_dir: Path, held: list) -> LockError:
    parts = []
    for path, owner in held:
        m = _TILE_LOCK.match(path.name)
        what = f"a bake of UDIM tile {m.group(1)}" if m else "a whole bake or tile assembly"
        who = f"process {owner['pid']} on {owner.get('host', '?')}" if "pid" in owner else "another process"
        parts.append(f"{what} by {who} (lock file {path})")
    return LockError(
        f"{out_dir} is locked by {'; '.join(parts)}: a whole bake and one-tile bakes of the same folder "
        "exclude each other; wait for it to finish, or remove the lock file if that process is gone"
    )


class _BakeLock:
    """The lock of a bake of ``tile`` (None: whole bake or assembly) that also honours the others' locks."""

    def __init__(self, out_dir: Path, tile: int | None):
        self.out_dir, self.tile = Path(out_dir), tile
        name = BAKE_LOCK if tile is None else tile_lock_name(tile)
        self.lock = FolderLock(out_dir, name=name, purpose="bake" if tile is None else f"bake of tile {tile}")

    def __enter__(self):
        self.lock.acquire()
        held = _conflicting_locks(self.out_dir, self.tile)  # looked at after taking ours: no gap between
        if held:
            self.lock.release()
            raise _locked_error(self.out_dir, held)
        return self

    def __exit__(self, *exc):
        self.lock.release()
        return False


def check_unlocked(out_dir: Path, tile: int | None) -> None:
    """Raise :class:`LockError` when a live process holds a lock that a bake of ``tile`` would meet."""
    out_dir = Path(out_dir)
    if not out_dir.is_dir():
        return
    own = out_dir / (BAKE_LOCK if tile is None else tile_lock_name(tile))
    held = [(own, o) for o in [live_lock_owner(own)] if o is not None]
    held += _conflicting_locks(out_dir, tile)
    if held:
        raise _locked_error(out_dir, held)


def _remove_stale_staging(out_dir: Path, own_lock: str = BAKE_LOCK) -> None:
    """Finish commits that stopped processes left (:func:`recover_commits`), then drop their staging."""
    recover_commits(out_dir, own_lock)
    remove_stale_staging(out_dir)


def bake_inputs(plan: BakePlan, table_source=None) -> list:
    """Files a bake reads: every map of every tile, the pass response files and the table file."""
    files = [info.path for ti in plan.tiles for info in ti.maps.values()]
    for entry in plan.config.outputs.passes:
        if isinstance(entry, dict):  # a table of lamp / filter / sensor curve files
            files += [plan.config.base_dir / v for k, v in entry.items() if k != "name"]
        elif entry.lower().endswith(".csv"):
            files.append(plan.config.base_dir / entry)
    if table_source is not None:
        files.append(Path(table_source))
    return files


#: Free space below which an output folder counts as full (bytes): a dry run refuses it.
MIN_FREE_BYTES = 1 << 20


def check_free_space(out_dir: Path, need_bytes: int = MIN_FREE_BYTES) -> None:
    """Refuse an output folder whose file system has less than ``need_bytes`` free (a full disk)."""
    base = Path(out_dir).absolute()
    while not base.exists() and base != base.parent:
        base = base.parent
    try:
        st = os.statvfs(base)
    except (OSError, AttributeError):
        return
    free = st.f_bavail * st.f_frsize
    if free < need_bytes:
        raise PathError(
            f"output folder {out_dir}: only {free} bytes free on its file system, below {need_bytes}; free "
            "some space first"
        )


def _commit(staging: Path, out_dir: Path, files: list, lock_name: str = BAKE_LOCK, inputs=()) -> None:
    """Publish staged files, descriptor last, through the journalled commit (:func:`commit`)."""
    commit(staging, out_dir, files, lock_name, inputs)


def planned_files(plan: BakePlan, name: str) -> list:
    """Relative paths of every file a bake of ``plan`` writes, descriptor last."""
    files = [spec.file_name(t) for t in plan.tile_numbers for spec in plan.outputs]
    return files + _document_names(plan)


def _document_names(plan: BakePlan) -> list:
    """Return the documents written beside the textures, descriptor last."""
    files = []
    if plan.config.outputs.materialx and plan.single_tile is None:
        files.append("material.mtlx")
    if plan.config.outputs.mitsuba_scene and plan.single_tile is None:
        files.append("scene_mitsuba.xml")
    return files + [_descriptor_name(plan)]


def _descriptor_name(plan: BakePlan) -> str:
    return "material.json" if plan.single_tile is None else f"material.{plan.single_tile}.json"


def texture_memory_bytes(plan: BakePlan) -> int:
    """Bytes that making the plan's largest tiled mip-mapped texture takes (0 when ``texture`` is off)."""
    if not plan.config.outputs.texture:
        return 0
    texels = max(t.width * t.height for t in plan.tiles)
    channels = max(len(spec.channels) for spec in plan.outputs)
    return int(TEXTURE_MEMORY_FACTOR * texels * channels * 4) + TEXTURE_MEMORY_OVERHEAD_BYTES


def check_texture_memory(plan: BakePlan, memory_budget_bytes: int) -> None:
    """Refuse ``texture = true`` when making a file's mip-maps would need more than the memory budget.

    Raises
    ------
    LimitError
        Naming the largest output, its size, the memory it needs and the budget.

    """
    need = texture_memory_bytes(plan)
    if need <= memory_budget_bytes:
        return
    ti = max(plan.tiles, key=lambda t: t.width * t.height)
    spec = max(plan.outputs, key=lambda s: len(s.channels))
    need_mib, budget_mib = math.ceil(need / (1 << 20)), memory_budget_bytes // (1 << 20)
    raise LimitError(
        f"outputs.exr.texture = true makes each tiled mip-mapped file from the whole image: "
        f"{spec.file_name(ti.tile)} ({ti.width} x {ti.height} texels, {len(spec.channels)} channels) needs "
        f"about {need_mib} MiB, more than the memory budget of {budget_mib} MiB; give --memory-mb "
        f"{need_mib} or more, or set texture = false"
    )


def _scene_mean(plan: BakePlan, sums: dict) -> dict:
    return {k: np.asarray(sums[k], dtype=np.float64) / max(plan.texels, 1) for k in SCENE_KEYS}


def _planned_sums(plan: BakePlan, table) -> dict:
    """Stand-in texel sums for a dry run's preview scene: the table grid's mean values times the texels."""
    n, idx = plan.texels, plan.spectral_index

    def grid_mean(q):
        return np.asarray(table.quantities[q], dtype=np.float64)[..., idx].reshape(-1, idx.size).mean(axis=0)

    g = float(np.mean(np.asarray(table.quantities["anisotropy"], dtype=np.float64)[..., idx]))
    return {
        SCENE_KEYS[0]: grid_mean("albedo_single") * n,
        SCENE_KEYS[1]: grid_mean("mean_free_path_mm") * n,
        SCENE_KEYS[2]: np.array([g * n]),
    }


def _build_documents(
    plan: BakePlan, table, table_source, entries: list, sums, n_table: int, n_enc: int, output_sums=None
) -> list:
    """Build and validate the documents and the descriptor of a bake: ``[(relative path, bytes)]``.

    The MaterialX document passes MaterialX's validation and the descriptor its schema before anything is
    written; the descriptor comes last. ``sums`` (output key -> per-channel texel sum over all tiles) feed
    the preview scene's mean texel.
    """
    cfg = plan.config
    ior = table_ior(table) if "ior" in table.quantities else None
    targets = renderer_targets(plan, ior)
    names = _document_names(plan)
    out, documents = [], {}
    if "material.mtlx" in names:
        from matgen.export.materialx import document_text, material_document

        doc = material_document(cfg.name, shader_inputs(targets), table.working_space)
        data = document_text(doc).encode("utf-8")
        out.append(("material.mtlx", data))
        documents["materialx"] = {"path": "material.mtlx", "sha256": hashlib.sha256(data).hexdigest()}
    if "scene_mitsuba.xml" in names:
        from matgen.export.scene import mitsuba_scene_xml

        if ior is None:
            raise DataError("the preview scene needs the table's boundary refractive index (quantity 'ior')")
        mean = _scene_mean(plan, sums)
        data = mitsuba_scene_xml(
            plan.spectral_bands.centre_nm,
            mean["spectral/albedo_single"],
            mean["spectral/mean_free_path_mm"],
            float(mean["openpbr/subsurface_scatter_anisotropy"][0]),
            ior,
            cfg.metres_per_scene_unit,
            name=cfg.name,
        ).encode("utf-8")
        out.append(("scene_mitsuba.xml", data))
        documents["mitsuba_scene"] = {"path": "scene_mitsuba.xml", "sha256": hashlib.sha256(data).hexdigest()}
    desc = build_descriptor(
        plan,
        table,
        matgen_version=__version__,
        table_identity=_table_identity(table, table_source),
        spectra_provenance=_spectra_provenance(table),
        textures=entries,
        targets=targets,
        documents=documents,
        table_clamped=n_table,
        encoding_clamped=n_enc,
        output_sums=output_sums,
    )
    out.append((_descriptor_name(plan), descriptor_json(desc).encode("utf-8")))
    return out


def _colour_tags(spec, working_space: str) -> dict:
    """EXR colour or data tags of one output: a target map is colour when its target planned it so."""
    if spec.kind == "target":
        return exr_colour_attributes(working_space) if spec.colour else exr_data_attributes()
    return exr_attributes(spec.quantity, spec.channels, working_space)


def bake(
    config: BakeConfig,
    out_dir,
    *,
    table=None,
    table_source=None,
    jobs: int | None = None,
    tile: int | None = None,
    dry_run: bool = False,
    allow_outside: bool = False,
    progress=None,
    memory_budget_bytes: int = 256 << 20,
    rows: int | None = None,
) -> BakeResult:
    """Bake a material config into an output folder.

    Parameters
    ----------
    config : BakeConfig
        The material config (:func:`matgen.bake.config.load_config`).
    out_dir : str or Path
        Output folder (created if needed).
    table : matgen.tables.store.Table, optional
        Table to use instead of the one the config names.
    table_source : str or Path, optional
        The file ``table`` was loaded from, for the provenance record (without it the descriptor records a
        hash of the table's content).
    jobs : int, optional
        Threads of the per-texel lookup and of OpenImageIO's EXR compression (default: all cores).
    tile : int, optional
        Bake only this UDIM tile (writes ``material.<tile>.json``); tiles are independent and deterministic.
    dry_run : bool
        Check the config, every map, the output folder (writable, not locked; nothing is created) and that
        the descriptor and documents build and validate; list the files; write nothing.
    allow_outside : bool
        Allow pass-response paths outside the config's folder.
    progress : callable, optional
        Called as ``progress(texels_done, texels_total)`` after each strip.
    memory_budget_bytes : int
        Bytes one strip of all channels may take (float32); bounds memory. Also the most that making a
        tiled mip-mapped texture may take (``texture = true``; :func:`check_texture_memory`).
    rows : int, optional
        Fixed strip height in rows (overrides the budget).

    Returns
    -------
    BakeResult

    """
    t_start = time.perf_counter()
    out_dir = Path(out_dir)
    if table is None:
        table = load_table(config)
        table_source = default_table_path() if config.table_path == "default" else config.table_path
    plan = plan_bake(config, table, tile=tile, allow_outside=allow_outside)
    files = planned_files(plan, config.name)
    check_texture_memory(plan, memory_budget_bytes)
    inputs = bake_inputs(plan, table_source)
    if out_dir.is_dir():
        check_targets(out_dir, files, inputs)
    space_names(table.working_space)  # colour maps are tagged with it: an unknown space fails before writing
    if dry_run:
        check_writable(out_dir, create=False)
        check_unlocked(out_dir, tile)
        check_free_space(out_dir)
        _dry_run_documents(plan, table, table_source)
        inputs = check_inputs(plan)
        would_clamp = check_table_range(plan).total  # refuses here when table_out_of_range = "error"
        return BakeResult(
            out_dir,
            None,
            files,
            plan.texels,
            would_clamp,
            inputs.total_clamped,
            dry_run=True,
            seconds=time.perf_counter() - t_start,
        )
    check_writable(out_dir)
    with _BakeLock(out_dir, tile) as held:
        lock_name = held.lock.path.name
        _remove_stale_staging(out_dir, lock_name)
        check_targets(out_dir, files, inputs)
        report = check_inputs(plan)
        if config.table_out_of_range == "error":
            check_table_range(plan)  # nothing is written when a texel lies outside the table
        set_threads(jobs)
        set_io_threads(jobs)
        with staging_folder(out_dir) as staging:
            result = _bake_into(
                plan, table, table_source, staging, progress, memory_budget_bytes, rows, report, jobs
            )
            _commit(staging, out_dir, result.files, lock_name, inputs)
    result.out_dir = out_dir
    result.descriptor = out_dir / result.files[-1]
    result.seconds = time.perf_counter() - t_start
    return result


def _dry_run_documents(plan: BakePlan, table, table_source) -> None:
    """Build (and validate) the descriptor and documents a bake would write, with planned texture entries."""
    opts = plan.config.outputs
    entries = [
        texture_entry(
            spec,
            spec.file_name(ti.tile),
            None,
            ti.tile,
            ti.width,
            ti.height,
            spec.pixel_type or opts.pixel_type,
            opts.texture,
        )
        for ti in plan.tiles
        for spec in plan.outputs
    ]
    scene = opts.mitsuba_scene
    sums = _planned_sums(plan, table) if scene else None
    tile_sums = sums if scene and plan.single_tile is not None else None
    _build_documents(plan, table, table_source, entries, sums, 0, 0, output_sums=tile_sums)


def _finish(pending: list) -> None:
    """Wait for one strip's file writes; the first failure is raised."""
    for f in pending:
        f.result()


def _bake_into(
    plan: BakePlan, table, table_source, staging: Path, progress, budget, rows, report, jobs=None
) -> BakeResult:
    cfg = plan.config
    opts = cfg.outputs
    lookup = TexelLookup(table, plan.request, derived=plan.derived)
    total = plan.texels
    done = 0
    entries, written = [], []
    scene_keys = [s.key for s in plan.outputs if s.key in SCENE_KEYS] if opts.mitsuba_scene else []
    widths = {s.key: len(s.channels) for s in plan.outputs}
    sums = {k: np.zeros(widths[k]) for k in scene_keys}  # per tile, then over tiles in order
    n_table, n_enc = 0, report.total_clamped
    base_attrs = {"matgen:version": __version__}
    # strip k is written in worker threads (OpenImageIO releases the GIL while it compresses) while strip
    # k+1 is computed; two strips are then in flight, so each gets half the memory budget
    with ThreadPoolExecutor(
        max_workers=max(1, jobs or os.cpu_count() or 1), thread_name_prefix="exr"
    ) as pool:
        for ti in plan.tiles:
            writers, pending = {}, []
            tile_sums = {k: np.zeros(widths[k]) for k in scene_keys}
            try:
                for spec in plan.outputs:
                    rel = spec.file_name(ti.tile)
                    (staging / rel).parent.mkdir(parents=True, exist_ok=True)
                    attrs = dict(
                        base_attrs,
                        **{
                            "matgen:quantity": spec.quantity,
                            "matgen:unit": spec.unit,
                            "matgen:kind": spec.kind,
                        },
                    )
                    if spec.kind == "spectral" or spec.wavelengths_nm:
                        attrs["spectralLayoutVersion"] = SPECTRAL_LAYOUT_VERSION
                    attrs.update(_colour_tags(spec, table.working_space))
                    target = staging / (rel + ".scan.exr") if opts.texture else staging / rel
                    writers[spec.key] = StreamingExr(
                        target,
                        ti.width,
                        ti.height,
                        spec.channels,
                        pixel_type=spec.pixel_type or opts.pixel_type,
                        compression=opts.compression,
                        attributes=attrs,
                    )
                strips = iter_strips(plan, ti.tile, lookup=lookup, memory_budget_bytes=budget // 2, rows=rows)
                for strip in strips:
                    _finish(pending)  # the previous strip's writes, in row order per file
                    pending = [
                        pool.submit(w.write_rows, strip.y0, strip.values[key]) for key, w in writers.items()
                    ]
                    for key in scene_keys:
                        tile_sums[key] += strip.values[key].sum(axis=(0, 1), dtype=np.float64)
                    n_table += strip.table_clamped
                    done += (strip.y1 - strip.y0) * ti.width
                    if progress is not None:
                        progress(done, total)
                _finish(pending)
                for w in writers.values():
                    w.close()
            except BaseException:
                wait(pending)
                for w in writers.values():
                    w.abort()
                raise
            for key in scene_keys:
                sums[key] += tile_sums[key]
            for spec in plan.outputs:
                rel = spec.file_name(ti.tile)
                if opts.texture:
                    make_texture(staging / (rel + ".scan.exr"), staging / rel)
                    (staging / (rel + ".scan.exr")).unlink()
                entries.append(
                    texture_entry(
                        spec,
                        rel,
                        staging / rel,
                        ti.tile,
                        ti.width,
                        ti.height,
                        spec.pixel_type or opts.pixel_type,
                        opts.texture,
                    )
                )
                written.append(rel)
    # a one-tile farm bake records its texel sums so that the set's preview scene can be assembled
    output_sums = sums if scene_keys and plan.single_tile is not None else None
    for rel, data in _build_documents(plan, table, table_source, entries, sums, n_table, n_enc, output_sums):
        (staging / rel).write_bytes(data)
        written.append(rel)
    return BakeResult(staging, None, written, plan.texels, n_table, n_enc)
