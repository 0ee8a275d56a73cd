"""Concurrent runs on one output or job folder are serialised by lock files; stale locks are detected.

* a bake into a folder whose lock is held by a live process fails at once with one LockError naming the
  lock file and the holder's PID (and the CLI turns it into one line and exit status 2);
* a lock left by a killed process (its PID gone on this host) is taken over with a StaleLockWarning;
* a lock of another host is never taken over (its process cannot be checked from here);
* two processes running the same table task at once (the second seen waiting on the first's live lock):
  one computes, the other waits and finds it done;
* a lock file whose owner record is not a JSON object with a host and a plausible PID is never taken over.
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


def test_cli_bake_into_a_locked_folder_is_one_line_and_exit_75(tmp_path, held_lock, capsys):
    from matgen.cli import main

    out, pid = held_lock
    cfg = make_project(tmp_path / "proj")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rc = main(["bake", str(cfg), "--out", str(out), "--quiet"])
    err = capsys.readouterr().err.strip()
    assert rc == 75  # busy: retry later (EX_TEMPFAIL)
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


# The second `matgen table run-task`: imports first, says READY, waits for the first process's task lock,
# reports the lock's owner (alive?) and the task's state while that lock is held, then runs the same task.
OBSERVER = """
import json, sys, time
from pathlib import Path
from matgen.cli import main
from matgen.fsutil import pid_alive
from matgen.tables.plan import JobFolder
from matgen.tables.tasks import task_state

job, lock = sys.argv[1], Path(sys.argv[2])
print("READY", flush=True)
deadline = time.monotonic() + 120
owner = None
while owner is None and time.monotonic() < deadline:
    try:
        owner = json.loads(lock.read_text())  # empty for an instant after O_EXCL creation
    except (OSError, ValueError):
        time.sleep(0.002)
if owner is None:
    print("NO LOCK SEEN", flush=True)
    sys.exit(3)
state = task_state(JobFolder.open(job), 0).state
print(f"SAW {owner['pid']} {pid_alive(owner['pid']) and lock.exists()} {state}", flush=True)
sys.exit(main(["table", "run-task", job, "0", "--threads", "1"]))
"""


def test_same_table_task_run_twice_at_once_is_computed_once(tmp_path):
    """Two `matgen table run-task JOB 0` processes at once: both exit 0, one computes, the other waits and
    finds the task done; one output, one record, no lock left.

    Overlap is proved, not assumed: the second process is started first and watches for the first's task
    lock; it reports the lock's owner (the first process, alive, the lock still there) and the task state
    (not done) while that lock is held, and only then runs the task.
    """
    from matgen.tables.build import plan_job
    from matgen.tables.store import lut_files
    from matgen.tables.tasks import task_state

    text = lut_files().joinpath("specs", "tiny.toml").read_text()
    text = text.replace("photons_per_band = 4000", "photons_per_band = 1000")
    spec = tmp_path / "spec.toml"
    spec.write_text(text)
    job = plan_job(spec, tmp_path / "job")
    lock = job.locks_dir / "task-00000.lock"
    env = dict(os.environ, PYTHONWARNINGS="ignore", NUMBA_NUM_THREADS="1")
    pipes = dict(stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    second = subprocess.Popen([sys.executable, "-c", OBSERVER, str(job.path), str(lock)], **pipes)
    first = None
    try:
        assert second.stdout.readline().strip() == "READY", second.stderr.read()
        assert not lock.exists()
        cmd = [sys.executable, "-m", "matgen", "table", "run-task", str(job.path), "0", "--threads", "1"]
        first = subprocess.Popen(cmd, **pipes)
        out_first = first.communicate(timeout=300)
        out_second = second.communicate(timeout=300)
    finally:
        for p in (second, first):
            if p is not None and p.poll() is None:
                p.kill()
                p.wait()
    assert first.returncode == 0, out_first
    assert second.returncode == 0, out_second
    said_first = out_first[0].strip().splitlines()
    said_second = out_second[0].strip().splitlines()
    # the second process saw the first's lock, held by the live first process, before the task was done ...
    assert said_second[0] == f"SAW {first.pid} True missing", (said_second, out_second[1][-2000:])
    # ... and, running the task itself, re-checked under the lock and found it done
    assert said_first == ["task 0: computed"], said_first
    assert said_second[1:] == ["task 0: done"], said_second
    assert task_state(job, 0).state == "done"
    record = json.loads(job.record_path(0).read_text())
    assert record["pid"] == first.pid
    files = sorted(p.name for p in job.tasks_dir.iterdir())
    assert files == ["task-00000.json", "task-00000.npz"], files
    assert not list(job.locks_dir.iterdir()), "a task lock was left behind"


@pytest.mark.parametrize(
    "owner",
    [
        "[]",
        '{"host": "HOST", "pid": 1180591620717411303424}',
        '{"host": "HOST", "pid": -1}',
        '{"host": "HOST", "pid": 0}',
        '{"host": "HOST", "pid": true}',
        '{"host": ["HOST"], "pid": 12345}',
        "[" * 100000,
    ],
    ids=["list", "pid_2_70", "pid_minus_1", "pid_0", "pid_true", "host_list", "nested_deep"],
)
def test_lock_file_without_a_plausible_owner_is_never_taken_over(tmp_path, owner):
    """A lock file holding '[]' raised AttributeError, a PID of 2**70 OverflowError from os.kill, and -1 or 0
    made os.kill(pid, 0) probe a whole process group; such a lock is another process's, never stale."""
    from matgen.fsutil import FolderLock

    text = owner.replace("HOST", socket.gethostname())
    (tmp_path / ".matgen.lock").write_text(text)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no StaleLockWarning: nothing is taken over
        with pytest.raises(LockError, match="locked by another process"):
            FolderLock(tmp_path).acquire()
    assert (tmp_path / ".matgen.lock").read_text() == text
