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
import math
import os
import socket
import time
from dataclasses import dataclass

import numpy as np

from matgen.errors import MatgenError, TableError
from matgen.fsutil import FolderLock, atomic_write_text, strict_json
from matgen.limits import read_text_limited
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


def _is_int(v) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _is_real(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _show(v) -> str:
    """Return a record value as JSON text, shortened for messages."""
    text = json.dumps(v)
    return text if len(text) <= 80 else text[:77] + "..."


def record_problem(record, index: int, task_id: str) -> str:
    """Why a task record (the parsed ``.json`` beside a task output) is unusable; ``""`` when it is sound.

    A record written by :func:`run_task` holds ``index``, ``task_id``, ``sha256`` (64 hex digits of the
    output), ``bytes`` (its size, >= 0), ``wall_s`` and ``cpu_s`` (seconds, finite, >= 0), ``photons`` and
    ``grid_points`` (whole numbers >= 1); ``host`` and ``pid`` are informative only.
    """
    if not isinstance(record, dict):
        return f"record is a JSON {type(record).__name__}, not an object"
    if record.get("task_id") != task_id:
        return "record belongs to another task id"
    if not _is_int(record.get("index")) or record["index"] != index:
        return f"record field 'index' is {_show(record.get('index'))}, not {index}"
    sha = record.get("sha256")
    if not (isinstance(sha, str) and len(sha) == 64 and all(c in "0123456789abcdef" for c in sha)):
        return f"record field 'sha256' is {_show(sha)}, not 64 lowercase hex digits"
    if not _is_int(record.get("bytes")) or record["bytes"] < 0:
        return f"record field 'bytes' is {_show(record.get('bytes'))}, not a whole number >= 0"
    for key in ("wall_s", "cpu_s"):
        v = record.get(key)
        if not _is_real(v) or v < 0:
            return f"record field '{key}' is {_show(v)}, not a finite number of seconds >= 0"
    for key in ("photons", "grid_points"):
        v = record.get(key)
        if not _is_int(v) or v < 1:
            return f"record field '{key}' is {_show(v)}, not a whole number >= 1"
    return ""


def read_task_record(job: JobFolder, index: int) -> tuple:
    """Read and check task ``index``'s record.

    Returns
    -------
    (dict or None, str)
        The record and ``""``, or None and why it is missing or unusable. The file is read through the
        size-limited text reader (``text_bytes`` ceiling of :mod:`matgen.limits`).

    """
    rec = job.record_path(index)
    if not rec.exists():
        return None, "no record"
    try:
        record = json.loads(read_text_limited(rec, f"record of task {index}"))
    except MatgenError as exc:  # too large, not UTF-8, unreadable
        return None, f"record cannot be read ({exc})"
    except (ValueError, RecursionError):  # RecursionError: nesting deeper than the parser's stack
        return None, "record is not valid JSON"
    problem = record_problem(record, index, job.plan.tasks[index].task_id)
    return (None, problem) if problem else (record, "")


def task_state(job: JobFolder, index: int) -> TaskState:
    """Check task ``index``'s output: present, of this task id, and matching its recorded SHA-256.

    A record that is not what :func:`run_task` writes (see :func:`record_problem`) makes the task
    ``corrupt``, so that a build recomputes it and a merge names it.
    """
    out, rec = job.output_path(index), job.record_path(index)
    if not rec.exists():
        return TaskState(index, "missing", "no record" if not out.exists() else "output without record")
    record, problem = read_task_record(job, index)
    if record is None:
        return TaskState(index, "corrupt", problem)
    if not out.exists():
        return TaskState(index, "corrupt", "output file missing")
    if out.stat().st_size != record["bytes"] or sha256_file(out) != record["sha256"]:
        return TaskState(
            index, "corrupt", "output does not match its recorded SHA-256 (truncated or altered)"
        )
    return TaskState(index, "done")


def _check_task_arrays(arrays: dict, job: JobFolder, index: int) -> None:
    """Check a task output's arrays against :data:`TASK_ARRAYS` and the plan before anything merges them.

    Raises
    ------
    TableError
        Naming the task, the array and what was expected: a missing or extra array, a wrong shape or dtype,
        grid indices other than the task's grid points, ring edges other than the plan's, non-finite or
        negative values.

    """
    plan = job.plan
    where = f"task {index} output of {job.path}"
    missing = sorted(set(TASK_ARRAYS) - set(arrays))
    extra = sorted(set(arrays) - set(TASK_ARRAYS))
    if missing or extra:
        raise TableError(f"{where}: arrays missing {missing} / unexpected {extra}")
    idx = arrays["grid_index"]
    for name, ndim in (("grid_index", 2), ("g", 1)):
        if arrays[name].ndim != ndim:
            raise TableError(
                f"{where}: array '{name}' has shape {arrays[name].shape}; expected {ndim} dimensions"
            )
    k, n_layers = idx.shape[0], arrays["g"].shape[0]
    n_rings = plan.ring_edges_mm.size - 1
    shapes = {
        "grid_index": (k, len(plan.spec.axes)),
        "diffuse_reflectance": (k,),
        "diffuse_reflectance_stderr": (k,),
        "radial_reflectance_per_mm2": (k, n_rings),
        "radial_stderr_per_mm2": (k, n_rings),
        "reflected_path_mm": (k, n_layers),
        "mu_a_per_mm": (k, n_layers),
        "mu_a_reference_per_mm": (n_layers,),
        "mu_s_per_mm": (n_layers,),
        "g": (n_layers,),
        "n": (n_layers,),
        "thickness_mm": (n_layers,),
        "n_ambient": (2,),
        "specular_reflectance": (1,),
        "ring_edges_mm": (n_rings + 1,),
        "photons": (1,),
    }
    for name, shape in shapes.items():
        a = arrays[name]
        kind = "i" if name in ("grid_index", "photons") else "f"
        if a.dtype.kind != kind or a.shape != shape or min(shape) < 1:
            raise TableError(
                f"{where}: array '{name}' is {a.dtype} {a.shape}; expected "
                f"{'integer' if kind == 'i' else 'float'} {shape} ({TASK_ARRAYS[name]})"
            )
        if kind == "f" and not np.all(np.isfinite(a)):
            raise TableError(f"{where}: array '{name}' holds NaN or infinite values")
    want_idx, _ = plan.task_grid_points(plan.tasks[index])
    if not np.array_equal(idx, want_idx):
        raise TableError(
            f"{where}: array 'grid_index' does not list the task's {want_idx.shape[0]} grid points"
        )
    if not np.array_equal(arrays["ring_edges_mm"], plan.ring_edges_mm):
        raise TableError(f"{where}: array 'ring_edges_mm' differs from the plan's ring edges")
    for name in (
        "diffuse_reflectance",
        "diffuse_reflectance_stderr",
        "radial_reflectance_per_mm2",
        "radial_stderr_per_mm2",
        "reflected_path_mm",
        "mu_a_per_mm",
        "mu_a_reference_per_mm",
        "mu_s_per_mm",
        "thickness_mm",
    ):
        if np.any(arrays[name] < 0):
            raise TableError(f"{where}: array '{name}' holds negative values (allowed range >= 0)")
    for name in ("diffuse_reflectance", "specular_reflectance"):
        if np.any(arrays[name] > 1):
            raise TableError(f"{where}: array '{name}' holds values above 1 (allowed range [0, 1])")
    if np.any(np.abs(arrays["g"]) > 1):
        raise TableError(f"{where}: array 'g' holds values outside the allowed range [-1, 1]")
    if np.any(arrays["n"] < 1) or np.any(arrays["n_ambient"] < 1):
        raise TableError(f"{where}: arrays 'n' / 'n_ambient' hold refractive indices below 1")
    if int(arrays["photons"][0]) < 1:
        raise TableError(f"{where}: array 'photons' is {int(arrays['photons'][0])}; allowed range >= 1")


def load_task_output(job: JobFolder, index: int) -> dict:
    """Read a finished task's arrays, checking its checksum, task id, array shapes and values.

    Raises
    ------
    TableError
        If the task is not done (missing or corrupt) or its output is not what :func:`compute_task` makes
        for this task (see :func:`_check_task_arrays`).

    """
    st = task_state(job, index)
    if st.state != "done":
        raise TableError(f"task {index} of {job.path} is {st.state} ({st.reason})")
    arrays = read_npz_checked(job.output_path(index), "task output")
    tid_arr = arrays.get("task_id", np.zeros(0, np.uint8))
    tid = bytes(tid_arr).decode("ascii", "replace") if tid_arr.dtype == np.uint8 else ""
    if tid != job.plan.tasks[index].task_id:
        raise TableError(f"task {index} output of {job.path} carries task id {tid[:12]!r}..., not its own")
    _check_task_arrays(arrays, job, index)
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
        atomic_write_text(
            job.record_path(index), strict_json(record, f"record of task {index}", indent=1) + "\n"
        )
        return "computed"
    finally:
        lock.release()


def job_states(job: JobFolder) -> list:
    """:class:`TaskState` of every task of the job."""
    return [task_state(job, i) for i in range(len(job.plan.tasks))]
