"""Kill harness: run a table build or a bake in a subprocess and SIGKILL it at a random point.

The child (``driver.py`` beside this file) imports matgen, prints ``READY``, runs the job and prints ``DONE``.
The parent waits for ``READY``, sleeps a delay drawn uniformly over the job's measured duration, then kills
the child's whole process group with SIGKILL (as a node failure or an out-of-memory kill would: no handler
runs, pool workers die too). After each kill the output is checked:

* every visible file (name not starting with ``.``) is complete: byte-identical to the same file of an
  uninterrupted reference run (so neither partial nor corrupt);
* leftovers are only hidden temporary files of interrupted atomic writes, hidden staging folders and lock
  files of the dead process; they are counted and must not be taken for outputs by a rerun;
* a rerun after the last kill completes, takes over the stale locks (none is left after it) and gives files
  byte-identical to the uninterrupted run;
* at least one kill landed inside a run (not after it had finished): a campaign that killed nothing but
  finished processes tested nothing (``KillReport.ok`` is then False).
"""

from __future__ import annotations

import fnmatch
import hashlib
import os
import random
import signal
import subprocess
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

HERE = Path(__file__).resolve().parent
DRIVER = HERE / "driver.py"


def _env() -> dict:
    env = dict(os.environ)
    env.setdefault("NUMBA_NUM_THREADS", "2")
    env["PYTHONWARNINGS"] = "ignore"
    # the child runs a script in tests/crash: put this checkout's matgen first, not an installed copy
    root = str(Path(__file__).resolve().parents[2])
    rest = [p for p in env.get("PYTHONPATH", "").split(os.pathsep) if p]
    env["PYTHONPATH"] = os.pathsep.join([root] + rest)
    return env


@dataclass
class Run:
    """One child run: whether it finished, its duration after READY (s) and the delay it was killed at."""

    finished: bool
    seconds: float
    killed_at_s: float | None
    returncode: int | None
    stderr: str = ""


def run_child(args: list, kill_after_s: float | None = None, timeout_s: float = 300.0) -> Run:
    """Run ``driver.py ARGS``; SIGKILL its process group ``kill_after_s`` s after READY (None: never)."""
    proc = subprocess.Popen(
        [sys.executable, str(DRIVER), *map(str, args)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env=_env(),
        start_new_session=True,
    )
    try:
        line = proc.stdout.readline()
        if line.strip() != "READY":
            proc.wait(timeout=timeout_s)
            raise RuntimeError(f"driver did not start: {line!r} {proc.stderr.read()[-3000:]}")
        t0 = time.perf_counter()
        if kill_after_s is not None:
            try:
                proc.wait(timeout=kill_after_s)
            except subprocess.TimeoutExpired:
                os.killpg(proc.pid, signal.SIGKILL)
                proc.wait(timeout=60)
                _reap_group(proc.pid)
                return Run(False, time.perf_counter() - t0, kill_after_s, proc.returncode)
        else:
            proc.wait(timeout=timeout_s)
        out = proc.stdout.read()
        err = proc.stderr.read()
        return Run("DONE" in out, time.perf_counter() - t0, None, proc.returncode, err[-3000:])
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()
        proc.stdout.close()
        proc.stderr.close()


def _reap_group(pgid: int, wait_s: float = 10.0) -> None:
    """Wait until no process of group ``pgid`` is left (pool workers die with the group)."""
    deadline = time.monotonic() + wait_s
    while time.monotonic() < deadline:
        try:
            os.killpg(pgid, 0)
        except ProcessLookupError:
            return
        time.sleep(0.05)


def _is_leftover(rel: Path) -> bool:
    """Hidden entries (temporaries, staging folders) and lock files are not outputs."""
    return any(part.startswith(".") for part in rel.parts) or rel.name.endswith(".lock")


def digest_tree(folder: Path) -> dict:
    """SHA-256 of every output file under ``folder`` (relative path -> hex); leftovers are skipped."""
    out = {}
    if not folder.exists():
        return out
    for p in sorted(folder.rglob("*")):
        rel = p.relative_to(folder)
        if _is_leftover(rel) or not p.is_file():
            continue
        out[str(rel)] = hashlib.sha256(p.read_bytes()).hexdigest()
    return out


def hidden_leftovers(folder: Path) -> list:
    """Leftovers under ``folder``: hidden temporaries and staging folders, and lock files."""
    if not folder.exists():
        return []
    return sorted(
        str(p.relative_to(folder)) for p in folder.rglob("*") if _is_leftover(p.relative_to(folder))
    )


@dataclass
class KillReport:
    """What a kill campaign found."""

    what: str
    kills: int = 0
    finished_before_kill: int = 0
    reference_seconds: float = 0.0
    kill_times_s: list = field(default_factory=list)
    partial_or_corrupt: list = field(default_factory=list)
    leftovers_max: int = 0
    rerun_identical: bool | None = None
    locks_after_rerun: list = field(default_factory=list)
    leftovers_after_rerun: list = field(default_factory=list)
    rerun_seconds: float = 0.0
    differing_files: list = field(default_factory=list)

    @property
    def landed(self) -> int:
        """Kills that landed inside a run (the others came after the killed run had finished)."""
        return self.kills - self.finished_before_kill

    @property
    def ok(self) -> bool:
        """True when at least one kill landed inside a run, no output was ever partial or corrupt, the rerun
        matched the uninterrupted run and took over every stale lock. A campaign whose kills all came after
        the runs had finished tested nothing and is not ok."""
        return (
            self.landed > 0
            and not self.partial_or_corrupt
            and bool(self.rerun_identical)
            and not self.locks_after_rerun
        )


def kill_campaign(
    what: str,
    args_for,
    reference: dict,
    reference_seconds: float,
    out_dirs,
    kills: int,
    seed: int = 0,
    ignore=(),
    rerun=None,
) -> KillReport:
    """Kill ``kills`` successive runs of the same job at random points, checking after each; then rerun.

    Parameters
    ----------
    what : str
        Name for the report.
    args_for : callable() -> list
        Driver arguments of the job (the same every time, so each run resumes the previous one).
    reference : dict
        :func:`digest_tree` of the uninterrupted run's output (relative path -> SHA-256), per out dir.
    reference_seconds : float
        Duration of the uninterrupted run after READY (s); kill delays are drawn from [0, 1.1 x this].
    out_dirs : dict of str to Path
        Folders to check, keyed like ``reference``.
    rerun : callable() -> None, optional
        Runs the final, uninterrupted rerun (e.g. in this process, to save a process start); raises on
        failure. Default: one more child run.
    ignore : iterable of str
        fnmatch patterns of visible files that legitimately differ between runs (a manifest or task record
        holding wall times and PIDs); for those only presence is compared, after the final rerun.
    """
    rng = random.Random(seed)
    rep = KillReport(what, reference_seconds=reference_seconds)
    ignore = list(ignore)

    def ignored(rel):
        return any(fnmatch.fnmatch(rel, pat) for pat in ignore)

    for _ in range(kills):
        delay = rng.uniform(0.0, 1.1 * reference_seconds)
        run = run_child(args_for(), kill_after_s=delay)
        rep.kills += 1
        rep.kill_times_s.append(round(delay, 3))
        rep.finished_before_kill += run.finished
        for key, folder in out_dirs.items():
            now = digest_tree(folder)
            for rel, h in now.items():
                if ignored(rel):
                    continue
                want = reference[key].get(rel)
                if want is None:
                    rep.partial_or_corrupt.append(f"after kill at {delay:.2f} s: unexpected file {key}/{rel}")
                elif h != want:
                    rep.partial_or_corrupt.append(
                        f"after kill at {delay:.2f} s: {key}/{rel} differs from the "
                        "uninterrupted run (partial or corrupt)"
                    )
            rep.leftovers_max = max(rep.leftovers_max, len(hidden_leftovers(folder)))
    if rerun is not None:
        t0 = time.perf_counter()
        try:
            rerun()
            final = Run(True, time.perf_counter() - t0, None, 0)
        except Exception as exc:  # reported, not raised: the caller asserts on the report
            final = Run(False, time.perf_counter() - t0, None, None, f"{type(exc).__name__}: {exc}")
    else:
        final = run_child(args_for())
    rep.rerun_seconds = final.seconds
    if not final.finished:
        rep.rerun_identical = False
        rep.differing_files.append(f"rerun failed (exit {final.returncode}): {final.stderr}")
        return rep
    same = True
    for key, folder in out_dirs.items():
        now = digest_tree(folder)
        for rel in sorted(set(now) | set(reference[key])):
            if ignored(rel):
                if (rel in now) != (rel in reference[key]):
                    same = False
                    rep.differing_files.append(f"{key}/{rel} present in only one run")
                continue
            if now.get(rel) != reference[key].get(rel):
                same = False
                rep.differing_files.append(f"{key}/{rel}")
    rep.rerun_identical = same
    for folder in out_dirs.values():
        left = hidden_leftovers(folder)
        rep.leftovers_after_rerun += left
        rep.locks_after_rerun += [x for x in left if x.endswith(".lock")]
    return rep
