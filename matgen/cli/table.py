"""``matgen table``: build, plan, run-task, merge, info and plot lookup tables.

Exit statuses (also for farm schedulers): 0 done; 1 a QA threshold of ``info`` failed, or ``status`` found
tasks missing or corrupt; 2 an error (bad spec,
job folder of another spec or code version, incomplete or corrupt job, unreachable scheduler), with one
message on standard error; 75 (``run-task --no-wait``) the task is being run by another live process: retry
later; 130 interrupted.
"""

from __future__ import annotations

import json
import sys

from matgen.cli import add_command, print_json
from matgen.errors import LockError, ParameterError

#: Exit status of ``run-task --no-wait`` when another process holds the task (EX_TEMPFAIL of sysexits.h).
EXIT_BUSY = 75
#: Exit status of ``table status`` when any task is missing or corrupt (the job is not ready to merge).
EXIT_NOT_DONE = 1


def register(sub):
    """Add ``matgen table`` and its subcommands to the top-level subparsers."""
    p = add_command(
        sub,
        "table",
        "Build, plan, run, merge, inspect and plot lookup tables",
        "matgen table build lut/specs/default.toml --out lut/default.npz\nmatgen table info lut/default.npz",
        description=(
            "Lookup tables over pigmentation axes x bands, built from a TOML spec by Monte Carlo transport "
            "with absorption reweighting. Subcommands: build (plan + run + merge in one go, resumable), "
            "plan / run-task / merge (farm job arrays), info (summary and QA), plot (slices)."
        ),
    )
    tsub = p.add_subparsers(dest="table_command", metavar="SUBCOMMAND")

    b = add_command(
        tsub,
        "build",
        "Build a table from a spec (resumes from its job folder)",
        "matgen table build lut/specs/default.toml --out lut/default.npz --workers 2",
    )
    b.add_argument("spec", help="table spec (TOML)")
    b.add_argument("--out", required=True, help="table file to write (.npz; manifest beside it as .json)")
    b.add_argument("--jobdir", help="job folder (default: OUT with .job instead of .npz); kept for resuming")
    b.add_argument("--workers", type=int, help="processes of the local pool (default: available CPUs)")
    b.add_argument("--serial", action="store_true", help="run tasks one by one in this process")
    b.add_argument(
        "--scheduler", metavar="ADDRESS", help="submit to a running Dask scheduler (tcp://host:8786)"
    )
    b.add_argument(
        "--dask-workers", type=int, metavar="N", help="start a Dask LocalCluster of N workers on 127.0.0.1"
    )
    b.add_argument("--connect-timeout", type=float, default=10.0, help="seconds to reach --scheduler")
    b.add_argument("--no-progress", action="store_true", help="no progress bar")
    b.add_argument("--json", action="store_true", help="print the result as one JSON document")
    b.set_defaults(func=_build)

    pl = add_command(
        tsub,
        "plan",
        "Plan a spec into a job folder of independent tasks (for a farm job array)",
        "matgen table plan lut/specs/default.toml jobs/default",
    )
    pl.add_argument("spec", help="table spec (TOML)")
    pl.add_argument("jobdir", help="job folder to create (reused if it holds the same plan)")
    pl.add_argument("--json", action="store_true", help="print the task list as JSON")
    pl.set_defaults(func=_plan)

    r = add_command(
        tsub,
        "run-task",
        "Run one task of a job folder (idempotent; safe to retry or run twice)",
        "matgen table run-task jobs/default $SLURM_ARRAY_TASK_ID",
    )
    r.add_argument("jobdir", help="job folder written by 'matgen table plan'")
    r.add_argument("index", type=int, help="0-based task index")
    r.add_argument(
        "--threads", type=int, help="kernel threads (default: all CPUs; results do not depend on it)"
    )
    r.add_argument(
        "--no-wait",
        action="store_true",
        help=f"exit {EXIT_BUSY} at once if another live process runs this task (default: wait for it)",
    )
    r.add_argument("--json", action="store_true", help="print the result as one JSON document")
    r.set_defaults(func=_run_task)

    m = add_command(
        tsub,
        "merge",
        "Merge a complete job folder into a table (lists missing tasks otherwise)",
        "matgen table merge jobs/default --out lut/default.npz",
    )
    m.add_argument("jobdir", help="job folder")
    m.add_argument("--out", required=True, help="table file to write (.npz)")
    m.add_argument("--json", action="store_true", help="print the result as one JSON document")
    m.set_defaults(func=_merge)

    s = add_command(
        tsub,
        "status",
        "Show which tasks of a job folder are done, missing or corrupt",
        "matgen table status jobs/default",
    )
    s.add_argument("jobdir", help="job folder")
    s.add_argument("--json", action="store_true", help="print JSON")
    s.set_defaults(func=_status)

    i = add_command(
        tsub,
        "info",
        "Summarise a table and its QA (worst statistical error and fit residual)",
        "matgen table info lut/default.npz --max-rel-stderr 0.01",
    )
    i.add_argument("file", nargs="?", help="table file (.npz; default: the shipped default table)")
    i.add_argument("--json", action="store_true", help="print JSON")
    i.add_argument(
        "--max-rel-stderr",
        type=float,
        metavar="X",
        help="exit 1 unless the relative stderr of A is <= X at every grid point and band",
    )
    i.set_defaults(func=_info)

    pt = add_command(
        tsub,
        "plot",
        "Plot table slices along one axis, one line per value of another",
        "matgen table plot lut/default.npz --out slices.png --quantity rgb_albedo_multiple",
    )
    pt.add_argument("file", nargs="?", help="table file (.npz; default: the shipped default table)")
    pt.add_argument("--out", required=True, help="image file (png, pdf, svg)")
    pt.add_argument("--quantity", default="rgb_albedo_multiple", help="table quantity")
    pt.add_argument("--x", dest="x_axis", help="axis along x (default: the first)")
    pt.add_argument("--lines", dest="line_axis", help="axis of the lines (default: the second)")
    pt.add_argument("--band-nm", type=float, help="band of a spectral quantity (default: nearest 550 nm)")
    pt.add_argument(
        "--at",
        action="append",
        default=[],
        metavar="AXIS=VALUE",
        help="value of another axis (repeatable; default: middle grid value)",
    )
    pt.set_defaults(func=_plot)

    p.set_defaults(func=_no_sub)


def _no_sub(args):
    raise ParameterError("name a table subcommand: build, plan, run-task, merge, status, info or plot")


def _build(args):
    from matgen.tables.build import build_table

    executor = "serial" if args.serial else "local"
    table = build_table(
        args.spec,
        args.out,
        jobdir=args.jobdir,
        executor=executor,
        workers=args.workers,
        scheduler=args.scheduler,
        dask_workers=args.dask_workers,
        connect_timeout_s=args.connect_timeout,
        progress=not args.no_progress,
    )
    bs = table.build_stats
    if args.json:
        print_json(
            {
                "status": "done",
                "table": str(args.out),
                "grid_points": int(table.n_points),
                "bands": len(table.bands),
                "tasks_computed": int(bs.get("computed", 0)),
                "tasks_reused": int(bs.get("skipped", 0)),
                "seconds": round(float(bs.get("build_wall_s", 0.0)), 3),
            }
        )
        return 0
    print(
        f"wrote {args.out}: {table.n_points} grid points x {len(table.bands)} bands; "
        f"{bs.get('computed', 0)} task(s) computed, {bs.get('skipped', 0)} reused; "
        f"{bs.get('build_wall_s', 0.0):.1f} s"
    )
    return 0


def _plan(args):
    from matgen.tables.build import plan_job

    job = plan_job(args.spec, args.jobdir)
    plan = job.plan
    if args.json:
        print(json.dumps({"jobdir": str(job.path), "tasks": [t.to_dict() for t in plan.tasks]}, indent=1))
    else:
        n = len(plan.tasks)
        print(
            f"planned {n} task(s) in {job.path} ({len(plan.spec.bands)} bands; scattering axes "
            f"{plan.scattering_axes or 'none'}; reweighted axes {plan.pigment_axes})"
        )
        print(f"run each with: matgen table run-task {job.path} INDEX   (INDEX = 0..{n - 1})")
        print(f"then: matgen table merge {job.path} --out TABLE.npz")
    return 0


def _run_task(args):
    from matgen.tables.plan import JobFolder
    from matgen.tables.tasks import run_task

    job = JobFolder.open(args.jobdir)
    try:
        status = run_task(job, args.index, threads=args.threads, wait_s=0.0 if args.no_wait else 24 * 3600.0)
    except LockError as exc:
        if args.no_wait:
            if args.json:
                print_json({"status": "busy", "task": int(args.index), "message": str(exc)})
            print(f"matgen table run-task: busy: {exc}", file=sys.stderr)
            return EXIT_BUSY
        raise
    if args.json:
        print_json({"status": status, "task": int(args.index), "jobdir": str(job.path)})
        return 0
    print(f"task {args.index}: {status}")
    return 0


def _merge(args):
    from matgen.tables.build import merge_job
    from matgen.tables.plan import JobFolder

    job = JobFolder.open(args.jobdir)
    table = merge_job(job, args.out)
    if args.json:
        print_json(
            {
                "status": "done",
                "table": str(args.out),
                "grid_points": int(table.n_points),
                "bands": len(table.bands),
                "tasks": len(job.plan.tasks),
            }
        )
        return 0
    print(
        f"wrote {args.out}: {table.n_points} grid points x {len(table.bands)} bands "
        f"from {len(job.plan.tasks)} tasks"
    )
    return 0


def _status(args):
    from matgen.tables.plan import JobFolder
    from matgen.tables.tasks import job_states

    job = JobFolder.open(args.jobdir, check_code=False)
    states = job_states(job)
    counts = {k: sum(s.state == k for s in states) for k in ("done", "missing", "corrupt")}
    if args.json:
        print_json({"counts": counts, "tasks": [s.__dict__ for s in states]})
    else:
        print(
            f"{job.path}: {counts['done']} done, {counts['missing']} missing, {counts['corrupt']} corrupt "
            f"of {len(states)}"
        )
        for s in states:
            if s.state != "done":
                print(f"  task {s.index}: {s.state} ({s.reason})")
    return 0 if counts["done"] == len(states) else EXIT_NOT_DONE


def _load(file):
    from matgen.tables.store import Table, default_table_path, load_default_table

    if file is None:
        return load_default_table(), default_table_path()
    return Table.load(file), file


def _info(args):
    from matgen.tables.report import format_summary, table_summary

    table, path = _load(args.file)
    doc = table_summary(table, path)
    if args.json:
        print(json.dumps(doc, indent=1))
    else:
        print(format_summary(doc))
    if args.max_rel_stderr is not None:
        worst = doc["qa"].get("worst_relative_stderr_albedo_multiple", {}).get("value")
        if worst is None or not worst <= args.max_rel_stderr:
            print(f"QA failed: worst relative stderr of A {worst} > {args.max_rel_stderr}", file=sys.stderr)
            return 1
    return 0


def _plot(args):
    from matgen.tables.report import plot_slices

    at = {}
    for item in args.at:
        if "=" not in item:
            raise ParameterError(f"--at takes AXIS=VALUE; got {item!r}")
        k, v = item.split("=", 1)
        try:
            at[k.strip()] = float(v)
        except ValueError:
            raise ParameterError(f"--at {item!r}: value is not a number") from None
    table, _ = _load(args.file)
    plot_slices(
        table,
        args.out,
        quantity=args.quantity,
        x_axis=args.x_axis,
        line_axis=args.line_axis,
        band_nm=args.band_nm,
        at=at,
    )
    print(f"wrote {args.out}")
    return 0
