"""A self-contained HTML report of one baked material: inputs, provenance, previews, QA, validation.

Units: as in the descriptor (nm, mm, scene units named per texture). The report is one HTML file with every
image embedded as a base64 PNG ``data:`` URI and its style inline; it loads no external resource (no fonts,
scripts or images from anywhere), so it opens offline and can be mailed or archived as one file. One short
inline script marks any image that fails to decode, visibly, and records the count on ``<body>``
(``data-images-ok``), so that a headless browser can check the page.
"""

from __future__ import annotations

import base64
import html
import json
import tempfile
from pathlib import Path

import numpy as np

from matgen import __version__
from matgen.cautions import IMAGERY_ONLY, PASS_PHYSICS, REAL_SOURCES
from matgen.errors import DataError, ImageError, MatgenError
from matgen.fsutil import resolve_inside
from matgen.limits import check_file_size
from matgen.preview import images, plots
from matgen.preview.validation_json import check_validation, load_validation

#: The eight bytes every PNG file starts with (PNG specification, W3C 2003, sec. 5.2).
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"

_STYLE = """
body{font-family:sans-serif;margin:2em auto;max-width:1100px;color:#222;line-height:1.4}
h1{font-size:1.6em}h2{font-size:1.25em;border-bottom:1px solid #ccc;margin-top:1.6em}
table{border-collapse:collapse;font-size:.85em;margin:.5em 0}td,th{border:1px solid #ccc;padding:2px 6px;
text-align:left;vertical-align:top}th{background:#f2f2f2}code{font-size:.9em}
.fail{color:#b00;font-weight:bold}.pass{color:#070;font-weight:bold}.note{color:#555;font-size:.9em}
figure{margin:1em 0}figcaption{font-size:.85em;color:#444}img{max-width:100%}
.broken{outline:3px solid #b00}
"""

_SCRIPT = """
window.addEventListener('load', function () {
  var bad = 0, imgs = document.images;
  for (var i = 0; i < imgs.length; i++) {
    if (!imgs[i].complete || imgs[i].naturalWidth === 0) { bad++; imgs[i].className += ' broken'; }
  }
  document.body.setAttribute('data-images-ok', bad === 0 ? 'true' : 'false');
  document.body.setAttribute('data-images', String(imgs.length));
});
"""


def _esc(x) -> str:
    return html.escape(str(x), quote=True)


def png_data_uri(path) -> str:
    """``data:image/png;base64,...`` of a PNG file."""
    return "data:image/png;base64," + base64.b64encode(Path(path).read_bytes()).decode("ascii")


def _figure(path, caption: str) -> str:
    return (
        f'<figure><img src="{png_data_uri(path)}" alt="{_esc(caption)}"><figcaption>{_esc(caption)}'
        f"</figcaption></figure>"
    )


def _table(headers, rows) -> str:
    head = "".join(f"<th>{_esc(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f"<td>{c}</td>" for c in row) + "</tr>" for row in rows)
    return f"<table><tr>{head}</tr>{body}</table>"


def texture_path(folder: Path, entry: dict, allow_outside: bool = False) -> Path:
    """Return the file of a descriptor's texture entry; refuse one leading outside the descriptor's folder.

    Parameters
    ----------
    folder : Path
        The descriptor's folder.
    entry : dict
        A ``textures`` entry of the descriptor.
    allow_outside : bool
        Follow absolute paths, ``..`` and symbolic links leading out of ``folder`` (the user's explicit
        choice, ``--allow-outside``).

    Raises
    ------
    PathError
        If the path (after following symbolic links) lies outside ``folder`` and that is not allowed.

    """
    return resolve_inside(folder, entry["path"], f"texture path of '{entry['key']}'", allow_outside)


def _texture(
    folder: Path,
    doc: dict,
    quantity: str = None,
    kind: str = None,
    key: str = None,
    allow_outside: bool = False,
):
    for t in doc["textures"]:
        if (
            (quantity is None or t["quantity"] == quantity)
            and (kind is None or t["kind"] == kind)
            and (key is None or t["key"] == key)
        ):
            path = texture_path(folder, t, allow_outside)
            if path.is_file():
                arr, names = images.read_texture(path)
                return t, arr, names
    return None


def material_panels(descriptor_path, doc: dict, *, allow_outside: bool = False) -> list:
    """Contact-sheet panels of a baked material (first UDIM tile where there are several).

    The ACEScg (working-space) albedo through the sRGB view (``matgen.preview.images.working_to_display``),
    each UV / IR pass map, the mean-free-path and radius maps with a colour bar and their unit, and the QA
    maps (texels clamped to the table, fit residual). Texture files are found through
    :func:`texture_path`: one leading outside the descriptor's folder (an absolute path, ``..``, a symbolic
    link out of it) is a :class:`~matgen.errors.PathError` unless ``allow_outside`` is true.
    """
    folder = Path(descriptor_path).parent
    panels = []
    space = doc.get("working_space", "ACEScg")
    found = _texture(folder, doc, quantity="rgb_albedo_multiple", kind="rgb", allow_outside=allow_outside)
    if found:
        t, arr, _ = found
        panels.append(
            {
                "title": f"albedo A ({space}), sRGB view",
                "image": images.working_to_display(arr[..., :3], space),
            }
        )
    for t in doc["textures"]:
        if t["kind"] == "pass":
            arr, _ = images.read_texture(texture_path(folder, t, allow_outside))
            panels.append(
                {
                    "title": f"pass {t['quantity']}",
                    "image": np.repeat(images.linear_to_display(arr[..., 0])[..., None], 3, axis=2),
                }
            )
    for quantity, label in (
        ("rgb_mean_free_path_mm", "mean free path (red channel)"),
        ("rgb_shape_distance_mm", "shape distance d (red channel)"),
        ("subsurface_radius", "OpenPBR subsurface_radius"),
    ):
        found = _texture(folder, doc, quantity=quantity, allow_outside=allow_outside)
        if found:
            t, arr, _ = found
            unit = {"scene_unit": "scene units", "mm": "mm"}.get(t["unit"], t["unit"])
            panels.append({"title": label, "values": arr[..., 0], "unit": unit, "cmap": "viridis"})
    found = _texture(folder, doc, kind="qa", allow_outside=allow_outside)
    if found:
        t, arr, names = found
        for i, name in enumerate(names):
            flags = name.endswith("_clamped")  # 0/1 flags: counted and ringed, not a percentile range
            panels.append(
                {"title": f"QA: {name}", "values": arr[..., i], "unit": "1", "cmap": "magma", "flags": flags}
            )
    return panels


def texel_spectra(descriptor_path, doc: dict, n_texels: int = 3, *, allow_outside: bool = False):
    """Spectra of the baked albedo A at a few texels: the darkest, the median and the brightest (by mean A).

    The spectral stack's file is found through :func:`texture_path` (``allow_outside`` as there).

    Returns
    -------
    (BandSet, dict of str -> ndarray (B,)) or None when the bake wrote no spectral albedo stack.

    """
    from matgen.spectra.bands import BandSet

    found = _texture(
        Path(descriptor_path).parent,
        doc,
        quantity="albedo_multiple",
        kind="spectral",
        allow_outside=allow_outside,
    )
    if not found:
        return None
    t, arr, names = found
    bands = BandSet.from_dict(doc["bands"]["spectral_stacks"])
    if arr.shape[2] != len(bands):
        raise DataError(f"{t['path']}: {arr.shape[2]} channels for {len(bands)} spectral-stack bands")
    flat = arr.reshape(-1, arr.shape[2]).astype(np.float64)
    order = np.argsort(flat.mean(axis=1), kind="stable")
    picks = {"darkest texel": order[0], "median texel": order[len(order) // 2], "brightest texel": order[-1]}
    w = arr.shape[1]
    curves = {f"{k} (x={i % w}, y={i // w})": flat[i] for k, i in list(picks.items())[:n_texels]}
    return bands, curves


def _qa_rows(descriptor_path, doc: dict, inspect, allow_outside: bool = False) -> list:
    s = doc.get("statistics", {})
    rows = [
        ["texels", _esc(s.get("texels", "?"))],
        ["texels clamped to the table's range", _esc(s.get("table_clamped_texels", "?"))],
        ["texels clamped by the map encoding", _esc(s.get("encoding_clamped_texels", "?"))],
        [
            "files present / missing / modified",
            _esc(f"{inspect.checked} / {len(inspect.missing)} / {len(inspect.modified)}"),
        ],
    ]
    found = _texture(Path(descriptor_path).parent, doc, kind="qa", allow_outside=allow_outside)
    if found:
        _, arr, names = found
        if "fit_residual" in names:
            r = arr[..., names.index("fit_residual")].astype(np.float64).ravel()
            r = r[np.isfinite(r)]
            if r.size:
                rows.append(
                    [
                        "fit residual (relative RMS): median / 95th percentile / max",
                        _esc(f"{np.median(r):.4f} / {np.percentile(r, 95):.4f} / {r.max():.4f}"),
                    ]
                )
    return rows


def _check_figure(path) -> Path:
    """Check an extra figure to embed: an existing regular file starting with the PNG signature."""
    p = Path(path)
    if not p.is_file():
        raise DataError(f"figure {p} does not exist or is not a regular file")
    check_file_size(p, "figure")
    try:
        with open(p, "rb") as fh:
            head = fh.read(len(PNG_SIGNATURE))
    except OSError as exc:
        raise DataError(f"figure {p} cannot be read: {exc.strerror or exc}") from None
    if head != PNG_SIGNATURE:
        raise DataError(f"figure {p} is not a PNG file (it does not start with the PNG signature)")
    return p


def _plot_label(text: str) -> str:
    """Text for a matplotlib label: a '$' would start mathtext, which may not parse; show it literally."""
    return text.replace("$", r"\$")


def _validation_section(validation: dict, tmp: Path) -> str:
    parts = []
    verdict = "PASS" if validation.get("passed") else "FAIL"
    cls = "pass" if validation.get("passed") else "fail"
    mode = "quick" if validation.get("quick") else "full"
    parts.append(
        f'<p>Validation against the spectral path tracer ({mode} run): <span class="{cls}">{verdict}</span>'
        f" in {validation.get('seconds', 0):.0f} s. A row fails when |difference| exceeds 3 combined "
        f"standard errors plus the stated allowance {_esc(validation.get('allowances', {}))}.</p>"
    )
    comps = validation.get("comparisons", [])
    drawn = [
        {
            **c,
            "name": _plot_label(c["name"]),
            "rows": [{**r, "label": _plot_label(r["label"])} for r in c["rows"]],
        }
        for c in comps
        if c["rows"]
    ]
    if drawn:
        fig = plots.plot_validation(tmp / "validation.png", drawn)
        parts.append(_figure(fig, "difference per case with its bound (green band)"))
    for comp in comps:
        cls = "pass" if comp["passed"] else "fail"
        parts.append(
            f"<h3>{_esc(comp['title'])} <span class='{cls}'>{'PASS' if comp['passed'] else 'FAIL'}</span>"
            f"</h3><p class='note'>tested: {_esc(comp['tested_label'])}; reference: "
            f"{_esc(comp['reference_label'])}</p>"
        )
        rows = [
            [
                _esc(r["label"]),
                f"{r['tested']['value']:.5f} ± {r['tested']['stderr']:.5f}",
                f"{r['reference']['value']:.5f} ± {r['reference']['stderr']:.5f}",
                f"{r['difference']:+.5f}",
                f"{r['combined_stderr']:.5f}",
                f"{r['bound']:.5f}",
                "<span class='pass'>yes</span>" if r["passed"] else "<span class='fail'>NO</span>",
                _esc(r["note"]),
            ]
            for r in comp["rows"]
        ]
        parts.append(
            _table(["case", "tested", "reference", "difference", "combined se", "bound", "ok", "note"], rows)
        )
    for name, why in validation.get("skipped", {}).items():
        parts.append(f"<p class='fail'>{_esc(name)}: not run ({_esc(why)})</p>")
    return "\n".join(parts)


def build_report(
    descriptor_path,
    out_path,
    *,
    validation=None,
    extra_figures=None,
    allow_outside: bool = False,
    bake_validation=None,
) -> Path:
    """Write the HTML report of the baked material described by ``descriptor_path``.

    Parameters
    ----------
    descriptor_path : str or Path
        The material descriptor (``material.json``) of a bake.
    out_path : str or Path
        HTML file to write.
    validation : dict or str or Path, optional
        A ``matgen validate --json`` result (or its path) to include; without it the report says that no
        validation is attached. Checked by :func:`check_validation` (a file by :func:`load_validation`).
    extra_figures : list of (path, caption), optional
        Further PNG files to embed.
    allow_outside : bool
        Read texture files whose path leads outside the descriptor's folder (absolute, ``..`` or a symbolic
        link out of it); by default such a path is a :class:`~matgen.errors.PathError`.
    bake_validation : dict, optional
        The validation of this bake through its files (``matgen.preview.roundtrip.BakeValidation.to_dict``).

    Returns
    -------
    Path
        The file written.

    Raises
    ------
    MatgenError
        A descriptor, texture, validation file or figure that cannot be used, naming the file; nothing is
        written then.

    """
    from matgen.export.descriptor import inspect_descriptor
    from matgen.fsutil import atomic_path

    descriptor_path = Path(descriptor_path)
    figures = [(_check_figure(p), caption) for p, caption in extra_figures or []]
    if isinstance(validation, (str, Path)):
        validation = load_validation(validation)
    elif validation is not None:
        validation = check_validation(validation)
    inspect = inspect_descriptor(descriptor_path)
    doc = inspect.doc
    body = [
        f"<h1>matgen material report: {_esc(doc['name'])}</h1>",
        f"<p class='note'>{_esc(IMAGERY_ONLY[0].upper() + IMAGERY_ONLY[1:])} "
        f"Report written by matgen {_esc(__version__)}.</p>",
    ]
    if any(t.get("kind") == "pass" for t in doc.get("textures", [])):
        body.append(
            f"<p class='note'>UV and near-infrared passes: {_esc(PASS_PHYSICS)} {_esc(REAL_SOURCES)}</p>"
        )
    with tempfile.TemporaryDirectory(prefix="matgen-report-") as tmpdir:
        tmp = Path(tmpdir)
        # inputs
        cfg = doc.get("provenance", {}).get("config", {})
        body.append("<h2>Inputs</h2>")
        rows = []
        for name, src in (cfg.get("parameters") or {}).items():
            rows.append([f"<code>{_esc(name)}</code>", _esc(json.dumps(src, sort_keys=True))])
        body.append(
            _table(["parameter", "source (map / value, encoding, range)"], rows)
            if rows
            else "<p class='note'>The descriptor records no parameter sources.</p>"
        )
        units = doc["units"]
        sb = doc["bands"]["spectral_stacks"]["centre_nm"]
        body.append(
            _table(
                ["setting", "value"],
                [
                    ["working space / illuminant", _esc(f"{doc['working_space']} / {doc['illuminant']}")],
                    ["metres per scene unit", _esc(units["metres_per_scene_unit"])],
                    ["spectral-stack bands (nm)", _esc(f"{len(sb)} bands, {sb[0]:g}-{sb[-1]:g} nm")],
                    ["UDIM tiles", _esc(doc["udim_tiles"] or "single texture")],
                    ["renderer targets", _esc(", ".join(doc.get("targets", {})) or "none")],
                ],
            )
        )
        # provenance
        prov = doc["provenance"]
        body.append("<h2>Provenance</h2>")
        body.append(
            _table(
                ["item", "value"],
                [
                    ["matgen version of the bake", _esc(prov.get("matgen_version"))],
                    ["table", _esc(prov.get("table", ""))],
                    ["table SHA-256", f"<code>{_esc(prov.get('table_sha256'))}</code>"],
                    ["config SHA-256", f"<code>{_esc(prov.get('config_sha256'))}</code>"],
                    [
                        "table manifest",
                        f"<code>{_esc(json.dumps(prov.get('table_manifest', {}), sort_keys=True)[:1500])}"
                        "</code>",
                    ],
                ],
            )
        )
        tex_rows = [
            [
                _esc(t["key"]),
                _esc(t["kind"]),
                _esc(t["path"]),
                _esc(f"{t['width']}x{t['height']}"),
                _esc(len(t["channels"])),
                _esc(t["unit"]),
                f"<code>{_esc(t['sha256'][:16])}</code>",
            ]
            for t in doc["textures"]
        ]
        body.append(
            _table(["texture", "kind", "path", "size", "channels", "unit", "SHA-256 (first 16)"], tex_rows)
        )
        # previews
        body.append("<h2>Previews</h2>")
        panels = material_panels(descriptor_path, doc, allow_outside=allow_outside)
        if panels:
            sheet = plots.plot_contact_sheet(tmp / "sheet.png", panels, title=f"{doc['name']}: baked maps")
            body.append(
                _figure(sheet, "contact sheet of the baked maps; scalar maps with colour bars and units")
            )
        spectra = texel_spectra(descriptor_path, doc, allow_outside=allow_outside)
        if spectra:
            bands, curves = spectra
            fig = plots.plot_reflectance_spectra(
                tmp / "spectra.png", bands, curves, title="baked albedo A at three texels"
            )
            body.append(_figure(fig, "reflectance spectra of the baked spectral stack at three texels"))
            body.append(_patch_section(descriptor_path, doc, bands, curves, tmp, allow_outside))
        else:
            body.append(
                "<p class='note'>No spectral albedo stack in this bake: spectra and patch preview "
                "left out.</p>"
            )
        for path, caption in figures:
            body.append(_figure(path, caption))
        # QA
        body.append("<h2>QA</h2>")
        body.append(_table(["check", "result"], _qa_rows(descriptor_path, doc, inspect, allow_outside)))
        for p in inspect.missing:
            body.append(f"<p class='fail'>missing file: {_esc(p)}</p>")
        for p in inspect.modified:
            body.append(f"<p class='fail'>file does not match its checksum: {_esc(p)}</p>")
        body.append("<h2>Validation</h2>")
        if bake_validation:
            body.append(_bake_validation_section(bake_validation))
        if validation:
            body.append(_validation_section(validation, tmp))
        else:
            body.append(
                "<p class='note'>No validation results attached: run <code>matgen validate --json "
                "validation.json</code> and pass <code>--validation validation.json</code>.</p>"
            )
        page = (
            "<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
            f"<title>matgen report: {_esc(doc['name'])}</title><style>{_STYLE}</style></head>"
            f"<body>{''.join(body)}<script>{_SCRIPT}</script></body></html>\n"
        )
    out_path = Path(out_path)
    with atomic_path(out_path) as tmpfile:
        tmpfile.write_text(page, encoding="utf-8")
    return out_path


def _bake_validation_section(v: dict) -> str:
    """Build the section of this bake read back through its files (per target and texel)."""
    rows = []
    for c in v.get("checks", []):
        err = np.abs(np.asarray(c["relative_error"], dtype=np.float64))
        de = "" if c.get("de2000") is None else f"{c['de2000']:.2f}"
        rows.append(
            [
                c["target"],
                c["texel"],
                f"{np.median(err):.2%}",
                f"{np.max(err):.2%}",
                de,
                "PASS" if c["passed"] else "FAIL",
            ]
        )
    verdict = "PASS" if v.get("passed") else "FAIL"
    head = (
        f"<p class='{'pass' if v.get('passed') else 'fail'}'>This bake through its files: {verdict} "
        f"({_esc(v.get('mode'))}, {_esc(v.get('renderer'))}, {float(v.get('seconds', 0)):.0f} s). Each "
        "texel's maps read as stored, each target's medium rebuilt by its consumer's remap, its deep slab "
        "solved under the exported index and compared with fresh layered transport of the texel's pigments; "
        "a check fails beyond 3 combined relative standard errors plus the stated allowance (2.5 % per band, "
        "2 % per channel, dE2000 1.0).</p>"
    )
    return head + _table(
        ["target", "texel", "median |rel. error|", "worst |rel. error|", "dE2000", "verdict"], rows
    )


def _patch_section(descriptor_path, doc, bands, curves, tmp: Path, allow_outside: bool = False) -> str:
    """Build the patch preview of the median texel from the baked spectral stacks (or a note why not).

    Baked stacks carry A and d (or the mean free path) but not the full effective medium, so this preview is
    always the labelled built-in approximation; ``matgen preview`` renders with the path tracer.
    """
    from matgen.preview.render import PatchMedium, patch_preview

    folder = Path(descriptor_path).parent
    label = next((k for k in curves if k.startswith("median")), next(iter(curves)))
    a = curves[label]
    d_found = _texture(
        folder, doc, quantity="shape_distance_mm", kind="spectral", allow_outside=allow_outside
    )
    l_found = _texture(
        folder, doc, quantity="mean_free_path_mm", kind="spectral", allow_outside=allow_outside
    )
    if d_found is None and l_found is None:
        return (
            "<p class='note'>Patch preview left out: the bake wrote neither shape_distance_mm nor "
            "mean_free_path_mm spectral stacks.</p>"
        )
    _, arr_a, _ = _texture(
        folder, doc, quantity="albedo_multiple", kind="spectral", allow_outside=allow_outside
    )
    flat_a = arr_a.reshape(-1, arr_a.shape[2]).astype(np.float64)
    i = int(np.argsort(flat_a.mean(axis=1), kind="stable")[flat_a.shape[0] // 2])
    if d_found is not None:
        d = d_found[1].reshape(-1, d_found[1].shape[2])[i].astype(np.float64)
        note = "shape distance d from the baked stack"
    else:
        from matgen.fit.models import shape_scaling

        mfp = l_found[1].reshape(-1, l_found[1].shape[2])[i].astype(np.float64)
        d = mfp / shape_scaling(np.clip(a, 1e-4, 0.9999))
        note = "shape distance d = mean free path / s(A) (Christensen-Burley mean-free-path scaling)"
    nan = np.full(len(bands), np.nan)
    medium = PatchMedium(bands, np.asarray(a, np.float64), d, nan, nan, nan, 1.4, label)
    try:
        path, used = patch_preview(
            tmp / "patch.png",
            medium,
            method="builtin",
            working_space=doc.get("working_space", "ACEScg"),
            illuminant=doc.get("illuminant", "D65"),
        )
    except (MatgenError, ImageError) as exc:
        return f"<p class='note'>Patch preview failed: {_esc(exc)}</p>"
    return _figure(path, f"flat patch under a small light, median texel, {used} method ({note}).")
