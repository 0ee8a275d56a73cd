"""The ``matgen`` command line: the only place that wires the pipeline stages together for a person.

Each subcommand lives in a module of this package exposing ``register(subparsers)``, which adds its
parser (with a description, an example in its epilog, and ``func`` set to the function that runs it).

Exit statuses, for people and farm schedulers alike (:data:`EXIT_STATUSES`): 0 done; 1 a check asked for
failed (QA thresholds, ``table status`` with tasks not done); 2 refused (a
:class:`~matgen.errors.MatgenError`: bad input, a ceiling, an unwritable path), one line on standard error;
70 an internal error (a bug: one line, the traceback at ``--log-level debug``); 74 the operating system
failed a read or write (disk full, read-only file system, a folder removed under the run); 75 another live
process holds the lock of the folder, tile or task: retry later; 130 interrupted (SIGINT); 143 terminated
(SIGTERM, which takes the same path as SIGINT: workers stopped, what the run created removed). A closed
standard output (``matgen table status --json | head``) is not an error.
"""

from __future__ import annotations

import argparse
import errno
import importlib
import logging
import os
import signal
import sys

from matgen import __version__
from matgen.errors import LockError, MatgenError

#: Exit status -> meaning (documented in the README's farm section).
EXIT_STATUSES = {
    0: "done",
    1: "a check asked for failed",
    2: "refused: bad input, a ceiling, an unwritable path",
    70: "internal error",
    74: "the operating system failed a read or write",
    75: "busy: another live process holds the lock; retry later",
    130: "interrupted (SIGINT)",
    143: "terminated (SIGTERM)",
}
EXIT_BUSY = 75
EXIT_IOERR = 74
EXIT_SOFTWARE = 70

_log = logging.getLogger("matgen")


class Terminated(KeyboardInterrupt):
    """Raised in the main thread by SIGTERM, so that it unwinds exactly like Ctrl-C (SIGINT)."""


def _on_sigterm(signum, frame):
    signal.signal(signal.SIGTERM, signal.SIG_IGN)  # a second SIGTERM does not interrupt the clean-up
    raise Terminated()


def install_signal_handlers() -> None:
    """Make SIGTERM raise :class:`Terminated` (a KeyboardInterrupt) in the main thread."""
    with _suppress_value_error():
        signal.signal(signal.SIGTERM, _on_sigterm)


class _suppress_value_error:
    def __enter__(self):
        return self

    def __exit__(self, kind, exc, tb):
        return kind is ValueError  # not the main thread (an embedding program): leave signals alone


#: Subcommand modules, in the order ``matgen --help`` lists them.
COMMAND_MODULES = (
    "demo",
    "optics",
    "simulate",
    "fit",
    "table",
    "bake",
    "estimate",
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
    """Return the top-level parser with every available subcommand registered."""
    parser = argparse.ArgumentParser(
        prog="matgen",
        description=(
            "Skin subsurface-scattering parameters for renderers, from pigmentation, across UV, visible "
            "and near-infrared bands. Outputs are for imagery only: no basis for clinical, diagnostic, "
            "dosimetric or UV-exposure decisions, which belong to licensed practice under local regulations "
            "and codes."
        ),
        epilog="example:\n  matgen demo --out lowtide\n  matgen optics --preset cheek --plot cheek.png",
        formatter_class=HelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"matgen {__version__}")
    _add_log_options(parser, None)
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


def _add_log_options(parser, default) -> None:
    """``--log-level`` and ``--log-format`` on the top-level parser and (without defaults) on each command."""
    from matgen.cli.logs import FORMATS, LEVELS

    kw = {} if default is None else {"default": default}
    parser.add_argument(
        "--log-level", choices=LEVELS, help="messages shown on standard error (default: warning)", **kw
    )
    parser.add_argument(
        "--log-format", choices=FORMATS, help="text lines, or one JSON object per line (default: text)", **kw
    )


def add_command(sub, name: str, help_text: str, example: str, description: str | None = None):
    """Add a subcommand parser with the house formatter; ``example`` goes into its epilog."""
    p = sub.add_parser(
        name,
        help=help_text,
        description=description or help_text,
        epilog="example:\n  " + example.strip().replace("\n", "\n  "),
        formatter_class=HelpFormatter,
    )
    _add_log_options(p, argparse.SUPPRESS)  # also accepted after the command; the top level's otherwise
    return p


def print_json(doc) -> None:
    """Print a command's result as one strict JSON document on standard output (``--json``)."""
    from matgen.fsutil import strict_json

    print(strict_json(doc, "the command's JSON result", indent=1))


def warn(command: str, message: str) -> None:
    """Report a warning collected during a command through the log (level WARNING)."""
    _log.warning("%s", message)


def _say(command: str | None, text: str) -> None:
    """One line on standard error (through the log in JSON format, so a farm's collector sees one form)."""
    from matgen.cli.logs import log_format

    who = f"matgen {command}" if command else "matgen"
    if log_format() == "json":
        _log.error("%s", text)
    else:
        print(f"{who}: {text}", file=sys.stderr)


def _closed_stdout() -> int:
    """Treat a reader that closed standard output (``| head``) as done; silence the final flush."""
    with _suppress_os_error():
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    return 0


class _suppress_os_error:
    def __enter__(self):
        return self

    def __exit__(self, kind, exc, tb):
        return kind is not None and issubclass(kind, OSError)


def _os_error_line(exc: OSError) -> str:
    name = f" '{exc.filename}'" if getattr(exc, "filename", None) else ""
    code = errno.errorcode.get(exc.errno, "") if exc.errno else ""
    return f"error: {exc.strerror or exc}{name}" + (f" ({code})" if code else "")


def main(argv=None) -> int:
    """Entry point of the ``matgen`` console command; returns the exit status (:data:`EXIT_STATUSES`)."""
    install_signal_handlers()
    command = None
    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        command = args.command
        from matgen.cli import logs

        logs.configure(getattr(args, "log_level", None), getattr(args, "log_format", None), command)
        if not getattr(args, "func", None):
            parser.print_help()
            return 0 if args.command is None else 2
        rc = args.func(args)
        sys.stdout.flush()
    except BrokenPipeError:
        return _closed_stdout()
    except LockError as exc:
        _say(command, f"busy: {exc}")
        return EXIT_BUSY
    except MatgenError as exc:
        _say(command, f"error: {exc}")
        return 2
    except Terminated:
        _say(command, "terminated (SIGTERM); what this run created was removed")
        return 143
    except KeyboardInterrupt:
        _say(command, "interrupted")
        return 130
    except MemoryError:
        _say(command, "error: out of memory; lower the request or raise the memory of the job")
        return 2
    except OSError as exc:
        _say(command, _os_error_line(exc))
        return EXIT_IOERR
    except SystemExit:
        raise
    except Exception as exc:  # noqa: BLE001 - a bug: one line for the farm log, the traceback at debug level
        _log.debug("internal error", exc_info=True)
        _say(command, f"internal error: {type(exc).__name__}: {exc} (run with --log-level debug for details)")
        return EXIT_SOFTWARE
    return int(rc or 0)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
