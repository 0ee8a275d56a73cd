"""Building a table from a spec in one call: plan -> job folder -> executor -> merge -> table file.

A build is resumable: it keeps its job folder (default ``<table>.job`` beside the table file), and a rerun
with the same spec skips the tasks already done and recomputes missing or corrupt ones. A job folder that
holds another spec or code version is refused and left unchanged.
"""

from __future__ import annotations

import platform
import time
from pathlib import Path

from matgen.errors import TableError
from matgen.limits import read_text_limited
from matgen.tables.executors import cpu_count, run_job
from matgen.tables.merge import merge
from matgen.tables.plan import JobFolder, make_plan
from matgen.tables.spec import TableSpec, load_spec
from matgen.tables.store import Table
from matgen.tables.tasks import read_task_record


def default_jobdir(out) -> Path:
    """Default job folder of a table file: ``x.npz`` -> ``x.job``."""
    return Path(out).with_suffix(".job")


def plan_job(spec_or_path, jobdir) -> JobFolder:
    """Plan a spec (a :class:`TableSpec` or a spec file) into a job folder (reused if it holds this plan)."""
    if isinstance(spec_or_path, TableSpec):
        spec, text = spec_or_path, None
    else:
        spec = load_spec(spec_or_path)
        text = read_text_limited(spec_or_path, "table spec")
    return JobFolder.create(jobdir, make_plan(spec), spec_text=text)


def merge_job(job: JobFolder, out, run_stats: dict | None = None) -> Table:
    """Merge a complete job and save the table to ``out`` (``.npz`` + ``.json``)."""
    t0 = time.perf_counter()
    table = merge(job)
    stats = dict(run_stats or {})
    stats["merge_wall_s"] = time.perf_counter() - t0
    stats["cpus"] = cpu_count()
    stats["machine"] = platform.machine()
    stats["python"] = platform.python_version()
    stats["task_wall_s_sum"] = _task_wall_sum(job)
    table.build_stats = stats
    table.save(out)
    return table


def _task_wall_sum(job: JobFolder) -> float:
    """Sum of the tasks' recorded wall times in seconds (records that fail their check count 0)."""
    total = 0.0
    for i in range(len(job.plan.tasks)):
        record, _ = read_task_record(job, i)
        if record is not None:
            total += float(record["wall_s"])
    return total


def build_table(
    spec_or_path,
    out,
    *,
    jobdir=None,
    executor: str = "local",
    workers: int | None = None,
    scheduler: str | None = None,
    dask_workers: int | None = None,
    connect_timeout_s: float = 10.0,
    progress: bool = True,
) -> Table:
    """Build a table from a spec and write it to ``out``.

    Parameters
    ----------
    spec_or_path : TableSpec or str or Path
        The spec, or a spec file (TOML).
    out : str or Path
        Table file to write (``.npz``; the manifest goes beside it as ``.json``).
    jobdir : str or Path, optional
        Job folder (default ``<out>.job``); kept after the build so a rerun resumes.
    executor, workers, scheduler, dask_workers, connect_timeout_s, progress
        See :func:`matgen.tables.executors.run_job`.

    Returns
    -------
    Table

    """
    out = Path(out)
    if out.suffix != ".npz":
        raise TableError(f"table file {out} must end in .npz")
    if not out.parent.exists():
        raise TableError(f"cannot write table {out}: folder {out.parent} does not exist")
    t0 = time.perf_counter()
    job = plan_job(spec_or_path, jobdir or default_jobdir(out))
    plan_s = time.perf_counter() - t0
    stats = run_job(
        job,
        executor,
        workers=workers,
        scheduler=scheduler,
        dask_workers=dask_workers,
        connect_timeout_s=connect_timeout_s,
        progress=progress,
    )
    stats["plan_wall_s"] = plan_s
    table = merge_job(job, out, stats)
    table.build_stats["build_wall_s"] = time.perf_counter() - t0
    table.save(out)  # once more, with the total build time in the manifest (the .npz bytes do not change)
    return table


__all__ = ["build_table", "plan_job", "merge_job", "default_jobdir"]
