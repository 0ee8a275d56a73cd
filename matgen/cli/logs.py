"""Logging of the command line: levels, UTC timestamps, a text or a JSON-lines format; warnings through it.

``matgen --log-level debug|info|warning|error`` (environment ``MATGEN_LOG_LEVEL``) and ``--log-format
text|json`` (``MATGEN_LOG_FORMAT``) set what goes to standard error. Text lines read
``2026-12-04T21:30:00Z matgen WARNING message``; JSON lines are objects with ``time`` (ISO 8601, UTC),
``level``, ``logger``, ``command`` and ``message``, one per line, for a farm's log collector. matgen's
warnings (``warnings.warn``) become log records of level WARNING naming their class.
"""

from __future__ import annotations

import json
import logging
import os
import sys
import time
import warnings

LEVELS = ("debug", "info", "warning", "error")
FORMATS = ("text", "json")

#: The logger every matgen module logs through (children: ``matgen.bake``, ``matgen.tables``...).
LOGGER = logging.getLogger("matgen")


def _iso(t: float) -> str:
    return time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(t)) + f".{int(t % 1 * 1000):03d}Z"


class TextFormatter(logging.Formatter):
    """``<UTC time> matgen[ <command>] <LEVEL> <message>``."""

    def __init__(self, command: str | None):
        super().__init__()
        self.command = command

    def format(self, record):  # noqa: D102 - logging.Formatter API
        who = f"matgen {self.command}" if self.command else "matgen"
        return f"{_iso(record.created)} {who} {record.levelname} {record.getMessage()}"


class JsonFormatter(logging.Formatter):
    """One JSON object per record: time, level, logger, command, message (strict JSON)."""

    def __init__(self, command: str | None):
        super().__init__()
        self.command = command

    def format(self, record):  # noqa: D102 - logging.Formatter API
        doc = {
            "time": _iso(record.created),
            "level": record.levelname.lower(),
            "logger": record.name,
            "command": self.command,
            "pid": record.process,
            "message": record.getMessage(),
        }
        if record.exc_info and LOGGER.isEnabledFor(logging.DEBUG):
            doc["traceback"] = self.formatException(record.exc_info)
        return json.dumps(doc, default=str)


def _showwarning(message, category, filename, lineno, file=None, line=None):
    LOGGER.warning("%s: %s", category.__name__, message)


def configure(level: str | None = None, fmt: str | None = None, command: str | None = None) -> None:
    """Send matgen's log records and warnings to standard error at ``level`` in format ``fmt``.

    Parameters
    ----------
    level : str, optional
        One of :data:`LEVELS`; default ``MATGEN_LOG_LEVEL`` or ``warning``.
    fmt : str, optional
        ``text`` or ``json``; default ``MATGEN_LOG_FORMAT`` or ``text``.
    command : str, optional
        The subcommand, named in every record.

    """
    level = (level or os.environ.get("MATGEN_LOG_LEVEL") or "warning").lower()
    fmt = (fmt or os.environ.get("MATGEN_LOG_FORMAT") or "text").lower()
    if level not in LEVELS:
        level = "warning"
    if fmt not in FORMATS:
        fmt = "text"
    for h in list(LOGGER.handlers):
        if getattr(h, "_matgen_cli", False):
            LOGGER.removeHandler(h)
    handler = logging.StreamHandler(sys.stderr)
    handler._matgen_cli = True
    handler.setFormatter(JsonFormatter(command) if fmt == "json" else TextFormatter(command))
    LOGGER.addHandler(handler)
    LOGGER.setLevel(level.upper())
    LOGGER.propagate = False
    warnings.showwarning = _showwarning


def log_format() -> str:
    """Return the format of the configured handler (``text`` or ``json``)."""
    for h in LOGGER.handlers:
        if getattr(h, "_matgen_cli", False):
            return "json" if isinstance(h.formatter, JsonFormatter) else "text"
    return "text"
