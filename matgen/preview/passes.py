"""Pass previews: each baked pass map with a scale bar in albedo units, beside the curves it was made from.

Units: wavelength nm; pass values are dimensionless albedos in [0, 1] (the response-weighted
multiple-scattering albedo, :mod:`matgen.color.curves`). The map is drawn on a fixed 0 - 1 grey scale (its
colour bar is the scale bar), so two passes can be compared by eye; the curve panel shows each recorded
curve normalised to its peak, their product, and the band weights the bake used. The caption says that
fluorescence is not modelled and how a pass map is used.

Curves are re-read from the files the descriptor names when the material config is given (its folder is
what the recorded paths are relative to); a file whose SHA-256 differs from the recorded one is refused, so
the plot never shows a curve the bake did not use. Without the config only the band weights are drawn.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from matgen.cautions import REAL_SOURCES
from matgen.errors import DataError

#: Caption under every pass preview.
CAPTION = (
    "Pass value = camera-weighted multiple-scattering albedo (0-1) of the skin under this lamp, filter and "
    "sensor. Fluorescence is not modelled. Use it as the albedo of a grey material rendered in this pass, "
    "or read the pass band's medium from the spectral stacks for a spectral renderer. " + REAL_SOURCES
)


def _curves(doc: dict, name: str, config_path):
    """Return the curves of pass ``name`` as ``(label, wavelength_nm, values)``, checked against files.

    Without the config only built-in curves can be drawn (user curves' paths are relative to its folder).
    """
    from matgen.color.curves import builtin_curve, check_recorded_curves, read_curve

    records = doc["passes"][name].get("curves", [])
    base = Path(config_path).resolve().parent if config_path is not None else None
    if base is not None:
        problems = check_recorded_curves(records, base)
        if problems:
            raise DataError(f"pass '{name}': " + "; ".join(problems))
    out = []
    for r in records:
        if r["path"].startswith("built-in "):
            c = builtin_curve(r["path"].split("'")[1])
        elif base is not None:
            c = read_curve(base / r["path"], r["role"], r["path"])
        else:
            continue
        out.append((f"{r['role']}: {r['path']}", *_arrays(c)))
    return out


def _arrays(curve):
    return curve.wavelength_nm, curve.values


def pass_preview(path, descriptor_path, name: str, *, config_path=None, tile=None) -> Path:
    """Write the preview PNG of pass ``name`` of a bake.

    Parameters
    ----------
    path : str or Path
        PNG to write.
    descriptor_path : str or Path
        The bake's ``material.json``.
    name : str
        Pass name (a key of the descriptor's ``passes``).
    config_path : str or Path, optional
        The material config the bake was made from (to re-read and check the curves).
    tile : int, optional
        UDIM tile shown (default: the first).

    Raises
    ------
    DataError
        Unknown pass, missing map, or a curve file changed since the bake.

    """
    from matgen.export.descriptor import load_descriptor
    from matgen.preview.plots import _plt, _save
    from matgen.preview.textured import read_channel
    from matgen.spectra.bands import BandSet

    descriptor_path = Path(descriptor_path)
    doc = load_descriptor(descriptor_path)
    if name not in doc.get("passes", {}):
        raise DataError(f"the bake has no pass '{name}'; it has {', '.join(doc.get('passes', {})) or 'none'}")
    entry = next(
        (
            t
            for t in doc["textures"]
            if t["kind"] == "pass" and t["quantity"] == name and (tile is None or t.get("udim") == tile)
        ),
        None,
    )
    if entry is None:
        raise DataError(f"no map of pass '{name}' in {descriptor_path}")
    img = read_channel(descriptor_path.parent / entry["path"], 0)
    curves = _curves(doc, name, config_path)
    bands = BandSet.from_dict(doc["bands"]["table"])
    weights = np.asarray(doc["passes"][name]["weights"], dtype=np.float64)
    plt = _plt()
    fig, (ax_img, ax_c) = plt.subplots(
        1, 2, figsize=(10, 4.4), dpi=100, gridspec_kw={"width_ratios": [1, 1.3]}
    )
    im = ax_img.imshow(np.clip(img, 0, 1), cmap="gray", vmin=0.0, vmax=1.0, interpolation="nearest")
    fig.colorbar(im, ax=ax_img, fraction=0.046, pad=0.04, label="pass albedo (dimensionless)")
    ax_img.set_title(
        f"pass '{name}': mean {np.mean(img):.3f}, range {np.min(img):.3f}-{np.max(img):.3f}", fontsize=9
    )
    ax_img.set_xticks([])
    ax_img.set_yticks([])
    keep = weights > 0
    width = np.asarray(bands.upper_nm) - np.asarray(bands.lower_nm)
    ax_c.bar(
        bands.centre_nm[keep],
        weights[keep] / weights.max(),
        width=width[keep],
        color="#9ab",
        label="band weights (bake)",
    )
    lo, hi = float(bands.lower_nm[keep].min()), float(bands.upper_nm[keep].max())
    for label, wl, v in curves:
        ax_c.plot(wl, v / max(float(np.max(v)), 1e-30), label=label)
    pad = max(20.0, 0.2 * (hi - lo))
    ax_c.set_xlim(lo - pad, hi + pad)
    ax_c.set_xlabel("wavelength (nm)")
    ax_c.set_ylabel("relative (peak = 1)")
    ax_c.legend(fontsize=7)
    ax_c.set_title(
        "curves of the pass" if curves else "band weights (give the config to plot the curves)", fontsize=9
    )
    fig.text(0.01, 0.01, CAPTION, fontsize=7, wrap=True)
    fig.tight_layout(rect=(0, 0.08, 1, 1))
    return _save(fig, path)
