"""The fuzz targets: every parser and entry point of matgen that reads outside input.

Each target turns bytes into a call of one matgen reader and lets :func:`fuzzlib.run_case` judge the outcome.
A target whose stage is not importable is listed as unavailable (with the reason) by the tests and the report.
"""

from __future__ import annotations

import json
from pathlib import Path

from fuzzlib import Target

TARGETS: dict[str, Target] = {}


def target(name: str, seeds, requires=(), time_budget_s: float = 10.0, notes: str = ""):
    """Register ``fn(data, scratch)`` as fuzz target ``name``."""

    def deco(fn):
        TARGETS[name] = Target(name, seeds, fn, tuple(requires), time_budget_s, notes)
        return fn

    return deco


def _text(data: bytes, what: str) -> str:
    """Decode like matgen's text readers: undecodable bytes are the caller's MatgenError, not ours to skip."""
    from matgen.errors import ConfigError

    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ConfigError(f"{what} is not UTF-8 ({exc.reason})") from None


# ---------------------------------------------------------------------------------------------------------
# bands


def _band_seeds(_d: Path):
    return [b"300:1000:10", b"400:700:10:5", b"365,550,850", b"300:1000:10:10", b"550"]


@target("band_spec", _band_seeds, requires=("matgen.spectra.bands",), notes="BandSet.parse (--bands option)")
def _band_spec(data: bytes, _scratch: Path):
    from matgen.spectra.bands import BandSet

    BandSet.parse(_text(data, "band spec"))


def _band_json_seeds(_d: Path):
    from matgen.spectra.bands import BandSet, default_bands

    return [
        json.dumps(default_bands().to_dict()).encode(),
        json.dumps(BandSet.parse("365,550,850").to_dict()).encode(),
    ]


@target(
    "bands_json",
    _band_json_seeds,
    requires=("matgen.spectra.bands",),
    notes="BandSet.from_dict on decoded JSON (band tables inside descriptors, manifests, table files)",
)
def _bands_json(data: bytes, _scratch: Path):
    from matgen.spectra.bands import BandSet

    try:
        obj = json.loads(_text(data, "band table"))
    except ValueError:
        return  # not JSON: the JSON readers' own targets cover that
    BandSet.from_dict(obj)


# ---------------------------------------------------------------------------------------------------------
# paths


def _path_seeds(_d: Path):
    return [b"maps/melanin.exr", b"../outside.exr", b"/etc/passwd", b"a/../../b", b"link/x.exr", b"."]


@target(
    "relative_path",
    _path_seeds,
    requires=("matgen.fsutil",),
    notes="fsutil.resolve_inside on texture/table paths from configs and descriptors",
)
def _relative_path(data: bytes, scratch: Path):
    import os

    from matgen.fsutil import resolve_inside

    base = scratch / "job"
    base.mkdir(exist_ok=True)
    if not (base / "link").exists():
        os.symlink(scratch, base / "link")
    text = data.decode("utf-8", "surrogateescape")
    full = resolve_inside(base, text, "texture path")
    # contract beyond "no crash": an accepted path lies inside the base folder
    assert full.is_relative_to(base.resolve()), f"accepted path {text!r} resolves outside the base: {full}"


# ---------------------------------------------------------------------------------------------------------
# table files and manifests (matgen.tables.store)


def _small_table():
    import numpy as np

    from matgen.spectra.bands import BandSet
    from matgen.tables.store import Axis, Table

    bands = BandSet.parse("450,550,650")
    axes = [Axis("melanin_fraction", [0.01, 0.1, 0.3], "log"), Axis("blood_fraction", [0.0, 0.05], "linear")]
    rng = np.random.default_rng(7)
    q = {
        "albedo_multiple": rng.random((3, 2, 3)),
        "rgb_albedo_multiple": rng.random((3, 2, 3)),
        "ior": np.full((3, 2, 1), 1.4),
    }
    return Table(axes, bands, q, manifest={"spec": {"name": "hostile"}})


def _use_table(table):
    """A loaded table must also be usable: a lookup at its axis midpoints gives values or a MatgenError."""
    import numpy as np

    mid = np.array([[0.5 * (a.values[0] + a.values[-1]) for a in table.axes]])
    table.lookup(mid, out_of_range="clamp")


def _table_npz_seeds(d: Path):
    p = _small_table().save(d / "t.npz")
    return [p.read_bytes()]


@target(
    "table_npz",
    _table_npz_seeds,
    requires=("matgen.tables.store",),
    notes="Table.load on a mutated .npz (no manifest beside it, so no checksum stops the mutation)",
)
def _table_npz(data: bytes, scratch: Path):
    from matgen.tables.store import Table

    p = scratch / "t.npz"
    p.write_bytes(data)
    _use_table(Table.load(p))


def _npz_from_members(members: dict) -> bytes:
    import io
    import zipfile

    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as zf:
        for name, payload in members.items():
            zf.writestr(name, payload)
    return buf.getvalue()


def _table_header_seeds(d: Path):
    import zipfile

    p = _small_table().save(d / "t.npz")
    import numpy as np

    with zipfile.ZipFile(p) as zf, zf.open("header.json.npy") as fh:
        header = bytes(np.lib.format.read_array(fh))
    return [header]


@target(
    "table_header",
    _table_header_seeds,
    requires=("matgen.tables.store",),
    notes="Table.load with a mutated JSON header inside an otherwise valid .npz",
)
def _table_header(data: bytes, scratch: Path):
    import io
    import zipfile

    import numpy as np

    from matgen.tables.store import Table

    seed = scratch / "seed.npz"
    _small_table().save(seed)
    members = {}
    with zipfile.ZipFile(seed) as zf:
        for name in zf.namelist():
            members[name] = zf.read(name)
    buf = io.BytesIO()
    np.lib.format.write_array(buf, np.frombuffer(data, dtype=np.uint8), allow_pickle=False)
    members["header.json.npy"] = buf.getvalue()
    p = scratch / "t.npz"
    p.write_bytes(_npz_from_members(members))
    _use_table(Table.load(p))


def _table_manifest_seeds(d: Path):
    _small_table().save(d / "t.npz")
    return [(d / "t.json").read_bytes()]


@target(
    "table_manifest",
    _table_manifest_seeds,
    requires=("matgen.tables.store",),
    notes="Table.load with a mutated .json manifest beside a valid .npz",
)
def _table_manifest(data: bytes, scratch: Path):
    from matgen.tables.store import Table

    p = _small_table().save(scratch / "t.npz")
    (scratch / "t.json").write_bytes(data)
    _use_table(Table.load(p))


def _npy_member(shape_text: bytes) -> bytes:
    """A .npy member whose header declares ``shape_text`` but carries 72 bytes (3 x 2 x 3 float32) of data."""
    header = b"{'descr': '<f4', 'fortran_order': False, 'shape': " + shape_text + b", }"
    header = header + b" " * (63 - (len(header) + 10) % 64) + b"\n"
    import struct as _s

    return b"\x93NUMPY\x01\x00" + _s.pack("<H", len(header)) + header + b"\x00" * 72


def _table_shape_seeds(_d: Path):
    return [b"(3, 2, 3)", b"(100000, 100000, 100000)", b"(-1, 3)", b"(0, 3)", b"(2**62,)"]


@target(
    "table_declared_shape",
    _table_shape_seeds,
    requires=("matgen.tables.store",),
    notes="a .npz member declaring a huge, negative or malformed shape with no data behind it",
)
def _table_declared_shape(data: bytes, scratch: Path):
    from matgen.tables.store import Table

    seed = scratch / "seed.npz"
    _small_table().save(seed)
    import zipfile

    with zipfile.ZipFile(seed) as zf:
        members = {n: zf.read(n) for n in zf.namelist()}
    members["q_albedo_multiple.npy"] = _npy_member(data)
    p = scratch / "t.npz"
    p.write_bytes(_npz_from_members(members))
    _use_table(Table.load(p))


# ---------------------------------------------------------------------------------------------------------
# open findings: a failure matching one of these is counted as "known open" instead of failing the fuzz test;
# each entry has a strict-xfail test with the exact input in test_found_inputs.py, an entry with status "open"
# in findings.py and a line in the report (test_found_inputs.py checks the three agree), so that a fixed
# finding left here, or any other failure, turns the fuzz tests red.

KNOWN_OPEN: dict[str, list[tuple[str, str]]] = {}


def known_open(failure) -> str | None:
    """The open finding that ``failure`` matches, or None."""
    import re

    for pattern, what in KNOWN_OPEN.get(failure.target, []):
        if re.search(pattern, failure.kind):
            return what
    return None


# ---------------------------------------------------------------------------------------------------------
# table build specs and job folders (matgen.tables.spec, matgen.tables.plan, matgen.tables.tasks)


def _lut_spec_texts() -> list:
    from matgen.tables.store import lut_files

    root = lut_files().joinpath("specs")
    return [root.joinpath(n).read_bytes() for n in ("tiny.toml", "default.toml")]


@target(
    "table_spec",
    lambda d: _lut_spec_texts(),
    requires=("matgen.tables.spec",),
    notes="load_spec on a mutated TOML table spec (seeds: lut/specs/*.toml)",
)
def _table_spec(data: bytes, scratch: Path):
    from matgen.tables.spec import load_spec

    p = scratch / "spec.toml"
    p.write_bytes(data)
    load_spec(p)


_TINY_JOB: dict = {}


def _tiny_job_text() -> bytes:
    """job.json of the tiny spec (planned once per process; planning probes the tissue model)."""
    if "text" not in _TINY_JOB:
        import tempfile

        from matgen.tables.build import plan_job

        with tempfile.TemporaryDirectory() as d:
            spec = Path(d) / "tiny.toml"
            spec.write_bytes(_lut_spec_texts()[0])
            job = plan_job(spec, Path(d) / "job")
            _TINY_JOB["text"] = (job.path / "job.json").read_bytes()
    return _TINY_JOB["text"]


@target(
    "job_file",
    lambda d: [_tiny_job_text()],
    requires=("matgen.tables.plan", "matgen.tissue.optics"),
    notes="JobFolder.open on a mutated job.json",
)
def _job_file(data: bytes, scratch: Path):
    from matgen.tables.plan import JobFolder

    job = scratch / "job"
    (job / "tasks").mkdir(parents=True)
    (job / "job.json").write_bytes(data)
    JobFolder.open(job)


# ---------------------------------------------------------------------------------------------------------
# material configs, maps, descriptors, response curves (matgen.bake, matgen.export, matgen.color)

_BAKE_REQ = ("matgen.bake.config", "matgen.export.job", "OpenImageIO")


def _project(scratch: Path) -> Path:
    from projects import make_project

    return make_project(scratch / "proj")


def _bake(cfg_path: Path, scratch: Path):
    import warnings

    from matgen.bake.config import load_config
    from matgen.errors import MatgenWarning
    from matgen.export.job import bake

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", MatgenWarning)
        config = load_config(cfg_path)
        return bake(config, scratch / "out", jobs=1)


def _config_seeds(d: Path) -> list:
    return [_project(d).read_bytes()]


@target(
    "material_config",
    _config_seeds,
    requires=_BAKE_REQ,
    time_budget_s=30.0,
    notes="load_config + bake on a mutated material config TOML (valid maps and table beside it)",
)
def _material_config(data: bytes, scratch: Path):
    cfg = _project(scratch)
    cfg.write_bytes(data)
    _bake(cfg, scratch)


def _map_seeds(kind: str):
    def seeds(d: Path) -> list:
        cfg = _project(d)
        return [(cfg.parent / "maps" / f"melanin.{kind}").read_bytes()]

    return seeds


def _map_target(kind: str):
    def run(data: bytes, scratch: Path):
        cfg = _project(scratch)
        text = cfg.read_text().replace("maps/melanin.exr", f"maps/melanin.{kind}")
        cfg.write_text(text)
        (cfg.parent / "maps" / f"melanin.{kind}").write_bytes(data)
        _bake(cfg, scratch)

    return run


def _map_seeds_as(kind: str):
    def seeds(d: Path) -> list:
        import OpenImageIO as oiio
        from projects import pigment_maps, write_map

        mel, _ = pigment_maps(16, 16)
        p = d / f"m.{kind}"
        write_map(p, mel, oiio.UINT16 if kind in ("png", "tif") else oiio.HALF)
        return [p.read_bytes()]

    return seeds


for _kind in ("exr", "png", "tif"):
    TARGETS[f"map_{_kind}"] = Target(
        f"map_{_kind}",
        _map_seeds_as(_kind),
        _map_target(_kind),
        _BAKE_REQ,
        30.0,
        f"bake with a mutated {_kind.upper()} melanin map",
    )


def _descriptor_seeds(d: Path) -> list:
    _bake(_project(d), d)
    return [(d / "out" / "material.json").read_bytes()]


_BAKED: dict = {}


@target(
    "descriptor",
    _descriptor_seeds,
    requires=_BAKE_REQ + ("matgen.export.descriptor",),
    time_budget_s=30.0,
    notes="inspect_descriptor on a mutated material.json beside its baked textures",
)
def _descriptor(data: bytes, scratch: Path):
    import shutil

    from matgen.export.descriptor import inspect_descriptor

    if "out" not in _BAKED:
        import tempfile

        d = Path(tempfile.mkdtemp(prefix="matgen-baked-"))
        _bake(_project(d), d)
        _BAKED["out"] = d / "out"
    shutil.copytree(_BAKED["out"], scratch / "baked")
    (scratch / "baked" / "material.json").write_bytes(data)
    rep = inspect_descriptor(scratch / "baked" / "material.json")
    for p in rep.missing + rep.modified:
        assert isinstance(p, str), p


def _csv_seeds(_d: Path) -> list:
    import importlib.resources as ir

    root = ir.files("matgen.color").joinpath("data")
    return [root.joinpath(f"{n}.csv").read_bytes() for n in ("uv365", "nir850", "nir940")]


@target(
    "response_csv",
    _csv_seeds,
    requires=("matgen.color.passes",),
    notes="pass_weights on a mutated response-curve CSV file",
)
def _response_csv(data: bytes, scratch: Path):
    import numpy as np

    from matgen.color.passes import pass_weights
    from matgen.spectra.bands import BandSet

    p = scratch / "curve.csv"
    p.write_bytes(data)
    w = np.asarray(pass_weights(p, BandSet.regular(300.0, 1000.0, 10.0)))
    assert np.all(np.isfinite(w)) and abs(float(w.sum()) - 1.0) < 1e-6, f"weights not normalised: {w}"


def _curve_seeds(d: Path) -> list:
    vendor = b"# filter datasheet\nWavelength [nm];Transmission [%]\n350;10,0\n365,5;80,0\n380;5,0\n"
    tabbed = b"lambda (um)\tQE\n0.80\t0.5\n0.85\t0.4\n0.90\t0.2\n"
    return _csv_seeds(d) + [vendor, tabbed]


@target(
    "pass_curve_csv",
    _curve_seeds,
    requires=("matgen.color.curves",),
    notes="read_curve + combined_weights on a mutated lamp/filter/sensor curve file (tolerant reader)",
)
def _pass_curve_csv(data: bytes, scratch: Path):
    import numpy as np

    from matgen.color.curves import combined_weights, read_curve
    from matgen.spectra.bands import BandSet

    p = scratch / "lamp.csv"
    p.write_bytes(data)
    c = read_curve(p, "lamp")
    assert np.all(np.isfinite(c.values)) and np.all(c.values >= 0) and np.all(np.diff(c.wavelength_nm) > 0)
    w = np.asarray(combined_weights([c], BandSet.regular(300.0, 1000.0, 10.0)))
    assert np.all(np.isfinite(w)) and abs(float(w.sum()) - 1.0) < 1e-6, f"weights not normalised: {w}"


# ---------------------------------------------------------------------------------------------------------
# transport inputs: STACK.json of `matgen simulate`, photon records files


def _stack_json_seeds(_d: Path) -> list:
    one = {
        "n_above": 1.0,
        "n_below": 1.0,
        "layers": [
            {"thickness_mm": 0.1, "n": 1.4, "mu_a": 0.5, "mu_s": 30.0, "g": 0.8, "name": "epidermis"},
            {"thickness_mm": 1.5, "n": 1.4, "mu_a": 0.05, "mu_s": 20.0, "g": 0.85, "name": "dermis"},
        ],
    }
    multi = {
        "wavelength_nm": [450.0, 650.0],
        "layers": [
            {"thickness_mm": 0.2, "n": [1.4, 1.39], "mu_a": [0.9, 0.2], "mu_s": [40.0, 25.0], "g": 0.8}
        ],
    }
    return [json.dumps(one).encode(), json.dumps(multi).encode()]


@target(
    "stack_json",
    _stack_json_seeds,
    requires=("matgen.cli.simulate", "matgen.transport.simulate"),
    notes="matgen simulate's STACK.json reader, then a 200-photon run of each stack read",
)
def _stack_json(data: bytes, scratch: Path):
    from matgen.cli.simulate import load_stacks
    from matgen.transport.simulate import simulate

    p = scratch / "stack.json"
    p.write_bytes(data)
    for _wl, stack in load_stacks(p):
        simulate(stack, 200, seed=1, threads=1)


def _records_seeds(d: Path) -> list:
    from matgen.transport.simulate import simulate
    from matgen.transport.stack import Stack

    stack = Stack([0.1, 1.0], [1.4, 1.4], [0.5, 0.05], [30.0, 20.0], [0.8, 0.85])
    _, rec = simulate(stack, 300, seed=3, threads=1, records=True)
    p = d / "rec.npz"
    rec.save(p)
    return [p.read_bytes()]


@target(
    "photon_records",
    _records_seeds,
    requires=("matgen.transport.records", "matgen.transport.reweight"),
    notes="PhotonRecords.load on a mutated records file, then a reweighting of what loaded",
)
def _photon_records(data: bytes, scratch: Path):
    import numpy as np

    from matgen.transport.records import PhotonRecords
    from matgen.transport.reweight import reweight

    p = scratch / "rec.npz"
    p.write_bytes(data)
    rec = PhotonRecords.load(p)
    reweight(rec, np.array([[0.5, 0.05]]), threads=1)


# ---------------------------------------------------------------------------------------------------------
# command-line entry points fed whole files: exit 0 or 2 with one message, never a traceback


def _cli(argv) -> int:
    import contextlib
    import io

    from matgen.cli import main

    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        rc = main([str(a) for a in argv])
    if rc not in (0, 2):
        raise AssertionError(f"matgen {argv[0]} exited {rc}")
    if rc == 2:
        from matgen.errors import ConfigError

        raise ConfigError("rejected by the command line (exit 2)")
    return rc


def _fit_seeds(d: Path) -> list:
    import contextlib
    import io

    from matgen.cli import main

    stack = d / "stack.json"
    stack.write_bytes(_stack_json_seeds(d)[0])
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        main(
            [
                "simulate",
                str(stack),
                "--photons",
                "3000",
                "--seed",
                "1",
                "--threads",
                "1",
                "--json",
                "--profile",
            ]
        )
    return [buf.getvalue().encode()]


@target(
    "fit_result",
    _fit_seeds,
    requires=("matgen.cli.fit", "matgen.cli.simulate"),
    time_budget_s=30.0,
    notes="matgen fit on a mutated transport result JSON (from matgen simulate --json --profile)",
)
def _fit_result(data: bytes, scratch: Path):
    p = scratch / "result.json"
    p.write_bytes(data)
    _cli(["fit", p, "--json"])


# ---------------------------------------------------------------------------------------------------------
# targets in their own modules, registered on import: table job folders and lock files (targets_jobs.py),
# validation results and photon-records members (targets_results.py), estimate albedos (targets_estimate.py)

import targets_estimate  # noqa: E402, F401
import targets_jobs  # noqa: E402, F401
import targets_results  # noqa: E402, F401
