"""Executors of a table job: serial, local process pool, Dask.

All write the same job folder, so all give bit-identical tables for the same spec and seed (each task is a
pure function of the plan and the task, and the transport's tallies do not depend on thread count).

* ``serial``: tasks one after another in this process (all cores go to each task's kernels).
* ``local`` (default): a process pool over the available cores, with a progress bar and an ETA (tqdm); each
  worker runs its kernels on ``cores // workers`` threads.
* ``dask``: tasks submitted to a ``dask.distributed`` scheduler, either a running one (``scheduler=ADDRESS``,
  reached within ``connect_timeout_s`` or a clear error) or a ``LocalCluster`` on 127.0.0.1 started here
  (``dask_workers=N``). Workers write into the job folder, so they must see it (same machine or a shared
  file system).

The farm job array needs no executor: ``matgen table run-task JOBDIR INDEX`` runs one task
(:func:`matgen.tables.tasks.run_task`).
"""

from __future__ import annotations

import concurrent.futures as cf
import contextlib
import multiprocessing as mp
import os
import signal
import threading
import time
from pathlib import Path

from matgen._optional import require
from matgen.errors import ParameterError, TableError
from matgen.tables.plan import JobFolder
from matgen.tables.tasks import job_states, run_task

EXECUTORS = ("local", "serial", "dask")

_JOB_CACHE: dict = {}


def cpu_count() -> int:
    """CPUs this process may use."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not Linux
        return os.cpu_count() or 1


def _run_one(jobdir: str, index: int, threads: int | None) -> tuple:
    """Worker entry point: run one task of the job at ``jobdir``; returns (index, status, wall_s)."""
    job = _JOB_CACHE.get(jobdir)
    if job is None:
        job = _JOB_CACHE[jobdir] = JobFolder.open(jobdir)
    t0 = time.perf_counter()
    status = run_task(job, index, threads=threads)
    return index, status, time.perf_counter() - t0


def _raise_interrupt(signum, frame):
    signal.signal(signal.SIGTERM, signal.SIG_IGN)
    raise KeyboardInterrupt(f"signal {signum}")


def _watch_parent(parent: int) -> None:
    """End this worker when the process that started it is gone (killed without a chance to stop us)."""
    while True:
        time.sleep(1.0)
        if os.getppid() != parent:
            os._exit(143)


def _worker_init(threads: int, parent: int | None = None) -> None:
    # SIGTERM (sent by run_job's clean-up, or by a scheduler to the process group) unwinds the task like
    # Ctrl-C, so its temporary files and its task lock go; Ctrl-C itself is the parent's to handle
    signal.signal(signal.SIGTERM, _raise_interrupt)
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if parent is not None:
        watch = threading.Thread(target=_watch_parent, args=(parent,), daemon=True, name="matgen-watch")
        watch.start()
    try:
        import numba

        numba.set_num_threads(max(1, min(threads, numba.config.NUMBA_NUM_THREADS)))
    except Exception:  # noqa: BLE001 - thread count is an optimisation only
        pass


def _progress(total: int, initial: int, enabled: bool, desc: str):
    from tqdm import tqdm

    return tqdm(
        total=total,
        initial=initial,
        disable=not enabled,
        desc=desc,
        unit="task",
        smoothing=0.1,
        bar_format="{desc}: {percentage:3.0f}%|{bar}| {n_fmt}/{total_fmt} [{elapsed}<{remaining}, "
        "{rate_fmt}]",
    )


def stop_pool(pool: cf.ProcessPoolExecutor, grace_s: float = 10.0) -> None:
    """Stop a process pool now: cancel queued tasks, SIGTERM the workers, SIGKILL any left after ``grace_s``.

    A worker receiving SIGTERM unwinds its task (temporary files removed, task lock released, nothing
    recorded); the task stays "missing" and a rerun computes it. No worker outlives the run.
    """
    procs = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for p in procs:
        with contextlib.suppress(Exception):
            p.terminate()
    deadline = time.monotonic() + grace_s
    for p in procs:
        with contextlib.suppress(Exception):
            p.join(max(0.0, deadline - time.monotonic()))
            if p.is_alive():
                p.kill()
                p.join(1.0)


def pending_tasks(job: JobFolder) -> list:
    """Return the indices of tasks that are not done (missing or corrupt)."""
    return [s.index for s in job_states(job) if s.state != "done"]


def run_job(
    job: JobFolder,
    executor: str = "local",
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    dask_workers: int | None = None,
    connect_timeout_s: float = 10.0,
    progress: bool = True,
) -> dict:
    """Run every unfinished task of a job folder.

    Parameters
    ----------
    job : JobFolder
        The job folder.
    executor : {"local", "serial", "dask"}
        Where the tasks run.
    workers : int, optional
        Processes of the local pool (default: the CPUs available).
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://host:8786``); implies ``executor="dask"``.
    dask_workers : int, optional
        Start a ``LocalCluster`` with this many workers on 127.0.0.1; implies ``executor="dask"``.
    connect_timeout_s : float
        How long to try reaching ``scheduler`` (seconds).
    progress : bool
        Show a progress bar with an ETA on standard error.

    Returns
    -------
    dict
        ``tasks``, ``skipped`` (already done), ``computed``, ``wall_s``, ``executor``, ``workers``.

    """
    if scheduler is not None or dask_workers is not None:
        executor = "dask"
    if executor not in EXECUTORS:
        raise ParameterError(f"unknown executor {executor!r}; use one of {EXECUTORS}")
    todo = pending_tasks(job)
    total = len(job.plan.tasks)
    t0 = time.perf_counter()
    stats = {"tasks": total, "skipped": total - len(todo), "computed": 0, "executor": executor}
    if executor == "serial" or (executor == "local" and len(todo) <= 1):
        stats["workers"] = 1
        with _progress(total, total - len(todo), progress, "table tasks") as bar:
            for i in todo:
                _, status, _ = _run_one(str(job.path), i, None)
                stats["computed"] += status == "computed"
                bar.update(1)
    elif executor == "local":
        n = max(1, min(workers or cpu_count(), len(todo)))
        stats["workers"] = n
        threads = max(1, cpu_count() // n)
        ctx = mp.get_context("spawn")  # no fork of a process whose kernel threads already run
        pool = cf.ProcessPoolExecutor(
            max_workers=n, mp_context=ctx, initializer=_worker_init, initargs=(threads, os.getpid())
        )
        try:
            with _progress(total, total - len(todo), progress, "table tasks") as bar:
                futures = [pool.submit(_run_one, str(job.path), i, threads) for i in todo]
                for fut in cf.as_completed(futures):
                    _, status, _ = fut.result()
                    stats["computed"] += status == "computed"
                    bar.update(1)
        except BaseException:
            stop_pool(pool)
            raise
        pool.shutdown(wait=True)
    else:
        stats.update(_run_dask(job, todo, scheduler, dask_workers, connect_timeout_s, progress, total))
    stats["wall_s"] = time.perf_counter() - t0
    left = pending_tasks(job)
    if left:
        raise TableError(f"{len(left)} task(s) of {job.path} are still not done after the run: {left[:20]}")
    return stats


def _run_dask(job, todo, scheduler, dask_workers, connect_timeout_s, progress, total) -> dict:
    distributed = require("distributed", "run table tasks on Dask")
    cluster = None
    try:
        if scheduler is not None:
            try:
                client = distributed.Client(scheduler, timeout=f"{float(connect_timeout_s)}s")
            except (OSError, TimeoutError) as exc:
                raise TableError(
                    f"cannot reach the Dask scheduler at {scheduler} within {connect_timeout_s:g} s ({exc}); "
                    "check the address and that the scheduler runs"
                ) from exc
        else:
            n = int(dask_workers or 0)
            if n < 1:
                raise ParameterError(f"dask_workers is {dask_workers!r}; give a whole number >= 1")
            cluster = distributed.LocalCluster(
                n_workers=n, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None
            )
            client = distributed.Client(cluster)
        try:
            n_workers = max(1, len(client.scheduler_info().get("workers", {})))
            threads = max(1, cpu_count() // n_workers) if scheduler is None else None
            futures = [
                client.submit(
                    _run_one,
                    str(Path(job.path).resolve()),
                    i,
                    threads,
                    pure=False,
                    key=f"matgen-table-task-{job.plan.tasks[i].task_id[:16]}-{i}",
                )
                for i in todo
            ]
            computed = 0
            try:
                with _progress(total, total - len(todo), progress, "table tasks (dask)") as bar:
                    for fut in distributed.as_completed(futures):
                        # a task's MatgenError is raised here, as the worker raised it
                        _, status, _ = fut.result()
                        computed += status == "computed"
                        bar.update(1)
            except BaseException:
                # interrupted or terminated: the scheduler must not keep running (or retrying) our tasks
                with contextlib.suppress(Exception):
                    client.cancel(futures, force=True)
                raise
            return {"computed": computed, "workers": n_workers}
        finally:
            client.close()
    finally:
        if cluster is not None:
            cluster.close()
