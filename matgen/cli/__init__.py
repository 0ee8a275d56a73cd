"""The ``matgen`` command line: the only place that wires the pipeline stages together for a person.

Each subcommand lives in a module of this package exposing ``register(subparsers)``, which adds its
parser (with a description, an example in its epilog, and ``func`` set to the function that runs it).
A :class:`~matgen.errors.MatgenError` becomes one message on standard error and exit status 2.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from matgen import __version__
from matgen.errors import MatgenError

#: Subcommand modules, in the order ``matgen --help`` lists them.
COMMAND_MODULES = (
    "demo",
    "optics",
    "simulate",
    "fit",
    "table",
    "bake",
    "inspect",
    "usd",
    "validate",
    "preview",
    "render",
    "report",
    "bench",
)


class HelpFormatter(argparse.RawDescriptionHelpFormatter, argparse.ArgumentDefaultsHelpFormatter):
    """Keeps the examples in epilogs as written and shows defaults (once: not where the help names one)."""

    def _get_help_string(self, action):
        text = action.help or ""
        if "(default" in text.lower():
            return text
        return super()._get_help_string(action)


def build_parser() -> argparse.ArgumentParser:
    """The top-level parser with every available subcommand registered."""
    parser = argparse.ArgumentParser(
        prog="matgen",
        description=(
            "Skin subsurface-scattering parameters for renderers, from pigmentation, across UV, visible "
            "and near-infrared bands. Outputs are for imagery only: no basis for clinical, dosimetric or "
            "UV-exposure decisions."
        ),
        epilog="example:\n  matgen demo --out lowtide\n  matgen optics --preset cheek --plot cheek.png",
        formatter_class=HelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"matgen {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMAND_MODULES:
        try:
            module = importlib.import_module(f"matgen.cli.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"matgen.cli.{name}":
                continue  # command not present in this build
            raise
        module.register(sub)
    return parser


def add_command(sub, name: str, help_text: str, example: str, description: str | None = None):
    """Add a subcommand parser with the house formatter; ``example`` goes into its epilog."""
    return sub.add_parser(
        name,
        help=help_text,
        description=description or help_text,
        epilog="example:\n  " + example.strip().replace("\n", "\n  "),
        formatter_class=HelpFormatter,
    )


def main(argv=None) -> int:
    """Entry point of the ``matgen`` console command; returns the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 0 if args.command is None else 2
    try:
        rc = args.func(args)
    except MatgenError as exc:
        print(f"matgen {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"matgen {args.command}: interrupted", file=sys.stderr)
        return 130
    return int(rc or 0)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
