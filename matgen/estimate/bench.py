"""Benchmark of the albedo estimate: texels/s at 4096 x 4096, peak memory, round-trip and recovery figures.

The albedo is synthetic: smooth invented pigment maps with seeded texel noise (melanin 0.01-0.3, blood
0.004-0.1, log-spaced; eumelanin share and saturation constant), turned into ACEScg albedo by the table's
own lookup (``Table.lookup`` of ``rgb_albedo_multiple``, what the bake writes) and stored as float EXR.
``matgen estimate`` then runs in a child process, so that wall time and peak resident memory
(its resident set, sampled) are its own. The round trip (``--roundtrip-size``, default 256)
bakes the estimate's ``material.toml`` with ``matgen bake`` and compares its ``rgb/albedo_multiple.exr`` with
the input in CIEDE2000, noise-free and with capture-like noise (0.2 % relative + 0.0002 absolute per
channel), and reports the relative errors of melanin and blood against the ground truth.
Units: texels, seconds, MiB; CIEDE2000.
"""

from __future__ import annotations

import json
import os
import resource
import shutil
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from matgen.errors import MatgenError

EXAMPLE = "matgen bench estimate --size 4096 --jobs 2"

#: Held axes of the synthetic albedo.
HELD = {"eumelanin_share": 0.55, "oxygen_saturation": 0.8}

#: Capture-like noise of the round trip (an invented model, not a measured camera).
NOISE_RELATIVE = 0.002
NOISE_ABSOLUTE = 0.0002


def add_arguments(parser) -> None:
    """Options of ``matgen bench estimate``."""
    parser.add_argument("--size", type=int, default=4096, help="albedo width and height, texels")
    parser.add_argument("--roundtrip-size", type=int, default=256, help="texels per side of the round trip")
    parser.add_argument("--jobs", type=int, default=None, help="solver threads of the estimate")
    parser.add_argument("--memory-mb", type=int, default=256, help="memory budget of the estimate, MiB")
    parser.add_argument("--work", default=None, help="keep the inputs and outputs in this folder")
    parser.add_argument("--json", action="store_true", help="print the figures as JSON")


def _pigments(size: int, seed: int = 5):
    """Smooth invented melanin and blood maps (h, w) with seeded texel noise, volume fractions."""
    rng = np.random.default_rng(seed)
    y, x = np.mgrid[0:size, 0:size] / max(size - 1, 1)
    mel = np.exp(np.log(0.01) + (np.log(0.3) - np.log(0.01)) * (0.5 + 0.45 * np.sin(3 * x + 2 * y)))
    blood = np.exp(np.log(0.004) + (np.log(0.1) - np.log(0.004)) * (0.5 + 0.45 * np.cos(4 * y - x)))
    mel *= np.exp(0.05 * rng.standard_normal(mel.shape))
    blood *= np.exp(0.05 * rng.standard_normal(blood.shape))
    return np.clip(mel, 0.006, 0.38), np.clip(blood, 0.003, 0.14)


def write_albedo(path: Path, table, size: int, noise_rng=None, rows: int = 256):
    """Write the synthetic ACEScg albedo (float EXR, tagged) strip by strip; returns the pigment maps."""
    from matgen.export.exr import StreamingExr

    mel, blood = _pigments(size)
    names = table.axis_names
    out = StreamingExr(
        path, size, size, ("R", "G", "B"), pixel_type="float", attributes={"oiio:ColorSpace": "lin_ap1_scene"}
    )
    try:
        for y0 in range(0, size, rows):
            y1 = min(size, y0 + rows)
            n = (y1 - y0) * size
            pts = np.empty((n, len(names)))
            for i, name in enumerate(names):
                pts[:, i] = {
                    "melanin_fraction": mel[y0:y1].ravel(),
                    "blood_fraction": blood[y0:y1].ravel(),
                }.get(name, HELD.get(name, 0.0))
            rgb = table.lookup(pts, "rgb_albedo_multiple")[0]["rgb_albedo_multiple"].astype(np.float64)
            if noise_rng is not None:
                rgb = rgb * (1 + NOISE_RELATIVE * noise_rng.standard_normal(rgb.shape))
                rgb += NOISE_ABSOLUTE * noise_rng.standard_normal(rgb.shape)
            out.write_rows(y0, rgb.reshape(y1 - y0, size, 3).astype(np.float32))
        out.close()
    except BaseException:
        out.abort()
        raise
    return mel, blood


def _child(args: list, what: str):
    """Run ``python -m matgen ARGS``; returns wall seconds, standard output, peak RSS (MiB) and CPU seconds.

    The peak is the child's own resident set sampled every 20 ms (psutil): ``getrusage(RUSAGE_CHILDREN)``
    would also count the pages the child inherited from this process when it was forked.
    """
    import psutil

    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parents[2]))
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    with tempfile.TemporaryFile("w+") as out, tempfile.TemporaryFile("w+") as err:
        t0 = time.perf_counter()
        proc = psutil.Popen([sys.executable, "-m", "matgen", *args], stdout=out, stderr=err, env=env)
        peak = 0
        while proc.poll() is None:
            try:
                peak = max(peak, proc.memory_info().rss)
            except psutil.Error:
                pass
            time.sleep(0.02)
        wall = time.perf_counter() - t0
        out.seek(0)
        err.seek(0)
        stdout, stderr = out.read(), err.read()
    if proc.returncode != 0:
        raise MatgenError(f"the benchmark's {what} failed (exit {proc.returncode}): {stderr.strip()}")
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)
    return wall, stdout, peak / 2**20, cpu


def _fix() -> list:
    return [a for k, v in HELD.items() for a in ("--fix", f"{k}={v}")]


def _round_trip(work: Path, table, size: int, noisy: bool) -> dict:
    from matgen.estimate.perceptual import delta_e2000, rgb_to_lab
    from matgen.estimate.solver import _space_matrix
    from matgen.export.exr import read_exr

    tag = "noisy" if noisy else "clean"
    albedo = work / f"rt_{tag}.exr"
    mel, blood = write_albedo(albedo, table, size, np.random.default_rng(7) if noisy else None)
    est = work / f"rt_{tag}_est"
    _child(["estimate", str(albedo), "--out", str(est), "--quiet", *_fix()], "round-trip estimate")
    _child(["bake", str(est / "material.toml"), "--out", str(work / f"rt_{tag}_bake"), "--quiet"], "bake")
    m = _space_matrix(table.working_space)
    a = read_exr(albedo)[0].reshape(-1, 3)
    b = read_exr(work / f"rt_{tag}_bake" / "rgb" / "albedo_multiple.exr")[0].reshape(-1, 3)
    inside = read_exr(est / "qa" / "out_of_gamut.exr")[0].reshape(-1) == 0
    de = delta_e2000(rgb_to_lab(a, m), rgb_to_lab(b, m))[inside]
    em = np.abs(read_exr(est / "maps" / "melanin_fraction.exr")[0][..., 0] / mel - 1)
    eb = np.abs(read_exr(est / "maps" / "blood_fraction.exr")[0][..., 0] / blood - 1)
    return {
        "texels": size * size,
        "in_gamut_share": round(float(inside.mean()), 4),
        "de2000_median": round(float(np.median(de)), 4),
        "de2000_p95": round(float(np.percentile(de, 95)), 4),
        "melanin_rel_error_median": round(float(np.median(em)), 4),
        "melanin_rel_error_p95": round(float(np.percentile(em, 95)), 4),
        "blood_rel_error_median": round(float(np.median(eb)), 4),
        "blood_rel_error_p95": round(float(np.percentile(eb, 95)), 4),
    }


def run(args) -> int:
    """Run the benchmark and print its figures."""
    from matgen.tables.store import load_default_table

    if args.size < 16 or args.roundtrip_size < 16:
        raise MatgenError("--size and --roundtrip-size: use at least 16 texels")
    table = load_default_table()
    work = Path(args.work) if args.work else Path(tempfile.mkdtemp(prefix="matgen-bench-estimate-"))
    work.mkdir(parents=True, exist_ok=True)
    try:
        t0 = time.perf_counter()
        write_albedo(work / "albedo.exr", table, args.size)
        t_inputs = time.perf_counter() - t0
        cmd = ["estimate", str(work / "albedo.exr"), "--out", str(work / "est"), "--quiet", "--json", *_fix()]
        cmd += ["--memory-mb", str(args.memory_mb)] + (["--jobs", str(args.jobs)] if args.jobs else [])
        wall, out, peak_mib, cpu_s = _child(cmd, "estimate")
        summary = json.loads(out)
        texels = args.size * args.size
        figures = {
            "size_texels": [args.size, args.size],
            "texels": texels,
            "estimate_wall_s": round(wall, 3),
            "texels_per_s": round(texels / wall, 1),
            "estimate_inner_s": summary["seconds"],
            "estimate_cpu_s": round(cpu_s, 3),
            "peak_memory_mib": round(peak_mib, 1),
            "residual_de2000_p95": summary["residual_de2000"]["all"]["p95"],
            "out_of_gamut_share": summary["out_of_gamut"]["share"],
            "input_generation_s": round(t_inputs, 3),
            "cpu_count": os.cpu_count(),
            "load_average": [round(x, 2) for x in os.getloadavg()],
            "round_trip": {
                "noise_free": _round_trip(work, table, args.roundtrip_size, False),
                "capture_noise": _round_trip(work, table, args.roundtrip_size, True),
            },
        }
        _print(figures, args.json)
        return 0
    finally:
        if not args.work:
            shutil.rmtree(work, ignore_errors=True)


def _print(figures: dict, as_json: bool) -> None:
    if as_json:
        print(json.dumps(figures, indent=1))
        return
    size = figures["size_texels"][0]
    print(
        f"estimate benchmark: {size} x {size} texels in {figures['estimate_wall_s']:.1f} s "
        f"({figures['texels_per_s']:,.0f} texels/s, matgen estimate in a child process), peak memory "
        f"{figures['peak_memory_mib']:.0f} MiB, {figures['estimate_cpu_s']:.1f} CPU-s; load average "
        f"{figures['load_average']}"
    )
    for name, rt in figures["round_trip"].items():
        print(
            f"  round trip ({name.replace('_', ' ')}, {rt['texels']} texels): bake(estimate(albedo)) "
            f"CIEDE2000 median {rt['de2000_median']:.3f}, p95 {rt['de2000_p95']:.3f} on "
            f"{100 * rt['in_gamut_share']:.1f} % in gamut; melanin rel. error median "
            f"{100 * rt['melanin_rel_error_median']:.2f} %, p95 {100 * rt['melanin_rel_error_p95']:.2f} %; "
            f"blood median {100 * rt['blood_rel_error_median']:.2f} %, "
            f"p95 {100 * rt['blood_rel_error_p95']:.2f} %"
        )
