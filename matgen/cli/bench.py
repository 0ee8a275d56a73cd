"""``matgen bench``: benchmarks of each stage, reported as ratios measured side by side in one run."""

from __future__ import annotations

import importlib

from matgen.cli import add_command
from matgen.errors import MatgenError

#: bench name -> module providing ``add_arguments(parser)`` and ``run(args) -> int``.
BENCHES = {
    "transport": "matgen.transport.bench",
    "tables": "matgen.tables.bench",
    "bake": "matgen.bake.bench",
    "estimate": "matgen.estimate.bench",
}


def register(sub):
    """Add the ``bench`` subcommand to the subparsers ``sub``."""
    p = add_command(
        sub,
        "bench",
        "Run a benchmark (transport, tables, bake) and print throughput and ratios",
        "matgen bench transport --photons 200000",
    )
    bsub = p.add_subparsers(dest="bench", metavar="BENCH")
    for name, modname in BENCHES.items():
        try:
            module = importlib.import_module(modname)
        except ModuleNotFoundError as exc:
            if exc.name == modname:
                continue
            raise
        bp = add_command(bsub, name, module.__doc__.strip().splitlines()[0], module.EXAMPLE)
        module.add_arguments(bp)
        bp.set_defaults(func=module.run)
    p.set_defaults(func=_no_bench)


def _no_bench(args):
    raise MatgenError(f"name a benchmark: one of {', '.join(BENCHES)}")
