"""``matgen inspect DESCRIPTOR``: check a baked material's textures against their checksums; summarise."""

from __future__ import annotations

import json

from matgen.cli import add_command
from matgen.export.descriptor import inspect_descriptor, summary_lines


def register(sub):
    """Add ``matgen inspect`` to the subcommands."""
    p = add_command(
        sub,
        "inspect",
        "Check that every texture of a material descriptor exists and matches its SHA-256; print a summary",
        "matgen inspect lowtide/bake/material.json",
    )
    p.add_argument("descriptor", help="material descriptor (material.json) written by matgen bake")
    p.add_argument("--json", action="store_true", help="print the check result as JSON")
    p.add_argument(
        "--config",
        help="the material config the bake was made from: also check that the pass curves it names "
        "(lamp, filter, sensor, response CSVs) still match the SHA-256 recorded in the descriptor",
    )
    p.set_defaults(func=run)


def _curve_problems(descriptor_path, config_path) -> list:
    """Messages for pass curves that changed or vanished since the bake (``matgen.color.curves``)."""
    from pathlib import Path

    from matgen.color.curves import check_recorded_curves
    from matgen.export.descriptor import load_descriptor

    doc = load_descriptor(descriptor_path)
    records = [r for p in doc.get("passes", {}).values() for r in p.get("curves", [])]
    return check_recorded_curves(records, Path(config_path).resolve().parent)


def run(args) -> int:
    """Run ``matgen inspect``; 0 when every file matches, 1 otherwise."""
    rep = inspect_descriptor(args.descriptor)
    curves = _curve_problems(rep.path, args.config) if args.config else []
    rep.modified.extend(curves)  # a changed curve fails the check like a changed texture
    if args.json:
        print(
            json.dumps(
                {
                    "descriptor": str(rep.path),
                    "ok": rep.ok,
                    "checked": rep.checked,
                    "missing": rep.missing,
                    "modified": rep.modified,
                },
                indent=1,
            )
        )
    else:
        print("\n".join(summary_lines(rep)))
        print("OK: every file matches its checksum" if rep.ok else "FAILED: files missing or modified")
    return 0 if rep.ok else 1
