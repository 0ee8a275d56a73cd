"""Readable material-config errors: name the key, say what is allowed, suggest the nearest valid key.

jsonschema's own texts ("is not valid under any of the given schemas", "Additional properties are not
allowed") say neither which key is wrong nor what was meant. :func:`schema_error_message` turns the first
schema violation into one line in the style of the table spec's errors (``matgen.tables.spec``): the field's
dotted path, the offending key or value, the allowed keys or values, and ``did you mean '...'?`` from
:func:`difflib.get_close_matches` where a close match exists.
"""

from __future__ import annotations

import difflib

#: Similarity cut-off of the suggestions (difflib ratio).
SUGGEST_CUTOFF = 0.6


def suggest(word: str, choices) -> str:
    """Return ``"; did you mean 'x'?"`` for the closest of ``choices``, or ``""`` when none is close."""
    near = difflib.get_close_matches(str(word), [str(c) for c in choices], n=1, cutoff=SUGGEST_CUTOFF)
    return f"; did you mean '{near[0]}'?" if near else ""


def _loc(path) -> str:
    return ".".join(str(p) for p in path) or "(top level)"


def _unknown_keys(e, where: str) -> str:
    allowed = sorted(e.schema.get("properties", {}))
    extra = sorted(k for k in e.instance if k not in allowed)
    key = extra[0] if extra else "?"
    field = _loc(e.absolute_path)  # the table holding the key
    return (
        f"{where}: field '{field}': unknown key '{key}'{suggest(key, allowed)} "
        f"(allowed here: {', '.join(allowed)})"
    )


def _one_of(e, where: str) -> str:
    """Explain a parameter entry (map or value form) or pass entry (name or table) by the form meant."""
    branches = e.schema.get("oneOf", [])
    inst = e.instance
    chosen = None
    for i, b in enumerate(branches):
        required = b.get("required", [])
        if b.get("type") == "object" and isinstance(inst, dict) and all(r in inst for r in required):
            chosen = i
        elif b.get("type") == "string" and isinstance(inst, str):
            chosen = i
    if chosen is None and isinstance(inst, dict):  # neither form's required key: say which keys make a form
        keys = [k for b in branches for k in b.get("required", [])]
        given = sorted(inst)
        hint = suggest(given[0], keys) if given else ""
        return (
            f"{where}: field '{_loc(e.absolute_path)}': needs one of the keys {', '.join(keys)}"
            f" (given: {', '.join(given) or 'none'}){hint}"
        )
    sub = [c for c in e.context if c.schema_path and c.schema_path[0] == chosen] if chosen is not None else []
    if sub:
        return schema_error_message(sorted(sub, key=lambda c: len(c.absolute_path))[0], where, None)
    return f"{where}: field '{_loc(e.absolute_path)}': {e.message}"


def _enum(e, where: str) -> str:
    allowed = list(e.validator_value)
    return (
        f"{where}: field '{_loc(e.absolute_path)}': {e.instance!r} is not one of "
        f"{', '.join(map(str, allowed))}{suggest(e.instance, allowed)}"
    )


def _type(e, where: str) -> str:
    want = e.validator_value
    want = " or ".join(want) if isinstance(want, list) else want
    return f"{where}: field '{_loc(e.absolute_path)}': {e.instance!r} is not of type {want}"


_EXPLAIN = {
    "additionalProperties": _unknown_keys,
    "oneOf": _one_of,
    "enum": _enum,
    "type": _type,
}


def schema_error_message(error, where: str, schema=None) -> str:
    """One-line message for a jsonschema ``ValidationError`` of a material config.

    Parameters
    ----------
    error : jsonschema.ValidationError
        The first violation (errors sorted by path).
    where : str
        The config's file name.
    schema : dict, optional
        The whole schema (unused; kept so callers can pass it for future cross-references).

    Returns
    -------
    str
        ``"<file>: field '<dotted.path>': <what is wrong>; did you mean '<key>'?"``.

    """
    explain = _EXPLAIN.get(error.validator)
    if explain is not None:
        return explain(error, where)
    return f"{where}: field '{_loc(error.absolute_path)}': {error.message}"
