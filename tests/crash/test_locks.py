"""Concurrent runs on one output or job folder are serialised by lock files; stale locks are detected.

* a bake into a folder whose lock is held by a live process fails at once with one LockError naming the
  lock file and the holder's PID (and the CLI turns it into one line and exit status 2);
* a lock left by a killed process (its PID gone on this host) is taken over with a StaleLockWarning;
* a lock of another host is never taken over (its process cannot be checked from here);
* two processes running the same table task at once: one computes, the other waits and finds it done.
"""

import json
import os
import signal
import socket
import subprocess
import sys
import time
import warnings

import pytest

pytest.importorskip("OpenImageIO")

from projects import make_project  # noqa: E402

from matgen.errors import LockError  # noqa: E402
from matgen.fsutil import StaleLockWarning  # noqa: E402

BAKE_LOCK = ".matgen-bake.lock"  # the whole-set bake lock name of matgen/export/job.py

HOLDER = """
import sys, time
from matgen.fsutil import FolderLock
with FolderLock(sys.argv[1], name=sys.argv[2], purpose="test holder"):
    print("HELD", flush=True)
    time.sleep(120)
"""


def _bake(cfg, out):
    from matgen.bake.config import load_config
    from matgen.export.job import bake

    return bake(load_config(cfg), out, jobs=1)


@pytest.fixture
def held_lock(tmp_path):
    """A live process holding the bake lock of tmp_path/out."""
    out = tmp_path / "out"
    out.mkdir()
    proc = subprocess.Popen(
        [sys.executable, "-c", HOLDER, str(out), BAKE_LOCK], stdout=subprocess.PIPE, text=True
    )
    assert proc.stdout.readline().strip() == "HELD"
    yield out, proc.pid
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    proc.stdout.close()


def test_bake_into_a_locked_folder_fails_with_the_holder_named(tmp_path, held_lock):
    out, pid = held_lock
    cfg = make_project(tmp_path / "proj")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(LockError) as exc:
            _bake(cfg, out)
    msg = str(exc.value)
    assert BAKE_LOCK in msg and str(pid) in msg
    assert sorted(p.name for p in out.iterdir()) == [BAKE_LOCK], "the refused bake wrote into the folder"


def test_cli_bake_into_a_locked_folder_is_one_line_and_exit_2(tmp_path, held_lock, capsys):
    from matgen.cli import main

    out, pid = held_lock
    cfg = make_project(tmp_path / "proj")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rc = main(["bake", str(cfg), "--out", str(out), "--quiet"])
    err = capsys.readouterr().err.strip()
    assert rc == 2
    lines = [ln for ln in err.splitlines() if "Warning" not in ln and ln.strip()]
    assert len(lines) == 1 and "locked" in lines[0] and str(pid) in lines[0], err


def test_stale_bake_lock_of_a_killed_process_is_taken_over(tmp_path):
    cfg = make_project(tmp_path / "proj")
    out = tmp_path / "out"
    out.mkdir()
    proc = subprocess.Popen(
        [sys.executable, "-c", HOLDER, str(out), BAKE_LOCK], stdout=subprocess.PIPE, text=True
    )
    assert proc.stdout.readline().strip() == "HELD"
    proc.send_signal(signal.SIGKILL)  # dies holding the lock: the lock file stays behind
    proc.wait()
    proc.stdout.close()
    assert (out / BAKE_LOCK).exists()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        _bake(cfg, out)
    assert any(issubclass(w.category, StaleLockWarning) and str(proc.pid) in str(w.message) for w in caught)
    assert (out / "material.json").is_file() and not (out / BAKE_LOCK).exists()


def test_lock_of_another_host_is_not_taken_over(tmp_path):
    cfg = make_project(tmp_path / "proj")
    out = tmp_path / "out"
    out.mkdir()
    other = socket.gethostname() + "-elsewhere"
    (out / BAKE_LOCK).write_text(json.dumps({"host": other, "pid": 1, "since": time.time()}))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(LockError, match=other):
            _bake(cfg, out)


def test_same_table_task_run_twice_at_once_is_computed_once(tmp_path):
    """Two `matgen table run-task JOB 0` processes started together: both exit 0, one output, one record."""
    from matgen.tables.store import lut_files

    from matgen.tables.build import plan_job
    from matgen.tables.tasks import task_state

    text = lut_files().joinpath("specs", "tiny.toml").read_text()
    text = text.replace("photons_per_band = 4000", "photons_per_band = 1000")
    spec = tmp_path / "spec.toml"
    spec.write_text(text)
    job = plan_job(spec, tmp_path / "job")
    env = dict(os.environ, PYTHONWARNINGS="ignore", NUMBA_NUM_THREADS="1")
    cmd = [sys.executable, "-m", "matgen", "table", "run-task", str(job.path), "0", "--threads", "1"]
    procs = [
        subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
        for _ in range(2)
    ]
    outs = [p.communicate(timeout=300) for p in procs]
    assert [p.returncode for p in procs] == [0, 0], outs
    said = sorted(o[0].strip() for o in outs)
    # whoever gets the task lock second re-checks under the lock and finds the task done
    assert said == ["task 0: computed", "task 0: done"], said
    assert task_state(job, 0).state == "done"
    record = json.loads(job.record_path(0).read_text())
    assert record["pid"] in [p.pid for p in procs]
    files = sorted(p.name for p in job.tasks_dir.iterdir())
    assert files == ["task-00000.json", "task-00000.npz"], files
    assert not list(job.locks_dir.iterdir()), "a task lock was left behind"
