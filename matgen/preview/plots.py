"""Plots a person reads: reflectance spectra, radial profiles, table slices, contact sheets, validation.

Units: wavelength in nm, radius in mm, profiles in mm^-2, reflectance dimensionless; every axis is labelled
with its unit. Figures are drawn with matplotlib's non-interactive Agg backend and written as PNG files
(atomic replace). Each function returns the path it wrote.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from matgen.errors import ParameterError

#: Spectral regions shaded behind spectra, in nm: (label, lower, upper, colour).
REGIONS_NM = (
    ("UV", 280.0, 400.0, "#b9a7e6"),
    ("visible", 400.0, 700.0, "#f3e6b3"),
    ("near IR", 700.0, 1100.0, "#e8b7a7"),
)

#: Figure resolution in dots per inch.
DPI = 100


def _plt():
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    return plt


def _save(fig, path) -> Path:
    from matgen.fsutil import atomic_path

    path = Path(path)
    with atomic_path(path) as tmp:
        fig.savefig(tmp, dpi=DPI, format="png")
    _plt().close(fig)
    return path


def shade_regions(ax, lower_nm: float, upper_nm: float) -> None:
    """Shade the UV, visible and near-IR regions (:data:`REGIONS_NM`) from ``lower_nm`` to ``upper_nm``."""
    for label, lo, hi, colour in REGIONS_NM:
        lo, hi = max(lo, lower_nm), min(hi, upper_nm)
        if hi <= lo:
            continue
        ax.axvspan(lo, hi, color=colour, alpha=0.35, lw=0, zorder=0)
        ax.text(
            0.5 * (lo + hi),
            0.98,
            label,
            transform=ax.get_xaxis_transform(),
            ha="center",
            va="top",
            fontsize=8,
            color="#444444",
        )


def plot_reflectance_spectra(
    path,
    bands,
    curves: dict,
    stderr: dict | None = None,
    *,
    title: str = "Total diffuse reflectance",
    ylabel: str = "reflectance A (1)",
    size_px=(900, 500),
) -> Path:
    """Reflectance spectra (one curve per parameter set or texel) over the bands, UV / visible / IR shaded.

    Parameters
    ----------
    path : str or Path
        PNG to write.
    bands : BandSet
        Bands of the curves (nm).
    curves : dict of str -> ndarray (B,)
        Label -> dimensionless values per band.
    stderr : dict of str -> ndarray (B,), optional
        Standard errors drawn as a band of +-2 se.
    title, ylabel : str
        Figure title and y label.
    size_px : (int, int)
        Image width and height in pixels.

    """
    if not curves:
        raise ParameterError("plot_reflectance_spectra needs at least one curve")
    plt = _plt()
    fig, ax = plt.subplots(figsize=(size_px[0] / DPI, size_px[1] / DPI), dpi=DPI)
    x = np.asarray(bands.centre_nm)
    lo = float(min(300.0, bands.lower_nm[0]))
    hi = float(max(1000.0, bands.upper_nm[-1]))
    shade_regions(ax, lo, hi)
    for label, values in curves.items():
        y = np.asarray(values, dtype=np.float64).reshape(-1)
        if y.size != x.size:
            raise ParameterError(f"curve {label!r} has {y.size} values for {x.size} bands")
        (line,) = ax.plot(x, y, lw=1.8, label=label, marker="." if x.size < 30 else None)
        if stderr and label in stderr:
            e = 2.0 * np.asarray(stderr[label], dtype=np.float64).reshape(-1)
            ax.fill_between(x, y - e, y + e, color=line.get_color(), alpha=0.25, lw=0)
    ax.set_xlim(lo, hi)
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("wavelength (nm)")
    ax.set_ylabel(ylabel)
    ax.set_title(title)
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8, loc="upper left", bbox_to_anchor=(0.0, 0.92))
    fig.tight_layout()
    return _save(fig, path)


def plot_radial_profiles(
    path,
    ring_edges_mm,
    profiles: dict,
    stderr: dict | None = None,
    models: dict | None = None,
    *,
    title: str = "Radial reflectance profiles",
    size_px=(900, 550),
) -> Path:
    """Radial reflectance profiles on log-log axes, with fitted models overlaid.

    Parameters
    ----------
    path : str or Path
        PNG to write.
    ring_edges_mm : ndarray (R+1,)
        Ring edges in mm (the first ring starts at 0 mm; it is drawn at its area-weighted centre).
    profiles : dict of str -> ndarray (R,)
        Label (e.g. ``"550 nm"``) -> Monte Carlo profile in mm^-2.
    stderr : dict of str -> ndarray (R,), optional
        Standard errors (error bars of +-2 se).
    models : dict of str -> (label, ndarray (R,)), optional
        Same keys as ``profiles`` -> (model name, model ring averages in mm^-2), drawn as lines.
    title : str
        Plot title.
    size_px : (int, int)
        Image width and height in pixels.

    """
    from matgen.transport.results import ring_centres_mm

    if not profiles:
        raise ParameterError("plot_radial_profiles needs at least one profile")
    plt = _plt()
    fig, ax = plt.subplots(figsize=(size_px[0] / DPI, size_px[1] / DPI), dpi=DPI)
    r = ring_centres_mm(ring_edges_mm)
    for label, y in profiles.items():
        y = np.asarray(y, dtype=np.float64)
        ok = y > 0
        if stderr and label in stderr:
            e = 2.0 * np.asarray(stderr[label], dtype=np.float64)
            container = ax.errorbar(
                r[ok],
                y[ok],
                yerr=np.minimum(e[ok], 0.999 * y[ok]),
                fmt="o",
                ms=3,
                capsize=0,
                label=f"{label} (Monte Carlo)",
            )
            colour = container[0].get_color()
        else:
            (pts,) = ax.plot(r[ok], y[ok], "o", ms=3, label=f"{label} (Monte Carlo)")
            colour = pts.get_color()
        if models and label in models:
            name, m = models[label]
            m = np.asarray(m, dtype=np.float64)
            ax.plot(r[m > 0], m[m > 0], "-", color=colour, lw=1.4, label=f"{label} {name}")
    ax.set_xscale("log")
    ax.set_yscale("log")
    data = np.concatenate([np.asarray(y, dtype=np.float64).ravel() for y in profiles.values()])
    data = data[data > 0]
    if data.size:  # frame the Monte Carlo data; model tails far below it say nothing
        ax.set_ylim(0.3 * data.min(), 3.0 * data.max())
    ax.set_xlabel("radius r (mm)")
    ax.set_ylabel("radial reflectance R(r) (mm$^{-2}$)")
    ax.set_title(title)
    ax.grid(alpha=0.3, which="both")
    ax.legend(fontsize=7, ncol=2)
    fig.tight_layout()
    return _save(fig, path)


def plot_table_slice(
    path,
    table,
    quantity: str,
    x_axis: str,
    y_axis: str,
    *,
    fixed: dict | None = None,
    band_nm: float | None = None,
    channel: int = 0,
    samples: int = 64,
    size_px=(700, 560),
) -> Path:
    """Plot a table quantity over two axes as a heat map, the other axes held fixed (interpolated lookup).

    Parameters
    ----------
    path : str or Path
        PNG to write.
    table : matgen.tables.store.Table
        Table to look the quantity up in.
    quantity : str
        Table quantity name (e.g. ``"albedo_multiple"``).
    x_axis, y_axis : str
        Two of the table's axis names.
    fixed : dict of str -> float, optional
        Values of the other axes (default: the middle grid value of each).
    band_nm : float, optional
        For spectral quantities: the band containing this wavelength (default 550 nm).
    channel : int
        For RGB or scalar quantities: the channel index.
    samples : int
        Samples per axis of the heat map.
    size_px : (int, int)
        Image width and height in pixels.

    """
    names = table.axis_names
    for a in (x_axis, y_axis):
        if a not in names:
            raise ParameterError(f"axis {a!r} is not in the table; axes are {names}")
    if x_axis == y_axis:
        raise ParameterError("x_axis and y_axis must differ")
    if quantity not in table.quantities:
        raise ParameterError(f"quantity {quantity!r} is not in the table; it has {sorted(table.quantities)}")
    fixed = dict(fixed or {})
    axes = {a.name: a for a in table.axes}
    coords = []
    grids = {}
    for name in (x_axis, y_axis):
        ax_ = axes[name]
        lo, hi = float(ax_.values[0]), float(ax_.values[-1])
        grids[name] = (
            np.geomspace(lo, hi, samples) if ax_.spacing == "log" and lo > 0 else np.linspace(lo, hi, samples)
        )
    xx, yy = np.meshgrid(grids[x_axis], grids[y_axis])
    for name in names:
        if name == x_axis:
            coords.append(xx.ravel())
        elif name == y_axis:
            coords.append(yy.ravel())
        else:
            v = fixed.get(name, float(axes[name].values[len(axes[name].values) // 2]))
            fixed[name] = v
            coords.append(np.full(xx.size, v))
    values, _ = table.lookup(np.stack(coords, axis=1), [quantity])
    q = values[quantity]
    if q.shape[1] == len(table.bands):
        wl = 550.0 if band_nm is None else float(band_nm)
        c = table.bands.index_of(wl)
        what = f"{quantity} at {table.bands.centre_nm[c]:g} nm"
    else:
        if not 0 <= channel < q.shape[1]:
            raise ParameterError(f"channel {channel} out of range for {quantity} ({q.shape[1]} channels)")
        c = channel
        what = f"{quantity} channel {c}"
    img = q[:, c].reshape(xx.shape)
    plt = _plt()
    fig, ax = plt.subplots(figsize=(size_px[0] / DPI, size_px[1] / DPI), dpi=DPI)
    mesh = ax.pcolormesh(xx, yy, img, shading="auto", cmap="viridis")
    unit = "mm" if quantity.endswith("_mm") else "1"
    fig.colorbar(mesh, ax=ax, label=f"{quantity} ({unit})")
    if axes[x_axis].spacing == "log":
        ax.set_xscale("log")
    if axes[y_axis].spacing == "log":
        ax.set_yscale("log")
    ax.set_xlabel(f"{x_axis} (1)")
    ax.set_ylabel(f"{y_axis} (1)")
    others = ", ".join(f"{k}={v:g}" for k, v in fixed.items())
    ax.set_title(f"{what}\n{others}", fontsize=9)
    fig.tight_layout()
    return _save(fig, path)


#: Most flagged texels marked one by one on a flag panel (beyond that the image alone shows them).
MAX_FLAG_MARKERS = 5000


def _flag_panel(fig, ax, p) -> str:
    """Draw a 0/1 flag map on a fixed [0, 1] scale, ring every flagged texel, return the title with the count.

    A percentile colour range would call a map with under 1 % flagged texels "all 0", and a panel smaller
    than the map drops single texels when it is resampled; the count and the rings avoid both.
    """
    from matplotlib.colors import ListedColormap

    v = np.asarray(p["values"], dtype=np.float64)
    flagged = np.isfinite(v) & (v > 0.5)
    n = int(flagged.sum())
    im = ax.imshow(
        flagged.astype(float),
        cmap=ListedColormap(["#1a1a1a", "#ff3030"]),
        vmin=0,
        vmax=1,
        interpolation="nearest",
    )
    fig.colorbar(im, ax=ax, fraction=0.046, pad=0.04, ticks=[0, 1], label="flag (0 / 1)")
    if 0 < n <= MAX_FLAG_MARKERS:
        yy, xx = np.nonzero(flagged)
        ax.scatter(xx, yy, s=30, facecolors="none", edgecolors="#ffd000", linewidths=0.8)
    return f"{p['title']}: {n} of {v.size} texels flagged ({100 * n / max(v.size, 1):.2g} %)"


def plot_contact_sheet(path, panels: list, *, title: str = "", columns: int = 3, panel_px: int = 300) -> Path:
    """Several maps side by side, each with a title; scalar maps with a colour bar and their unit.

    Parameters
    ----------
    path : str or Path
        PNG to write.
    panels : list of dict
        Each ``{"title": str, "image": ndarray (H, W, 3) display values in [0, 1]}``,
        ``{"title": str, "values": ndarray (H, W), "unit": str, "cmap": str (optional)}``, or a 0/1 flag map
        ``{"title": str, "values": ndarray (H, W), "flags": True}`` (fixed scale, count in the title, every
        flagged texel ringed).
    title : str
        Sheet title.
    columns : int
        Panels per row.
    panel_px : int
        Size of one panel in pixels.

    """
    if not panels:
        raise ParameterError("the contact sheet needs at least one panel")
    plt = _plt()
    cols = min(columns, len(panels))
    rows = (len(panels) + cols - 1) // cols
    fig, axs = plt.subplots(
        rows, cols, figsize=(cols * panel_px / DPI, rows * (panel_px + 40) / DPI), dpi=DPI, squeeze=False
    )
    for i, ax in enumerate(axs.ravel()):
        if i >= len(panels):
            ax.axis("off")
            continue
        p = panels[i]
        if "image" in p:
            ax.imshow(np.clip(p["image"], 0, 1), interpolation="nearest")
        elif p.get("flags"):
            p = dict(p, title=_flag_panel(fig, ax, p))
        else:
            v = np.asarray(p["values"], dtype=np.float64)
            finite = v[np.isfinite(v)]
            lo, hi = np.percentile(finite, [1, 99]) if finite.size else (0.0, 1.0)
            panel_title = p["title"]
            if hi <= lo:  # a flat map: show it on a unit-wide scale and say so
                panel_title = f"{panel_title} (all {lo:g})"
                hi = lo + max(abs(lo), 1.0)
            p = dict(p, title=panel_title)
            im = ax.imshow(v, cmap=p.get("cmap", "magma"), vmin=lo, vmax=hi, interpolation="nearest")
            fig.colorbar(im, ax=ax, fraction=0.046, pad=0.04, label=p.get("unit", ""))
        ax.set_title(p["title"], fontsize=9)
        ax.set_xticks([])
        ax.set_yticks([])
    if title:
        fig.suptitle(title, fontsize=11)
    fig.tight_layout()
    return _save(fig, path)


def plot_validation(path, comparisons: list, *, size_px=(900, 520)) -> Path:
    """Differences of each validation comparison with their bounds (3 combined se + allowance).

    Parameters
    ----------
    path : str or Path
        PNG to write.
    comparisons : list of dict
        ``Comparison.to_dict()`` forms (``matgen.preview.validate``).
    size_px : (int, int)
        Image width and minimum height in pixels (at least 190 pixels per comparison).

    """
    if not comparisons:
        raise ParameterError("plot_validation needs at least one comparison")
    plt = _plt()
    n = len(comparisons)
    fig, axs = plt.subplots(
        n, 1, figsize=(size_px[0] / DPI, max(size_px[1], 190 * n) / DPI), dpi=DPI, squeeze=False
    )
    for ax, comp in zip(axs[:, 0], comparisons, strict=True):
        rows = comp["rows"]
        x = np.arange(len(rows))
        d = np.array([r["difference"] for r in rows])
        b = np.array([r["bound"] for r in rows])
        ok = np.array([r["passed"] for r in rows])
        ax.fill_between(x, -b, b, step="mid", color="#cde5cd", label="bound (3 se + allowance)")
        ax.plot(x[ok], d[ok], "o", color="#226622", label="difference (passes)")
        if (~ok).any():
            ax.plot(x[~ok], d[~ok], "x", color="#bb2222", ms=8, label="difference (fails)")
        ax.axhline(0.0, color="k", lw=0.6)
        ax.set_xticks(x)
        ax.set_xticklabels([r["label"] for r in rows], rotation=30, ha="right", fontsize=7)
        ax.set_ylabel("tested - reference (1)")
        verdict = "PASS" if comp["passed"] else "FAIL"
        ax.set_title(f"{comp['name']}: {verdict}, max |diff| {comp['max_abs_difference']:.4f}", fontsize=9)
        ax.legend(fontsize=7, loc="upper right")
        ax.grid(alpha=0.3)
    fig.tight_layout()
    return _save(fig, path)
