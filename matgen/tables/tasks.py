"""Run one table task: a scattering simulation plus absorption reweighting, written atomically. Units: mm.

:func:`compute_task` is a pure function of the plan and the task: it builds the skin parameters of every grid
point the task covers, their absorption (``absorption_batch``), the node's scattering stack for the task's
band (``skin_optics``), runs the transport once with photon records at the reference absorption (per-layer
minimum over the grid points) and reweights the records for every grid point (``Alerstam2008white``).

:func:`run_task` makes that idempotent and safe to run twice at once: a finished task (record present, task id
equal, SHA-256 of the output equal) is skipped; otherwise the task takes its lock (``O_CREAT | O_EXCL`` lock
file with host and PID; a lock of a dead process on this host is stale and taken over), computes, writes the
output ``.npz`` through a temporary file and ``os.replace``, then its ``.json`` record the same way. A second
process arriving while the first runs waits for the lock and then finds the task done.
"""

from __future__ import annotations

import json
import os
import socket
import time
from dataclasses import dataclass

import numpy as np

from matgen.errors import TableError
from matgen.fsutil import FolderLock, atomic_write_text
from matgen.provenance import sha256_file
from matgen.tables.plan import JobFolder, Plan, Task, base_parameters, parameters_at
from matgen.tables.store import _write_npz_deterministic, read_npz_checked

#: Arrays of a task output and their meaning (K = grid points of the task, R = rings, L = layers).
TASK_ARRAYS = {
    "grid_index": "(K, D) int64 grid indices of the task's points",
    "diffuse_reflectance": "(K,) diffuse reflectance A (fraction of launched weight)",
    "diffuse_reflectance_stderr": "(K,) its standard error",
    "radial_reflectance_per_mm2": "(K, R) radial reflectance, mm^-2",
    "radial_stderr_per_mm2": "(K, R) its standard error, mm^-2",
    "reflected_path_mm": "(K, L) weight-averaged path of reflected light in each layer, mm",
    "mu_a_per_mm": "(K, L) absorption coefficients of the grid points, 1/mm",
    "mu_a_reference_per_mm": "(L,) reference absorption of the scattering run, 1/mm",
    "mu_s_per_mm": "(L,) scattering coefficients, 1/mm",
    "g": "(L,) Henyey-Greenstein anisotropy",
    "n": "(L,) refractive indices",
    "thickness_mm": "(L,) layer thicknesses, mm",
    "n_ambient": "(2,) refractive index above and below the stack",
    "specular_reflectance": "(1,) Fresnel reflection at entry",
    "ring_edges_mm": "(R+1,) ring edges, mm",
    "photons": "(1,) photons launched in total (all runs of the task)",
    "task_id": "uint8 bytes of the task id (ASCII hex)",
}

#: Photon counts of the adaptive runs are rounded up to a multiple of this.
PHOTON_QUANTUM = 1000
#: Safety factor on the photon count predicted to reach the target error (stderr ~ photons^-1/2).
PHOTON_MARGIN = 1.15


def _deps():
    try:
        from matgen.tissue.optics import absorption_batch, skin_optics
        from matgen.transport.records import PhotonRecords
        from matgen.transport.simulate import simulate
        from matgen.transport.stack import Stack
    except ImportError as exc:
        raise TableError(
            f"running table tasks needs the tissue model and the transport engine: {exc}"
        ) from exc
    return absorption_batch, skin_optics, simulate, PhotonRecords, Stack


def next_photon_count(n_done: int, worst_rel: float, target: float, n_min: int, n_max: int) -> int:
    """Photons to add so that the worst relative stderr reaches ``target`` (stderr scales as photons^-1/2).

    Parameters
    ----------
    n_done : int
        Photons run so far.
    worst_rel : float
        Worst relative standard error of A so far.
    target : float
        Target relative standard error.
    n_min, n_max : int
        Smallest step, and the ceiling of the total.

    Returns
    -------
    int
        Photons of the next run (0 if the target is met or the ceiling reached).

    """
    if not (worst_rel > target) or n_done >= n_max:
        return 0
    need = n_done * (worst_rel / target) ** 2 * PHOTON_MARGIN if np.isfinite(worst_rel) else 4 * n_done
    add = max(int(np.ceil(need)) - n_done, n_min)
    add = -(-add // PHOTON_QUANTUM) * PHOTON_QUANTUM
    return int(min(add, n_max - n_done))


def compute_task(plan: Plan, task: Task, threads: int | None = None) -> dict:
    """Compute the output arrays of one task (see :data:`TASK_ARRAYS`).

    The reference run launches ``photons_per_band`` photons; with a ``target_relative_stderr`` further runs
    continue the same photon stream (``first_photon`` = photons so far) until the worst relative standard
    error of A over the task's grid points meets the target or ``max_photons_per_band`` is reached. The
    stopping rule depends only on the results, so the photon count is as deterministic as the results.

    Parameters
    ----------
    plan : Plan
        The job's plan.
    task : Task
        The task to compute.
    threads : int, optional
        Threads of the transport and reweighting kernels (results do not depend on it).

    Returns
    -------
    dict of str to ndarray

    """
    import numba

    from matgen.tables.factored import factored_reweight

    absorption_batch, skin_optics, simulate, PhotonRecords, Stack = _deps()
    spec = plan.spec
    bands = spec.bands.subset(np.array([task.band]))
    base = base_parameters(spec)
    idx, values = plan.task_grid_points(task)
    sub_shape = tuple(int(np.unique(idx[:, d]).size) for d in range(idx.shape[1]))  # 1 along fixed axes
    params = [parameters_at(base, v, spec.source) for v in values]
    mu_a = np.asarray(absorption_batch(params, bands, packaging=spec.packaging), dtype=np.float64)[:, :, 0]
    optics = skin_optics(params[0], bands, packaging=spec.packaging)
    layer = optics.band(0)
    # the reference absorption: per-layer minimum over the task's grid points, so every reweighting factor
    # exp(-(mu_a - mu_a_ref) L) is <= 1
    mu_ref = mu_a.min(axis=0)
    stack = Stack(**{**layer, "mu_a": mu_ref})
    target = spec.target_relative_stderr
    n_max = spec.max_photons_per_band if target is not None else spec.photons_per_band
    parts, n_done, chunk = [], 0, spec.photons_per_band
    old_threads = numba.get_num_threads()
    if threads is not None:
        numba.set_num_threads(max(1, min(int(threads), numba.config.NUMBA_NUM_THREADS)))
    try:
        while chunk > 0:
            _, rec = simulate(
                stack,
                chunk,
                seed=task.seed,
                threads=threads,
                first_photon=n_done,
                ring_edges_mm=plan.ring_edges_mm,
                records=True,
            )
            parts.append(rec)
            n_done += chunk
            records = parts[0] if len(parts) == 1 else PhotonRecords.concatenate(parts)
            rw = factored_reweight(records, mu_a, sub_shape, plan.ring_edges_mm)
            a, e = rw["diffuse_reflectance"], rw["diffuse_reflectance_stderr"]
            worst = float(np.max(np.where(a > 0, e / np.where(a > 0, a, 1.0), np.inf)))
            chunk = (
                0
                if target is None
                else next_photon_count(n_done, worst, target, spec.photons_per_band // 4 or 1, n_max)
            )
    finally:
        numba.set_num_threads(old_threads)
    return {
        "grid_index": idx,
        "diffuse_reflectance": np.asarray(a, np.float64),
        "diffuse_reflectance_stderr": np.asarray(e, np.float64),
        "radial_reflectance_per_mm2": np.asarray(rw["radial_reflectance_per_mm2"], np.float64),
        "radial_stderr_per_mm2": np.asarray(rw["radial_stderr_per_mm2"], np.float64),
        "reflected_path_mm": np.asarray(rw["reflected_path_mm"], np.float64),
        "mu_a_per_mm": mu_a,
        "mu_a_reference_per_mm": mu_ref,
        "mu_s_per_mm": np.asarray(stack.mu_s, np.float64),
        "g": np.asarray(stack.g, np.float64),
        "n": np.asarray(stack.n, np.float64),
        "thickness_mm": np.asarray(stack.thickness_mm, np.float64),
        "n_ambient": np.array([stack.n_above, stack.n_below], np.float64),
        "specular_reflectance": np.array([float(records.meta["specular_reflectance"])], np.float64),
        "ring_edges_mm": np.asarray(plan.ring_edges_mm, np.float64),
        "photons": np.array([n_done], np.int64),
        "task_id": np.frombuffer(task.task_id.encode("ascii"), dtype=np.uint8),
    }


@dataclass(frozen=True)
class TaskState:
    """State of one task output: ``done``, ``missing`` or ``corrupt`` (with the reason)."""

    index: int
    state: str
    reason: str = ""


def task_state(job: JobFolder, index: int) -> TaskState:
    """Check task ``index``'s output: present, of this task id, and matching its recorded SHA-256."""
    task = job.plan.tasks[index]
    out, rec = job.output_path(index), job.record_path(index)
    if not rec.exists():
        return TaskState(index, "missing", "no record" if not out.exists() else "output without record")
    try:
        record = json.loads(rec.read_text())
    except (OSError, ValueError):
        return TaskState(index, "corrupt", "record is not valid JSON")
    if not isinstance(record, dict):
        return TaskState(index, "corrupt", "record is not a JSON object")
    if record.get("task_id") != task.task_id:
        return TaskState(index, "corrupt", "record belongs to another task id")
    if not out.exists():
        return TaskState(index, "corrupt", "output file missing")
    if out.stat().st_size != record.get("bytes") or sha256_file(out) != record.get("sha256"):
        return TaskState(
            index, "corrupt", "output does not match its recorded SHA-256 (truncated or altered)"
        )
    return TaskState(index, "done")


def load_task_output(job: JobFolder, index: int) -> dict:
    """Read a finished task's arrays, checking its checksum and task id."""
    st = task_state(job, index)
    if st.state != "done":
        raise TableError(f"task {index} of {job.path} is {st.state} ({st.reason})")
    arrays = read_npz_checked(job.output_path(index), "task output")
    tid = bytes(arrays.get("task_id", np.zeros(0, np.uint8))).decode("ascii", "replace")
    if tid != job.plan.tasks[index].task_id:
        raise TableError(f"task {index} output of {job.path} carries task id {tid[:12]}..., not its own")
    return arrays


def run_task(job: JobFolder, index: int, *, threads: int | None = None, wait_s: float = 24 * 3600.0) -> str:
    """Run task ``index`` of a job folder unless it is already done.

    Parameters
    ----------
    job : JobFolder
        The job folder.
    index : int
        0-based task index.
    threads : int, optional
        Kernel threads (results do not depend on it).
    wait_s : float
        How long to wait for a lock held by another live process before raising
        :class:`~matgen.errors.LockError`.

    Returns
    -------
    str
        ``"done"`` if it was already finished, ``"computed"`` if this call computed it.

    """
    n = len(job.plan.tasks)
    if not (0 <= index < n):
        raise TableError(f"task index {index} is outside this job's tasks 0..{n - 1} ({job.path})")
    if task_state(job, index).state == "done":
        return "done"
    job.tasks_dir.mkdir(exist_ok=True)
    lock = FolderLock(job.locks_dir, f"task-{index:05d}.lock", wait_s=wait_s, purpose=f"table task {index}")
    lock.acquire()
    try:
        if task_state(job, index).state == "done":  # finished by another process while we waited
            return "done"
        task = job.plan.tasks[index]
        t0, c0 = time.perf_counter(), time.process_time()
        arrays = compute_task(job.plan, task, threads=threads)
        wall = time.perf_counter() - t0
        out = job.output_path(index)
        _write_npz_deterministic(out, arrays)
        record = {
            "index": index,
            "task_id": task.task_id,
            "sha256": sha256_file(out),
            "bytes": out.stat().st_size,
            "wall_s": wall,
            "cpu_s": time.process_time() - c0,
            "photons": int(arrays["photons"][0]),
            "grid_points": int(arrays["diffuse_reflectance"].size),
            "host": socket.gethostname(),
            "pid": os.getpid(),
        }
        atomic_write_text(job.record_path(index), json.dumps(record, indent=1) + "\n")
        return "computed"
    finally:
        lock.release()


def job_states(job: JobFolder) -> list:
    """:class:`TaskState` of every task of the job."""
    return [task_state(job, i) for i in range(len(job.plan.tasks))]
