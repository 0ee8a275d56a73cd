"""Merging a finished job folder into a :class:`~matgen.tables.store.Table`. Units: nm, mm, 1/mm.

Merge refuses an incomplete job (listing exactly which tasks are missing or corrupt), checks every task
output against its recorded SHA-256 and task id and that all tasks agree on ring edges, then assembles per
grid point and band: the total diffuse reflectance A and its standard error, the radial profile and its
standard error, and the effective anisotropy. The fit summary (:func:`matgen.fit.summary.summarize`) turns
these into every table quantity, spectral and RGB (the RGB shape distance needs all bands' profiles, hence
here and not in the tasks).

Effective anisotropy of the layered skin (per grid point and band): the mean of the layers' g over the
scattering events of the reflected light, ``g_eff = sum_i g_i mu_s,i l_i / sum_i mu_s,i l_i``, where ``l_i``
is the weight-averaged path length of the diffusely reflected light in layer i (from the reweighted photon
records, ``Alerstam2008white``; the expected number of scattering events in a layer is ``mu_s,i`` times the
path length there). The boundary index is that of the top layer, averaged over the bands (the fit summary
takes one index).
"""

from __future__ import annotations

import numpy as np

from matgen.errors import TableError
from matgen.fit.layered import effective_anisotropy
from matgen.tables.plan import JobFolder
from matgen.tables.store import Table
from matgen.tables.tasks import job_states, load_task_output


def _summarize():
    try:
        from matgen.fit.summary import summarize
    except ImportError as exc:
        raise TableError(f"merging a table needs the fit summary (matgen.fit.summary): {exc}") from exc
    return summarize


def check_complete(job: JobFolder) -> None:
    """Raise :class:`TableError` listing every missing or corrupt task of ``job``."""
    states = job_states(job)
    bad = [s for s in states if s.state != "done"]
    if bad:
        missing = [s.index for s in bad if s.state == "missing"]
        corrupt = [s for s in bad if s.state == "corrupt"]
        parts = []
        if missing:
            parts.append(f"missing tasks {_ranges(missing)}")
        if corrupt:
            parts.append("corrupt tasks " + ", ".join(f"{s.index} ({s.reason})" for s in corrupt))
        raise TableError(
            f"job {job.path} is incomplete: {len(bad)} of {len(states)} tasks not done: {'; '.join(parts)}. "
            f"Run them (matgen table run-task {job.path} INDEX, or matgen table build --jobdir {job.path}) "
            "and merge again"
        )


def _ranges(indices) -> str:
    """Compact text of sorted indices: '0-3, 7, 9-10'."""
    out, start, prev = [], None, None
    for i in sorted(indices):
        if start is None:
            start = prev = i
        elif i == prev + 1:
            prev = i
        else:
            out.append(f"{start}-{prev}" if prev > start else f"{start}")
            start = prev = i
    if start is not None:
        out.append(f"{start}-{prev}" if prev > start else f"{start}")
    return ", ".join(out)


def assemble(job: JobFolder) -> dict:
    """Gather every task output of a complete job into grid arrays.

    Returns
    -------
    dict
        ``albedo_multiple``, ``albedo_multiple_stderr``, ``g_effective`` (N, B); ``radial_per_mm2``,
        ``radial_stderr_per_mm2`` (N, B, R); ``ring_edges_mm`` (R+1,); ``n_top`` (N, B); N = grid points in
        C order of the grid; ``photons_total`` (photons of all tasks).

    """
    check_complete(job)
    plan = job.plan
    shape = plan.spec.grid_shape
    n_points, n_bands = int(np.prod(shape)), len(plan.spec.bands)
    n_rings = plan.ring_edges_mm.size - 1
    a = np.full((n_points, n_bands), np.nan)
    a_err = np.full((n_points, n_bands), np.nan)
    g_eff = np.full((n_points, n_bands), np.nan)
    n_top = np.full((n_points, n_bands), np.nan)
    radial = np.full((n_points, n_bands, n_rings), np.nan)
    radial_err = np.full((n_points, n_bands, n_rings), np.nan)
    photons = 0
    for task in plan.tasks:  # each output is read (and checked) once
        out = load_task_output(job, task.index)
        photons += int(out["photons"][0])
        if not np.array_equal(out["ring_edges_mm"], plan.ring_edges_mm):
            raise TableError(f"task {task.index} of {job.path} used other ring edges than its plan")
        flat = np.ravel_multi_index(tuple(out["grid_index"].T), shape)
        if np.any(np.isfinite(a[flat, task.band])):
            raise TableError(f"task {task.index} of {job.path} covers grid points another task covered")
        a[flat, task.band] = out["diffuse_reflectance"]
        a_err[flat, task.band] = out["diffuse_reflectance_stderr"]
        radial[flat, task.band] = out["radial_reflectance_per_mm2"]
        radial_err[flat, task.band] = out["radial_stderr_per_mm2"]
        g_eff[flat, task.band] = effective_anisotropy(out["g"], out["mu_s_per_mm"], out["reflected_path_mm"])
        n_top[flat, task.band] = out["n"][0]
    if np.isnan(a).any():
        p, b = np.argwhere(np.isnan(a))[0]
        raise TableError(f"job {job.path}: grid point {int(p)} band {int(b)} is covered by no task")
    return {
        "albedo_multiple": a,
        "albedo_multiple_stderr": a_err,
        "radial_per_mm2": radial,
        "radial_stderr_per_mm2": radial_err,
        "g_effective": g_eff,
        "n_top": n_top,
        "ring_edges_mm": plan.ring_edges_mm.copy(),
        "photons_total": photons,
    }


def qa_summary(quantities: dict, table_axes, bands) -> dict:
    """Worst relative statistical error of A and worst fit residual, with where they occur."""

    def where(flat_index, band_index):
        idx = np.unravel_index(int(flat_index), tuple(a.values.size for a in table_axes))
        point = {a.name: float(a.values[i]) for a, i in zip(table_axes, idx, strict=True)}
        return {"point": point, "band_nm": float(bands.centre_nm[band_index])}

    out = {}
    a = quantities["albedo_multiple"].reshape(-1, len(bands)).astype(np.float64)
    e = quantities["albedo_multiple_stderr"].reshape(-1, len(bands)).astype(np.float64)
    rel = e / np.where(a > 0, a, np.inf)
    p, b = np.unravel_index(int(np.nanargmax(rel)), rel.shape)
    out["worst_relative_stderr_albedo_multiple"] = {"value": float(rel[p, b]), **where(p, b)}
    out["median_relative_stderr_albedo_multiple"] = float(np.nanmedian(rel))
    if "fit_residual" in quantities:
        r = quantities["fit_residual"].reshape(-1, len(bands)).astype(np.float64)
        p, b = np.unravel_index(int(np.nanargmax(r)), r.shape)
        out["worst_fit_residual"] = {"value": float(r[p, b]), **where(p, b)}
        out["median_fit_residual"] = float(np.nanmedian(r))
    return out


def merge(job: JobFolder) -> Table:
    """Assemble a complete job into a :class:`Table` (quantities from :func:`matgen.fit.summary.summarize`).

    Raises
    ------
    TableError
        Incomplete job (naming the missing tasks), corrupt or inconsistent task outputs.

    """
    summarize = _summarize()
    plan, spec = job.plan, job.plan.spec
    data = assemble(job)
    n_boundary = float(np.mean(data["n_top"]))
    q = summarize(
        spec.bands,
        data["ring_edges_mm"],
        data["albedo_multiple"],
        data["albedo_multiple_stderr"],
        data["radial_per_mm2"],
        data["radial_stderr_per_mm2"],
        data["g_effective"],
        n_boundary,
        working_space=spec.working_space,
        illuminant=spec.illuminant,
    )
    shape = spec.grid_shape
    quantities = {}
    for name, arr in q.items():
        v = np.asarray(arr)
        if v.ndim == 1:
            v = v[:, None]
        quantities[name] = v.reshape(shape + (v.shape[-1],)).astype(np.float32)
    if "albedo_multiple_stderr" not in quantities:
        quantities["albedo_multiple_stderr"] = (
            data["albedo_multiple_stderr"].reshape(shape + (-1,)).astype(np.float32)
        )
    total_photons = data["photons_total"]
    manifest = {
        "spec": spec.to_dict(),
        "provenance": {
            "code_version": plan.code_version,
            "source_hash": plan.source_hash,
            "data_hashes": plan.data_hashes,
            "job_hash": plan.job_hash(),
            "spec_hash": spec.spec_hash(),
            "task_ids": [t.task_id for t in plan.tasks],
        },
        "scattering_axes": list(plan.scattering_axes),
        "ring_edges_mm": plan.ring_edges_mm.tolist(),
        "boundary_index": n_boundary,
        "tasks": len(plan.tasks),
        "photons_total": int(total_photons),
        "qa": qa_summary(quantities, spec.axes, spec.bands),
    }
    return Table(list(spec.axes), spec.bands, quantities, spec.working_space, spec.illuminant, manifest)
