"""Benchmark lookup tables: build time, reweighting speed-up over separate transport runs, lookups per second.

Three measurements, each side by side in one run:

1. **build**: the spec (default ``lut/specs/default.toml``) built from scratch in a fresh job folder with the
   local executor on the available cores; reports wall time and the worst relative standard error of A.
2. **reweighting speed-up**: for one band (default 550 nm) and a subset of grid points, separate transport
   runs (one per point, its own absorption) against one reference run with photon records plus factored
   reweighting for *every* grid point of the table, at equal photon count per point. The per-point time of
   the separate runs is measured on the subset and multiplied by the table's grid size. The transport's own
   unfactored ``reweight`` on the same records is timed too.
3. **lookups**: multilinear lookups of 10^7 random points (RGB quantities) and 10^6 points (one spectral
   quantity) in the table (default: the shipped one).
"""

from __future__ import annotations

import json
import tempfile
import time
from pathlib import Path

import numpy as np

EXAMPLE = "matgen bench tables --skip-build --photons 50000"


def add_arguments(parser) -> None:
    """Options of ``matgen bench tables``."""
    parser.add_argument("--spec", help="table spec to build (default: the shipped default spec)")
    parser.add_argument("--table", help="table for the lookup benchmark (default: the shipped default table)")
    parser.add_argument("--skip-build", action="store_true", help="skip the from-scratch build")
    parser.add_argument("--workers", type=int, help="processes of the build (default: available CPUs)")
    parser.add_argument(
        "--photons", type=int, default=50000, help="photons per point in the speed-up comparison"
    )
    parser.add_argument("--subset", type=int, default=6, help="grid points run separately in the comparison")
    parser.add_argument("--band-nm", type=float, default=550.0, help="band of the speed-up comparison (nm)")
    parser.add_argument("--lookups", type=int, default=10_000_000, help="random lookups of RGB quantities")
    parser.add_argument("--json", dest="json_out", help="also write the figures to this JSON file")


def _default_spec() -> Path:
    from matgen.tables.store import lut_files

    return lut_files() / "specs" / "default.toml"


def bench_build(spec_path, workers=None) -> dict:
    """Build ``spec_path`` from scratch in a temporary folder; returns wall time and QA."""
    from matgen.tables.build import build_table
    from matgen.tables.executors import cpu_count
    from matgen.tables.report import table_qa

    with tempfile.TemporaryDirectory(prefix="matgen-bench-") as tmp:
        t0 = time.perf_counter()
        table = build_table(spec_path, Path(tmp) / "bench.npz", workers=workers, progress=True)
        wall = time.perf_counter() - t0
        size = (Path(tmp) / "bench.npz").stat().st_size
    qa = table_qa(table)
    return {
        "build_wall_s": wall,
        "cpus": cpu_count(),
        "grid_points": table.n_points,
        "bands": len(table.bands),
        "table_bytes": size,
        "worst_relative_stderr_albedo_multiple": qa["worst_relative_stderr_albedo_multiple"]["value"],
    }


def bench_reweighting(spec_path, photons: int, subset: int, band_nm: float) -> dict:
    """Time separate transport runs per grid point against one reference run + reweighting of all points."""
    from matgen.tables.factored import factored_reweight
    from matgen.tables.plan import base_parameters, make_plan, parameters_at
    from matgen.tables.spec import load_spec
    from matgen.tissue.optics import absorption_batch, skin_optics
    from matgen.transport.reweight import reweight
    from matgen.transport.simulate import simulate
    from matgen.transport.stack import Stack

    spec = load_spec(spec_path)
    plan = make_plan(spec)
    b = spec.bands.index_of(band_nm)
    task = next(t for t in plan.tasks if t.band == b)
    bands = spec.bands.subset(np.array([b]))
    base = base_parameters(spec)
    idx, values = plan.task_grid_points(task)
    params = [parameters_at(base, v) for v in values]
    mu_a = np.asarray(absorption_batch(params, bands, packaging=spec.packaging))[:, :, 0]
    layer = skin_optics(params[0], bands, packaging=spec.packaging).band(0)
    ref_stack = Stack(**{**layer, "mu_a": mu_a.min(axis=0)})
    sub_shape = tuple(int(np.unique(idx[:, d]).size) for d in range(idx.shape[1]))
    rings = plan.ring_edges_mm
    # warm-up (compilation) outside the timings
    simulate(ref_stack, 1000, seed=1, ring_edges_mm=rings, records=True)
    simulate(ref_stack, 1000, seed=1, ring_edges_mm=rings)
    pick = np.linspace(0, len(params) - 1, max(1, subset)).round().astype(int)
    t0 = time.perf_counter()
    for k in pick:
        simulate(ref_stack.with_mu_a(mu_a[k]), photons, seed=2, ring_edges_mm=rings)
    direct_per_point = (time.perf_counter() - t0) / pick.size
    t0 = time.perf_counter()
    _, rec = simulate(ref_stack, photons, seed=2, ring_edges_mm=rings, records=True)
    t_ref = time.perf_counter() - t0
    factored_reweight(rec, mu_a[: min(4, len(mu_a))], (min(4, len(mu_a)),), rings)  # compile
    t0 = time.perf_counter()
    factored_reweight(rec, mu_a, sub_shape, rings)
    t_fact = time.perf_counter() - t0
    n_sub = min(len(params), 64)
    t0 = time.perf_counter()
    reweight(rec, mu_a[:n_sub], ring_edges_mm=rings)
    t_plain = (time.perf_counter() - t0) * len(params) / n_sub
    k_total = len(params)
    separate = direct_per_point * k_total
    return {
        "band_nm": float(spec.bands.centre_nm[b]),
        "photons_per_point": photons,
        "grid_points": k_total,
        "separate_runs_s_per_point": direct_per_point,
        "separate_runs_s_all_points": separate,
        "reference_run_s": t_ref,
        "factored_reweight_s": t_fact,
        "plain_reweight_s_all_points_extrapolated": t_plain,
        "speedup_factored": separate / (t_ref + t_fact),
        "speedup_plain_reweight": separate / (t_ref + t_plain),
    }


def bench_lookups(table_path, n_rgb: int) -> dict:
    """Lookups per second of RGB quantities (n_rgb points) and one spectral quantity (n_rgb / 10 points)."""
    from matgen.tables.store import RGB_QUANTITIES, Table, load_default_table

    table = Table.load(table_path) if table_path else load_default_table()
    rng = np.random.default_rng(0)

    def points(n):
        cols = []
        for a in table.axes:
            lo, hi = a.values[0], a.values[-1]
            cols.append(
                np.exp(rng.uniform(np.log(lo), np.log(hi), n))
                if a.spacing == "log"
                else rng.uniform(lo, hi, n)
            )
        return np.stack(cols, axis=1)

    rgb = [n for n in RGB_QUANTITIES if n in table.quantities]
    table.lookup(points(1000), rgb)  # compile
    p = points(n_rgb)
    t0 = time.perf_counter()
    table.lookup(p, rgb)
    t_rgb = time.perf_counter() - t0
    n_sp = max(1, n_rgb // 10)
    p = points(n_sp)
    table.lookup(p[:10], ["albedo_multiple"])
    t0 = time.perf_counter()
    table.lookup(p, ["albedo_multiple"])
    t_sp = time.perf_counter() - t0
    return {
        "rgb_points": n_rgb,
        "rgb_channels": 3 * len(rgb),
        "rgb_lookups_per_s": n_rgb / t_rgb,
        "spectral_points": n_sp,
        "spectral_channels": len(table.bands),
        "spectral_lookups_per_s": n_sp / t_sp,
    }


def run(args) -> int:
    """Run the table benchmarks and print the figures."""
    spec = Path(args.spec) if args.spec else _default_spec()
    out = {}
    if not args.skip_build:
        out["build"] = bench_build(spec, args.workers)
        b = out["build"]
        print(
            f"build {spec.name}: {b['build_wall_s']:.1f} s on {b['cpus']} CPUs; {b['grid_points']} points x "
            f"{b['bands']} bands; worst relative stderr of A "
            f"{100 * b['worst_relative_stderr_albedo_multiple']:.2f} %"
        )
    r = bench_reweighting(spec, args.photons, args.subset, args.band_nm)
    out["reweighting"] = r
    print(
        f"reweighting at {r['band_nm']:g} nm, {r['photons_per_point']} photons per point, "
        f"{r['grid_points']} points:"
    )
    print(
        f"  separate transport runs: {r['separate_runs_s_per_point']:.3f} s per point (measured on "
        f"{args.subset}), {r['separate_runs_s_all_points']:.1f} s for all"
    )
    print(
        f"  one reference run {r['reference_run_s']:.2f} s + factored reweighting "
        f"{r['factored_reweight_s']:.2f} s:"
        f" speed-up {r['speedup_factored']:.0f}x"
    )
    print(
        f"  (unfactored transport reweight, extrapolated: "
        f"{r['plain_reweight_s_all_points_extrapolated']:.1f} s,"
        f" speed-up {r['speedup_plain_reweight']:.0f}x)"
    )
    lk = bench_lookups(args.table, args.lookups)
    out["lookups"] = lk
    print(
        f"lookups: {lk['rgb_lookups_per_s']:.3g} points/s ({lk['rgb_points']} points, {lk['rgb_channels']} "
        f"RGB channels); {lk['spectral_lookups_per_s']:.3g} points/s ({lk['spectral_points']} points, "
        f"{lk['spectral_channels']} bands)"
    )
    if args.json_out:
        Path(args.json_out).write_text(json.dumps(out, indent=1) + "\n")
    return 0
