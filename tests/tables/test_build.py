"""Table builds: executors agree bit for bit; kill and resume; corrupt and missing tasks; refused job folders;
interpolation against a fresh transport + fit between grid nodes.

All builds use lut/specs/tiny.toml (3 bands, 5 x 4 x 3 grid, 4000 photons per band).
"""

import json
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from matgen.cli import main
from matgen.errors import ConfigError, TableError
from matgen.tables.build import build_table, merge_job, plan_job
from matgen.tables.executors import run_job
from matgen.tables.plan import JobFolder, task_seed
from matgen.tables.spec import load_spec
from matgen.tables.store import lut_files
from matgen.tables.tasks import job_states, run_task

SPEC = lut_files() / "specs" / "tiny.toml"


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    """The tiny table built serially in this process: the reference all other builds must reproduce."""
    root = tmp_path_factory.mktemp("ref")
    table = build_table(SPEC, root / "t.npz", executor="serial", progress=False)
    return root, table


def _npz_bytes(path):
    return Path(path).read_bytes()


def test_reference_table_is_complete(reference):
    root, table = reference
    assert table.grid_shape == (5, 4, 3)
    assert set(table.quantities) >= {
        "albedo_multiple",
        "albedo_multiple_stderr",
        "shape_distance_mm",
        "rgb_albedo_multiple",
        "ior",
    }
    a = table.quantities["albedo_multiple"]
    assert np.all(np.isfinite(a)) and np.all((a > 0) & (a < 1))
    # more melanin, less reflectance at 450 nm (every blood / saturation node)
    assert np.all(np.diff(a[..., 0], axis=0) < 0)
    doc = json.loads((root / "t.json").read_text())
    assert doc["manifest"]["tasks"] == 3 and doc["build_stats"]["executor"] == "serial"
    assert len(doc["manifest"]["provenance"]["task_ids"]) == 3


def test_local_pool_dask_and_farm_give_identical_tables(reference, tmp_path):
    """Same spec and seed: serial, 2-process pool, 2-worker Dask LocalCluster and plan/run-task/merge."""
    root, _ = reference
    ref = _npz_bytes(root / "t.npz")
    build_table(SPEC, tmp_path / "local.npz", executor="local", workers=2, progress=False)
    assert _npz_bytes(tmp_path / "local.npz") == ref
    build_table(SPEC, tmp_path / "dask.npz", dask_workers=2, progress=False)
    assert _npz_bytes(tmp_path / "dask.npz") == ref
    jobdir = tmp_path / "farm"
    assert main(["table", "plan", str(SPEC), str(jobdir)]) == 0
    n = len(JobFolder.open(jobdir).plan.tasks)
    for i in range(n):
        assert main(["table", "run-task", str(jobdir), str(i), "--threads", "1"]) == 0
    assert run_task(JobFolder.open(jobdir), 0) == "done"  # a retry is a no-op
    assert main(["table", "merge", str(jobdir), "--out", str(tmp_path / "farm.npz")]) == 0
    assert _npz_bytes(tmp_path / "farm.npz") == ref
    # the task outputs themselves are identical too
    for i in range(n):
        assert (jobdir / "tasks" / f"task-{i:05d}.npz").read_bytes() == (
            root / "t.job" / "tasks" / f"task-{i:05d}.npz"
        ).read_bytes()


def test_killed_build_resumes_to_the_same_table(reference, tmp_path):
    root, _ = reference
    out, jobdir = tmp_path / "k.npz", tmp_path / "k.job"
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    proc = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "matgen",
            "table",
            "build",
            str(SPEC),
            "--out",
            str(out),
            "--workers",
            "1",
            "--no-progress",
        ],
        env=env,
        start_new_session=True,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    lock = jobdir / "locks" / "task-00001.lock"
    deadline = time.monotonic() + 240
    try:
        while not lock.exists():  # task 1 has started in the worker process
            assert proc.poll() is None, "build ended before it could be killed"
            assert time.monotonic() < deadline, "task 1 never started"
            time.sleep(0.005)
    finally:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
    job = JobFolder.open(jobdir)
    states = [s.state for s in job_states(job)]
    assert states[0] == "done" and states[1] != "done", states
    assert lock.exists()  # the killed worker left its lock behind
    with pytest.raises(TableError, match="missing tasks"):
        merge_job(job, tmp_path / "partial.npz")
    with pytest.warns(Warning, match="stale lock"):
        stats = run_job(job, "serial", progress=False)
    assert stats["skipped"] >= 1 and stats["computed"] >= 1
    merge_job(job, out)
    assert _npz_bytes(out) == _npz_bytes(root / "t.npz")


def test_corrupt_task_is_detected_and_recomputed(reference, tmp_path):
    root, _ = reference
    jobdir = tmp_path / "c.job"
    shutil.copytree(root / "t.job", jobdir)
    task1 = jobdir / "tasks" / "task-00001.npz"
    data = task1.read_bytes()
    task1.write_bytes(data[: len(data) // 3])  # truncated
    job = JobFolder.open(jobdir)
    assert [s.state for s in job_states(job)] == ["done", "corrupt", "done"]
    with pytest.raises(TableError, match=r"corrupt tasks 1 \(output does not match its recorded SHA-256"):
        merge_job(job, tmp_path / "x.npz")
    (jobdir / "tasks" / "task-00002.json").unlink()
    with pytest.raises(TableError, match=r"missing tasks 2; corrupt tasks 1"):
        merge_job(job, tmp_path / "x.npz")
    assert main(["table", "status", str(jobdir)]) == 1  # tasks missing or corrupt: not ready to merge
    stats = run_job(job, "serial", progress=False)
    assert stats["computed"] == 2 and stats["skipped"] == 1
    assert main(["table", "status", str(jobdir)]) == 0
    assert task1.read_bytes() == data
    merge_job(job, tmp_path / "c.npz")
    assert _npz_bytes(tmp_path / "c.npz") == _npz_bytes(root / "t.npz")


def test_job_folder_of_another_spec_or_version_is_refused(reference, tmp_path):
    root, _ = reference
    jobdir = tmp_path / "r.job"
    shutil.copytree(root / "t.job", jobdir)
    before = {p.name: p.read_bytes() for p in (jobdir / "tasks").iterdir()}
    other = tmp_path / "other.toml"
    other.write_text(SPEC.read_text().replace("seed = 7", "seed = 8"))
    with pytest.raises(TableError, match=r"another spec or code version \(spec differs in \['seed'\]\)"):
        plan_job(other, jobdir)
    doc = json.loads((jobdir / "job.json").read_text())
    doc["code_version"] = "0.0.1"
    (jobdir / "job.json").write_text(json.dumps(doc))
    with pytest.raises(TableError, match="edited after planning"):
        JobFolder.open(jobdir)
    # a consistent job of another version: planned elsewhere, job hash recomputed
    from matgen.tables.plan import plan_from_dict

    plan = plan_from_dict(json.loads((root / "t.job" / "job.json").read_text()), "job.json")
    old = type(plan)(
        plan.spec,
        plan.scattering_axes,
        plan.ring_edges_mm,
        plan.tasks,
        "0.0.1",
        plan.data_hashes,
        plan.source_hash,
    )
    (jobdir / "job.json").write_text(json.dumps(old.to_dict()))
    with pytest.raises(TableError, match="planned with matgen 0.0.1"):
        JobFolder.open(jobdir)
    edited = type(plan)(
        plan.spec,
        plan.scattering_axes,
        plan.ring_edges_mm,
        plan.tasks,
        plan.code_version,
        plan.data_hashes,
        "0" * 64,
    )
    (jobdir / "job.json").write_text(json.dumps(edited.to_dict()))
    with pytest.raises(TableError, match="other matgen source code"):
        JobFolder.open(jobdir)
    assert main(["table", "run-task", str(jobdir), "0"]) == 2
    after = {p.name: p.read_bytes() for p in (jobdir / "tasks").iterdir()}
    assert after == before  # nothing already computed was touched


def test_unreachable_scheduler_fails_fast(reference, tmp_path):
    root, _ = reference
    job = JobFolder.open(root / "t.job")
    # a job with work left, so that the executor must reach the scheduler
    jobdir = tmp_path / "s.job"
    shutil.copytree(root / "t.job", jobdir)
    (jobdir / "tasks" / "task-00000.json").unlink()
    job = JobFolder.open(jobdir)
    t0 = time.monotonic()
    with pytest.raises(TableError, match="cannot reach the Dask scheduler at tcp://127.0.0.1:9"):
        run_job(job, scheduler="tcp://127.0.0.1:9", connect_timeout_s=2.0, progress=False)
    assert time.monotonic() - t0 < 60


def test_task_seed_depends_on_identity_not_position():
    a = task_seed(7, (445.0, 450.0, 455.0), {}, {})
    assert a == task_seed(7, (445.0, 450.0, 455.0), {}, {})
    assert a != task_seed(7, (545.0, 550.0, 555.0), {}, {}) != task_seed(8, (545.0, 550.0, 555.0), {}, {})


def test_plan_rejects_out_of_range_grid(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(SPEC.read_text().replace("stop = 0.2", "stop = 0.6"))
    with pytest.raises(ConfigError, match="melanin_fraction"):
        plan_job(bad, tmp_path / "j")


def test_interpolation_matches_fresh_transport_between_nodes(reference):
    """Between grid nodes the table matches a fresh simulation of that point (reference: matgen.transport
    simulate of that point's own stack, 20000 photons per band) within 3 x the combined standard error plus
    the table's own interpolation-error estimate. The quantity compared is A, the one with a stated error."""
    from matgen.tables.plan import base_parameters
    from matgen.tissue.optics import skin_optics
    from matgen.transport.simulate import simulate
    from matgen.transport.stack import Stack

    _, table = reference
    spec = load_spec(SPEC)
    m = table.axes[0].values
    # cell middles (in log coordinates) on every axis: where linear interpolation errs most
    points = np.array(
        [
            [np.sqrt(m[0] * m[1]), np.sqrt(0.005 * 0.0125), 0.625],
            [np.sqrt(m[2] * m[3]), np.sqrt(0.0125 * 0.03), 0.875],
            [np.sqrt(m[3] * m[4]), np.sqrt(0.03 * 0.075), 0.6],
        ]
    )
    looked, n_clamped = table.lookup(points, ["albedo_multiple", "albedo_multiple_stderr"])
    assert n_clamped == 0
    interp_err = table.interpolation_error(points, "albedo_multiple")
    base = base_parameters(spec)
    for p, pt in enumerate(points):
        params = base.replace(**dict(zip(table.axis_names, pt, strict=True)))
        optics = skin_optics(params, spec.bands, packaging=spec.packaging)
        a = np.empty(len(spec.bands))
        e = np.empty(len(spec.bands))
        for b in range(len(spec.bands)):
            r = simulate(Stack(**optics.band(b)), 20000, seed=100 + b)
            a[b], e[b] = r.diffuse_reflectance.value, r.diffuse_reflectance.stderr
        tol = 3 * np.hypot(e, looked["albedo_multiple_stderr"][p]) + interp_err[p]
        diff = np.abs(looked["albedo_multiple"][p] - a)
        assert np.all(diff <= tol), (pt, diff, tol)


def test_info_and_plot_commands(reference, tmp_path, capsys):
    root, table = reference
    path = root / "t.npz"
    assert main(["table", "info", str(path)]) == 0
    out = capsys.readouterr().out
    assert "QA worst relative stderr of A" in out and "melanin_fraction" in out
    assert main(["table", "info", str(path), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    a = table.quantities["albedo_multiple"].astype(float)
    e = table.quantities["albedo_multiple_stderr"].astype(float)
    worst = doc["qa"]["worst_relative_stderr_albedo_multiple"]
    assert worst["value"] == pytest.approx(float((e / a).max()))
    # the QA threshold decides the exit status
    assert main(["table", "info", str(path), "--max-rel-stderr", str(worst["value"] * 1.01)]) == 0
    assert main(["table", "info", str(path), "--max-rel-stderr", str(worst["value"] * 0.5)]) == 1
    png = tmp_path / "s.png"
    assert (
        main(
            [
                "table",
                "plot",
                str(path),
                "--out",
                str(png),
                "--quantity",
                "albedo_multiple",
                "--band-nm",
                "550",
                "--at",
                "oxygen_saturation=0.75",
            ]
        )
        == 0
    )
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert main(["table", "plot", str(path), "--out", str(png), "--x", "melanin"]) == 2


def test_run_task_twice_at_once_and_busy_status(reference, tmp_path):
    from matgen.fsutil import FolderLock

    root, _ = reference
    jobdir = tmp_path / "twice.job"
    shutil.copytree(root / "t.job", jobdir)
    for f in (jobdir / "tasks").glob("task-00002.*"):
        f.unlink()
    # two processes on the same task at the same time: both succeed, one computes, the other waits and finds
    # it done; the output equals the reference's
    cmd = [sys.executable, "-m", "matgen", "table", "run-task", str(jobdir), "2", "--threads", "1"]
    procs = [
        subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True) for _ in range(2)
    ]
    outs = [p.communicate(timeout=300) for p in procs]
    assert [p.returncode for p in procs] == [0, 0], outs
    said = sorted(o[0].strip() for o in outs)
    assert said == ["task 2: computed", "task 2: done"], said
    assert (jobdir / "tasks" / "task-00002.npz").read_bytes() == (
        root / "t.job" / "tasks" / "task-00002.npz"
    ).read_bytes()
    # a live holder of the lock: --no-wait exits 75 (retry later)
    (jobdir / "tasks" / "task-00002.json").unlink()
    with FolderLock(jobdir / "locks", "task-00002.lock"):
        assert main(["table", "run-task", str(jobdir), "2", "--no-wait"]) == 75
    assert main(["table", "run-task", str(jobdir), "7"]) == 2  # no such task


def test_scattering_axis_and_reference_split_make_separate_runs(tmp_path):
    """An axis that changes scattering (thickness_scale) cannot be reached by reweighting: each of its values
    is its own scattering node with its own transport run, as is each value of a reference_split axis. The
    table at such a node matches a fresh transport of that grid point within 3 combined standard errors
    (reference: matgen.transport simulate of the point's own stack)."""
    from matgen.tables.plan import base_parameters, make_plan, scattering_axes
    from matgen.tissue.optics import skin_optics
    from matgen.transport.simulate import simulate
    from matgen.transport.stack import Stack

    text = SPEC.read_text()
    text = text.replace("centres_nm = [450.0, 550.0, 650.0]", "centres_nm = [550.0, 850.0]")
    text = text.replace("values = [0.5, 0.75, 1.0]", "values = [0.6, 1.0]")
    text += "\n[axes.thickness_scale]\nvalues = [0.7, 1.4]\n"
    text += '\n[transport]\nreference_split = ["melanin_fraction"]\n'
    spec_path = tmp_path / "scat.toml"
    spec_path.write_text(text)
    spec = load_spec(spec_path)
    assert scattering_axes(spec) == ["thickness_scale"]
    plan = make_plan(spec)
    # 2 bands x 2 thickness nodes x 5 melanin reference runs
    assert len(plan.tasks) == 2 * 2 * 5
    table = build_table(spec_path, tmp_path / "t.npz", executor="serial", progress=False)
    a = table.quantities["albedo_multiple"].astype(float)
    e = table.quantities["albedo_multiple_stderr"].astype(float)
    t_axis = table.axis_names.index("thickness_scale")
    assert not np.allclose(np.take(a, 0, axis=t_axis), np.take(a, 1, axis=t_axis))
    base = base_parameters(spec)
    for idx in [(0, 0, 0, 0), (2, 1, 1, 1), (4, 3, 0, 1)]:
        point = {
            name: float(ax.values[i]) for name, ax, i in zip(table.axis_names, table.axes, idx, strict=True)
        }
        optics = skin_optics(base.replace(**point), spec.bands, packaging=spec.packaging)
        for b in range(len(spec.bands)):
            r = simulate(Stack(**optics.band(b)), 20000, seed=300 + b)
            tol = 3 * np.hypot(r.diffuse_reflectance.stderr, e[idx][b])
            assert abs(a[idx][b] - r.diffuse_reflectance.value) <= tol, (point, b)
