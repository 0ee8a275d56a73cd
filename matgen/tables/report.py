"""Summary, QA and slice plots of a table file (what ``matgen table info`` and ``matgen table plot`` show).

QA is recomputed from the stored quantities, not copied from the manifest: the worst relative standard error
of the total diffuse reflectance A (``albedo_multiple_stderr / albedo_multiple``) and the worst profile fit
residual, each with the grid point and band where it occurs.
"""

from __future__ import annotations

import numpy as np

from matgen.errors import ParameterError, TableError
from matgen.tables.store import SPECTRAL_QUANTITIES, Table, manifest_path


def _where(table: Table, flat: int) -> dict:
    idx = np.unravel_index(int(flat), table.grid_shape)
    return {a.name: float(a.values[i]) for a, i in zip(table.axes, idx, strict=True)}


def table_qa(table: Table) -> dict:
    """Worst and median relative stderr of A and fit residual (spectral and RGB), with locations."""
    nb = len(table.bands)
    out = {}
    q = table.quantities
    if "albedo_multiple" in q and "albedo_multiple_stderr" in q:
        a = q["albedo_multiple"].reshape(-1, nb).astype(np.float64)
        e = q["albedo_multiple_stderr"].reshape(-1, nb).astype(np.float64)
        rel = np.where(a > 0, e / np.where(a > 0, a, 1.0), np.inf)
        p, b = np.unravel_index(int(np.argmax(rel)), rel.shape)
        out["worst_relative_stderr_albedo_multiple"] = {
            "value": float(rel[p, b]),
            "point": _where(table, p),
            "band_nm": float(table.bands.centre_nm[b]),
        }
        out["median_relative_stderr_albedo_multiple"] = float(np.median(rel))
        out["albedo_multiple_range"] = [float(a.min()), float(a.max())]
    for name in ("fit_residual", "rgb_fit_residual"):
        if name in q:
            r = q[name].reshape(-1, q[name].shape[-1]).astype(np.float64)
            p, c = np.unravel_index(int(np.nanargmax(r)), r.shape)
            where = {"value": float(r[p, c]), "point": _where(table, p)}
            if name == "fit_residual":
                where["band_nm"] = float(table.bands.centre_nm[c])
            else:
                where["channel"] = "RGB"[c]
            out[f"worst_{name}"] = where
            out[f"median_{name}"] = float(np.nanmedian(r))
    n_nan = {n: int(np.isnan(v).sum()) for n, v in q.items() if np.isnan(v).any()}
    out["non_finite_entries"] = n_nan
    return out


def table_summary(table: Table, path=None) -> dict:
    """JSON-ready summary of a table: axes, bands, quantities, QA, build statistics, file sizes."""
    doc = {
        "axes": [
            {
                "name": a.name,
                "spacing": a.spacing,
                "count": int(a.values.size),
                "min": float(a.values[0]),
                "max": float(a.values[-1]),
            }
            for a in table.axes
        ],
        "grid_points": table.n_points,
        "bands": {
            "count": len(table.bands),
            "first_nm": float(table.bands.centre_nm[0]),
            "last_nm": float(table.bands.centre_nm[-1]),
        },
        "working_space": table.working_space,
        "illuminant": table.illuminant,
        "quantities": {n: int(v.shape[-1]) for n, v in table.quantities.items()},
        "qa": table_qa(table),
        "photons_per_band": table.manifest.get("spec", {}).get("photons_per_band"),
        "tasks": table.manifest.get("tasks"),
        "build_stats": table.build_stats,
    }
    if path is not None:
        from pathlib import Path

        p = Path(path)
        doc["file"] = p.name
        doc["file_bytes"] = p.stat().st_size
        side = manifest_path(p)
        doc["manifest_bytes"] = side.stat().st_size if side.exists() else None
    return doc


def format_summary(doc: dict) -> str:
    """Human-readable text of :func:`table_summary`."""
    lines = []
    if "file" in doc:
        mb = doc["file_bytes"] / 1e6
        lines.append(f"table {doc['file']}  ({mb:.2f} MB; manifest {doc.get('manifest_bytes') or 0} bytes)")
    lines.append(
        f"grid: {doc['grid_points']} points x {doc['bands']['count']} bands "
        f"({doc['bands']['first_nm']:g}-{doc['bands']['last_nm']:g} nm); "
        f"RGB in {doc['working_space']} under {doc['illuminant']}"
    )
    for a in doc["axes"]:
        lines.append(
            f"  axis {a['name']:<20s} {a['spacing']:<6s} {a['count']:3d} points  {a['min']:g} .. {a['max']:g}"
        )
    lines.append("quantities: " + ", ".join(f"{n}[{c}]" for n, c in doc["quantities"].items()))
    if doc.get("photons_per_band"):
        lines.append(f"photons per task: {doc['photons_per_band']}; tasks: {doc.get('tasks')}")
    qa = doc["qa"]
    w = qa.get("worst_relative_stderr_albedo_multiple")
    if w:
        lines.append(
            f"QA worst relative stderr of A: {100 * w['value']:.3f} % at {w['band_nm']:g} nm, {w['point']}"
            f" (median {100 * qa['median_relative_stderr_albedo_multiple']:.3f} %)"
        )
    w = qa.get("worst_fit_residual")
    if w:
        lines.append(
            f"QA worst fit residual: {w['value']:.4f} at {w['band_nm']:g} nm, {w['point']}"
            f" (median {qa['median_fit_residual']:.4f})"
        )
    w = qa.get("worst_rgb_fit_residual")
    if w:
        lines.append(f"QA worst RGB fit residual: {w['value']:.4f} in {w['channel']}, {w['point']}")
    if qa.get("non_finite_entries"):
        lines.append(f"QA non-finite entries: {qa['non_finite_entries']}")
    bs = doc.get("build_stats") or {}
    if bs:
        parts = []
        for k in ("build_wall_s", "wall_s", "merge_wall_s", "task_wall_s_sum"):
            if k in bs:
                parts.append(f"{k} {bs[k]:.1f}")
        for k in ("executor", "workers", "cpus"):
            if k in bs:
                parts.append(f"{k} {bs[k]}")
        lines.append("build: " + ", ".join(parts))
    return "\n".join(lines)


def plot_slices(
    table: Table,
    out,
    quantity: str = "rgb_albedo_multiple",
    x_axis: str | None = None,
    line_axis: str | None = None,
    band_nm: float | None = None,
    at: dict | None = None,
):
    """Plot a quantity along one axis, one line per value of another, other axes at their middle values.

    Parameters
    ----------
    table : Table
        The table.
    out : str or Path
        Image file (PNG, PDF, SVG; by the suffix).
    quantity : str
        Table quantity; spectral quantities are shown at ``band_nm`` (default the band nearest 550 nm), RGB
        quantities as one panel per channel.
    x_axis, line_axis : str, optional
        Axis along x (default the first) and axis of the lines (default the second, if any).
    band_nm : float, optional
        Wavelength in nm for spectral quantities.
    at : dict, optional
        Values of the remaining axes (default: each axis' middle grid value).

    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    table._check_names([quantity])
    names = table.axis_names
    x_axis = x_axis or names[0]
    if line_axis is None and len(names) > 1:
        line_axis = next(n for n in names if n != x_axis)
    for n in (x_axis, line_axis):
        if n is not None and n not in names:
            raise ParameterError(f"table has no axis '{n}'; axes: {names}")
    if x_axis == line_axis:
        raise ParameterError("x axis and line axis must differ")
    by = {a.name: a for a in table.axes}
    fixed = {a.name: float(a.values[a.values.size // 2]) for a in table.axes}
    for k, v in (at or {}).items():
        if k not in by:
            raise ParameterError(f"table has no axis '{k}'; axes: {names}")
        fixed[k] = float(v)
    arr = table.quantities[quantity]
    c = arr.shape[-1]
    if quantity in SPECTRAL_QUANTITIES or (c == len(table.bands) and c != 3):
        b = (
            table.bands.index_of(band_nm)
            if band_nm is not None
            else int(np.argmin(abs(table.bands.centre_nm - 550)))
        )
        channels, labels = [b], [f"{table.bands.centre_nm[b]:g} nm"]
    else:
        channels, labels = list(range(c)), (["R", "G", "B"] if c == 3 else [str(i) for i in range(c)])
    xa = by[x_axis]
    xs = (
        np.geomspace(xa.values[0], xa.values[-1], 200)
        if xa.spacing == "log"
        else np.linspace(xa.values[0], xa.values[-1], 200)
    )
    line_vals = by[line_axis].values if line_axis else [None]
    fig, axs = plt.subplots(1, len(channels), figsize=(4.2 * len(channels), 3.4), squeeze=False)
    for ci, (ch, lab) in enumerate(zip(channels, labels, strict=True)):
        ax = axs[0, ci]
        for lv in line_vals:
            pts = np.array(
                [[x if n == x_axis else (lv if n == line_axis else fixed[n]) for n in names] for x in xs]
            )
            vals, _ = table.lookup(pts, [quantity])
            ax.plot(xs, vals[quantity][:, ch], label=f"{line_axis} = {lv:g}" if line_axis else None)
            node_pts = np.array(
                [
                    [x if n == x_axis else (lv if n == line_axis else fixed[n]) for n in names]
                    for x in xa.values
                ]
            )
            nv, _ = table.lookup(node_pts, [quantity])
            ax.plot(xa.values, nv[quantity][:, ch], "k.", ms=3)
        if xa.spacing == "log":
            ax.set_xscale("log")
        ax.set_xlabel(x_axis)
        ax.set_title(f"{quantity} ({lab})", fontsize=9)
        ax.grid(alpha=0.3)
    if line_axis:
        axs[0, -1].legend(fontsize=7)
    rest = {k: v for k, v in fixed.items() if k not in (x_axis, line_axis)}
    fig.suptitle(", ".join(f"{k} = {v:g}" for k, v in rest.items()) or " ", fontsize=8)
    fig.tight_layout()
    try:
        fig.savefig(out, dpi=120)
    except (OSError, ValueError) as exc:
        raise TableError(f"cannot write plot {out}: {exc}") from exc
    finally:
        plt.close(fig)
    return out
