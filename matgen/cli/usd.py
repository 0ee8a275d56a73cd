"""``matgen usd DESCRIPTOR``: write ``material.usda`` (UsdShade OpenPBR + UsdPreviewSurface) for a bake."""

from __future__ import annotations

from matgen.cli import add_command


def register(sub):
    """Add ``matgen usd`` to the subcommands."""
    p = add_command(
        sub,
        "usd",
        "Write a USD material (material.usda) beside a baked material descriptor",
        "matgen usd lowtide/bake/material.json",
        description=(
            "Write material.usda beside a baked material descriptor: a UsdShade material whose mtlx "
            "surface is "
            "the MaterialX OpenPBR shader reading the baked textures (UDIM sets as <UDIM>), a "
            "UsdPreviewSurface fallback for viewers, and the spectral stacks and pass maps as asset "
            'attributes. Needs usd-core (pip install "matgen[usd]").'
        ),
    )
    p.add_argument("descriptor", help="material descriptor (material.json) written by matgen bake")
    p.set_defaults(func=run)


def run(args) -> int:
    """Run ``matgen usd``; prints the path written."""
    from matgen.export.usd import write_usd

    print(write_usd(args.descriptor))
    return 0
