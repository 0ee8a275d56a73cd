"""The set of preview images ``matgen preview`` (and ``matgen demo``) writes into a folder. Units: nm, mm.

:func:`write_previews` gathers what a person wants to look at before a farm render: reflectance spectra of
parameter sets (presets) or of baked texels, radial profiles with their fitted normalised-diffusion model,
a table slice as a heat map, a contact sheet of baked maps and a flat-patch preview in the visible, a UV
and an IR pass.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from matgen.errors import ParameterError
from matgen.preview import plots

#: Bands of the preset previews when none are given: 300-1000 nm every 20 nm, 10 nm wide.
PREVIEW_BANDS = "300:1000:20:10"

#: Bands whose radial profiles are drawn (nm), where present.
PROFILE_BANDS_NM = (400.0, 560.0, 700.0, 860.0)


def preset_previews(
    out_dir, presets, *, bands=None, photons: int = 20_000, seed: int = 0, method: str = "auto", progress=None
) -> dict:
    """Spectra of the presets, profiles and patch preview of the first, from matgen's own pipeline.

    Parameters
    ----------
    out_dir : str or Path
        Folder to write into.
    presets : sequence of str or (label, SkinParameters)
        Preset names, or labelled parameter sets.
    bands : BandSet, optional
        Default :data:`PREVIEW_BANDS`.
    photons : int
        Photons per band of matgen's transport.
    seed : int
        Transport seed.
    method : {"auto", "tracer", "builtin"}
        Patch preview method.
    progress : callable, optional
        Called with one line of text before each preset's transport runs.

    Returns
    -------
    dict of str -> Path
        ``spectra``, ``profiles``, ``patch`` (and the method used under ``patch_method``).

    """
    from matgen.fit.models import burley2015_rings
    from matgen.preview.media import base_skin, skin_runs, skin_summary
    from matgen.preview.render import PatchMedium, patch_preview
    from matgen.spectra.bands import BandSet

    if not presets:
        raise ParameterError("name at least one preset (e.g. cheek)")
    out = Path(out_dir)
    bands = bands or BandSet.parse(PREVIEW_BANDS)
    sets = [(p, base_skin(p)) if isinstance(p, str) else tuple(p) for p in presets]
    curves, errs, first = {}, {}, None
    for i, (label, params) in enumerate(sets):
        if progress:
            progress(f"transport for {label}: {len(bands)} bands x {photons} photons")
        runs = skin_runs(label, params, bands, photons, seed + 1000 * i)
        q = skin_summary(runs)
        curves[label] = q["albedo_multiple"][0]
        errs[label] = q["albedo_multiple_stderr"][0]
        if first is None:
            first = (label, runs, q)
    written = {
        "spectra": plots.plot_reflectance_spectra(
            out / "spectra.png", bands, curves, errs, title="Total diffuse reflectance A (matgen transport)"
        )
    }
    label, runs, q = first
    edges = runs.results[0].ring_edges_mm
    prof, perr, models = {}, {}, {}
    for wl in PROFILE_BANDS_NM:
        try:
            b = bands.index_of(wl)
        except ParameterError:
            continue
        key = f"{bands.centre_nm[b]:g} nm"
        prof[key] = runs.results[b].radial_reflectance_per_mm2
        perr[key] = runs.results[b].radial_stderr_per_mm2
        models[key] = (
            "normalised diffusion fit",
            burley2015_rings(edges, q["albedo_multiple"][0, b], q["shape_distance_mm"][0, b]),
        )
    if prof:
        written["profiles"] = plots.plot_radial_profiles(
            out / "profiles.png", edges, prof, perr, models, title=f"Radial reflectance profiles: {label}"
        )
    medium = PatchMedium.from_quantities(bands, q, 0, label)
    written["patch"], written["patch_method"] = patch_preview(out / "patch.png", medium, method=method)
    return written


def descriptor_previews(out_dir, descriptor_path, *, config_path=None, textured: bool = False) -> dict:
    """Contact sheet of a bake's maps, the spectra of three of its texels, one preview per pass.

    ``textured`` adds the textured spectral render (:mod:`matgen.preview.textured`, Mitsuba 3) into
    ``<out>/render/``; ``config_path`` lets the pass previews re-read and check their curves.
    """
    from matgen.export.descriptor import load_descriptor
    from matgen.preview.report import material_panels, texel_spectra

    out = Path(out_dir)
    doc = load_descriptor(descriptor_path)
    written = {}
    panels = material_panels(descriptor_path, doc)
    if panels:
        written["contact_sheet"] = plots.plot_contact_sheet(
            out / "contact_sheet.png", panels, title=f"{doc['name']}: baked maps"
        )
    spectra = texel_spectra(descriptor_path, doc)
    if spectra:
        written["texel_spectra"] = plots.plot_reflectance_spectra(
            out / "texel_spectra.png", *spectra, title="baked albedo A at three texels"
        )
    from matgen.preview.passes import pass_preview

    for name in doc.get("passes", {}):
        written[f"pass_{name}"] = pass_preview(
            out / f"pass_{name}.png", descriptor_path, name, config_path=config_path
        )
    if textured:
        from matgen.preview.textured import render_views

        for key, path in render_views(descriptor_path, out / "render").items():
            written[f"render_{key}"] = path
    return written


def table_previews(
    out_dir, table, x_axis: str, y_axis: str, quantity: str = "albedo_multiple", band_nm: float = 550.0
) -> dict:
    """Plot a heat map of ``quantity`` over two table axes (the others at their middle grid value)."""
    out = Path(out_dir)
    path = plots.plot_table_slice(
        out / f"table_{quantity}_{x_axis}_{y_axis}.png", table, quantity, x_axis, y_axis, band_nm=band_nm
    )
    return {"table_slice": path}


def write_previews(
    out_dir,
    *,
    presets=(),
    descriptor=None,
    table=None,
    slice_axes=None,
    quantity: str = "albedo_multiple",
    band_nm: float = 550.0,
    method: str = "auto",
    bands=None,
    photons: int = 20_000,
    seed: int = 0,
    progress=None,
    config_path=None,
    textured: bool = False,
) -> dict:
    """Write every preview that the given inputs allow into ``out_dir``; return name -> path.

    ``presets`` -> spectra, profiles, patch (:func:`preset_previews`); ``descriptor`` -> contact sheet and
    texel spectra (:func:`descriptor_previews`); ``table`` and ``slice_axes`` (two axis names) -> a heat map
    (:func:`table_previews`).
    """
    if not presets and descriptor is None and table is None:
        raise ParameterError("nothing to preview: give presets, a material descriptor or a table")
    written = {}
    if presets:
        written.update(
            preset_previews(
                out_dir, presets, bands=bands, photons=photons, seed=seed, method=method, progress=progress
            )
        )
    if descriptor is not None:
        written.update(descriptor_previews(out_dir, descriptor, config_path=config_path, textured=textured))
    if table is not None:
        axes = list(slice_axes or table.axis_names[:2])
        if len(axes) != 2:
            raise ParameterError(f"a table slice needs two axis names; got {axes}")
        written.update(table_previews(out_dir, table, axes[0], axes[1], quantity, band_nm))
    return {k: v for k, v in written.items() if not isinstance(v, np.ndarray)}
