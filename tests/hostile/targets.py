"""The fuzz targets: every parser and entry point of matgen that reads outside input.

Each target turns bytes into a call of one matgen reader and lets :func:`fuzzlib.run_case` judge the outcome.
A target whose stage is not importable is listed as unavailable (with the reason) by the tests and the report.
"""

from __future__ import annotations

import json
from pathlib import Path

from fuzzlib import Target

from matgen.errors import MatgenError

TARGETS: dict[str, Target] = {}


def target(name: str, seeds, requires=(), time_budget_s: float = 10.0, notes: str = ""):
    """Register ``fn(data, scratch)`` as fuzz target ``name``."""

    def deco(fn):
        TARGETS[name] = Target(name, seeds, fn, tuple(requires), time_budget_s, notes)
        return fn

    return deco


def _text(data: bytes, what: str) -> str:
    """Decode like matgen's text readers: undecodable bytes are the caller's MatgenError, not ours to skip."""
    from matgen.errors import ConfigError

    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ConfigError(f"{what} is not UTF-8 ({exc.reason})") from None


# ---------------------------------------------------------------------------------------------------------
# bands


def _band_seeds(_d: Path):
    return [b"300:1000:10", b"400:700:10:5", b"365,550,850", b"300:1000:10:10", b"550"]


@target("band_spec", _band_seeds, requires=("matgen.spectra.bands",), notes="BandSet.parse (--bands option)")
def _band_spec(data: bytes, _scratch: Path):
    from matgen.spectra.bands import BandSet

    BandSet.parse(_text(data, "band spec"))


def _band_json_seeds(_d: Path):
    from matgen.spectra.bands import BandSet, default_bands

    return [json.dumps(default_bands().to_dict()).encode(), json.dumps(BandSet.parse("365,550,850").to_dict()).encode()]


@target("bands_json", _band_json_seeds, requires=("matgen.spectra.bands",),
        notes="BandSet.from_dict on decoded JSON (band tables inside descriptors, manifests, table files)")
def _bands_json(data: bytes, _scratch: Path):
    from matgen.spectra.bands import BandSet

    try:
        obj = json.loads(_text(data, "band table"))
    except ValueError:
        return  # not JSON: the JSON readers' own targets cover that
    BandSet.from_dict(obj)


# ---------------------------------------------------------------------------------------------------------
# paths


def _path_seeds(_d: Path):
    return [b"maps/melanin.exr", b"../outside.exr", b"/etc/passwd", b"a/../../b", b"link/x.exr", b"."]


@target("relative_path", _path_seeds, requires=("matgen.fsutil",),
        notes="fsutil.resolve_inside on texture/table paths from configs and descriptors")
def _relative_path(data: bytes, scratch: Path):
    import os

    from matgen.fsutil import resolve_inside

    base = scratch / "job"
    base.mkdir(exist_ok=True)
    if not (base / "link").exists():
        os.symlink(scratch, base / "link")
    text = data.decode("utf-8", "surrogateescape")
    try:
        full = resolve_inside(base, text, "texture path")
    except MatgenError:
        return
    # contract beyond "no crash": an accepted path lies inside the base folder
    assert full.is_relative_to(base.resolve()), f"accepted path {text!r} resolves outside the base: {full}"
