"""``matgen render DESCRIPTOR``: a textured spectral render of a bake (Mitsuba 3, one band per render)."""

from __future__ import annotations

from matgen.cli import add_command


def register(sub):
    """Add ``matgen render`` to the subcommands."""
    from matgen.preview import textured as tx

    p = add_command(
        sub,
        "render",
        "Render a baked material as a textured flat patch in Mitsuba 3 (visible bands, UV and IR pass bands)",
        "matgen render lowtide/bake/material.json --out lowtide/render\n"
        "matgen render lowtide/bake/material.json --out hi --pixels 64 --spp 256 --band 550",
        description=(
            "Render a flat patch of the baked skin: a Mitsuba 3 heterogeneous medium whose grids are the "
            "baked spectral stacks (single-scattering albedo, 1 / mean free path), one narrow band per "
            "render (scalar_spectral, CPU), under a small point light. Writes visible.png, one PNG per pass "
            "band the stacks hold, render.json, and the scene files of every band (scenes/<band>nm/) to "
            'render again with more samples. Needs Mitsuba 3 (pip install "matgen[validate]"). '
            "Fluorescence is not modelled."
        ),
    )
    p.add_argument("descriptor", help="material descriptor (material.json) written by matgen bake")
    p.add_argument("--out", required=True, help="folder for the images, render.json and scene files")
    p.add_argument(
        "--band",
        type=float,
        action="append",
        metavar="NM",
        help="render only these band centres (nm; repeatable) instead of the visible and pass views",
    )
    p.add_argument(
        "--patch-mm", type=float, default=tx.PATCH_MM, help="side of the patch the texture spans, mm"
    )
    p.add_argument("--pixels", type=int, default=tx.PIXELS, help="render pixels per side")
    p.add_argument("--spp", type=int, default=tx.SPP, help="samples per pixel")
    p.add_argument(
        "--grid", type=int, default=tx.GRID, help="grid texels per side the stacks are averaged to"
    )
    p.add_argument(
        "--boundary",
        choices=tx.BOUNDARIES,
        default="null",
        help="surface: index-matched (fast) or GGX rough dielectric of the material's index (slow)",
    )
    p.add_argument("--tile", type=int, default=None, help="UDIM tile to render (default: the first)")
    p.add_argument("--seed", type=int, default=0, help="sampler seed")
    p.set_defaults(func=run)


def run(args) -> int:
    """Run ``matgen render``; prints the files written."""
    from matgen.preview import textured as tx

    opts = {
        "patch_mm": args.patch_mm,
        "pixels": args.pixels,
        "spp": args.spp,
        "grid": args.grid,
        "boundary": args.boundary,
        "tile": args.tile,
        "seed": args.seed,
    }
    if args.band:
        written = tx.render_views(
            args.descriptor,
            args.out,
            visible_nm=(),
            passes={f"band_{b:g}nm": b for b in args.band},
            strict=True,
            **opts,
        )
    else:
        written = tx.render_views(args.descriptor, args.out, **opts)
    for name, path in written.items():
        print(f"{name}: {path}")
    return 0
