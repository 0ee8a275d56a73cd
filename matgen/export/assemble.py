"""Assembling a UDIM set baked tile by tile on a farm: the set's descriptor and documents from its tiles.

A farm bakes each tile of a UDIM set on its own (``matgen bake CONFIG --out DIR --tile N``), which writes
the tile's textures and ``material.<tile>.json`` only. :func:`assemble_tiles` (``matgen bake CONFIG --out
DIR --assemble-tiles``) then checks every tile of the set: its descriptor exists and is exactly what this
config, table and matgen write for that tile, and every texture it lists matches its SHA-256. It writes the
set's ``material.mtlx`` (and preview scene) and ``material.json``, the same bytes a whole bake of the set
writes, atomically and under the folder's whole-bake lock, which refuses while a one-tile bake still works
in the folder. Units: as the descriptor (lengths in mm, renderer-target lengths in scene units).
"""

from __future__ import annotations

import dataclasses
import json
import time
from pathlib import Path

import numpy as np

from matgen.bake.config import BakeConfig
from matgen.bake.run import BakePlan, plan_bake
from matgen.errors import ConfigError, DataError, MatgenError, PathError
from matgen.export.descriptor import load_descriptor, texture_entry
from matgen.export.job import (
    SCENE_KEYS,
    BakeResult,
    _BakeLock,
    _build_documents,
    _commit,
    _remove_stale_staging,
    check_unlocked,
    check_writable,
    load_table,
    staging_folder,
)
from matgen.tables.store import default_table_path


def assemble_tiles(
    config: BakeConfig,
    out_dir,
    *,
    table=None,
    table_source=None,
    dry_run: bool = False,
    allow_outside: bool = False,
) -> BakeResult:
    """Write ``material.json`` and the documents of a UDIM set whose tiles were baked one by one (``--tile``).

    Every tile of the set must have its ``material.<tile>.json`` in ``out_dir``, each of its textures must
    match its SHA-256, and the descriptor must be what this config, table and matgen write for that tile
    (same config and table identity). The set's descriptor, MaterialX document (and preview scene) are then
    exactly those of a whole bake of the set; they are written atomically under the folder's whole-bake
    lock, which refuses while any one-tile bake still holds its lock.

    Parameters
    ----------
    config : BakeConfig
        The material config the tiles were baked from.
    out_dir : str or Path
        The folder the tiles were baked into.
    table, table_source
        As for :func:`bake`.
    dry_run : bool
        Check everything, write nothing.
    allow_outside : bool
        As for :func:`bake`.

    Returns
    -------
    BakeResult
        ``files`` are the documents written (descriptor last).

    Raises
    ------
    DataError
        Listing every tile whose descriptor is missing or does not match, and every missing or modified
        texture.

    """
    t_start = time.perf_counter()
    out_dir = Path(out_dir)
    if table is None:
        table = load_table(config)
        table_source = default_table_path() if config.table_path == "default" else config.table_path
    plan = plan_bake(config, table, allow_outside=allow_outside)
    if plan.tile_numbers[0] is None:
        raise ConfigError(
            "assembling tiles needs a UDIM set, but no map of the config is a UDIM set (a single texture's "
            "bake writes material.json itself)"
        )
    if not out_dir.is_dir():
        raise PathError(
            f"output folder {out_dir} does not exist or is not a folder; bake the tiles into it first "
            f"(matgen bake CONFIG --out {out_dir} --tile N for each tile)"
        )
    check_writable(out_dir, create=False)
    if dry_run:
        check_unlocked(out_dir, None)
        docs = _assembled_documents(plan, table, table_source, out_dir)
        return BakeResult(
            out_dir,
            None,
            [rel for rel, _ in docs],
            plan.texels,
            dry_run=True,
            seconds=time.perf_counter() - t_start,
        )
    with _BakeLock(out_dir, None):
        _remove_stale_staging(out_dir)
        docs = _assembled_documents(plan, table, table_source, out_dir)
        with staging_folder(out_dir) as staging:
            for rel, data in docs:
                (staging / rel).write_bytes(data)
            _commit(staging, out_dir, [rel for rel, _ in docs])
    stats = json.loads(docs[-1][1])["statistics"]
    files = [rel for rel, _ in docs]
    return BakeResult(
        out_dir,
        out_dir / files[-1],
        files,
        plan.texels,
        stats["table_clamped_texels"],
        stats["encoding_clamped_texels"],
        time.perf_counter() - t_start,
    )


def _mismatch(expected: dict, found: dict) -> str:
    """Why a tile descriptor differs from the one this config and table write: the fields that differ."""
    prov_e, prov_f = expected["provenance"], found.get("provenance", {})
    why = []
    if prov_e["config_sha256"] != prov_f.get("config_sha256"):
        why.append("baked from a different config")
    if prov_e["table_sha256"] != prov_f.get("table_sha256"):
        why.append(f"baked with a different table ({prov_f.get('table', '?')})")
    if prov_e["matgen_version"] != prov_f.get("matgen_version"):
        why.append(f"baked by matgen {prov_f.get('matgen_version', '?')}, not {prov_e['matgen_version']}")
    fields = sorted(k for k in set(expected) | set(found) if expected.get(k) != found.get(k))
    return ", ".join(why) or f"fields {', '.join(fields) or '(formatting)'} differ"


def _assembled_documents(plan: BakePlan, table, table_source, out_dir: Path) -> list:
    """Check every tile's descriptor and textures; return the set's documents ``[(relative path, bytes)]``."""
    opts = plan.config.outputs
    scene_keys = [s.key for s in plan.outputs if s.key in SCENE_KEYS] if opts.mitsuba_scene else []
    entries, problems = [], []
    sums = {s.key: np.zeros(len(s.channels)) for s in plan.outputs if s.key in scene_keys}
    n_table = n_enc = 0
    for ti in plan.tiles:
        t = ti.tile
        name = f"material.{t}.json"
        if not (out_dir / name).is_file():
            problems.append(f"tile {t}: {name} is missing")
            continue
        try:
            doc = load_descriptor(out_dir / name)
        except MatgenError as exc:
            problems.append(f"tile {t}: {exc}")
            continue
        want = [spec.file_name(t) for spec in plan.outputs]
        have = [e["path"] for e in doc["textures"]]
        if have != want:
            odd = sorted(set(have) ^ set(want))
            problems.append(
                f"tile {t}: {name} lists other textures than this config bakes ({', '.join(odd)})"
            )
            continue
        bad = []
        for spec, e in zip(plan.outputs, doc["textures"], strict=True):
            f = out_dir / e["path"]
            if not f.is_file():
                bad.append(f"{e['path']} is missing")
                continue
            entry = texture_entry(
                spec, e["path"], f, t, ti.width, ti.height, spec.pixel_type or opts.pixel_type, opts.texture
            )
            if entry["sha256"] != e["sha256"]:
                bad.append(f"{e['path']} does not match its SHA-256 in {name}")
            elif entry != e:
                diff = sorted(k for k in entry if entry[k] != e.get(k))
                bad.append(f"{e['path']}: its entry in {name} differs from this config's ({', '.join(diff)})")
        stats = doc["statistics"]
        tile_sums = stats.get("output_sums", {})
        if set(scene_keys) - set(tile_sums):
            bad.append(f"{name} records no texel sums for the preview scene")
        if not bad:
            # the tile's descriptor must be exactly what this config, table and matgen write for its textures
            tile_plan = dataclasses.replace(plan, tiles=[ti], single_tile=t)
            tile_out = {k: np.asarray(tile_sums[k], dtype=np.float64) for k in scene_keys} or None
            expected = _build_documents(
                tile_plan,
                table,
                table_source,
                doc["textures"],
                tile_out,
                stats.get("table_clamped_texels", 0),
                stats.get("encoding_clamped_texels", 0),
                tile_out,
            )[-1][1]
            if expected != (out_dir / name).read_bytes():
                bad.append(
                    f"{name} does not match this config and table: {_mismatch(json.loads(expected), doc)}"
                )
        if bad:
            problems.append(f"tile {t}: " + "; ".join(bad))
            continue
        entries.extend(doc["textures"])
        n_table += stats.get("table_clamped_texels", 0)
        n_enc += stats.get("encoding_clamped_texels", 0)
        for k in scene_keys:
            sums[k] += np.asarray(tile_sums[k], dtype=np.float64)
    if problems:
        raise DataError(
            f"cannot assemble the UDIM tiles of {out_dir}: {'; '.join(problems)}; bake those tiles again "
            f"(matgen bake CONFIG --out {out_dir} --tile N) and assemble again"
        )
    return _build_documents(plan, table, table_source, entries, sums, n_table, n_enc)
