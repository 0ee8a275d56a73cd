"""Plan a table build into independent, deterministic, content-addressed tasks; the job folder. Units: nm, mm.

One task is one scattering simulation: one band, one *scattering node* (a combination of the axes that change
scattering, such as ``thickness_scale``) and one *reference block* (a combination of the axes named in the
spec's ``reference_split``). The task covers every grid point of its node and block: the remaining (pigment)
axes change only absorption, so one transport run at a reference absorption (the per-layer minimum ``mu_a``
over the task's grid points, so that reweighting factors stay <= 1) serves all of them through absorption
reweighting.

Each task has

* a **seed** derived from the spec seed and the task's identity (its band edges and node/block values), never
  from its position in a list, so reordering or extending a plan leaves other tasks' photons unchanged;
* a **task id**: SHA-256 (:func:`matgen.provenance.hash_json`) of the code version, the hashes of the vendored
  data, the hash of the result-determining source, the task's slice of the spec (region, packaging,
  photons, ring edges, band, node, block and the pigment axes it covers) and its seed.

The job folder (``plan`` writes it; executors and ``run-task`` fill it; ``merge`` reads it)::

    JOBDIR/job.json          format version, code version, data hashes, resolved spec, task list, job hash
    JOBDIR/spec.toml         the spec text as given (for people; job.json is what counts)
    JOBDIR/tasks/task-NNNNN.npz   one output per task (written atomically)
    JOBDIR/tasks/task-NNNNN.json  its record: task id, SHA-256 and size of the .npz, timing
    JOBDIR/locks/            per-task lock files of running tasks
"""

from __future__ import annotations

import ast
import functools
import itertools
import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from matgen import limits
from matgen.errors import ConfigError, MatgenError, TableError
from matgen.fsutil import FolderLock, atomic_write_text, strict_json
from matgen.provenance import code_version, data_hashes, hash_json
from matgen.tables.spec import TableSpec

#: Version of the job-folder layout.
JOB_FORMAT_VERSION = 1
JOB_FILE = "job.json"

#: Source folders (under the matgen package) whose code determines task outputs and merged tables.
_RESULT_PACKAGES = ("spectra", "tissue", "transport", "color", "fit", "tables")
#: Files of those folders that do not change results (reports, benchmarks, scheduling).
_RESULT_NEUTRAL = {
    "tables/report.py",
    "tables/bench.py",
    "tables/executors.py",
    "tables/build.py",
    "color/tags.py",
    "color/curves.py",  # file tags and bake-time pass curves: no table number uses them
}
#: Top-level modules that determine results.
_RESULT_MODULES = ("constants.py", "units.py", "provenance.py", "limits.py")

#: Fields of the scattering arrays compared when deciding whether an axis changes scattering.
_SCATTERING_FIELDS = ("thickness_mm", "n", "mu_s", "g")


@dataclass(frozen=True)
class Task:
    """One scattering simulation of a plan.

    Attributes
    ----------
    index : int
        Position in the plan (0-based; the farm array index).
    task_id : str
        Content hash of everything that determines the task's output.
    band : int
        Band index into the spec's band set.
    node : dict
        Values of the scattering axes for this task (axis name -> value).
    block : dict
        Values of the reference-split axes for this task.
    seed : int
        Seed of the transport run (from the spec seed and the task identity).

    """

    index: int
    task_id: str
    band: int
    node: dict
    block: dict
    seed: int

    def to_dict(self) -> dict:
        """JSON form."""
        return {
            "index": self.index,
            "task_id": self.task_id,
            "band": self.band,
            "node": self.node,
            "block": self.block,
            "seed": self.seed,
        }

    @classmethod
    def from_dict(cls, d: dict) -> Task:
        """Inverse of :meth:`to_dict`."""
        return cls(
            int(d["index"]),
            str(d["task_id"]),
            int(d["band"]),
            dict(d["node"]),
            dict(d["block"]),
            int(d["seed"]),
        )


def _strip_docstrings(tree: ast.AST) -> ast.AST:
    """Remove the docstring of the module and of every class and function of a parsed source file."""
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.ClassDef, ast.FunctionDef, ast.AsyncFunctionDef)):
            first = node.body[0] if node.body else None
            if isinstance(first, ast.Expr) and isinstance(first.value, ast.Constant):
                if isinstance(first.value.value, str):
                    node.body = node.body[1:] or [ast.Pass()]
    return tree


def code_digest(path: Path) -> bytes:
    """SHA-256 of what a Python source file computes, blind to its comments, docstrings and formatting.

    The file is parsed and its syntax tree, without docstrings and without line or column positions, is
    hashed; comments and layout never reach the tree. A file that does not parse (it could not be imported
    either) is hashed by its bytes.

    Parameters
    ----------
    path : Path
        A ``.py`` file.

    Returns
    -------
    bytes
        32-byte digest.

    """
    import hashlib

    raw = path.read_bytes()
    try:
        tree = ast.parse(raw, filename=str(path))
    except (SyntaxError, ValueError):
        return hashlib.sha256(raw).digest()
    dump = ast.dump(_strip_docstrings(tree), annotate_fields=False, include_attributes=False)
    return hashlib.sha256(dump.encode("utf-8")).digest()


@functools.lru_cache(maxsize=1)
def source_hash() -> str:
    """SHA-256 over what the matgen source and data files that determine a table's numbers compute.

    The package version alone does not change when the transport, tissue model or fits are edited between
    releases; this hash does, so a job folder planned with other code (or other shipped data, such as the fit
    stage's inversion tables) is refused instead of being merged with mixed results, and the shipped default
    table's recorded hash says when it is due for a rebuild. Python files enter through :func:`code_digest`
    (their syntax tree without docstrings), so a comment, a docstring or a reformat changes nothing; data
    files enter by their bytes. Covered: the ``.py`` files of the spectra, tissue, transport, color, fit and
    tables stages (except reporting, benchmark and scheduling modules: every ``bench.py`` and the tables'
    report, executors and build modules, the colour tags and pass curves), their ``data/`` folders, and the
    top-level constants, units,
    provenance and limits. Computed once per process (the code a process runs is the code it imported).
    """
    import hashlib

    root = Path(__file__).resolve().parents[1]
    files = [root / m for m in _RESULT_MODULES]
    for pkg in _RESULT_PACKAGES:
        base = root / pkg
        files += [
            p
            for p in base.rglob("*")
            if p.is_file()
            and "__pycache__" not in p.parts
            and (p.suffix == ".py" or "data" in p.relative_to(base).parts)
        ]
    h = hashlib.sha256()
    for p in sorted(files, key=lambda q: q.relative_to(root).as_posix()):
        rel = p.relative_to(root).as_posix()
        if rel in _RESULT_NEUTRAL or p.name == "bench.py" or not p.is_file():
            continue
        digest = code_digest(p) if p.suffix == ".py" else hashlib.sha256(p.read_bytes()).digest()
        h.update(rel.encode() + b"\0" + digest)
    return h.hexdigest()


def task_seed(spec_seed: int, band_edges_nm, node: dict, block: dict) -> int:
    """Seed of a task, derived from the spec seed and the task identity (not its list position).

    Parameters
    ----------
    spec_seed : int
        The spec's seed.
    band_edges_nm : sequence of float
        (lower, centre, upper) of the task's band in nm.
    node, block : dict
        Scattering-axis and reference-split-axis values of the task.

    Returns
    -------
    int
        A seed in [0, 2**63).

    """
    ident = {
        "spec_seed": int(spec_seed),
        "band_nm": [float(x) for x in band_edges_nm],
        "node": node,
        "block": block,
    }
    return int(hash_json(ident)[:16], 16) & ((1 << 63) - 1)


def _tissue():
    try:
        from matgen.tissue.optics import absorption_batch, skin_optics
        from matgen.tissue.presets import preset
    except ImportError as exc:
        raise TableError(f"table planning needs the tissue model (matgen.tissue): {exc}") from exc
    return preset, skin_optics, absorption_batch


def base_parameters(spec: TableSpec):
    """Return the spec's region preset with every axis at its first value."""
    preset, _, _ = _tissue()
    try:
        base = preset(spec.region)
    except MatgenError as exc:
        raise ConfigError(f"{spec.source}: region '{spec.region}': {exc}") from exc
    return base.replace(**{a.name: float(a.values[0]) for a in spec.axes})


def parameters_at(base, values: dict, source: str = "<spec>"):
    """Return ``base`` with the given axis values; out-of-range values raise ConfigError naming the axis."""
    try:
        return base.replace(**{k: float(v) for k, v in values.items()})
    except MatgenError as exc:
        raise ConfigError(f"{source}: grid point {values}: {exc}") from exc


def scattering_axes(spec: TableSpec) -> list:
    """Axes of the spec that change scattering (mu_s, g, n or thickness in any layer or band).

    Each axis is probed by moving it alone from its first to its last value (and to its middle value) with the
    others at their first values and comparing the scattering arrays of
    :func:`matgen.tissue.optics.skin_optics`.
    """
    _, skin_optics, _ = _tissue()
    base = base_parameters(spec)

    def arrays(p):
        o = skin_optics(p, spec.bands, packaging=spec.packaging)
        return [np.asarray(getattr(o, f)) for f in _SCATTERING_FIELDS] + [np.array([o.n_above, o.n_below])]

    ref = arrays(base)
    out = []
    for a in spec.axes:
        probe_values = {float(a.values[-1]), float(a.values[a.values.size // 2])}
        changes = False
        for v in probe_values:
            other = arrays(parameters_at(base, {a.name: v}, spec.source))
            if any(x.shape != y.shape or not np.array_equal(x, y) for x, y in zip(ref, other, strict=True)):
                changes = True
        if changes:
            out.append(a.name)
    return out


def resolve_ring_edges(spec: TableSpec) -> np.ndarray:
    """Return the spec's ring edges in mm, or the transport default."""
    if spec.ring_edges_mm is not None:
        return np.asarray(spec.ring_edges_mm, dtype=np.float64)
    try:
        from matgen.transport.simulate import default_ring_edges_mm
    except ImportError as exc:
        raise TableError(f"table planning needs the transport engine (matgen.transport): {exc}") from exc
    return np.asarray(default_ring_edges_mm(), dtype=np.float64)


@dataclass(frozen=True)
class Plan:
    """A spec resolved into tasks.

    Attributes
    ----------
    spec : TableSpec
    scattering_axes : list of str
        Axes that change scattering (one node per combination of their values).
    ring_edges_mm : ndarray
        Radial ring edges in mm used by every task.
    tasks : list of Task
    code_version : str
    data_hashes : dict
    source_hash : str
        :func:`source_hash` of the code that planned the job.

    """

    spec: TableSpec
    scattering_axes: list
    ring_edges_mm: np.ndarray
    tasks: list
    code_version: str
    data_hashes: dict
    source_hash: str = ""

    @property
    def pigment_axes(self) -> list:
        """Axes covered inside each task by reweighting (neither scattering nor reference-split axes)."""
        fixed = set(self.scattering_axes) | set(self.spec.reference_split)
        return [a.name for a in self.spec.axes if a.name not in fixed]

    def task_grid_points(self, task: Task) -> tuple:
        """Grid points of a task: (index array (K, D) into the grid, value dicts list of length K)."""
        spec = self.spec
        fixed = {**task.node, **task.block}
        per_axis = []
        for a in spec.axes:
            if a.name in fixed:
                i = int(np.nonzero(a.values == fixed[a.name])[0][0])
                per_axis.append([i])
            else:
                per_axis.append(list(range(a.values.size)))
        idx = np.array(list(itertools.product(*per_axis)), dtype=np.int64)
        vals = [{a.name: float(a.values[j]) for a, j in zip(spec.axes, row, strict=True)} for row in idx]
        return idx, vals

    def job_hash(self) -> str:
        """Hash of the whole plan (spec, code version, data hashes, task ids)."""
        return hash_json(
            {
                "code": self.code_version,
                "source": self.source_hash,
                "data": self.data_hashes,
                "spec": self.spec.to_dict(),
                "tasks": [t.task_id for t in self.tasks],
            }
        )

    def to_dict(self) -> dict:
        """Return the ``job.json`` document."""
        return {
            "format": "matgen-table-job",
            "format_version": JOB_FORMAT_VERSION,
            "code_version": self.code_version,
            "source_hash": self.source_hash,
            "data_hashes": self.data_hashes,
            "spec": self.spec.to_dict(),
            "spec_hash": self.spec.spec_hash(),
            "scattering_axes": list(self.scattering_axes),
            "ring_edges_mm": self.ring_edges_mm.tolist(),
            "tasks": [t.to_dict() for t in self.tasks],
            "job_hash": self.job_hash(),
        }


def make_plan(spec: TableSpec) -> Plan:
    """Resolve a spec into a :class:`Plan` (checks every grid point against the tissue model's ranges).

    Parameters
    ----------
    spec : TableSpec
        The parsed spec.

    Returns
    -------
    Plan

    Raises
    ------
    ConfigError
        A grid point outside the tissue model's allowed ranges (naming the point), or a reference-split axis
        that changes scattering.

    """
    base = base_parameters(spec)
    for a in spec.axes:  # each axis value alone against the tissue model's ranges
        for v in a.values:
            parameters_at(base, {a.name: float(v)}, spec.source)
    for combo in itertools.product(*[(a.values[0], a.values[-1]) for a in spec.axes]):  # every corner
        parameters_at(base, dict(zip(spec.axis_names, combo, strict=True)), spec.source)
    scat = scattering_axes(spec)
    clash = [s for s in spec.reference_split if s in scat]
    if clash:
        raise ConfigError(
            f"{spec.source}: reference_split axes {clash} change scattering; they form nodes already"
        )
    ring = resolve_ring_edges(spec)
    version, dhash, shash = code_version(), data_hashes(), source_hash()
    by_name = {a.name: a for a in spec.axes}
    node_axes = [by_name[n] for n in scat]
    block_axes = [by_name[n] for n in spec.reference_split]
    fixed = set(scat) | set(spec.reference_split)
    pigment = [a.to_dict() for a in spec.axes if a.name not in fixed]
    n_tasks = len(spec.bands) * int(np.prod([a.values.size for a in node_axes + block_axes]))
    limits.check_count(n_tasks, "table_entries", f"the task count of {spec.source}")
    tasks = []
    for node_vals in itertools.product(*[a.values for a in node_axes]):
        node = {a.name: float(v) for a, v in zip(node_axes, node_vals, strict=True)}
        for block_vals in itertools.product(*[a.values for a in block_axes]):
            block = {a.name: float(v) for a, v in zip(block_axes, block_vals, strict=True)}
            for b in range(len(spec.bands)):
                edges = (spec.bands.lower_nm[b], spec.bands.centre_nm[b], spec.bands.upper_nm[b])
                seed = task_seed(spec.seed, edges, node, block)
                slice_ = {
                    "region": spec.region,
                    "packaging": spec.packaging,
                    "photons": spec.photons_per_band,
                    "target_relative_stderr": spec.target_relative_stderr,
                    "max_photons": spec.max_photons_per_band,
                    "ring_edges_mm": ring,
                    "band_nm": [float(x) for x in edges],
                    "node": node,
                    "block": block,
                    "axes_order": spec.axis_names,
                    "pigment_axes": pigment,
                }
                tid = hash_json(
                    {"code": version, "source": shash, "data": dhash, "slice": slice_, "seed": seed}
                )
                tasks.append(Task(len(tasks), tid, b, node, block, seed))
    return Plan(spec, scat, ring, tasks, version, dhash, shash)


def plan_from_dict(doc: dict, source: str) -> Plan:
    """Rebuild a :class:`Plan` from a ``job.json`` document (without re-probing the tissue model)."""
    try:
        if not isinstance(doc, dict) or doc.get("format") != "matgen-table-job":
            raise TableError(f"{source} is not a matgen table job file")
        if doc.get("format_version") != JOB_FORMAT_VERSION:
            raise TableError(
                f"{source} has job format {doc.get('format_version')}; this matgen uses {JOB_FORMAT_VERSION}"
            )
        spec = TableSpec.from_dict(doc["spec"], source=source)
        plan = Plan(
            spec,
            list(doc["scattering_axes"]),
            np.asarray(doc["ring_edges_mm"], dtype=np.float64),
            [Task.from_dict(t) for t in doc["tasks"]],
            str(doc["code_version"]),
            dict(doc["data_hashes"]),
            str(doc["source_hash"]),
        )
    except MatgenError:
        raise
    except (KeyError, TypeError, ValueError, AttributeError, IndexError) as exc:
        raise TableError(f"{source} is incomplete or malformed ({type(exc).__name__}: {exc})") from exc
    if plan.job_hash() != doc.get("job_hash"):
        raise TableError(f"{source} was edited after planning: its job hash does not match its contents")
    if [t.index for t in plan.tasks] != list(range(len(plan.tasks))):
        raise TableError(f"{source}: task indices are not 0..{len(plan.tasks) - 1}")
    return plan


class JobFolder:
    """A table job folder (see the module docstring for its layout)."""

    def __init__(self, path, plan: Plan):
        self.path = Path(path)
        self.plan = plan

    @property
    def tasks_dir(self) -> Path:
        """Folder of task outputs."""
        return self.path / "tasks"

    @property
    def locks_dir(self) -> Path:
        """Folder of per-task lock files."""
        return self.path / "locks"

    def output_path(self, index: int) -> Path:
        """Return the path of task ``index``'s ``.npz`` output."""
        return self.tasks_dir / f"task-{index:05d}.npz"

    def record_path(self, index: int) -> Path:
        """Return the path of task ``index``'s ``.json`` record."""
        return self.tasks_dir / f"task-{index:05d}.json"

    @classmethod
    def create(cls, path, plan: Plan, spec_text: str | None = None) -> JobFolder:
        """Write a job folder for ``plan``, or reuse one that holds exactly this plan.

        Raises
        ------
        TableError
            If ``path`` holds a job of another spec, code version or data (nothing there is changed).

        """
        path = Path(path)
        path.mkdir(parents=True, exist_ok=True)
        with FolderLock(path, ".plan.lock", wait_s=30.0, purpose="plan"):
            job_file = path / JOB_FILE
            if job_file.exists():
                existing = cls.open(path, check_code=False)
                if existing.plan.job_hash() != plan.job_hash():
                    raise TableError(_mismatch(existing.plan, plan, path))
                return existing
            (path / "tasks").mkdir(exist_ok=True)
            (path / "locks").mkdir(exist_ok=True)
            if spec_text is not None:
                atomic_write_text(path / "spec.toml", spec_text)
            text = strict_json(plan.to_dict(), f"table job file {job_file}", indent=1)
            atomic_write_text(job_file, text + "\n")
        return cls(path, plan)

    @classmethod
    def open(cls, path, check_code: bool = True) -> JobFolder:
        """Open an existing job folder.

        Parameters
        ----------
        path : str or Path
            The job folder.
        check_code : bool
            Refuse a job planned with another matgen version or other vendored data.

        """
        path = Path(path)
        job_file = path / JOB_FILE
        if not job_file.is_file():
            raise TableError(
                f"{path} is not a table job folder (no {JOB_FILE}); create one with 'matgen table plan'"
            )
        try:
            doc = json.loads(limits.read_text_limited(job_file, "table job file"))
        except ValueError as exc:
            raise TableError(f"{job_file} is not valid JSON ({exc})") from exc
        except RecursionError:  # nesting deeper than the parser's stack
            raise TableError(f"{job_file}: JSON nested too deeply to be a job file") from None
        plan = plan_from_dict(doc, str(job_file))
        if check_code:
            if plan.code_version != code_version():
                raise TableError(
                    f"job folder {path} was planned with matgen {plan.code_version}; this is matgen "
                    f"{code_version()}: plan a new job folder"
                )
            if plan.source_hash != source_hash():
                raise TableError(
                    f"job folder {path} was planned with other matgen source code (the transport, tissue, "
                    "fit or table code, or their data, changed since): plan a new job folder"
                )
            if plan.data_hashes != data_hashes():
                changed = sorted(set(plan.data_hashes.items()) ^ set(data_hashes().items()))
                names = sorted({k for k, _ in changed})
                raise TableError(
                    f"job folder {path} was planned with other vendored data (changed: {', '.join(names)}); "
                    "plan a new job folder"
                )
        return cls(path, plan)


def _mismatch(old: Plan, new: Plan, path) -> str:
    why = []
    if old.code_version != new.code_version:
        why.append(f"code version {old.code_version} vs {new.code_version}")
    if old.source_hash != new.source_hash:
        why.append("source code differs")
    if old.data_hashes != new.data_hashes:
        why.append("vendored data differ")
    if old.spec.spec_hash() != new.spec.spec_hash():
        a, b = old.spec.to_dict(), new.spec.to_dict()
        keys = [k for k in a if a.get(k) != b.get(k)]
        why.append(f"spec differs in {keys}")
    return (
        f"job folder {path} holds a job of another spec or code version "
        f"({'; '.join(why) or 'tasks differ'}); "
        "it is left unchanged: use a new job folder"
    )
