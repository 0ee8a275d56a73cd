"""Bake a large map set into all default outputs; report texels/s, peak memory and ratio to the I/O floor.

The benchmark writes a synthetic map set (smooth melanin and blood maps, float EXR) and a material config
with the default outputs (five spectral stacks on the chosen bands, ACEScg maps, OpenPBR maps, the uv365 and
nir850 passes, the QA map, the descriptor and the MaterialX document), then runs ``matgen bake`` on it in a
child process, so that wall time and peak resident memory (``getrusage(RUSAGE_CHILDREN).ru_maxrss``) are
those of a real bake from the command line, interpreter start included. The I/O floor is the time needed to
merely write the same bytes: every output file is read back strip by strip and written again with the same
size, channels, pixel type and compression; only the write calls are timed. Units: seconds, texels, MiB.
"""

from __future__ import annotations

import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import OpenImageIO as oiio

from matgen.errors import ImageError, MatgenError

EXAMPLE = "matgen bench bake --size 4096 --jobs 2"

#: Rows read and rewritten at a time while measuring the I/O floor.
FLOOR_ROWS = 64

_CONFIG = """\
format_version = 1
name = "bench_face"
[table]
path = "{table}"
[parameters.melanin_fraction]
map = "maps/melanin.exr"
encoding = "linear"
range = [0.005, 0.25]
[parameters.blood_fraction]
map = "maps/blood.exr"
encoding = "linear"
range = [0.002, 0.10]
[parameters.eumelanin_share]
value = 0.6
[parameters.oxygen_saturation]
value = 0.8
[outputs]
spectral_bands = "{bands}"
"""


def add_arguments(parser) -> None:
    """Options of ``matgen bench bake``."""
    parser.add_argument("--size", type=int, default=4096, help="map side in texels")
    parser.add_argument("--bands", default="400:700:10", help="band subset of the spectral stacks")
    parser.add_argument("--jobs", type=int, default=None, help="lookup threads of the bake")
    parser.add_argument("--table", default="default", help="table file, or 'default' for the shipped table")
    parser.add_argument(
        "--work", default=None, help="work folder (default: a temporary folder, removed after)"
    )
    parser.add_argument("--memory-mb", type=int, default=256, help="strip memory budget of the bake, MiB")
    parser.add_argument("--json", action="store_true", help="print the figures as JSON")


def _write_map(path: Path, values: np.ndarray) -> None:
    spec = oiio.ImageSpec(values.shape[1], values.shape[0], 1, oiio.FLOAT)
    spec.attribute("compression", "zip")
    out = oiio.ImageOutput.create(str(path))
    if out is None or not out.open(str(path), spec):
        raise ImageError(f"cannot write benchmark map {path}: {oiio.geterror()}")
    rows = 256
    for y0 in range(0, values.shape[0], rows):
        out.write_scanlines(y0, min(values.shape[0], y0 + rows), 0, values[y0 : y0 + rows, :, None])
    out.close()


def write_inputs(folder: Path, size: int, bands: str) -> Path:
    """Synthetic smooth maps (texel values in [0, 1]) and the benchmark config; returns the config path."""
    (folder / "maps").mkdir(parents=True, exist_ok=True)
    c = (np.arange(size, dtype=np.float32) + 0.5) / size
    x, y = np.meshgrid(c, c)
    mel = 0.1 + 0.4 * (0.5 + 0.5 * np.sin(40 * x) * np.cos(31 * y)) * (0.5 + 0.5 * y)
    _write_map(folder / "maps" / "melanin.exr", mel.astype(np.float32))
    del mel
    blood = 0.1 + 0.5 * np.exp(-((x - 0.3) ** 2 + (y - 0.6) ** 2) / 0.02) + 0.3 * x * (1 - y)
    _write_map(folder / "maps" / "blood.exr", np.clip(blood, 0, 1).astype(np.float32))
    cfg = folder / "material.toml"
    cfg.write_text(_CONFIG.format(table="default", bands=bands))  # another table is given with --table
    return cfg


def io_floor_seconds(out_dir: Path, descriptor: dict) -> tuple:
    """Time to write the same bytes again: (seconds in write calls, bytes written)."""
    total, nbytes = 0.0, 0
    scratch = out_dir / ".io-floor.exr"
    for tex in descriptor["textures"]:
        src = out_dir / tex["path"]
        inp = oiio.ImageInput.open(str(src))
        if inp is None:
            raise ImageError(f"cannot read {src} back: {oiio.geterror()}")
        spec = inp.spec()
        wspec = oiio.ImageSpec(spec.width, spec.height, spec.nchannels, spec.format)
        wspec.channelnames = spec.channelnames
        wspec.attribute("compression", spec.get_string_attribute("compression", "zip"))
        if spec.tile_width:
            wspec.tile_width, wspec.tile_height = spec.tile_width, spec.tile_height
        out = oiio.ImageOutput.create(str(scratch))
        out.open(str(scratch), wspec)
        for y0 in range(0, spec.height, FLOOR_ROWS):
            y1 = min(spec.height, y0 + FLOOR_ROWS)
            rows = inp.read_scanlines(0, 0, y0, y1, 0, 0, spec.nchannels, spec.format)
            t = time.perf_counter()
            out.write_scanlines(y0, y1, 0, rows)
            total += time.perf_counter() - t
        t = time.perf_counter()
        out.close()
        total += time.perf_counter() - t
        inp.close()
        nbytes += scratch.stat().st_size
        scratch.unlink()
    return total, nbytes


def run(args) -> int:
    """Run the benchmark and print its figures."""
    if args.size < 16:
        raise MatgenError(f"--size {args.size}: use at least 16 texels")
    work = Path(args.work) if args.work else Path(tempfile.mkdtemp(prefix="matgen-bench-bake-"))
    try:
        t0 = time.perf_counter()
        cfg = write_inputs(work / "inputs", args.size, args.bands)
        t_inputs = time.perf_counter() - t0
        out = work / "out"
        cmd = [
            sys.executable,
            "-m",
            "matgen",
            "bake",
            str(cfg),
            "--out",
            str(out),
            "--quiet",
            "--memory-mb",
            str(args.memory_mb),
        ]
        if args.jobs:
            cmd += ["--jobs", str(args.jobs)]
        if args.table != "default":
            cmd += ["--table", str(Path(args.table).resolve())]
        t0 = time.perf_counter()
        proc = subprocess.run(cmd, capture_output=True, text=True, env=dict(os.environ))
        wall = time.perf_counter() - t0
        if proc.returncode != 0:
            raise MatgenError(f"the benchmark bake failed (exit {proc.returncode}): {proc.stderr.strip()}")
        peak_mib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0  # Linux: KiB
        descriptor = json.loads((out / "material.json").read_text())
        floor_s, floor_bytes = io_floor_seconds(out, descriptor)
        texels = args.size * args.size
        channels = sum(len(t["channels"]) for t in descriptor["textures"])
        figures = {
            "size_texels": [args.size, args.size],
            "texels": texels,
            "output_files": len(descriptor["textures"]),
            "output_channels": channels,
            "output_bytes": int(sum(t["bytes"] for t in descriptor["textures"])),
            "bake_wall_s": round(wall, 3),
            "texels_per_s": round(texels / wall, 1),
            "peak_memory_mib": round(peak_mib, 1),
            "io_floor_s": round(floor_s, 3),
            "ratio_to_io_floor": round(wall / floor_s, 3) if floor_s > 0 else None,
            "input_generation_s": round(t_inputs, 3),
            "cpu_count": os.cpu_count(),
            "bake_stdout": proc.stdout.strip().splitlines()[:1],
        }
        if args.json:
            print(json.dumps(figures, indent=1))
        else:
            print(
                f"bake benchmark: {args.size} x {args.size} texels, {figures['output_files']} files, "
                f"{channels} channels, {figures['output_bytes'] / 2**20:.0f} MiB written"
            )
            print(
                f"  bake (matgen bake in a child process): {wall:.1f} s, {texels / wall:,.0f} texels/s, "
                f"peak memory {peak_mib:.0f} MiB"
            )
            print(
                f"  I/O floor (writing the same bytes to EXR): {floor_s:.1f} s; bake / floor = "
                f"{figures['ratio_to_io_floor']}"
            )
        return 0
    finally:
        if not args.work:
            shutil.rmtree(work, ignore_errors=True)
