"""Fuzz targets over a finished table job folder (task records, task outputs) and over lock files.

Registered in :data:`targets.TARGETS` when :mod:`targets` is imported. The job is a real build of the tiny
spec (2 bands, 1000 photons per band), made once per process; each case works on a copy of it.
"""

from __future__ import annotations

import json
from pathlib import Path

from targets import _lut_spec_texts, _npz_from_members, target

_BUILT_JOB: dict = {}


def _built_job() -> Path:
    """A finished table job folder (tiny spec, 2 bands, 1000 photons per band), built once per process."""
    if "path" not in _BUILT_JOB:
        import tempfile
        import warnings

        from matgen.tables.build import build_table

        d = Path(tempfile.mkdtemp(prefix="matgen-job-"))
        text = _lut_spec_texts()[0].decode("utf-8")
        for old, new in (
            ("photons_per_band = 4000", "photons_per_band = 1000"),
            ("centres_nm = [450.0, 550.0, 650.0]", "centres_nm = [450.0, 650.0]"),
        ):
            assert old in text, old
            text = text.replace(old, new)
        (d / "spec.toml").write_text(text)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            build_table(d / "spec.toml", d / "t.npz", executor="serial", progress=False)
        _BUILT_JOB["path"] = d / "t.job"
    return _BUILT_JOB["path"]


def _job_copy(scratch: Path):
    """A copy of the built job in ``scratch`` (the fuzz case may alter it), opened."""
    import shutil

    from matgen.tables.plan import JobFolder

    shutil.copytree(_built_job(), scratch / "job")
    return JobFolder.open(scratch / "job")


def _merge(job, scratch: Path):
    """Merge the job into ``<scratch>/out/t.npz`` as 'matgen table merge' does (build statistics included)."""
    from matgen.tables.build import merge_job

    (scratch / "out").mkdir(exist_ok=True)
    return merge_job(job, scratch / "out" / "t.npz")


_JOB_REQ = ("matgen.tables.build", "matgen.tables.merge", "matgen.tissue.optics", "matgen.fit.summary")


@target(
    "task_record",
    lambda d: [(_built_job() / "tasks" / "task-00000.json").read_bytes()],
    requires=_JOB_REQ,
    notes="task_state, then merge_job (task wall-time sum included) with task 0's record JSON mutated",
)
def _task_record(data: bytes, scratch: Path):
    from matgen.tables.tasks import task_state

    job = _job_copy(scratch)
    job.record_path(0).write_bytes(data)
    st = task_state(job, 0)
    assert st.state in ("done", "corrupt"), st
    _merge(job, scratch)


def _rerecord(job, index: int) -> None:
    """Make task ``index``'s record match its (altered) output, so that only the arrays' check can object."""
    from matgen.provenance import sha256_file

    out = job.output_path(index)
    record = json.loads(job.record_path(index).read_text())
    record["sha256"], record["bytes"] = sha256_file(out), out.stat().st_size
    job.record_path(index).write_text(json.dumps(record))


@target(
    "task_output",
    lambda d: [(_built_job() / "tasks" / "task-00000.npz").read_bytes()],
    requires=_JOB_REQ,
    notes="merge_job with task 0's output .npz mutated and its record's checksum made to match",
)
def _task_output(data: bytes, scratch: Path):
    job = _job_copy(scratch)
    job.output_path(0).write_bytes(data)
    _rerecord(job, 0)
    _merge(job, scratch)


def _task_array_names() -> list:
    from matgen.tables.tasks import TASK_ARRAYS

    return sorted(TASK_ARRAYS)


def _task_array_seeds(_d: Path) -> list:
    import zipfile

    names = _task_array_names()
    with zipfile.ZipFile(_built_job() / "tasks" / "task-00000.npz") as zf:
        return [bytes([i]) + zf.read(f"{n}.npy") for i, n in enumerate(names)]


@target(
    "task_output_array",
    _task_array_seeds,
    requires=_JOB_REQ,
    notes="merge_job with one .npy member of task 0's output replaced (first byte picks the array; "
    "shape, dtype and values mutated) and the record made to match",
)
def _task_output_array(data: bytes, scratch: Path):
    import zipfile

    if not data:
        return
    names = _task_array_names()
    job = _job_copy(scratch)
    out = job.output_path(0)
    with zipfile.ZipFile(out) as zf:
        members = {n: zf.read(n) for n in zf.namelist()}
    members[f"{names[data[0] % len(names)]}.npy"] = data[1:]
    out.write_bytes(_npz_from_members(members))
    _rerecord(job, 0)
    _merge(job, scratch)


def _lock_seeds(_d: Path) -> list:
    import os
    import socket
    import subprocess
    import sys

    gone = subprocess.Popen([sys.executable, "-c", "pass"])
    gone.wait()  # its PID is now free: a lock naming it is stale
    host = socket.gethostname()
    return [
        json.dumps({"host": host, "pid": gone.pid, "since": 1.0, "purpose": "write"}).encode(),
        json.dumps({"host": host, "pid": os.getpid(), "since": 1.0, "purpose": "write"}).encode(),
        json.dumps({"host": host + "-elsewhere", "pid": 1, "since": 1.0, "purpose": "write"}).encode(),
    ]


@target(
    "lock_file",
    _lock_seeds,
    requires=("matgen.fsutil",),
    notes="FolderLock.acquire over an existing lock file with mutated owner JSON (taken over if stale)",
)
def _lock_file(data: bytes, scratch: Path):
    import os
    import warnings

    from matgen.fsutil import FolderLock

    folder = scratch / "locked"
    folder.mkdir()
    (folder / ".matgen.lock").write_bytes(data)
    lock = FolderLock(folder, wait_s=0.0, purpose="fuzz")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        lock.acquire()
    # taken over: the file now holds this process's own record
    assert json.loads((folder / ".matgen.lock").read_text())["pid"] == os.getpid()
    lock.release()
