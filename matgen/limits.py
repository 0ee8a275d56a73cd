"""Safety ceilings on what one request or one file may make matgen allocate.

A hostile or corrupt file can declare a 10^6 x 10^6 image, a million channels or a table of 10^12 entries in
a few bytes of header; a typo can ask for 10^15 photons. Every reader and entry point checks the declared size
here *before* it allocates anything, and gets a :class:`~matgen.errors.LimitError` that names the value, the
ceiling and how to raise it.

Ceilings (name, default, environment variable, unit):

===================== =============== ============================== =========================================
name                  default         environment variable           meaning
===================== =============== ============================== =========================================
``image_pixels``      268435456       ``MATGEN_MAX_IMAGE_PIXELS``    width x height of one image or tile
                      (16384^2)                                      (texels)
``image_side``        65536           ``MATGEN_MAX_IMAGE_SIDE``      width or height of one image (texels)
``image_channels``    1024            ``MATGEN_MAX_IMAGE_CHANNELS``  channels of one image (a spectral EXR
                                                                     of 71 bands x a few quantities fits)
``image_bytes``       8589934592      ``MATGEN_MAX_IMAGE_BYTES``     width x height x channels x 4 (bytes of
                      (8 GiB)                                        one image as float32)
``udim_tiles``        10000           ``MATGEN_MAX_UDIM_TILES``      tiles of one UDIM set (1001-10999 would
                                                                     be 9999 tiles)
``table_entries``     1000000000      ``MATGEN_MAX_TABLE_ENTRIES``   values of one table quantity or grid
                                                                     (grid points x channels)
``axis_points``       100000          ``MATGEN_MAX_AXIS_POINTS``     points of one table axis (checked before
                                                                     the axis or its grid is allocated)
``demo_side``         8192            ``MATGEN_MAX_DEMO_SIDE``       side of the demo's maps (texels)
``photons``           2000000000      ``MATGEN_MAX_PHOTONS``         photon packets of one transport run
                                                                     (:data:`matgen.constants.MAX_PHOTONS`)
``file_bytes``        17179869184     ``MATGEN_MAX_FILE_BYTES``      size of a binary input file (table,
                      (16 GiB)                                       records, image) in bytes
``text_bytes``        67108864        ``MATGEN_MAX_TEXT_BYTES``      size of a text input file (TOML, JSON,
                      (64 MiB)                                       CSV) in bytes
``records_bytes``     8589934592      ``MATGEN_MAX_RECORDS_BYTES``   memory of the photon records of one
                      (8 GiB)                                        transport run or records file (photons x
                                                                     (8 x layers + 17) bytes)
===================== =============== ============================== =========================================

Precedence: a value set with :func:`set_limit` or :func:`override` wins over the environment variable, which
wins over the default. Environment variables are read at every check, so a pipeline can set them per job.
This module imports nothing of the pipeline stages, so any stage may use it.
"""

from __future__ import annotations

import contextlib
import operator
import os
from pathlib import Path

from matgen.constants import MAX_PHOTONS
from matgen.errors import ConfigError, ImageError, LimitError, ParameterError

#: name -> (default, environment variable, unit for messages)
DEFAULTS: dict[str, tuple[int, str, str]] = {
    "image_pixels": (16384 * 16384, "MATGEN_MAX_IMAGE_PIXELS", "texels"),
    "image_side": (65536, "MATGEN_MAX_IMAGE_SIDE", "texels"),
    "image_channels": (1024, "MATGEN_MAX_IMAGE_CHANNELS", "channels"),
    "image_bytes": (8 << 30, "MATGEN_MAX_IMAGE_BYTES", "bytes"),
    "udim_tiles": (10000, "MATGEN_MAX_UDIM_TILES", "tiles"),
    "table_entries": (1_000_000_000, "MATGEN_MAX_TABLE_ENTRIES", "entries"),
    "axis_points": (100_000, "MATGEN_MAX_AXIS_POINTS", "points"),
    "demo_side": (8192, "MATGEN_MAX_DEMO_SIDE", "texels"),
    "photons": (MAX_PHOTONS, "MATGEN_MAX_PHOTONS", "photons"),
    "file_bytes": (16 << 30, "MATGEN_MAX_FILE_BYTES", "bytes"),
    "text_bytes": (64 << 20, "MATGEN_MAX_TEXT_BYTES", "bytes"),
    "records_bytes": (8 << 30, "MATGEN_MAX_RECORDS_BYTES", "bytes"),
}

_overrides: dict[str, int] = {}


def _check_name(name: str) -> None:
    if name not in DEFAULTS:
        raise ParameterError(f"unknown limit '{name}'; known limits: {', '.join(sorted(DEFAULTS))}")


def _positive_int(value, what: str) -> int:
    """``value`` as a Python int >= 1, or :class:`ParameterError` naming ``what``."""
    if isinstance(value, bool):
        raise ParameterError(f"{what} is {value!r}; give a positive whole number")
    try:
        v = operator.index(value)
    except TypeError:
        if isinstance(value, float) and value.is_integer():
            v = int(value)
        else:
            raise ParameterError(f"{what} is {value!r}; give a positive whole number") from None
    if v < 1:
        raise ParameterError(f"{what} is {v}; give a positive whole number")
    return v


def get_limit(name: str) -> int:
    """Return the ceiling ``name`` now in force (override, else environment variable, else default).

    Parameters
    ----------
    name : str
        One of the keys of :data:`DEFAULTS` (``"image_pixels"``, ``"photons"``, ...).

    Returns
    -------
    int
        The ceiling, in the unit listed in the module docstring.

    Raises
    ------
    ConfigError
        If the environment variable is set but is not a positive whole number.

    """
    _check_name(name)
    if name in _overrides:
        return _overrides[name]
    default, env, _unit = DEFAULTS[name]
    raw = os.environ.get(env)
    if raw is None or raw.strip() == "":
        return default
    text = raw.strip().replace("_", "")
    try:
        v = int(text)
    except ValueError:
        try:
            f = float(text)
        except ValueError:
            f = float("nan")
        if not (f == f and f.is_integer()):
            raise ConfigError(
                f"environment variable {env}={raw!r} is not a whole number; unset it or give "
                f"a positive integer (default {default})"
            ) from None
        v = int(f)
    if v < 1:
        raise ConfigError(
            f"environment variable {env}={raw!r} must be a positive integer (default {default})"
        )
    return v


def set_limit(name: str, value: int | None) -> None:
    """Set ceiling ``name`` for this process (``None`` removes the override).

    Parameters
    ----------
    name : str
        One of the keys of :data:`DEFAULTS`.
    value : int or None
        New ceiling (>= 1), in the unit of that limit, or ``None`` to fall back to the environment / default.

    """
    _check_name(name)
    if value is None:
        _overrides.pop(name, None)
    else:
        _overrides[name] = _positive_int(value, f"limit '{name}'")


@contextlib.contextmanager
def override(**limits):
    """Context manager that sets ceilings for the duration of a ``with`` block, then restores them.

    Examples
    --------
    >>> with override(image_pixels=4096 * 4096, photons=10**6):
    ...     check_photons(10**6)

    """
    for name in limits:
        _check_name(name)
    saved = {name: _overrides.get(name) for name in limits}
    try:
        for name, value in limits.items():
            set_limit(name, value)
        yield
    finally:
        for name, value in saved.items():
            set_limit(name, value)


def current_limits() -> dict[str, int]:
    """Every ceiling now in force, name -> value (for ``matgen`` diagnostics and provenance)."""
    return {name: get_limit(name) for name in DEFAULTS}


def _how_to_raise(name: str) -> str:
    env = DEFAULTS[name][1]
    return f"raise it with the environment variable {env} or matgen.limits.set_limit('{name}', ...)"


def _exceeds(name: str, value: int, what: str) -> None:
    ceiling = get_limit(name)
    if value > ceiling:
        unit = DEFAULTS[name][2]
        raise LimitError(
            f"{what} is {value} {unit}, above the ceiling of {ceiling} {unit}; {_how_to_raise(name)}"
        )


def _where(path) -> str:
    return f" in '{path}'" if path is not None else ""


def check_image_dims(width, height, channels=1, path=None, bytes_per_channel: int = 4) -> int:
    """Check the declared size of an image (or one tile) before reading or allocating it.

    Parameters
    ----------
    width, height : int
        Declared width and height in texels (from the file header, a config or a tile request).
    channels : int
        Declared channel count.
    path : str or Path, optional
        The file (or tile) for messages.
    bytes_per_channel : int
        Bytes the reader will allocate per channel value (4 for float32).

    Returns
    -------
    int
        The texel count ``width * height``.

    Raises
    ------
    ImageError
        If a dimension is not a positive whole number (zero-sized or negative declared sizes).
    LimitError
        If width, height, width x height, the channel count or the bytes to allocate exceed their ceilings.

    """
    where = _where(path)
    try:
        w = _positive_int(width, f"image width{where}")
        h = _positive_int(height, f"image height{where}")
        c = _positive_int(channels, f"image channel count{where}")
    except ParameterError as exc:
        raise ImageError(str(exc)) from None
    _exceeds("image_side", max(w, h), f"the larger side of the image{where} ({w} x {h})")
    _exceeds("image_pixels", w * h, f"the image{where} ({w} x {h})")
    _exceeds("image_channels", c, f"the channel count of the image{where}")
    _exceeds(
        "image_bytes",
        w * h * c * int(bytes_per_channel),
        f"the memory for the image{where} ({w} x {h} x {c} channels x {int(bytes_per_channel)} bytes)",
    )
    return w * h


def check_photons(n) -> int:
    """Check a requested photon count before any tally or record buffer is allocated.

    Parameters
    ----------
    n : int
        Photon packets requested (dimensionless).

    Returns
    -------
    int
        ``n`` as a Python int.

    Raises
    ------
    ParameterError
        If ``n`` is not a positive whole number.
    LimitError
        If ``n`` exceeds the ``photons`` ceiling.

    """
    v = _positive_int(n, "photon count")
    _exceeds("photons", v, "the photon count")
    return v


def check_table_entries(n, what: str = "table") -> int:
    """Check the number of values a table, grid or table quantity would hold before allocating it.

    Parameters
    ----------
    n : int
        Entries to allocate (grid points x channels, dimensionless).
    what : str
        What is being sized, for the message ("table 'lut/default.npz' quantity 'albedo_multiple'").

    Returns
    -------
    int
        ``n`` as a Python int.

    Raises
    ------
    ParameterError
        If ``n`` is not a positive whole number.
    LimitError
        If ``n`` exceeds the ``table_entries`` ceiling.

    """
    v = _positive_int(n, f"entry count of {what}")
    _exceeds("table_entries", v, f"the entry count of {what}")
    return v


def check_udim_tiles(n, what: str = "UDIM set") -> int:
    """Check the tile count of a UDIM set before reading its tiles.

    Parameters
    ----------
    n : int
        Number of tiles (dimensionless).
    what : str
        The set for messages (its path pattern).

    Returns
    -------
    int
        ``n`` as a Python int.

    """
    v = _positive_int(n, f"tile count of {what}")
    _exceeds("udim_tiles", v, f"the tile count of {what}")
    return v


def check_count(n, name: str, what: str) -> int:
    """Check any count ``n`` against ceiling ``name`` (generic form of the ``check_*`` functions)."""
    _check_name(name)
    v = _positive_int(n, what)
    _exceeds(name, v, what)
    return v


def not_a_file(path) -> str | None:
    """Return why ``path`` cannot be read as a regular file, or None when it is one.

    The reason reads "does not exist", "is a folder, not a regular file", "is a named pipe (FIFO), not a
    regular file" and so on; it is found before anything opens the path (opening a FIFO blocks until a
    writer comes).
    """
    import stat

    p = Path(path)
    try:
        mode = p.stat().st_mode
    except FileNotFoundError:
        return "does not exist" if not p.is_symlink() else "is a broken symbolic link"
    except OSError as exc:
        return f"cannot be read ({exc.strerror or exc})"
    if stat.S_ISREG(mode):
        return None
    for test, kind in (
        (stat.S_ISDIR, "is a folder"),
        (stat.S_ISFIFO, "is a named pipe (FIFO)"),
        (stat.S_ISCHR, "is a character device"),
        (stat.S_ISBLK, "is a block device"),
        (stat.S_ISSOCK, "is a socket"),
    ):
        if test(mode):
            return f"{kind}, not a regular file"
    return "is not a regular file"


def check_file_size(path, what: str = "input file", text: bool = False) -> int:
    """Check a file's size on disk before reading it whole.

    Parameters
    ----------
    path : str or Path
        The file.
    what : str
        What the file is, for messages ("material config", "table").
    text : bool
        True for text inputs (TOML, JSON, CSV: ``text_bytes`` ceiling), False for binary ones
        (``file_bytes`` ceiling).

    Returns
    -------
    int
        The file size in bytes.

    Raises
    ------
    ConfigError
        If the file does not exist or is not a regular file.
    LimitError
        If it is larger than the ceiling.

    """
    p = Path(path)
    why = not_a_file(p)
    if why is not None:
        raise ConfigError(f"cannot read {what} '{p}': it {why}")
    try:
        st = p.stat()
    except OSError as exc:
        raise ConfigError(f"cannot read {what} '{p}': {exc.strerror or exc}") from None
    _exceeds("text_bytes" if text else "file_bytes", st.st_size, f"the size of {what} '{p}'")
    return int(st.st_size)


def read_text_limited(path, what: str = "input file") -> str:
    """Read a UTF-8 text input after checking its size; undecodable bytes become :class:`ConfigError`.

    Parameters
    ----------
    path : str or Path
        The file.
    what : str
        What the file is, for messages.

    Returns
    -------
    str
        The file's text.

    """
    ceiling = get_limit("text_bytes")
    check_file_size(path, what, text=True)
    chunks, total = [], 0
    try:
        with open(path, "rb") as fh:
            # in chunks: read(n) would reserve n bytes up front, and the file may grow between stat and read
            while total <= ceiling:
                block = fh.read(min(1 << 20, ceiling + 1 - total))
                if not block:
                    break
                chunks.append(block)
                total += len(block)
    except OSError as exc:
        raise ConfigError(f"cannot read {what} '{path}': {exc.strerror or exc}") from None
    data = b"".join(chunks)
    if len(data) > ceiling:
        _exceeds("text_bytes", len(data), f"the size of {what} '{path}'")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ConfigError(f"{what} '{path}' is not UTF-8 text (byte {exc.start}: {exc.reason})") from None


#: Most decimal digits of a whole number in a JSON input (a 64-bit integer has at most 20).
MAX_JSON_INT_DIGITS = 20


def loads_json_checked(text: str, what: str, allow_nonfinite: bool = False):
    """Parse JSON text, refusing what no matgen input holds: NaN / Infinity tokens, numbers that overflow.

    Python's parser accepts ``NaN``, ``Infinity``, ``1e400`` (read as infinity) and integers of any size
    (``10^400`` then overflows every later ``float()``); each is refused here with :class:`ConfigError`
    naming ``what`` and the token.

    Parameters
    ----------
    text : str
        The JSON text.
    what : str
        The file and its role, for messages ("stack file 'a.json'").
    allow_nonfinite : bool
        Read ``NaN`` / ``Infinity`` / ``1e400`` as floats, for a reader that checks every field itself and
        names it (over-long integers are still refused).

    Returns
    -------
    object
        The parsed document.

    Raises
    ------
    ConfigError
        On a non-finite or overflowing number.
    json.JSONDecodeError, RecursionError
        As :func:`json.loads` (invalid JSON, nesting too deep): the caller words them for its file.

    """
    import json
    import math

    def bad_constant(token):
        raise ConfigError(f"{what}: the number {token} is not finite; give a finite number")

    def parse_float(token):
        v = float(token)
        if not math.isfinite(v):
            bad_constant(token if len(token) < 40 else token[:37] + "...")
        return v

    def parse_int(token):
        if len(token.lstrip("-")) > MAX_JSON_INT_DIGITS:
            raise ConfigError(
                f"{what}: a whole number of {len(token.lstrip('-'))} digits; at most {MAX_JSON_INT_DIGITS}"
            )
        return int(token)

    kw = {} if allow_nonfinite else {"parse_constant": bad_constant, "parse_float": parse_float}
    return json.loads(text, parse_int=parse_int, **kw)
