"""A whole bake into an output folder: lock, check, compute strip by strip, write, checksum, commit.

:func:`bake` is the Python entry point behind ``matgen bake``. It holds a lock on the output folder (a
second bake into the same folder refuses, naming the lock; a one-tile farm bake locks only its tile), reads
and checks every map before it computes anything, writes every texture into a hidden staging folder inside
the output folder, validates the MaterialX document and the descriptor, and only then moves each file into
place with ``os.replace``, the descriptor last. A bake that fails or is killed part-way therefore leaves no
partial output file; the staging folder of a killed bake is removed by the next bake into that folder.
Units: lengths in mm; renderer-target lengths in scene units.
"""

from __future__ import annotations

import hashlib
import os
import shutil
import time
import uuid
from concurrent.futures import ThreadPoolExecutor, wait
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from matgen import __version__
from matgen.bake.config import BakeConfig
from matgen.bake.lookup import TexelLookup, set_threads
from matgen.bake.run import BakePlan, check_inputs, iter_strips, plan_bake
from matgen.errors import DataError, PathError
from matgen.export.descriptor import DESCRIPTOR_FORMAT, DESCRIPTOR_VERSION, descriptor_json, texture_entry
from matgen.export.exr import SPECTRAL_LAYOUT_VERSION, StreamingExr, make_texture, set_io_threads
from matgen.fsutil import FolderLock, pid_alive
from matgen.provenance import hash_json, sha256_file
from matgen.tables.store import Table, default_table_path, load_default_table

#: Prefix of the hidden staging folders inside an output folder.
STAGING_PREFIX = ".matgen-staging-"


def load_table(config: BakeConfig):
    """Load the table a config names: the shipped default table, or a table file."""
    if config.table_path == "default":
        return load_default_table()
    return Table.load(config.table_path)


def _table_identity(table, table_source) -> tuple:
    """(name, SHA-256) of the table used: of its file when known, else of its content (axes, quantities)."""
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


def check_writable(out_dir: Path) -> None:
    """Refuse an output folder that exists as a file or cannot be created or written."""
    if out_dir.exists() and not out_dir.is_dir():
        raise PathError(f"output folder {out_dir} exists and is not a folder")
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise PathError(f"cannot create output folder {out_dir}: {exc.strerror or exc}") from exc
    if not os.access(out_dir, os.W_OK | os.X_OK):
        raise PathError(f"output folder {out_dir} is not writable")


def _remove_stale_staging(out_dir: Path) -> None:
    for entry in out_dir.glob(STAGING_PREFIX + "*"):
        try:
            pid = int(entry.name[len(STAGING_PREFIX) :].split("-")[0])
        except ValueError:
            continue
        if not pid_alive(pid) or pid == os.getpid():
            shutil.rmtree(entry, ignore_errors=True)


def planned_files(plan: BakePlan, name: str) -> list:
    """Relative paths of every file a bake of ``plan`` writes, descriptor last."""
    files = [spec.file_name(t) for t in plan.tile_numbers for spec in plan.outputs]
    if plan.config.outputs.materialx and plan.single_tile is None:
        files.append("material.mtlx")
    if plan.config.outputs.mitsuba_scene and plan.single_tile is None:
        files.append("scene_mitsuba.xml")
    files.append(_descriptor_name(plan))
    return files


def _descriptor_name(plan: BakePlan) -> str:
    return "material.json" if plan.single_tile is None else f"material.{plan.single_tile}.json"


def _openpbr_inputs(plan: BakePlan, spec_ior: float) -> dict:
    udim = plan.tile_numbers[0] is not None
    inputs = {"subsurface_weight": {"value": 1.0, "type": "float"}}
    for spec in plan.outputs:
        if spec.kind == "target":
            path = f"{spec.key}.<UDIM>.exr" if udim else f"{spec.key}.exr"
            inputs[spec.quantity] = {
                "texture": path,
                "unit": spec.unit,
                "type": "color3" if len(spec.channels) == 3 else "float",
            }
    if spec_ior is not None:  # the table's boundary index (mean over its grid)
        inputs["specular_ior"] = {"value": spec_ior, "type": "float", "unit": "1"}
    return inputs


def _standard_surface_inputs(plan: BakePlan, spec_ior: float) -> dict:
    """Map Standard Surface inputs onto the OpenPBR maps (RGB radius = radius scale, scale = radius)."""
    udim = plan.tile_numbers[0] is not None
    rename = {
        "subsurface_color": "subsurface_color",
        "subsurface_radius_scale": "subsurface_radius",
        "subsurface_radius": "subsurface_scale",
        "subsurface_scatter_anisotropy": "subsurface_anisotropy",
    }
    inputs = {"subsurface": {"value": 1.0, "type": "float"}}
    for spec in plan.outputs:
        if spec.kind == "target" and spec.quantity in rename:
            path = f"{spec.key}.<UDIM>.exr" if udim else f"{spec.key}.exr"
            inputs[rename[spec.quantity]] = {
                "texture": path,
                "unit": spec.unit,
                "type": "color3" if len(spec.channels) == 3 else "float",
            }
    if spec_ior is not None:
        inputs["specular_IOR"] = {"value": spec_ior, "type": "float", "unit": "1"}
    return inputs


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
        Check the config and every map, list the files, write nothing.
    allow_outside : bool
        Allow pass-response paths outside the config's folder.
    progress : callable, optional
        Called as ``progress(texels_done, texels_total)`` after each strip.
    memory_budget_bytes : int
        Bytes one strip of all channels may take (float32); bounds memory.
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
    if dry_run:
        check_inputs(plan)
        return BakeResult(
            out_dir, None, files, plan.texels, dry_run=True, seconds=time.perf_counter() - t_start
        )
    check_writable(out_dir)
    lock_name = ".matgen-bake.lock" if tile is None else f".matgen-bake.{int(tile)}.lock"
    with FolderLock(out_dir, name=lock_name, purpose="bake"):
        _remove_stale_staging(out_dir)
        report = check_inputs(plan)
        set_threads(jobs)
        set_io_threads(jobs)
        staging = out_dir / f"{STAGING_PREFIX}{os.getpid()}-{uuid.uuid4().hex[:8]}"
        staging.mkdir()
        try:
            result = _bake_into(
                plan, table, table_source, staging, progress, memory_budget_bytes, rows, report, jobs
            )
            _commit(staging, out_dir, result.files)
        finally:
            shutil.rmtree(staging, ignore_errors=True)
    result.out_dir = out_dir
    result.descriptor = out_dir / result.files[-1]
    result.seconds = time.perf_counter() - t_start
    return result


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
    sums = {spec.key: np.zeros(len(spec.channels)) for spec in plan.outputs}  # for the preview scene
    n_table, n_enc = 0, report.total_clamped
    base_attrs = {"matgen:version": __version__}
    # strip k is written in worker threads (OpenImageIO releases the GIL while it compresses) while strip
    # k+1 is computed; two strips are then in flight, so each gets half the memory budget
    with ThreadPoolExecutor(
        max_workers=max(1, jobs or os.cpu_count() or 1), thread_name_prefix="exr"
    ) as pool:
        for ti in plan.tiles:
            writers, pending = {}, []
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
                    if spec.kind == "spectral":
                        attrs["spectralLayoutVersion"] = SPECTRAL_LAYOUT_VERSION
                    if spec.kind in ("rgb", "target") and len(spec.channels) == 3:
                        attrs["matgen:working_space"] = table.working_space
                    target = staging / (rel + ".scan.exr") if opts.texture else staging / rel
                    writers[spec.key] = StreamingExr(
                        target,
                        ti.width,
                        ti.height,
                        spec.channels,
                        pixel_type=opts.pixel_type,
                        compression=opts.compression,
                        attributes=attrs,
                    )
                strips = iter_strips(plan, ti.tile, lookup=lookup, memory_budget_bytes=budget // 2, rows=rows)
                for strip in strips:
                    _finish(pending)  # the previous strip's writes, in row order per file
                    pending = [
                        pool.submit(w.write_rows, strip.y0, strip.values[key]) for key, w in writers.items()
                    ]
                    for key in writers:
                        sums[key] += strip.values[key].sum(axis=(0, 1), dtype=np.float64)
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
            for spec in plan.outputs:
                rel = spec.file_name(ti.tile)
                if opts.texture:
                    make_texture(staging / (rel + ".scan.exr"), staging / rel)
                    (staging / (rel + ".scan.exr")).unlink()
                entries.append(
                    texture_entry(
                        spec, rel, staging / rel, ti.tile, ti.width, ti.height, opts.pixel_type, opts.texture
                    )
                )
                written.append(rel)
    ior = float(np.mean(table.quantities["ior"])) if "ior" in table.quantities else None
    targets = {}
    if "openpbr" in opts.targets:
        targets["openpbr"] = {
            "shading_model": "OpenPBR Surface (MaterialX 1.39 open_pbr_surface)",
            "albedo_convention": "spec_remap: subsurface_color is van de Hulst's A of the "
            "effective single-scattering albedo (matgen.fit.targets)",
            "inputs": _openpbr_inputs(plan, ior),
        }
    if "standard_surface" in opts.targets:
        targets["standard_surface"] = {
            "shading_model": "Autodesk Standard Surface (MaterialX standard_surface)",
            "inputs": _standard_surface_inputs(plan, ior),
        }
    documents = {}
    if "material.mtlx" in planned_files(plan, cfg.name):
        from matgen.export.materialx import document_text, openpbr_document

        inputs = targets.get("openpbr", {}).get("inputs", {"subsurface_weight": {"value": 1.0}})
        doc = openpbr_document(
            cfg.name,
            {k: {kk: vv for kk, vv in v.items() if kk in ("texture", "value")} for k, v in inputs.items()},
            table.working_space,
        )
        (staging / "material.mtlx").write_text(document_text(doc))
        documents["materialx"] = {"path": "material.mtlx", "sha256": sha256_file(staging / "material.mtlx")}
        written.append("material.mtlx")
    if "scene_mitsuba.xml" in planned_files(plan, cfg.name):
        from matgen.export.scene import mitsuba_scene_xml

        if ior is None:
            raise DataError("the preview scene needs the table's boundary refractive index (quantity 'ior')")
        mean = {k: v / max(total, 1) for k, v in sums.items()}
        xml = mitsuba_scene_xml(
            plan.spectral_bands.centre_nm,
            mean["spectral/albedo_single"],
            mean["spectral/mean_free_path_mm"],
            float(mean["openpbr/subsurface_scatter_anisotropy"][0]),
            ior,
            cfg.metres_per_scene_unit,
            name=cfg.name,
        )
        (staging / "scene_mitsuba.xml").write_text(xml)
        documents["mitsuba_scene"] = {
            "path": "scene_mitsuba.xml",
            "sha256": sha256_file(staging / "scene_mitsuba.xml"),
        }
        written.append("scene_mitsuba.xml")
    table_name, table_hash = _table_identity(table, table_source)
    source = {k: v for k, v in cfg.source.items()}
    desc = {
        "format": DESCRIPTOR_FORMAT,
        "format_version": DESCRIPTOR_VERSION,
        "name": cfg.name,
        "units": {
            "wavelength": "nm",
            "length": "mm",
            "scene_length": "scene_unit",
            "metres_per_scene_unit": cfg.metres_per_scene_unit,
        },
        "bands": {"table": table.bands.to_dict(), "spectral_stacks": plan.spectral_bands.to_dict()},
        "working_space": table.working_space,
        "illuminant": table.illuminant,
        "udim_tiles": None if plan.tile_numbers[0] is None else [int(t) for t in plan.tile_numbers],
        "textures": entries,
        "passes": {k: {"weights": v.tolist()} for k, v in plan.pass_weights.items()},
        "targets": targets,
        "documents": documents,
        "provenance": {
            "matgen_version": __version__,
            "table": table_name,
            "table_sha256": table_hash,
            "table_manifest": {
                k: v for k, v in (table.manifest or {}).items() if k in ("spec", "spec_hash", "name", "hash")
            },
            "spectra": _spectra_provenance(table),
            "config": source,
            "config_sha256": hash_json(source),
        },
        "statistics": {
            "texels": int(plan.texels),
            "table_clamped_texels": int(n_table),
            "encoding_clamped_texels": int(n_enc),
        },
    }
    name = _descriptor_name(plan)
    (staging / name).write_text(descriptor_json(desc))
    written.append(name)
    return BakeResult(staging, None, written, plan.texels, n_table, n_enc)


def _commit(staging: Path, out_dir: Path, files: list) -> None:
    """Move every staged file into place (descriptor last); each move is atomic."""
    for rel in files:
        src, dst = staging / rel, out_dir / rel
        if not src.is_file():
            raise PathError(f"staged output {rel} is missing; nothing was committed after it")
        dst.parent.mkdir(parents=True, exist_ok=True)
        os.replace(src, dst)
