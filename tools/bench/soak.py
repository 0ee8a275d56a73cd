#!/usr/bin/env python3
"""Soak benchmark: bake a UDIM set of many small tiles with 2 workers; report throughput and memory per tile.

Two worker processes each bake tiles one at a time (``matgen.export.job.bake(..., tile=T)``, each tile its own
lock and descriptor, all into one output folder) and record, after every tile, the seconds it took, the
worker's resident set size (RSS, psutil) and its high-water mark (``ru_maxrss``). A leak shows as RSS that
keeps growing with the tiles a worker has baked; the script fits a line to each worker's RSS over its second
half of tiles (after warm-up: imports, kernel compilation, first table load) and reports the slope in MB per
tile. Then one whole-set bake (``jobs=2`` lookup threads, all tiles in one call) is timed for comparison.

The table and maps are generated test data (tests/hostile/projects.py: invented smooth functions), so the
figures measure matgen's I/O and lookup machinery, not physics.

Usage::

    python tools/bench/soak.py                      # 40 tiles of 128 x 128, 2 workers
    python tools/bench/soak.py --tiles 40 --size 64 --json soak.json
"""

from __future__ import annotations

import argparse
import concurrent.futures as cf
import json
import multiprocessing as mp
import os
import resource
import sys
import tempfile
import time
import warnings
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests" / "hostile"))

#: Leak criterion: RSS growth over a worker's second half of tiles, MB per tile.
LEAK_SLOPE_MB_PER_TILE = 0.5


def udim_tiles(n: int) -> list:
    """``n`` UDIM tile numbers, row by row: 1001..1010, 1011..1020, ..."""
    return [1001 + (i % 10) + 10 * (i // 10) for i in range(n)]


def _rss_mb() -> float:
    import psutil

    return psutil.Process().memory_info().rss / 2**20


def _maxrss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # Linux: kB


def _worker_init(threads: int) -> None:
    os.environ["NUMBA_NUM_THREADS"] = str(threads)
    warnings.simplefilter("ignore")


_BAKED_HERE = [0]


def bake_tile(cfg: str, out: str, tile: int) -> dict:
    """Bake one tile in this worker; return its timing and this process's memory after it."""
    from matgen.bake.config import load_config
    from matgen.export.job import bake

    t0 = time.perf_counter()
    res = bake(load_config(cfg), out, jobs=1, tile=tile)
    _BAKED_HERE[0] += 1
    return {
        "tile": tile,
        "pid": os.getpid(),
        "sequence": _BAKED_HERE[0],
        "seconds": time.perf_counter() - t0,
        "texels": int(res.texels),
        "rss_mb": _rss_mb(),
        "maxrss_mb": _maxrss_mb(),
    }


def _slope(xs, ys) -> float:
    n = len(xs)
    if n < 2:
        return 0.0
    mx, my = sum(xs) / n, sum(ys) / n
    den = sum((x - mx) ** 2 for x in xs)
    return sum((x - mx) * (y - my) for x, y in zip(xs, ys, strict=True)) / den if den else 0.0


def run(tiles: int, size: int, workers: int, workdir: Path) -> dict:
    """Run the soak; return a JSON-ready report."""
    from projects import make_project

    cfg = make_project(workdir / "proj", h=size, w=size, tiles=udim_tiles(tiles))
    out = workdir / "out"
    ctx = mp.get_context("spawn")
    rows = []
    t0 = time.perf_counter()
    with cf.ProcessPoolExecutor(
        max_workers=workers, mp_context=ctx, initializer=_worker_init, initargs=(1,)
    ) as pool:
        futures = [pool.submit(bake_tile, str(cfg), str(out), t) for t in udim_tiles(tiles)]
        for fut in cf.as_completed(futures):
            rows.append(fut.result())
    wall = time.perf_counter() - t0
    by_worker = {}
    for r in sorted(rows, key=lambda r: (r["pid"], r["sequence"])):
        by_worker.setdefault(r["pid"], []).append(r)
    workers_report = []
    for pid, rs in by_worker.items():
        half = rs[len(rs) // 2 :]
        workers_report.append(
            {
                "pid": pid,
                "tiles": len(rs),
                "rss_first_mb": rs[0]["rss_mb"],
                "rss_last_mb": rs[-1]["rss_mb"],
                "maxrss_last_mb": rs[-1]["maxrss_mb"],
                "rss_slope_second_half_mb_per_tile": _slope(
                    list(range(len(half))), [r["rss_mb"] for r in half]
                ),
                "seconds_first_tile": rs[0]["seconds"],
                "seconds_median_tile": sorted(r["seconds"] for r in rs)[len(rs) // 2],
            }
        )
    texels = sum(r["texels"] for r in rows)
    steady = [r["seconds"] for ws in by_worker.values() for r in ws[1:]]

    # the whole set in one call, lookup on 2 threads, for comparison
    from matgen.bake.config import load_config
    from matgen.export.job import bake

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        bake(load_config(cfg), workdir / "warm", jobs=workers)  # compile and load once
        rss_before = _rss_mb()
        t1 = time.perf_counter()
        whole = bake(load_config(cfg), workdir / "whole", jobs=workers)
        whole_s = time.perf_counter() - t1
        rss_after = _rss_mb()
    worst = max(w["rss_slope_second_half_mb_per_tile"] for w in workers_report)
    return {
        "tiles": tiles,
        "tile_size": [size, size],
        "workers": workers,
        "wall_s": wall,
        "tiles_per_s": tiles / wall,
        "texels_per_s": texels / wall,
        "steady_seconds_per_tile_median": sorted(steady)[len(steady) // 2] if steady else None,
        "per_worker": workers_report,
        "leak_slope_limit_mb_per_tile": LEAK_SLOPE_MB_PER_TILE,
        "worst_rss_slope_mb_per_tile": worst,
        "memory_flat": worst < LEAK_SLOPE_MB_PER_TILE,
        "whole_set_one_call": {
            "seconds": whole_s,
            "texels_per_s": whole.texels / whole_s,
            "rss_growth_mb": rss_after - rss_before,
            "threads": workers,
        },
    }


def print_report(rep: dict) -> None:
    """Human-readable summary."""
    print(
        f"soak: {rep['tiles']} UDIM tiles of {rep['tile_size'][0]} x {rep['tile_size'][1]}, "
        f"{rep['workers']} worker processes"
    )
    print(
        f"  wall {rep['wall_s']:.1f} s, {rep['tiles_per_s']:.2f} tiles/s, "
        f"{rep['texels_per_s'] / 1e3:.0f} k texels/s; "
        f"median steady tile {rep['steady_seconds_per_tile_median']:.3f} s"
    )
    for w in rep["per_worker"]:
        print(
            f"  worker {w['pid']}: {w['tiles']} tiles, "
            f"RSS {w['rss_first_mb']:.0f} -> {w['rss_last_mb']:.0f} MB, "
            f"peak {w['maxrss_last_mb']:.0f} MB, "
            f"slope (2nd half) {w['rss_slope_second_half_mb_per_tile']:+.3f} "
            f"MB/tile; first tile {w['seconds_first_tile']:.2f} s, median {w['seconds_median_tile']:.3f} s"
        )
    verdict = "flat" if rep["memory_flat"] else "GROWING"
    print(
        f"  memory per tile: {verdict} (worst slope {rep['worst_rss_slope_mb_per_tile']:+.3f} MB/tile, "
        f"limit {rep['leak_slope_limit_mb_per_tile']} MB/tile)"
    )
    w = rep["whole_set_one_call"]
    print(
        f"  whole set in one call ({w['threads']} lookup threads): {w['seconds']:.2f} s, "
        f"{w['texels_per_s'] / 1e3:.0f} k texels/s, RSS growth {w['rss_growth_mb']:+.1f} MB"
    )


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--tiles", type=int, default=40, help="UDIM tiles to bake")
    ap.add_argument("--size", type=int, default=128, help="tile width = height in texels")
    ap.add_argument("--workers", type=int, default=2, help="worker processes")
    ap.add_argument("--json", help="write the report as JSON to this file")
    ap.add_argument("--keep", help="work in this folder and keep it (default: a temporary folder)")
    args = ap.parse_args(argv)
    warnings.simplefilter("ignore")
    if args.keep:
        Path(args.keep).mkdir(parents=True, exist_ok=True)
        rep = run(args.tiles, args.size, args.workers, Path(args.keep))
    else:
        with tempfile.TemporaryDirectory(prefix="matgen-soak-") as d:
            rep = run(args.tiles, args.size, args.workers, Path(d))
    print_report(rep)
    if args.json:
        Path(args.json).write_text(json.dumps(rep, indent=1) + "\n")
    return 0 if rep["memory_flat"] else 1


if __name__ == "__main__":
    sys.exit(main())
