"""Reading the results of ``matgen validate --json`` for the material report: checked before they are shown.

The file is a JSON object written by :meth:`matgen.preview.validate.ValidationRun.to_dict`. A report may be
handed any file, so it is read through the size-limited text reader and checked field by field; a file that
is not such a result ends in one :class:`~matgen.errors.DataError` naming the file and the field (units:
seconds, absolute reflectance).
"""

from __future__ import annotations

import json
from pathlib import Path

from matgen.errors import DataError
from matgen.limits import read_text_limited

#: Most comparisons, and rows per comparison, a validation file may hold (``matgen validate`` writes 4 and
#: fewer than 40); more is not a validation result and would only make the report's figure unbounded.
MAX_VALIDATION_COMPARISONS = 64
MAX_VALIDATION_ROWS = 1000
#: Largest |difference| or bound (absolute reflectance) a validation row may carry to be plotted; reflectances
#: lie in [0, 1], so anything beyond is not a result (and overflows the plot's axis transforms).
MAX_VALIDATION_MAGNITUDE = 1.0e6


def _is_number(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


class _Fields:
    """Type checks of one JSON object of a validation file, with messages naming the file and the field."""

    def __init__(self, where: str):
        self.where = where

    def fail(self, field: str, want: str, got) -> None:
        shown = json.dumps(got, default=str)
        shown = shown if len(shown) <= 60 else shown[:57] + "..."
        raise DataError(f"validation results {self.where}: field '{field}' is {shown}; expected {want}")

    def obj(self, doc: dict, field: str, key: str, want: str, test, default=None, required=True):
        if key not in doc:
            if required:
                raise DataError(f"validation results {self.where}: field '{field}{key}' is missing ({want})")
            return default
        if not test(doc[key]):
            self.fail(field + key, want, doc[key])
        return doc[key]


def check_validation(doc, where: str = "(in memory)") -> dict:
    """Check that ``doc`` is a ``matgen validate --json`` result the report can show.

    Expected (all keys optional at the top, required inside a comparison): ``passed``, ``quick`` (bool),
    ``seconds`` (number >= 0), ``allowances`` (object), ``skipped`` (object of strings), ``comparisons``: at
    most :data:`MAX_VALIDATION_COMPARISONS` objects with ``name``, ``title``, ``tested_label``,
    ``reference_label`` (strings), ``passed`` (bool), ``max_abs_difference`` (number) and ``rows``: at most
    :data:`MAX_VALIDATION_ROWS` objects with ``label``, ``note`` (strings), ``tested`` and ``reference``
    (objects of numbers ``value``, ``stderr``), ``difference`` and ``bound`` (NaN or |x| <=
    :data:`MAX_VALIDATION_MAGNITUDE`, absolute reflectance), ``combined_stderr`` (number), ``passed`` (bool).

    Parameters
    ----------
    doc : object
        The parsed JSON.
    where : str
        The file, for messages.

    Returns
    -------
    dict
        ``doc`` itself.

    Raises
    ------
    DataError
        Naming the file and the first field that is missing or of the wrong type or range.

    """
    f = _Fields(where)
    if not isinstance(doc, dict):
        raise DataError(
            f"validation results {where} must be a JSON object (as 'matgen validate --json' writes), "
            f"not {type(doc).__name__}"
        )
    is_bool = lambda v: isinstance(v, bool)  # noqa: E731
    is_str = lambda v: isinstance(v, str)  # noqa: E731
    f.obj(doc, "", "passed", "true or false", is_bool, required=False)
    f.obj(doc, "", "quick", "true or false", is_bool, required=False)
    f.obj(doc, "", "seconds", "a number of seconds >= 0", lambda v: _is_number(v) and v >= 0, required=False)
    f.obj(doc, "", "allowances", "an object", lambda v: isinstance(v, dict), required=False)
    skipped = f.obj(doc, "", "skipped", "an object", lambda v: isinstance(v, dict), {}, required=False)
    for name, why in skipped.items():
        if not is_str(why):
            f.fail(f"skipped.{name}", "a string (why it was not run)", why)
    comps = f.obj(
        doc,
        "",
        "comparisons",
        f"a list of at most {MAX_VALIDATION_COMPARISONS} comparisons",
        lambda v: isinstance(v, list) and len(v) <= MAX_VALIDATION_COMPARISONS,
        [],
        required=False,
    )
    plotted = lambda v: _is_number(v) and (v != v or abs(v) <= MAX_VALIDATION_MAGNITUDE)  # noqa: E731
    for i, comp in enumerate(comps):
        at = f"comparisons[{i}]."
        if not isinstance(comp, dict):
            f.fail(at[:-1], "an object", comp)
        for key in ("name", "title", "tested_label", "reference_label"):
            f.obj(comp, at, key, "a string", is_str)
        f.obj(comp, at, "passed", "true or false", is_bool)
        f.obj(comp, at, "max_abs_difference", "a number", _is_number)
        rows = f.obj(
            comp,
            at,
            "rows",
            f"a list of at most {MAX_VALIDATION_ROWS} rows",
            lambda v: isinstance(v, list) and len(v) <= MAX_VALIDATION_ROWS,
        )
        for j, row in enumerate(rows):
            rat = f"{at}rows[{j}]."
            if not isinstance(row, dict):
                f.fail(rat[:-1], "an object", row)
            for key in ("label", "note"):
                f.obj(row, rat, key, "a string", is_str)
            for side in ("tested", "reference"):
                est = f.obj(
                    row, rat, side, "an object with 'value' and 'stderr'", lambda v: isinstance(v, dict)
                )
                for key in ("value", "stderr"):
                    f.obj(est, f"{rat}{side}.", key, "a number", _is_number)
            for key in ("difference", "bound"):
                f.obj(row, rat, key, f"NaN or a number within +-{MAX_VALIDATION_MAGNITUDE:g}", plotted)
            f.obj(row, rat, "combined_stderr", "a number", _is_number)
            f.obj(row, rat, "passed", "true or false", is_bool)
    return doc


def load_validation(path) -> dict:
    """Read and check a ``matgen validate --json`` file (size-limited, UTF-8 JSON, :func:`check_validation`).

    Raises
    ------
    ConfigError, LimitError, DataError
        Naming the file: unreadable or not UTF-8, larger than the ``text_bytes`` ceiling, not JSON, or not
        a validation result.

    """
    path = Path(path)
    text = read_text_limited(path, "validation results")
    try:
        doc = json.loads(text)
    except (ValueError, RecursionError) as exc:  # RecursionError: nesting too deep to parse
        raise DataError(f"validation results {path} are not valid JSON ({exc})") from None
    return check_validation(doc, str(path))
