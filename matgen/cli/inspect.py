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
    p.set_defaults(func=run)


def run(args) -> int:
    """Run ``matgen inspect``; 0 when every file matches, 1 otherwise."""
    rep = inspect_descriptor(args.descriptor)
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
