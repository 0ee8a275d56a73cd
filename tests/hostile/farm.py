"""Farm families of hostile cases: each runs ``python -m matgen`` in a child process and judges the outcome.

A case is judged on four counts, the ones a farm cares about:

* **traceback**: a Python traceback on standard error (every refusal must be one line);
* **wrong exit**: an exit status other than the one expected (0 done, 1 check failed, 2 refused, 74 the
  operating system failed a write, 75 busy, 143 terminated);
* **partial / inconsistent**: after the run, a visible output that no complete bake made, a descriptor whose
  textures do not match its SHA-256 entries, a lock, staging folder or temporary file left behind, a worker
  process left running;
* **silent wrong**: exit 0 with a descriptor holding NaN / Infinity tokens, non-finite texels, or textures
  that differ from the reference bake of the same inputs.

Families: non-finite config numbers, name collisions, disk full at every write (``RLIMIT_FSIZE``), kill at
every rename of the commit, cross-host leases, SIGTERM with pool workers, memory bombs (peak RSS measured
with ``wait4``), tracebacks of the request's list, texture-tool inputs (tiled, mip-mapped, offset maps).
:func:`run_families` returns one row of figures per family; ``tools/hostile_report`` prints them.
"""

from __future__ import annotations

import hashlib
import json
import os
import resource
import shutil
import signal
import subprocess
import sys
import tempfile
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
HERE = Path(__file__).resolve().parent


def _env(extra=None) -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(
        [str(ROOT), str(HERE)] + [p for p in env.get("PYTHONPATH", "").split(os.pathsep) if p]
    )
    env.setdefault("NUMBA_NUM_THREADS", "2")
    env.pop("MATGEN_LOCK_LEASE_S", None)
    env.update(extra or {})
    return env


@dataclass
class Run:
    """A finished child: exit status, standard output and error, wall time and peak RSS."""

    rc: int
    out: str
    err: str
    seconds: float
    rss_mb: float


def run_cli(
    args, *, timeout=300.0, env=None, preexec=None, stdout_fd=None, script=None, term_after=None
) -> Run:
    """Run ``python -m matgen ARGS`` (or ``python -c SCRIPT``); peak RSS from ``wait4``.

    ``term_after``: send SIGTERM to the child (not its group) after that many seconds.
    """
    cmd = (
        [sys.executable, "-c", script]
        if script is not None
        else [sys.executable, "-m", "matgen", *map(os.fsdecode, args)]
    )
    if script is not None and args:
        cmd += [os.fsdecode(a) for a in args]
    # pipes, not files: a file size limit (the disk-full family) must not stop the child's error message
    t0 = time.perf_counter()
    proc = subprocess.Popen(
        cmd,
        cwd=ROOT,
        env=_env(env),
        stdout=stdout_fd if stdout_fd is not None else subprocess.PIPE,
        stderr=subprocess.PIPE,
        preexec_fn=preexec,
        start_new_session=True,
    )
    chunks = {"out": [], "err": []}

    def drain(stream, key):
        for block in iter(lambda: stream.read(65536), b""):
            chunks[key].append(block)

    readers = [threading.Thread(target=drain, args=(proc.stderr, "err"), daemon=True)]
    if proc.stdout is not None:
        readers.append(threading.Thread(target=drain, args=(proc.stdout, "out"), daemon=True))
    for t in readers:
        t.start()
    timer = threading.Timer(timeout, lambda: _kill_group(proc.pid))
    timer.start()
    if term_after is not None:
        threading.Timer(term_after, lambda: _signal(proc.pid, signal.SIGTERM)).start()
    try:
        _, status, usage = os.wait4(proc.pid, 0)
    finally:
        timer.cancel()
    proc.returncode = os.waitstatus_to_exitcode(status)
    for t in readers:
        t.join(10.0)
    secs = time.perf_counter() - t0
    return Run(
        proc.returncode,
        b"".join(chunks["out"]).decode(errors="replace"),
        b"".join(chunks["err"]).decode(errors="replace"),
        secs,
        usage.ru_maxrss / 1024.0,
    )


def _signal(pid, sig):
    try:
        os.kill(pid, sig)
    except ProcessLookupError:
        pass


def _kill_group(pid):
    try:
        os.killpg(pid, signal.SIGKILL)
    except ProcessLookupError:
        pass


def group_alive(pgid: int) -> bool:
    try:
        os.killpg(pgid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


@dataclass
class Verdict:
    family: str
    case: str
    expected: tuple
    rc: int = 0
    traceback: bool = False
    wrong_exit: bool = False
    partial: list = field(default_factory=list)
    silent_wrong: list = field(default_factory=list)
    seconds: float = 0.0
    rss_mb: float = 0.0
    note: str = ""

    @property
    def ok(self) -> bool:
        return not (self.traceback or self.wrong_exit or self.partial or self.silent_wrong)


_LOG_LINE = __import__("re").compile(r"^\d{4}-\d\d-\d\dT\S+ matgen( \S+)? (DEBUG|INFO|WARNING) ")


def judge(family, case, run: Run, expected) -> Verdict:
    expected = tuple(expected) if isinstance(expected, (tuple, list)) else (expected,)
    v = Verdict(family, case, expected, run.rc, seconds=run.seconds, rss_mb=run.rss_mb)
    v.traceback = "Traceback (most recent call last)" in run.err
    v.wrong_exit = run.rc not in expected
    if run.rc in (2, 74, 75, 130, 143) and not v.traceback:
        lines = [
            ln for ln in run.err.splitlines() if ln.strip() and "%|" not in ln and not _LOG_LINE.match(ln)
        ]
        if len(lines) != 1:
            v.partial.append(f"{len(lines)} lines on standard error, not one: {run.err[-300:]!r}")
    if v.wrong_exit or v.traceback:
        v.note = run.err.strip().splitlines()[-1][:200] if run.err.strip() else ""
    return v


# ------------------------------------------------------------------ output checks


def _strict(text):
    def bad(token):
        raise ValueError(f"token {token}")

    return json.loads(text, parse_constant=bad)


def leftovers(out: Path) -> list:
    """Locks, staging folders, journals and temporary files under ``out``."""
    if not out.exists():
        return []
    bad = []
    for p in out.rglob("*"):
        n = p.name
        if (
            n.endswith(".lock")
            or n.startswith(".matgen-staging-")
            or n.startswith(".matgen-commit.")
            or ".tmp" in n
        ):
            bad.append(str(p.relative_to(out)))
    return sorted(bad)


def visible(out: Path) -> dict:
    if not out.exists():
        return {}
    return {
        str(p.relative_to(out)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(out.rglob("*"))
        if p.is_file() and not any(part.startswith(".") for part in p.relative_to(out).parts)
    }


def consistent(out: Path, descriptor="material.json") -> list:
    """Problems of a bake folder as a reader sees it: descriptor strict JSON, every texture matching it."""
    d = out / descriptor
    if not d.exists():
        return []
    try:
        doc = _strict(d.read_text())
    except ValueError as exc:
        return [f"{descriptor} is not strict JSON ({exc})"]
    bad = []
    for t in doc.get("textures", []):
        p = out / t["path"]
        if not p.is_file():
            bad.append(f"{t['path']} listed but missing")
        elif hashlib.sha256(p.read_bytes()).hexdigest() != t["sha256"]:
            bad.append(f"{t['path']} does not match {descriptor}")
    return bad


def finite_textures(out: Path) -> list:
    import OpenImageIO as oiio

    bad = []
    for p in sorted(out.rglob("*.exr")):
        if any(part.startswith(".") for part in p.relative_to(out).parts):
            continue
        buf = oiio.ImageBuf(str(p))
        px = buf.get_pixels(oiio.FLOAT)
        if px is None or not np.all(np.isfinite(px)):
            bad.append(f"{p.relative_to(out)} holds non-finite texels")
    return bad


# ------------------------------------------------------------------ projects


def project(root: Path, band_spec="400:700:50", h=8, w=8, tiles=None) -> Path:
    from projects import make_project, make_table

    root = Path(root)
    root.mkdir(parents=True, exist_ok=True)
    if band_spec != "400:700:50" and not (root / "table.npz").exists():
        make_table(band_spec).save(root / "table.npz")
    return make_project(root, h=h, w=w, tiles=tiles)


def edit(cfg: Path, old: str, new: str, name=None) -> Path:
    text = cfg.read_text()
    assert old in text, old
    dst = cfg.with_name(name or cfg.name)
    dst.write_text(text.replace(old, new, 1))
    return dst


RANGE = "range = [0.005, 0.45]"
SCENE = "metres_per_scene_unit = 0.01"


def family_nonfinite(tmp: Path) -> list:
    cfg = project(tmp / "p")
    cases = [
        (f"metres_per_scene_unit = {v}", SCENE, f"metres_per_scene_unit = {v}")
        for v in ("nan", "inf", "-inf", "1e300", "1e-300", "0.0", "-0.01", "1e400")
    ]
    cases += [
        (f"range = {v}", RANGE, f"range = {v}")
        for v in (
            "[nan, 0.45]",
            "[0.005, inf]",
            "[0.0, 1e300]",
            "[1e-300, 2e-300]",
            "[0.0, 1e-300]",
            "[-inf, inf]",
        )
    ]
    cases += [
        ("channel = 10^400", 'map = "maps/melanin.exr"', 'map = "maps/melanin.exr"\nchannel = ' + "9" * 400)
    ]
    cases += [
        (
            "value = nan",
            '[parameters.melanin_fraction]\nmap = "maps/melanin.exr"\nencoding = "linear"\n' + RANGE,
            "[parameters.melanin_fraction]\nvalue = nan",
        )
    ]
    rows = []
    for i, (name, old, new) in enumerate(cases):
        c = edit(cfg, old, new, f"c{i}.toml")
        out = tmp / f"o{i}"
        v = judge("non-finite config numbers", name, run_cli(["bake", c, "--out", out, "--quiet"]), 2)
        v.partial += [f"left {x}" for x in leftovers(out)] + [f"wrote {x}" for x in visible(out)]
        rows.append(v)
    return rows


def family_collisions(tmp: Path) -> list:
    cfg = project(tmp / "p", band_spec="350:700:50")
    for sub in ("a", "b", "r"):
        (tmp / "p" / sub).mkdir(exist_ok=True)
    curve = "wavelength_nm,weight\n350,0.2\n500,1\n700,0.3\n"
    for rel in ("a/p.csv", "b/p.csv", "r/uv365.csv", "a/P.csv"):
        (tmp / "p" / rel).write_text(curve)
    cases = {
        "a/p.csv and b/p.csv": '["a/p.csv", "b/p.csv"]',
        "uv365 and r/uv365.csv": '["uv365", "r/uv365.csv"]',
        "a/p.csv and a/P.csv (case)": '["a/p.csv", "a/P.csv"]',
        "same entry twice": '["a/p.csv", "a/p.csv"]',
    }
    rows = []
    for i, (name, lst) in enumerate(cases.items()):
        c = edit(cfg, "passes = []", f"passes = {lst}", f"c{i}.toml")
        out = tmp / f"o{i}"
        v = judge("name collisions", name, run_cli(["bake", c, "--out", out, "--quiet"]), 2)
        v.partial += [f"wrote {x}" for x in visible(out)]
        rows.append(v)
    c = edit(cfg, "passes = []", 'passes = ["a/p.csv", "uv365"]', "ok.toml")
    out = tmp / "ok"
    v = judge("name collisions", "distinct names bake both", run_cli(["bake", c, "--out", out, "--quiet"]), 0)
    have = sorted(x for x in visible(out) if x.startswith("passes/"))
    if have != ["passes/p.exr", "passes/uv365.exr"]:
        v.silent_wrong.append(f"passes written: {have}")
    rows.append(v)
    return rows


def _fsize(limit):
    def pre():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))

    return pre


def family_disk_full(tmp: Path) -> list:
    cfg = project(tmp / "p")
    prior = edit(cfg, RANGE, "range = [0.01, 0.3]", "prior.toml")
    rows = []
    for k, limit in enumerate((0, 1, 100, 1000, 3000, 10_000, 30_000, 100_000)):
        out = tmp / f"o{k}"
        first = run_cli(["bake", prior, "--out", out, "--quiet"])
        before = visible(out)
        r = run_cli(["bake", cfg, "--out", out, "--quiet"], preexec=_fsize(limit))
        v = judge("disk full at every write", f"file size limit {limit} B", r, (0, 2, 74))
        if first.rc != 0:
            v.partial.append(f"prior bake failed: {first.err[-200:]}")
        v.partial += [f"left {x}" for x in leftovers(out)] + consistent(out)
        if r.rc != 0 and visible(out) != before:
            v.partial.append("a failed bake changed the published outputs")
        rows.append(v)
    # a table build on a full disk
    spec = tmp / "spec.toml"
    spec.write_text(
        (ROOT / "lut" / "specs" / "tiny.toml")
        .read_text()
        .replace("photons_per_band = 4000", "photons_per_band = 500")
    )
    for limit in (0, 2000):
        out = tmp / f"t{limit}"
        out.mkdir()
        r = run_cli(
            ["table", "build", spec, "--out", out / "t.npz", "--serial", "--no-progress"],
            preexec=_fsize(limit),
        )
        v = judge("disk full at every write", f"table build, file size limit {limit} B", r, (2, 74))
        v.partial += [f"left {x}" for x in leftovers(out)]
        if (out / "t.npz").exists():
            v.partial.append("t.npz written by a failed build")
        rows.append(v)
    return rows


KILL_AT_RENAME = """
import os, sys
n = {"k": 0}
real = os.replace
def replace(a, b):
    n["k"] += 1
    if n["k"] == int(sys.argv[3]):
        os._exit(137)
    return real(a, b)
os.replace = replace
from matgen.bake.config import load_config
from matgen.export.job import bake
bake(load_config(sys.argv[1]), sys.argv[2], jobs=1)
"""


def family_kill_at_rename(tmp: Path) -> list:
    cfg = project(tmp / "p")
    prior = edit(cfg, RANGE, "range = [0.01, 0.3]", "prior.toml")
    ref = tmp / "ref"
    run_cli(["bake", cfg, "--out", ref, "--quiet"])
    want = visible(ref)
    rows = []
    for k in range(1, 80):
        out = tmp / f"o{k}"
        run_cli(["bake", prior, "--out", out, "--quiet"])
        r = run_cli([cfg, out, str(k)], script=KILL_AT_RENAME)
        v = judge("kill at every rename", f"killed at rename {k}", r, (137, 0))
        last = r.rc == 0  # the bake made fewer renames than k: every rename has been killed once
        v.partial += consistent(out)  # what a reader sees between the kill and the next bake
        again = run_cli(["bake", cfg, "--out", out, "--quiet"])
        if again.rc != 0:
            v.partial.append(f"rerun failed: {again.err[-200:]}")
        v.partial += [f"left after rerun {x}" for x in leftovers(out)] + consistent(out)
        if visible(out) != want:
            v.silent_wrong.append("rerun after the kill differs from the reference bake")
        rows.append(v)
        if last:
            break
    # a file where a subfolder should be, a folder named like the descriptor
    for name, make in (
        ("spectral is a file", lambda o: (o / "spectral").write_text("x")),
        ("material.json is a folder", lambda o: (o / "material.json").mkdir()),
    ):
        out = tmp / name.replace(" ", "_")
        out.mkdir()
        make(out)
        before = visible(out)
        v = judge("kill at every rename", name, run_cli(["bake", cfg, "--out", out, "--quiet"]), 2)
        if visible(out) != before:
            v.partial.append("outputs changed although the bake was refused")
        v.partial += [f"left {x}" for x in leftovers(out)]
        rows.append(v)
    # an input inside the folder the bake writes
    proj = tmp / "inside"
    c2 = project(proj)
    txt = c2.read_text().replace('map = "maps/melanin.exr"', 'map = "out/spectral/albedo_multiple.exr"')
    (proj / "out" / "spectral").mkdir(parents=True)
    shutil.copy(proj / "maps" / "melanin.exr", proj / "out" / "spectral" / "albedo_multiple.exr")
    c2.write_text(txt)
    before = visible(proj / "out")
    v = judge(
        "kill at every rename",
        "an input map inside the outputs",
        run_cli(["bake", c2, "--out", proj / "out", "--quiet"]),
        2,
    )
    if visible(proj / "out") != before:
        v.partial.append("the input was overwritten")
    rows.append(v)
    return rows


def _lock(path: Path, host="node-a.farm", pid=4242, age_s=0.0, raw=None, mtime_age=None):
    path.parent.mkdir(parents=True, exist_ok=True)
    now = time.time() - age_s
    path.write_text(
        raw
        if raw is not None
        else json.dumps({"host": host, "pid": pid, "since": now, "heartbeat": now, "purpose": "bake"})
    )
    if mtime_age is not None:
        os.utime(path, (time.time() - mtime_age, time.time() - mtime_age))


HOLD = """
import sys, time
from matgen.fsutil import FolderLock
l = FolderLock(sys.argv[1], name=".matgen-bake.lock", lease_s=float(sys.argv[2])); l.acquire()
print("held", flush=True); time.sleep(float(sys.argv[3]))
"""


def family_leases(tmp: Path) -> list:
    cfg = project(tmp / "p")
    rows = []
    cases = [
        ("other host, fresh heartbeat", dict(age_s=5), 75, True),
        ("other host, heartbeat an hour old", dict(age_s=3600), 0, False),
        ("empty lock, new", dict(raw=""), 75, True),
        ("empty lock, an hour old", dict(raw="", mtime_age=3600), 0, False),
        ("garbage lock, new", dict(raw="\x00garbage"), 75, True),
        ("this host, dead process", dict(host=os.uname().nodename, pid=2**31 - 2), 0, False),
    ]
    for i, (name, kw, want, held) in enumerate(cases):
        out = tmp / f"o{i}"
        _lock(out / ".matgen-bake.lock", **kw)
        v = judge("cross-host leases", name, run_cli(["bake", cfg, "--out", out, "--quiet"]), want)
        if held and not (out / ".matgen-bake.lock").exists():
            v.partial.append("a live lock was removed")
        if not held:
            v.partial += [f"left {x}" for x in leftovers(out)] + consistent(out)
        rows.append(v)
    out = tmp / "tile"
    _lock(out / ".matgen-bake.1001.lock", age_s=1)
    rows.append(
        judge(
            "cross-host leases",
            "whole bake while another host's tile bake is live",
            run_cli(["bake", cfg, "--out", out, "--quiet"]),
            75,
        )
    )
    # a live holder with a 2 s lease, asked after 4 s: its heartbeat keeps the lock
    out = tmp / "live"
    out.mkdir()
    holder = subprocess.Popen(
        [sys.executable, "-c", HOLD, str(out), "2", "30"],
        cwd=ROOT,
        env=_env(),
        stdout=subprocess.PIPE,
        text=True,
    )
    try:
        holder.stdout.readline()
        time.sleep(4.0)
        r = run_cli(["bake", cfg, "--out", out, "--quiet"], env={"MATGEN_LOCK_LEASE_S": "2"})
        rows.append(judge("cross-host leases", "live holder past its lease, heartbeat refreshed", r, 75))
    finally:
        holder.kill()
        holder.wait()
    return rows


def family_sigterm(tmp: Path) -> list:
    rows = []
    spec = tmp / "spec.toml"
    spec.write_text((ROOT / "lut" / "specs" / "tiny.toml").read_text())
    for k, delay in enumerate((4.0, 7.0)):
        out = tmp / f"t{k}"
        out.mkdir()
        r = run_cli(
            ["table", "build", spec, "--out", out / "t.npz", "--workers", "2", "--no-progress"],
            term_after=delay,
            timeout=240,
        )
        v = judge(
            "SIGTERM with pool workers", f"table build, 2 workers, SIGTERM at {delay:g} s", r, (143, 0, -15)
        )
        time.sleep(1.0)
        stray = _stray_workers(out)
        if stray:
            v.partial.append(f"{len(stray)} worker process(es) still running: {stray}")
            for pid in stray:
                _signal(pid, signal.SIGKILL)
        v.partial += [f"left {x}" for x in leftovers(out) if ".tmp" in x]
        rows.append(v)
    cfg = project(tmp / "p", h=256, w=256)
    for k, delay in enumerate((2.5, 3.5, 5.0)):
        out = tmp / f"b{k}"
        r = run_cli(["bake", cfg, "--out", out, "--quiet", "--jobs", "1"], term_after=delay)
        # -15: the signal came before the handler was installed (imports) or during interpreter shutdown,
        # when Python has restored the default action; a shell and a scheduler read that as 143 as well
        v = judge("SIGTERM with pool workers", f"bake, SIGTERM at {delay:g} s", r, (143, 0, -15))
        v.partial += [f"left {x}" for x in leftovers(out)] + consistent(out)
        if r.rc in (143, -15) and visible(out) and consistent(out):
            v.partial.append("a terminated bake published files")
        rows.append(v)
    return rows


def _stray_workers(jobroot: Path) -> list:
    """PIDs of processes whose command line names the spawn machinery of multiprocessing and our job."""
    pids = []
    for d in Path("/proc").iterdir():
        if not d.name.isdigit():
            continue
        try:
            cmd = (d / "cmdline").read_bytes().replace(b"\x00", b" ").decode(errors="replace")
            env = (d / "environ").read_bytes()
        except OSError:
            continue
        if "multiprocessing" in cmd and str(ROOT).encode() in env and int(d.name) != os.getpid():
            # a spawn child of a matgen build started from this checkout
            if b"MATGEN_FARM_CAMPAIGN=1" in env:
                pids.append(int(d.name))
    return pids


def family_memory(tmp: Path) -> list:
    rows = []
    spec_text = (ROOT / "lut" / "specs" / "tiny.toml").read_text()
    import re

    big = re.sub(r"count = \d+", "count = 1000000000", spec_text, count=1)
    (tmp / "big.toml").write_text(big)
    r = run_cli(["table", "plan", tmp / "big.toml", tmp / "big.job"])
    rows.append(judge("memory bombs", "axis count 10^9 (table plan)", r, 2))
    photons = spec_text.replace("photons_per_band = 4000", "photons_per_band = 1000000000")
    (tmp / "ph.toml").write_text(photons)
    rows.append(
        judge(
            "memory bombs",
            "photons_per_band 10^9 (table plan)",
            run_cli(["table", "plan", tmp / "ph.toml", tmp / "ph.job"]),
            2,
        )
    )
    # a small archive with an extra, highly compressible array
    src = ROOT / "lut" / "default.npz"
    import zipfile

    bomb = tmp / "bomb.npz"
    shutil.copy(src, bomb)
    with zipfile.ZipFile(bomb, "a", compression=zipfile.ZIP_DEFLATED) as zf:
        with zf.open("q_extra.npy", "w", force_zip64=True) as fh:
            np.lib.format.write_array_header_1_0(
                fh, {"descr": "<f8", "fortran_order": False, "shape": (16384, 16384)}
            )
            block = bytes(1 << 20)
            for _ in range(2048):
                fh.write(block)
    rows.append(
        judge(
            "memory bombs",
            f"table archive of {bomb.stat().st_size >> 20} MB declaring 2 GiB more (table info)",
            run_cli(["table", "info", bomb]),
            2,
        )
    )
    rows.append(
        judge(
            "memory bombs", "demo --size 100000", run_cli(["demo", "--size", "100000", "--out", tmp / "d"]), 2
        )
    )
    (tmp / "s.json").write_text(
        json.dumps({"layers": [{"thickness_mm": 1, "n": 1.4, "mu_a": 0.5, "mu_s": 30, "g": 0.8}]})
    )
    rows.append(
        judge(
            "memory bombs",
            "simulate --photons 10^12",
            run_cli(["simulate", tmp / "s.json", "--photons", str(10**12)]),
            2,
        )
    )
    for v in rows:
        if v.rss_mb > 1024:
            v.partial.append(f"peak RSS {v.rss_mb:.0f} MB before refusing")
    return rows


def family_tracebacks(tmp: Path) -> list:
    rows = []
    cfg = project(tmp / "p")
    bad_name = os.fsencode(str(tmp)) + b"/\xff\xfe.toml"
    with open(bad_name, "wb") as fh:
        fh.write(cfg.read_bytes())
    rows.append(
        judge(
            "tracebacks",
            "non-UTF-8 config path",
            run_cli(["bake", bad_name, "--out", tmp / "o1", "--quiet"]),
            (0, 2),
        )
    )
    rows.append(
        judge(
            "tracebacks",
            "over-long config path",
            run_cli(["bake", str(tmp / ("a" * 300 + ".toml")), "--out", tmp / "o2"]),
            2,
        )
    )
    rows.append(
        judge(
            "tracebacks",
            "over-long output path",
            run_cli(["bake", cfg, "--out", str(tmp / ("b" * 300)), "--quiet"]),
            (2, 74),
        )
    )
    empty = edit(
        cfg,
        '[outputs]\nspectral = ["albedo_multiple", "mean_free_path_mm"]',
        "[outputs]\nspectral = []\nqa = false\ntargets = []",
        "empty.toml",
    )
    empty.write_text(empty.read_text().replace('rgb = ["albedo_multiple", "mean_free_path_mm"]', "rgb = []"))
    rows.append(
        judge("tracebacks", "every output list empty", run_cli(["bake", empty, "--out", tmp / "o3"]), 2)
    )
    (tmp / "big.json").write_text(
        '{"layers": [{"thickness_mm": 1' + "0" * 400 + ', "n": 1.4, "mu_a": 0.5, "mu_s": 30, "g": 0.8}]}'
    )
    rows.append(
        judge(
            "tracebacks",
            "10^400 integer in a stack",
            run_cli(["simulate", tmp / "big.json", "--photons", "100"]),
            2,
        )
    )
    (tmp / "res.json").write_text('{"photons": 1' + "0" * 400 + "}")
    rows.append(judge("tracebacks", "10^400 integer in a result", run_cli(["fit", tmp / "res.json"]), 2))
    rows.append(judge("tracebacks", "demo --size 8", run_cli(["demo", "--size", "8", "--out", tmp / "d"]), 2))
    (tmp / "afile").write_text("x")
    rows.append(
        judge("tracebacks", "demo --out a file", run_cli(["demo", "--size", "16", "--out", tmp / "afile"]), 2)
    )
    spec = tmp / "ws.toml"
    tiny_text = (ROOT / "lut" / "specs" / "tiny.toml").read_text()
    spec.write_text(tiny_text.replace('working_space = "ACEScg"', 'working_space = "foo"'))
    rows.append(
        judge(
            "tracebacks",
            'working_space = "foo" (table plan)',
            run_cli(["table", "plan", spec, tmp / "ws.job"]),
            2,
        )
    )
    spec.write_text(tiny_text.replace('illuminant = "D65"', 'illuminant = "foo"'))
    rows.append(
        judge(
            "tracebacks",
            'illuminant = "foo" (table plan)',
            run_cli(["table", "plan", spec, tmp / "il.job"]),
            2,
        )
    )
    # a closed pipe: standard output whose reader is gone
    rd, wr = os.pipe()
    os.close(rd)
    r = run_cli(["table", "info", ROOT / "lut" / "default.npz", "--json"], stdout_fd=wr)
    os.close(wr)
    rows.append(judge("tracebacks", "table info --json into a closed pipe", r, 0))
    # table status of a job with a corrupt task
    job = tmp / "st.job"
    tiny = tmp / "tiny.toml"
    tiny.write_text(
        (ROOT / "lut" / "specs" / "tiny.toml")
        .read_text()
        .replace("photons_per_band = 4000", "photons_per_band = 300")
    )
    run_cli(["table", "plan", tiny, job])
    rows.append(judge("tracebacks", "table status with tasks missing", run_cli(["table", "status", job]), 1))
    # a stale lock's warning is a log line, not a raw Python warning
    out = tmp / "stale"
    _lock(out / ".matgen-bake.lock", host=os.uname().nodename, pid=2**31 - 2)
    r = run_cli(["bake", cfg, "--out", out, "--quiet"])
    v = judge("tracebacks", "stale-lock warning through the log", r, 0)
    if "warnings.warn" in r.err or "StaleLockWarning" not in r.err or " WARNING " not in r.err:
        v.partial.append(f"warning not a log line: {r.err[-200:]!r}")
    rows.append(v)
    return rows


def family_texture_inputs(tmp: Path) -> list:
    import OpenImageIO as oiio

    cfg = project(tmp / "p", h=40, w=24)
    ref = tmp / "ref"
    run_cli(["bake", cfg, "--out", ref, "--quiet"])
    src = oiio.ImageBuf(str(tmp / "p" / "maps" / "melanin.exr"))
    px = src.get_pixels(oiio.FLOAT)
    rows = []
    for name in ("tiled", "mip-mapped", "offset data window", "tiled with offset"):
        proj = tmp / name.replace(" ", "_")
        shutil.copytree(tmp / "p", proj)
        dst = str(proj / "maps" / "melanin.exr")
        spec = oiio.ImageSpec(24, 40, px.shape[2] if px.ndim == 3 else 1, oiio.FLOAT)
        if "offset" in name:
            spec.x, spec.y, spec.full_x, spec.full_y = 13, -7, 13, -7
        if name.startswith("tiled"):
            spec.tile_width = spec.tile_height = 16
        if name == "mip-mapped":
            buf = oiio.ImageBuf(spec)
            buf.set_pixels(oiio.ROI(0, 24, 0, 40, 0, 1, 0, spec.nchannels), px)
            oiio.ImageBufAlgo.make_texture(oiio.MakeTxTexture, buf, dst)
        else:
            o = oiio.ImageOutput.create(dst)
            o.open(dst, spec)
            o.write_image(px)
            o.close()
        out = tmp / f"o_{proj.name}"
        r = run_cli(["bake", proj / "material.toml", "--out", out, "--quiet"])
        v = judge("texture-tool inputs", name, r, 0)
        if r.rc == 0:
            a = {k: h for k, h in visible(out).items() if k.endswith(".exr")}
            b = {k: h for k, h in visible(ref).items() if k.endswith(".exr")}
            if a != b:
                v.silent_wrong.append("textures differ from the bake of the scanline map")
        rows.append(v)
    d = tmp / "dirmap"
    shutil.copytree(tmp / "p", d)
    (d / "maps" / "melanin.exr").unlink()
    (d / "maps" / "melanin.exr").mkdir()
    r = run_cli(["bake", d / "material.toml", "--out", tmp / "od", "--quiet"])
    v = judge("texture-tool inputs", "a folder where a map should be", r, 2)
    if "folder" not in r.err:
        v.partial.append("the message does not say it is a folder")
    rows.append(v)
    f = tmp / "fifomap"
    shutil.copytree(tmp / "p", f)
    (f / "maps" / "melanin.exr").unlink()
    os.mkfifo(f / "maps" / "melanin.exr")
    r = run_cli(["bake", f / "material.toml", "--out", tmp / "of", "--quiet"], timeout=60)
    v = judge("texture-tool inputs", "a FIFO where a map should be", r, 2)
    if "FIFO" not in r.err:
        v.partial.append("the message does not say it is a FIFO")
    rows.append(v)
    return rows


FAMILIES = {
    "non-finite config numbers": family_nonfinite,
    "name collisions": family_collisions,
    "disk full at every write": family_disk_full,
    "kill at every rename": family_kill_at_rename,
    "cross-host leases": family_leases,
    "SIGTERM with pool workers": family_sigterm,
    "memory bombs": family_memory,
    "tracebacks": family_tracebacks,
    "texture-tool inputs": family_texture_inputs,
}


def run_families(names=None, progress=True) -> list:
    """Run the named families (default all); returns every :class:`Verdict`."""
    os.environ["MATGEN_FARM_CAMPAIGN"] = "1"
    verdicts = []
    for name, fn in FAMILIES.items():
        if names and name not in names:
            continue
        with tempfile.TemporaryDirectory(prefix="matgen-farm-") as d:
            t0 = time.perf_counter()
            got = fn(Path(d))
            verdicts += got
            if progress:
                bad = sum(not v.ok for v in got)
                print(
                    f"  farm family {name}: {len(got)} cases, {bad} not ok, {time.perf_counter() - t0:.0f} s",
                    file=sys.stderr,
                )
    return verdicts


def summarise(verdicts) -> list:
    """One row per family: cases, tracebacks, wrong exits, partial/inconsistent, silent wrong, peak RSS."""
    rows = {}
    for v in verdicts:
        r = rows.setdefault(
            v.family,
            {
                "family": v.family,
                "cases": 0,
                "ok": 0,
                "tracebacks": 0,
                "wrong_exit": 0,
                "partial": 0,
                "silent_wrong": 0,
                "max_rss_mb": 0.0,
                "seconds": 0.0,
            },
        )
        r.setdefault("exits", {})
        r["exits"][v.rc] = r["exits"].get(v.rc, 0) + 1
        r["cases"] += 1
        r["ok"] += v.ok
        r["tracebacks"] += v.traceback
        r["wrong_exit"] += v.wrong_exit
        r["partial"] += bool(v.partial)
        r["silent_wrong"] += bool(v.silent_wrong)
        r["max_rss_mb"] = max(r["max_rss_mb"], v.rss_mb)
        r["seconds"] += v.seconds
    return list(rows.values())
