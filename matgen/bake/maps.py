"""Reading pigment maps through OpenImageIO: single files and UDIM sets, streamed in rows.

Maps are non-colour data: 8- and 16-bit PNG/TIFF values are read as floats in [0, 1] (OpenImageIO's
normalisation of unsigned integers), EXR values as stored. A colour-space tag such as sRGB is ignored with a
:class:`~matgen.errors.ColourSpaceWarning`. A UDIM set is a file name holding ``<UDIM>``; tile numbers are
1001 + u + 10 v. Every failure of OpenImageIO becomes an :class:`~matgen.errors.ImageError` naming the file,
the UDIM tile and the rows or texel concerned.
"""

from __future__ import annotations

import re
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import OpenImageIO as oiio

from matgen.bake.config import UDIM_TOKEN
from matgen.bake.map_tags import states_colour_space
from matgen.errors import ColourSpaceWarning, ImageError
from matgen.limits import check_count, check_image_dims


def oiio_error_text(source=None) -> str:
    """Return OpenImageIO's pending error message (non-UTF-8 bytes of a file name decoded loosely)."""
    try:
        return (source if source is not None else oiio).geterror().strip()
    except UnicodeDecodeError as exc:
        if isinstance(exc.object, bytes):
            return exc.object.decode("utf-8", "replace").strip()
        return "undecodable error"


def udim_of(u: int, v: int) -> int:
    """UDIM tile number of tile column ``u`` (0..9) and row ``v`` (0..): 1001 + u + 10 v."""
    if not (0 <= u <= 9) or v < 0:
        raise ImageError(f"UDIM tile column u={u} must be 0..9 and row v={v} >= 0")
    return 1001 + u + 10 * v


def tile_path(pattern: Path, tile: int | None) -> Path:
    """Return the file of UDIM ``tile`` in ``pattern`` (``pattern`` itself when it holds no ``<UDIM>``)."""
    pattern = Path(pattern)
    if UDIM_TOKEN not in pattern.name:
        return pattern
    return pattern.parent / pattern.name.replace(UDIM_TOKEN, str(int(tile)))


def discover_tiles(pattern: Path) -> list[int]:
    """UDIM tile numbers present on disk for ``pattern``, sorted; an empty list if none."""
    pattern = Path(pattern)
    head, tail = pattern.name.split(UDIM_TOKEN)
    rx = re.compile(re.escape(head) + r"(1\d\d\d)" + re.escape(tail) + r"$")
    if not pattern.parent.is_dir():
        return []
    found = []
    for entry in pattern.parent.iterdir():
        m = rx.match(entry.name)
        if m and entry.is_file():
            found.append(int(m.group(1)))
    return sorted(found)


def _where(path, tile) -> str:
    return f"{path}" + (f" (UDIM tile {tile})" if tile is not None else "")


@dataclass(frozen=True)
class MapInfo:
    """Header facts of one map file: size in texels, channel count, pixel format, colour-space tag."""

    path: Path
    tile: int | None
    width: int
    height: int
    nchannels: int
    format: str
    colorspace: str


def map_info(path, tile=None, *, channel: int = 0, what: str = "map") -> MapInfo:
    """Open a map's header and check it can feed channel ``channel``.

    Raises
    ------
    ImageError
        If the file is missing or unreadable, too large, or has too few channels.

    """
    path = Path(path)
    if not path.is_file():
        raise ImageError(f"{what} {_where(path, tile)} does not exist")
    inp = oiio.ImageInput.open(str(path))
    if inp is None:
        raise ImageError(f"{what} {_where(path, tile)} cannot be read by OpenImageIO: {oiio_error_text()}")
    try:
        spec = inp.spec()
        info = MapInfo(
            path,
            tile,
            int(spec.width),
            int(spec.height),
            int(spec.nchannels),
            str(spec.format),
            str(spec.get_string_attribute("oiio:ColorSpace", "")),
        )
    finally:
        inp.close()
    check_image_dims(info.width, info.height, 1, path=_where(path, tile))
    check_count(info.nchannels, "image_channels", f"the channel count of {what} {_where(path, tile)}")
    if channel >= info.nchannels:
        raise ImageError(
            f"{what} {_where(path, tile)} has {info.nchannels} channel(s); the config reads channel "
            f"{channel} (channels count from 0)"
        )
    return info


class MapReader:
    """Streams one channel of a map in rows, optionally resampled bilinearly to another size.

    Parameters
    ----------
    info : MapInfo
        The map (from :func:`map_info`).
    channel : int
        Channel to read.
    target_size : tuple of int, optional
        (width, height) to resample to; None reads at the map's own size.
    what : str
        Name of the map for messages (e.g. "map of parameter 'melanin_fraction'").

    """

    def __init__(self, info: MapInfo, channel: int = 0, target_size=None, what: str = "map"):
        self.info = info
        self.channel = int(channel)
        self.what = what
        self.width, self.height = target_size if target_size is not None else (info.width, info.height)
        self.resampled = (self.width, self.height) != (info.width, info.height)
        self._inp = None
        if info.colorspace and "srgb" in info.colorspace.lower() and states_colour_space(info.path):
            warnings.warn(
                f"{what} {_where(info.path, info.tile)} is tagged as colour space '{info.colorspace}'; "
                "pigment maps "
                "are non-colour data and are read without any transfer function",
                ColourSpaceWarning,
                stacklevel=2,
            )

    def __enter__(self):
        self._inp = oiio.ImageInput.open(str(self.info.path))
        if self._inp is None:
            raise ImageError(
                f"{self.what} {_where(self.info.path, self.info.tile)} cannot be read: {oiio_error_text()}"
            )
        return self

    def __exit__(self, *exc):
        self.close()
        return False

    def close(self):
        """Close the file."""
        if self._inp is not None:
            self._inp.close()
            self._inp = None

    def _read_source_rows(self, y0: int, y1: int) -> np.ndarray:
        inp = self._inp
        if inp is None:
            raise ImageError(f"{self.what} {self.info.path} is not open")
        data = inp.read_scanlines(0, 0, y0, y1, 0, self.channel, self.channel + 1, oiio.FLOAT)
        if data is None or not isinstance(data, np.ndarray) or data.size != (y1 - y0) * self.info.width:
            msg = oiio_error_text(inp) or oiio_error_text() or "short read"
            raise ImageError(
                f"{self.what} {_where(self.info.path, self.info.tile)}: rows {y0}..{y1 - 1} cannot be "
                f"read ({msg}); the file may be truncated or corrupt"
            )
        return np.asarray(data, dtype=np.float32).reshape(y1 - y0, self.info.width)

    def read_rows(self, y0: int, y1: int) -> np.ndarray:
        """Rows ``y0 .. y1-1`` (target size) of the channel, float32, shape (y1 - y0, width)."""
        if not self.resampled:
            return self._read_source_rows(y0, y1)
        hs, ws = self.info.height, self.info.width
        # texel centres: target texel y sits at source coordinate (y + 0.5) * hs / h - 0.5
        sy = np.clip((np.arange(y0, y1) + 0.5) * hs / self.height - 0.5, 0.0, hs - 1)
        sx = np.clip((np.arange(self.width) + 0.5) * ws / self.width - 0.5, 0.0, ws - 1)
        r0 = int(np.floor(sy[0]))
        r1 = min(int(np.floor(sy[-1])) + 2, hs)
        src = self._read_source_rows(r0, r1).astype(np.float64)
        iy = np.minimum(np.floor(sy).astype(np.int64), hs - 1)
        ty = sy - iy
        iy1 = np.minimum(iy + 1, hs - 1)
        ix = np.minimum(np.floor(sx).astype(np.int64), ws - 1)
        tx = sx - ix
        ix1 = np.minimum(ix + 1, ws - 1)
        a = src[iy - r0][:, ix] * (1 - tx) + src[iy - r0][:, ix1] * tx
        b = src[iy1 - r0][:, ix] * (1 - tx) + src[iy1 - r0][:, ix1] * tx
        return (a * (1 - ty)[:, None] + b * ty[:, None]).astype(np.float32)


@dataclass
class MapStats:
    """What a scan of one map found: non-finite texels and values outside the encoding range [0, 1]."""

    nonfinite: int = 0
    first_nonfinite: tuple | None = None
    out_of_range: int = 0
    first_out_of_range: tuple | None = None
    minimum: float = np.inf
    maximum: float = -np.inf


def scan_map(reader: MapReader, rows_per_read: int = 256, low: float = 0.0, high: float = 1.0) -> MapStats:
    """Read a whole map in rows and count non-finite texels and texels outside [low, high].

    Coordinates in the result are (x, y) texels, y counted from the top row.
    """
    stats = MapStats()
    for y0 in range(0, reader.height, rows_per_read):
        y1 = min(reader.height, y0 + rows_per_read)
        rows = reader.read_rows(y0, y1)
        finite = np.isfinite(rows)
        if not finite.all():
            n = int(rows.size - np.count_nonzero(finite))
            if stats.first_nonfinite is None:
                yy, xx = np.argwhere(~finite)[0]
                stats.first_nonfinite = (int(xx), int(y0 + yy))
            stats.nonfinite += n
        vals = rows[finite]
        if vals.size:
            stats.minimum = min(stats.minimum, float(vals.min()))
            stats.maximum = max(stats.maximum, float(vals.max()))
        bad = finite & ((rows < low) | (rows > high))
        if bad.any():
            if stats.first_out_of_range is None:
                yy, xx = np.argwhere(bad)[0]
                stats.first_out_of_range = (int(xx), int(y0 + yy))
            stats.out_of_range += int(np.count_nonzero(bad))
    return stats
