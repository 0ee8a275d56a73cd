"""``matgen validate``: matgen's transport and exported media against an independent spectral path tracer."""

from __future__ import annotations

import json

from matgen.cli import add_command


def register(sub):
    """Add the ``validate`` subcommand."""
    p = add_command(
        sub,
        "validate",
        "Compare matgen against Mitsuba 3 (harness vs adding-doubling, homogeneous media, layered skin, "
        "cost of collapsing layers); exit 1 when a comparison fails",
        "matgen validate --quick\nmatgen validate --only harness layered --json validation.json\n"
        "matgen validate --bake out/face --quick",
    )
    p.add_argument(
        "--bake",
        metavar="DIR",
        help="validate a bake folder through its files: read its maps as stored, rebuild each target's "
        "medium, solve its deep slab and compare with fresh layered transport of the texels' pigments",
    )
    p.add_argument(
        "--renderer",
        choices=("adding-doubling", "mitsuba"),
        default=None,
        help="deep-slab solver of --bake (default: mitsuba for a full run, adding-doubling with --quick)",
    )
    p.add_argument(
        "--table", metavar="PATH", help="with --bake: the table at hand (default: the shipped one)"
    )
    p.add_argument("--quick", action="store_true", help="fewer bands and paths (under 2 minutes on 2 cores)")
    p.add_argument(
        "--only",
        nargs="+",
        metavar="NAME",
        help="run only these comparisons: harness, homogeneous, layered, collapse",
    )
    p.add_argument("--preset", default="cheek", help="skin preset of the skin comparisons")
    p.add_argument("--seed", type=int, default=0, help="seed of matgen's transport and of the path tracer")
    p.add_argument("--json", metavar="PATH", help="also write the tables as JSON to PATH")
    p.set_defaults(func=run)


def run(args) -> int:
    """Run ``matgen validate``; exit 1 when a comparison fails or could not run."""
    from matgen.fsutil import atomic_path

    if args.bake:
        return _run_bake(args)
    from matgen.preview.validate import run_validation

    result = run_validation(
        quick=args.quick,
        seed=args.seed,
        only=args.only,
        preset_name=args.preset,
        progress=lambda text: print(text + "\n", flush=True),
    )
    print(result.format().split("\n\n")[-1] if result.comparisons else result.format())
    if args.json:
        with atomic_path(args.json) as tmp:
            tmp.write_text(json.dumps(result.to_dict(), indent=2))
    return 0 if result.passed and not result.skipped else 1


def _run_bake(args) -> int:
    """``matgen validate --bake DIR``: exit 0 when every target passes at every texel, 1 otherwise."""
    from matgen.fsutil import atomic_path
    from matgen.preview.roundtrip import validate_bake

    table = None
    if args.table:
        from matgen.tables.store import Table

        table = Table.load(args.table)
    renderer = args.renderer or ("adding-doubling" if args.quick else "mitsuba")
    result = validate_bake(
        args.bake,
        table=table,
        table_source=args.table,
        quick=args.quick,
        renderer=renderer,
        seed=args.seed,
        progress=lambda text: print(text, flush=True),
    )
    print(result.format())
    if args.json:
        with atomic_path(args.json) as tmp:
            tmp.write_text(json.dumps(result.to_dict(), indent=2))
    return 0 if result.passed else 1
