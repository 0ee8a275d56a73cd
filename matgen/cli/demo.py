"""``matgen demo``: the invented "Low Tide Lantern" scenario end to end, from procedural maps to previews."""

from __future__ import annotations

import time
import warnings
from pathlib import Path

import numpy as np

from matgen import limits
from matgen.bake.config import load_config
from matgen.cautions import print_caution
from matgen.cli import add_command, print_json, warn
from matgen.errors import ImageError, MatgenWarning, ParameterError, PathError
from matgen.export.exr import read_exr
from matgen.export.job import bake, load_table
from matgen.fsutil import atomic_path
from matgen.preview.gallery import descriptor_previews
from matgen.preview.report import build_report
from matgen.scenario import DEFAULT_SEED, write_scenario
from matgen.tables.store import Table, default_table_path

#: Percentile of each pass map shown as white in its preview (black is 0): like a camera exposed for the skin,
#: so a pass with little contrast looks even and one with much contrast shows it.
PASS_PREVIEW_WHITE_PERCENTILE = 99.0


def register(sub):
    """Add ``matgen demo`` to the subcommands."""
    p = add_command(
        sub,
        "demo",
        "Bake the invented 'Low Tide Lantern' pilot's face: maps, textures, passes, MaterialX, previews",
        "matgen demo --out lowtide",
        description=(
            "Generate the invented demo scenario's pigment maps (seeded freckles, wind-reddened cheeks, a "
            "pale scar), bake them with the shipped default table into spectral EXR stacks, ACEScg maps, a "
            "365 nm UV pass and an 850 nm IR pass, write the descriptor and MaterialX document, and write "
            "preview PNGs. "
            "The character and scenario are invented; outputs are for imagery only."
        ),
    )
    p.add_argument("--out", default="lowtide", help="output folder")
    p.add_argument("--size", type=int, default=512, help="map side in texels")
    p.add_argument("--seed", type=int, default=DEFAULT_SEED, help="seed of the procedural maps")
    p.add_argument("--jobs", type=int, default=None, help="lookup threads (default: all cores)")
    p.add_argument("--table", default=None, help="table file instead of the shipped default table")
    p.add_argument("--json", action="store_true", help="print the result as one JSON document")
    p.set_defaults(func=run)


def _png(path: Path, pixels: np.ndarray) -> None:
    """Write an 8-bit PNG (display-referred values in [0, 1]) atomically through OpenImageIO."""
    import OpenImageIO as oiio

    pixels = np.clip(np.asarray(pixels, dtype=np.float32), 0.0, 1.0)
    if pixels.ndim == 2:
        pixels = pixels[:, :, None]
    with atomic_path(path) as tmp:
        spec = oiio.ImageSpec(pixels.shape[1], pixels.shape[0], pixels.shape[2], oiio.UINT8)
        spec.attribute("oiio:ColorSpace", "sRGB")
        out = oiio.ImageOutput.create(str(tmp))
        if out is None or not out.open(str(tmp), spec) or not out.write_image(pixels):
            raise ImageError(f"cannot write preview {path}: {oiio.geterror()}")
        out.close()


def _srgb_from_working(rgb: np.ndarray, working_space: str) -> np.ndarray:
    """Working-space linear RGB -> sRGB display values (CAT02 to D65, sRGB transfer function)."""
    import colour

    return colour.RGB_to_RGB(
        rgb, working_space, "sRGB", chromatic_adaptation_transform="CAT02", apply_cctf_encoding=True
    )


def _scaled(values: np.ndarray) -> tuple:
    hi = float(np.percentile(values, PASS_PREVIEW_WHITE_PERCENTILE))
    hi = hi if hi > 0 else 1.0
    return values / hi, 0.0, hi


def _previews(out: Path, bake_dir: Path, config, table, maps) -> list:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    preview = out / "preview"
    preview.mkdir(parents=True, exist_ok=True)
    written = []
    rgb, _, _ = read_exr(bake_dir / "rgb" / "albedo_multiple.exr")
    srgb = _srgb_from_working(rgb.astype(np.float64), table.working_space)
    _png(preview / "swatch_srgb.png", srgb)
    written.append(preview / "swatch_srgb.png")
    scales = {}
    for name in ("uv365", "nir850"):
        v, _, _ = read_exr(bake_dir / "passes" / f"{name}.exr")
        s, lo, hi = _scaled(v[..., 0])
        scales[name] = (v[..., 0], lo, hi)
        _png(preview / f"{name}.png", s)
        written.append(preview / f"{name}.png")
    # the three marked texels: their parameters, looked up in the table over all its bands
    marked = maps["marked"]
    points = []
    for m in marked:
        row = []
        for ax in table.axes:
            src = config.parameter(ax.name)
            if src.value is not None:
                row.append(src.value)
            else:
                key = "melanin" if ax.name == "melanin_fraction" else "blood"
                row.append(float(src.decode(maps[key][m.y, m.x])))
        points.append(row)
    spectra, _ = table.lookup(np.array(points), ["albedo_multiple"])
    fig, axes = plt.subplots(1, 4, figsize=(16, 4.2))
    panels = [(srgb, "daylight (sRGB view of ACEScg albedo)", None)]
    for name, title in (("uv365", "365 nm inspection lamp"), ("nir850", "850 nm security camera")):
        v, lo, hi = scales[name]
        panels.append((v, f"{title}\n(black 0, white {hi:.3f})", (lo, hi)))
    for ax, (img, title, rng) in zip(axes[:3], panels, strict=True):
        if rng is None:
            ax.imshow(np.clip(img, 0, 1))
        else:
            ax.imshow(img, cmap="gray", vmin=rng[0], vmax=rng[1])
        for m, colour_name in zip(marked, ("tab:cyan", "tab:orange", "tab:green"), strict=True):
            ax.plot(m.x, m.y, marker="o", mfc="none", mec=colour_name, ms=10, mew=1.5)
        ax.set_title(title, fontsize=9)
        ax.set_axis_off()
    wl = table.bands.centre_nm
    for m, colour_name, s in zip(
        marked, ("tab:cyan", "tab:orange", "tab:green"), spectra["albedo_multiple"], strict=True
    ):
        axes[3].plot(wl, s, color=colour_name, label=f"{m.name} ({m.x}, {m.y})")
    for w in (365.0, 850.0):
        axes[3].axvline(w, color="0.7", lw=0.8, ls="--")
    axes[3].set_xlabel("wavelength (nm)")
    axes[3].set_ylabel("multiple-scattering albedo")
    axes[3].set_title("marked texels (table lookup)", fontsize=9)
    axes[3].legend(fontsize=8)
    fig.suptitle("Low Tide Lantern (invented scenario): ferry pilot's cheek", fontsize=10)
    fig.tight_layout()
    with atomic_path(preview / "overview.png") as tmp:
        fig.savefig(tmp, dpi=90, format="png")
    written.append(preview / "overview.png")
    fig2, ax2 = plt.subplots(figsize=(6, 4))
    for m, colour_name, s in zip(
        marked, ("tab:cyan", "tab:orange", "tab:green"), spectra["albedo_multiple"], strict=True
    ):
        ax2.plot(wl, s, color=colour_name, label=f"{m.name} texel ({m.x}, {m.y})")
    ax2.set_xlabel("wavelength (nm)")
    ax2.set_ylabel("multiple-scattering albedo (diffuse reflectance)")
    ax2.legend(fontsize=8)
    fig2.tight_layout()
    with atomic_path(preview / "spectra.png") as tmp:
        fig2.savefig(tmp, dpi=90, format="png")
    written.append(preview / "spectra.png")
    plt.close("all")
    return written


#: Smallest demo map side, texels (the procedural features need a few texels each).
MIN_DEMO_SIDE = 16


def _check_request(args, out: Path) -> None:
    """Refuse a map side outside MIN_DEMO_SIDE .. the ``demo_side`` ceiling and an --out that is a file."""
    ceiling = limits.get_limit("demo_side")
    if not MIN_DEMO_SIDE <= args.size <= ceiling:
        raise ParameterError(
            f"--size is {args.size}; allowed {MIN_DEMO_SIDE} .. {ceiling} texels "
            "(raise the ceiling with MATGEN_MAX_DEMO_SIDE)"
        )
    if args.jobs is not None and not 1 <= args.jobs <= 4096:
        raise ParameterError(f"--jobs is {args.jobs}; allowed 1 .. 4096 threads")
    if not 0 <= args.seed < 2**63:
        raise ParameterError(f"--seed is {args.seed}; allowed 0 .. 2^63 - 1")
    for path in (out, out / "inputs", out / "bake", out / "preview"):
        if path.exists() and not path.is_dir():
            raise PathError(f"--out: {path} exists and is not a folder")


def _estimate_back(out: Path, config, table, args) -> tuple:
    """Make the scenario's "scanned" albedo, estimate and re-bake it; return the preview figure."""
    from matgen.estimate.perceptual import delta_e2000, rgb_to_lab
    from matgen.estimate.run import CAUTION, EstimateRequest, estimate, plan_estimate
    from matgen.estimate.solver import _space_matrix
    from matgen.export.exr import write_exr
    from matgen.preview.estimate import estimate_sheet
    from matgen.scenario import scanned_albedo

    scan = scanned_albedo(read_exr(out / "bake" / "rgb" / "albedo_multiple.exr")[0], args.seed)
    (out / "scan").mkdir(parents=True, exist_ok=True)
    write_exr(
        out / "scan" / "albedo.exr",
        scan,
        ("R", "G", "B"),
        pixel_type="float",
        attributes={"oiio:ColorSpace": "lin_ap1_scene", "matgen:scenario": "Low Tide Lantern (invented)"},
    )
    held = {p.name: p.value for p in config.parameters if p.value is not None}
    req = EstimateRequest(albedo=out / "scan" / "albedo.exr", held=held, name="ferry_pilot_face_from_scan")
    plan = plan_estimate(req, table, args.table)
    est = estimate(plan, out / "estimate", jobs=args.jobs)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", MatgenWarning)
        rebake = bake(
            load_config(out / "estimate" / "material.toml"), out / "estimate" / "bake", jobs=args.jobs
        )
    again = read_exr(rebake.out_dir / "rgb" / "albedo_multiple.exr")[0]
    m = _space_matrix(table.working_space)
    de = delta_e2000(rgb_to_lab(scan.reshape(-1, 3), m), rgb_to_lab(again.reshape(-1, 3), m)).reshape(
        scan.shape[:2]
    )
    pigments = {a: read_exr(out / "estimate" / "maps" / f"{a}.exr")[0][..., 0] for a in plan.model.estimated}
    mask = read_exr(out / "estimate" / "qa" / "out_of_gamut.exr")[0][..., 0]
    sheet = estimate_sheet(
        out / "estimate" / "preview" / "estimate_sheet.png",
        scan,
        again,
        pigments,
        de,
        mask,
        table.working_space,
        "Low Tide Lantern (invented): scanned albedo estimated back",
    )
    res = est.summary["residual_de2000"]["in_gamut"]
    caption = (
        "Scanned albedo estimated back: the invented pilot's baked albedo with capture-like noise "
        f"(0.2 % + 0.0002 per channel), estimated "
        f"back ({', '.join(plan.model.estimated)} estimated; held {held}) and re-baked: CIEDE2000 scan vs "
        f"re-bake median {np.median(de):.3f}, p95 {np.percentile(de, 95):.3f}; estimate residual in gamut "
        f"median {res['p50']:.3f}, p95 {res['p95']:.3f}; "
        f"{100 * est.summary['out_of_gamut']['share']:.2f} % of texels out of gamut. {CAUTION}"
    )
    return sheet, caption


def run(args) -> int:
    """Run ``matgen demo``; returns the exit status."""
    t0 = time.perf_counter()
    out = Path(args.out)
    _check_request(args, out)
    inputs = out / "inputs"
    config_path, maps = write_scenario(inputs, size=args.size, seed=args.seed)
    config = load_config(config_path)
    if args.table:
        table, source = Table.load(args.table), args.table
    else:
        table, source = load_table(config), default_table_path()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", MatgenWarning)
        result = bake(config, out / "bake", table=table, table_source=source, jobs=args.jobs)
    seen = sorted({str(w.message) for w in caught})
    for msg in seen:
        warn("demo", msg)
    previews = _previews(out, out / "bake", config, table, maps)
    # contact sheet with colour bars and units
    sheets = descriptor_previews(out / "preview", result.descriptor)
    previews.extend(sheets.values())
    # the baked material itself, read back through its files (quick: three texels, adding-doubling)
    from matgen.preview.roundtrip import validate_bake

    check = validate_bake(out / "bake", table=table, table_source=source, quick=True, seed=args.seed)
    print(check.format())
    report = build_report(result.descriptor, out / "report.html", bake_validation=check.to_dict())

    est_figure = _estimate_back(out, config, table, args)
    report = build_report(result.descriptor, out / "report.html", extra_figures=[est_figure])
    dt = time.perf_counter() - t0
    if args.json:
        print_json(
            {
                "status": "done",
                "out": str(out),
                "size": int(args.size),
                "descriptor": str(result.descriptor),
                "files": [str(out / "bake" / f) for f in result.files],
                "previews": [str(p) for p in previews],
                "report": str(report),
                "seconds": round(dt, 3),
                "warnings": seen,
            }
        )
        return 0
    print(f"Low Tide Lantern demo (invented scenario): {args.size} x {args.size} texels baked in {dt:.1f} s")
    print(f"  pigment maps and material config: {inputs}")
    print(
        f"  spectral EXR stacks ({len(config.outputs.spectral)} quantities, "
        f"{config.outputs.spectral_bands} nm): {out / 'bake' / 'spectral'}"
    )
    print(f"  ACEScg maps: {out / 'bake' / 'rgb'}   OpenPBR maps: {out / 'bake' / 'openpbr'}")
    print(f"  UV 365 nm and IR 850 nm passes: {out / 'bake' / 'passes'}   QA map: {out / 'bake' / 'qa'}")
    print(f"  descriptor: {result.descriptor}   MaterialX: {out / 'bake' / 'material.mtlx'}")
    print(f"  previews: {', '.join(str(p) for p in previews)}")
    print(f"  scanned albedo estimated back (pigment maps, re-bake, preview): {out / 'estimate'}")
    print(f"  report (self-contained HTML): {report}")
    print(f"  check the textures: matgen inspect {result.descriptor}")
    print_caution()
    return 0
