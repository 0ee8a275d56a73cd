"""``matgen preview``: PNG previews of presets, a baked material or a table slice."""

from __future__ import annotations

from matgen.cli import add_command


def register(sub):
    """Add the ``preview`` subcommand."""
    p = add_command(
        sub,
        "preview",
        "Write preview images: spectra (300-1000 nm, UV / visible / IR shaded), radial profiles with fits, "
        "a flat patch under a small light (visible, UV 365 nm, IR 850 nm), baked-map contact sheets, "
        "table slices",
        "matgen preview --preset cheek palm --out previews\n"
        "matgen preview --descriptor lowtide/bake/material.json --out previews\n"
        "matgen preview --table table.npz --slice melanin_fraction blood_fraction --out previews",
    )
    p.add_argument("--out", required=True, help="folder to write the PNG files into")
    p.add_argument(
        "--preset",
        nargs="+",
        default=[],
        metavar="NAME",
        help="skin presets to run through matgen's pipeline (spectra, profiles, patch)",
    )
    p.add_argument(
        "--descriptor", help="material descriptor (material.json) of a bake: contact sheet, texel spectra"
    )
    p.add_argument(
        "--config",
        help="material config of the bake: the pass previews re-read its curves and check their SHA-256",
    )
    p.add_argument(
        "--textured",
        action="store_true",
        help="also render the bake as a textured patch in Mitsuba 3 (matgen render; into <out>/render)",
    )
    p.add_argument("--table", help="table file (.npz) for a heat-map slice")
    p.add_argument("--slice", nargs=2, metavar=("X_AXIS", "Y_AXIS"), help="two table axes of the slice")
    p.add_argument("--quantity", default="albedo_multiple", help="table quantity of the slice")
    p.add_argument("--band-nm", type=float, default=550.0, help="band (nm) of a spectral quantity's slice")
    p.add_argument(
        "--method",
        choices=("auto", "tracer", "builtin"),
        default="auto",
        help="patch preview: Mitsuba 3 path tracer, or the labelled built-in approximation",
    )
    p.add_argument("--bands", default=None, help="bands of the preset previews (default 300:1000:20:10)")
    p.add_argument("--photons", type=int, default=20_000, help="photons per band of the preset previews")
    p.add_argument("--seed", type=int, default=0, help="transport seed")
    p.set_defaults(func=run)


def run(args) -> int:
    """Run ``matgen preview``."""
    from matgen.preview.gallery import write_previews
    from matgen.spectra.bands import BandSet

    table = None
    if args.table:
        from matgen.tables.store import Table

        table = Table.load(args.table)
    bands = BandSet.parse(args.bands) if args.bands else None
    written = write_previews(
        args.out,
        presets=args.preset,
        descriptor=args.descriptor,
        table=table,
        slice_axes=args.slice,
        quantity=args.quantity,
        band_nm=args.band_nm,
        method=args.method,
        bands=bands,
        photons=args.photons,
        seed=args.seed,
        config_path=args.config,
        textured=args.textured,
        progress=lambda m: print(m, flush=True),
    )
    for name, path in written.items():
        print(f"{name}: {path}")
    return 0
