"""``matgen report``: a self-contained HTML report of one baked material."""

from __future__ import annotations

from pathlib import Path

from matgen.cautions import print_caution
from matgen.cli import add_command


def register(sub):
    """Add the ``report`` subcommand."""
    p = add_command(
        sub,
        "report",
        "Write a self-contained HTML report of a baked material: inputs, provenance, previews, QA "
        "(out-of-range texels, fit residuals) and validation results",
        "matgen report lowtide/bake/material.json --out lowtide/report.html --validation validation.json",
    )
    p.add_argument("descriptor", metavar="DESCRIPTOR", help="material descriptor (material.json) of a bake")
    p.add_argument("--out", help="HTML file to write (default: report.html beside the descriptor)")
    p.add_argument("--validation", help="JSON written by 'matgen validate --json' to include")
    p.add_argument("--figure", nargs="+", default=[], metavar="PNG", help="further PNG figures to embed")
    p.add_argument(
        "--config",
        help="material config of the bake: the pass figures re-read its curves and check their SHA-256",
    )
    p.add_argument(
        "--textured",
        action="store_true",
        help="embed the textured spectral render of the bake (matgen render; needs Mitsuba 3)",
    )
    p.add_argument(
        "--allow-outside",
        action="store_true",
        help="read textures whose path leads outside the descriptor's folder (absolute, '..' or a symbolic "
        "link out of it); refused by default",
    )
    p.set_defaults(func=run)


def run(args) -> int:
    """Run ``matgen report``."""
    import tempfile

    from matgen.export.descriptor import load_descriptor
    from matgen.preview.passes import CAPTION, pass_preview
    from matgen.preview.report import build_report

    out = Path(args.out) if args.out else Path(args.descriptor).parent / "report.html"
    figures = [(f, Path(f).name) for f in args.figure]
    with tempfile.TemporaryDirectory(prefix="matgen-report-figures-") as tmp:
        for name in load_descriptor(args.descriptor).get("passes", {}):
            png = pass_preview(Path(tmp) / f"pass_{name}.png", args.descriptor, name, config_path=args.config)
            figures.append((png, f"pass '{name}': map on a 0-1 albedo scale and its curves. {CAPTION}"))
        if args.textured:
            from matgen.preview.textured import render_views

            for key, png in render_views(args.descriptor, Path(tmp) / "render").items():
                if png.suffix == ".png":
                    figures.append((png, f"textured spectral render ({key}), Mitsuba 3 (matgen render)"))
        path = build_report(
            args.descriptor,
            out,
            validation=args.validation,
            extra_figures=figures,
            allow_outside=args.allow_outside,
        )
    print(f"report: {path}")
    print_caution()
    return 0
