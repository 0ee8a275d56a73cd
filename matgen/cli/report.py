"""``matgen report``: a self-contained HTML report of one baked material."""

from __future__ import annotations

from pathlib import Path

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
        "--allow-outside",
        action="store_true",
        help="read textures whose path leads outside the descriptor's folder (absolute, '..' or a symbolic "
        "link out of it); refused by default",
    )
    p.set_defaults(func=run)


def run(args) -> int:
    """Run ``matgen report``."""
    from matgen.preview.report import build_report

    out = Path(args.out) if args.out else Path(args.descriptor).parent / "report.html"
    figures = [(f, Path(f).name) for f in args.figure]
    path = build_report(
        args.descriptor,
        out,
        validation=args.validation,
        extra_figures=figures,
        allow_outside=args.allow_outside,
    )
    print(f"report: {path}")
    return 0
