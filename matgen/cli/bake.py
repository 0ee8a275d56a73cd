"""``matgen bake CONFIG``: pigment maps to spectral EXR stacks, RGB and target maps, passes, descriptor."""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

from matgen.bake.config import load_config
from matgen.cli import add_command, print_json, warn
from matgen.errors import MatgenWarning, ParameterError
from matgen.export.assemble import assemble_tiles
from matgen.export.job import bake
from matgen.tables.store import Table

#: Largest --memory-mb, MiB (1 TiB).
MAX_MEMORY_MB = 1 << 20

#: Default memory budget of a bake, MiB.
MEMORY_MB = 256
#: Default with ``outputs.exr.texture = true``: making a tile's mip-maps holds 2 x its float32 image + 16 MiB
#: (``matgen.export.job.TEXTURE_MEMORY_FACTOR``); a 2048 x 2048 tile of 31 bands needs 1008 MiB.
TEXTURE_MEMORY_MB = 1100


def register(sub):
    """Add ``matgen bake`` to the subcommands."""
    p = add_command(
        sub,
        "bake",
        "Bake a material config's pigment maps into textures, a descriptor and a MaterialX document",
        "matgen bake scenes/low_tide_lantern/material.toml --out lowtide_bake --jobs 2",
        description=(
            "Read the pigment maps a material config names (EXR, TIFF, PNG; single files or UDIM sets), look "
            "every texel up in the skin table, and write spectral EXR stacks (one channel per band), RGB "
            "maps in the working space, OpenPBR subsurface maps, UV/IR pass maps, a QA map, a JSON "
            "descriptor with checksums and a MaterialX document. Outputs appear only when the whole bake "
            "succeeded. On a farm, bake each UDIM tile with --tile N, then run --assemble-tiles once to "
            "write the set's material.json and material.mtlx. Exit status 0 on success, 2 when refused (one "
            "line naming the file, tile, texel or range), 75 when another live process holds the folder or "
            "tile (retry later), 143 on SIGTERM (what the bake created is removed)."
        ),
    )
    p.add_argument("config", help="material config (TOML)")
    p.add_argument("--out", default="matgen_out", help="output folder")
    p.add_argument("--jobs", type=int, default=None, help="lookup threads (default: all cores)")
    farm = p.add_mutually_exclusive_group()
    farm.add_argument(
        "--tile",
        type=int,
        default=None,
        help="bake only this UDIM tile (farm use); writes material.<tile>.json",
    )
    farm.add_argument(
        "--assemble-tiles",
        action="store_true",
        help="after every tile was baked with --tile into --out: check them all (descriptors, SHA-256, same "
        "config and table) and write the set's material.json and material.mtlx",
    )
    p.add_argument(
        "--dry-run", action="store_true", help="check config and maps, print what would be written"
    )
    p.add_argument("--table", default=None, help="table file to use instead of the config's")
    p.add_argument(
        "--allow-outside",
        action="store_true",
        help="allow paths in the config that leave its folder (through '..' or absolute)",
    )
    p.add_argument(
        "--memory-mb",
        type=int,
        default=None,
        help="memory budget of the texels in flight, MiB (also the most that making tiled mip-mapped "
        f"textures may take) (default: {MEMORY_MB}; {TEXTURE_MEMORY_MB} with outputs.exr.texture = true, "
        "enough to make the mip-maps of a 2048 x 2048 tile of 31 bands)",
    )
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.add_argument("--json", action="store_true", help="print the result as one JSON document, no progress")
    p.set_defaults(func=run)


def memory_budget_mb(args, config) -> int:
    """Return the memory budget in MiB: ``--memory-mb``, else the default for the texture setting."""
    if args.memory_mb is not None:
        return int(args.memory_mb)
    return TEXTURE_MEMORY_MB if config.outputs.texture else MEMORY_MB


def run(args) -> int:
    """Run ``matgen bake``; returns the exit status."""
    if args.memory_mb is not None and not 1 <= args.memory_mb <= MAX_MEMORY_MB:
        raise ParameterError(f"--memory-mb is {args.memory_mb}; allowed 1 .. {MAX_MEMORY_MB} MiB")
    if args.jobs is not None and not 1 <= args.jobs <= 4096:
        raise ParameterError(f"--jobs is {args.jobs}; allowed 1 .. 4096 threads")
    config = load_config(args.config, allow_outside=args.allow_outside)
    want_usd = bool(config.source.get("outputs", {}).get("usd", False))
    if want_usd:  # before any texel is computed: a missing usd-core is one message, status 2
        from matgen._optional import require

        require("pxr.Usd", "write material.usda (outputs.usd = true)")
    table = Table.load(args.table) if args.table else None
    if args.assemble_tiles:
        return _assemble(args, config, table)
    bar = None
    progress = None
    if not args.quiet and not args.dry_run and not args.json:
        from tqdm import tqdm

        bar = tqdm(
            total=0,
            unit=" texels",
            unit_scale=True,
            desc="bake",
            file=sys.stderr,
            dynamic_ncols=True,
            bar_format="{desc}: {percentage:3.0f}%|{bar}| {n_fmt}/{total_fmt} texels "
            "[{rate_fmt}, elapsed {elapsed}, ETA {remaining}]",
        )

        def progress(done, total):
            if bar.total != total:
                bar.total = total
            bar.update(done - bar.n)

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", MatgenWarning)
        try:
            result = bake(
                config,
                args.out,
                table=table,
                table_source=args.table,
                jobs=args.jobs,
                tile=args.tile,
                dry_run=args.dry_run,
                allow_outside=args.allow_outside,
                progress=progress,
                memory_budget_bytes=memory_budget_mb(args, config) << 20,
            )
        finally:
            if bar is not None:
                bar.close()
    seen = set()
    for w in caught:
        msg = str(w.message)
        if msg not in seen:
            seen.add(msg)
            warn("bake", f"{w.category.__name__}: {msg}")
    out = Path(args.out)
    if args.json:
        print_json(_result_doc(result, sorted(seen)))
        return 0
    if result.dry_run:
        print(
            f"dry run: config, maps, output folder and documents are valid; {result.texels} texels; "
            f"would write into {out}:"
        )
        for rel in result.files:
            print(f"  {rel}")
        print(
            f"  texels that would be clamped: {result.table_clamped} to the table's range "
            f"({100 * result.table_clamped / max(result.texels, 1):.1f} %), {result.encoding_clamped} to the "
            "encoding range"
        )
        return 0
    if want_usd and args.tile is None:  # one-tile farm bakes leave the USD layer to --assemble-tiles
        from matgen.export.usd import write_usd

        print(f"USD layer: {write_usd(result.descriptor)}")
    rate = result.texels / result.seconds if result.seconds > 0 else float("nan")
    print(f"baked {result.texels} texels in {result.seconds:.1f} s ({rate:,.0f} texels/s) into {out}")
    print(f"  {len(result.files)} files; descriptor {result.descriptor}")
    if result.table_clamped or result.encoding_clamped:
        print(
            f"  clamped texels: {result.table_clamped} to the table's range, {result.encoding_clamped} to "
            "the "
            "encoding range (see qa/qa*.exr)"
        )
    return 0


def _result_doc(result, warnings_seen) -> dict:
    """Return the ``--json`` document of a bake, dry run or assembly."""
    return {
        "status": "dry_run" if result.dry_run else "done",
        "out": str(result.out_dir),
        "descriptor": None if result.descriptor is None else str(result.descriptor),
        "files": list(result.files),
        "texels": int(result.texels),
        "table_clamped_texels": int(result.table_clamped),
        "encoding_clamped_texels": int(result.encoding_clamped),
        "seconds": round(float(result.seconds), 3),
        "warnings": list(warnings_seen),
    }


def _assemble(args, config, table) -> int:
    """``--assemble-tiles``: the set's descriptor and documents from its one-tile bakes."""
    result = assemble_tiles(
        config,
        args.out,
        table=table,
        table_source=args.table,
        dry_run=args.dry_run,
        allow_outside=args.allow_outside,
    )
    out = Path(args.out)
    if args.json:
        print_json(_result_doc(result, []))
        return 0
    if result.dry_run:
        print(f"dry run: every UDIM tile in {out} is complete and matches; would write:")
        for rel in result.files:
            print(f"  {rel}")
        return 0
    print(f"assembled the UDIM tiles in {out} ({result.texels} texels): {', '.join(result.files)}")
    if config.source.get("outputs", {}).get("usd", False):
        from matgen.export.usd import write_usd

        print(f"USD layer: {write_usd(result.descriptor)}")
    print(f"  descriptor {result.descriptor}")
    return 0
