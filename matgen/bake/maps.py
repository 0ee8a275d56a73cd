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
from matgen.limits import check_count, check_image_dims, not_a_file


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
    """Header facts of one map file: size in texels, channel count, pixel format, colour-space tag.

    ``width`` x ``height`` is the display window (the texture's UV square); ``data_x`` / ``data_y`` are its
    origin's offset inside the stored data window (0 for most files), ``tile_height`` the height of the
    file's tiles (0 for a scanline file), ``data_width`` the stored rows' width and ``data_origin`` the
    data window's (x, y, z) origin, as OpenImageIO reads them.
    """

    path: Path
    tile: int | None
    width: int
    height: int
    nchannels: int
    format: str
    colorspace: str
    data_x: int = 0
    data_y: int = 0
    data_width: int = 0
    data_height: int = 0
    tile_height: int = 0
    data_origin: tuple = (0, 0, 0)


def _display_window(spec, path, what: str) -> tuple:
    """(width, height, offset x, offset y) of the display window inside the data window; refuse a gap."""
    fw, fh = int(spec.full_width), int(spec.full_height)
    if fw <= 0 or fh <= 0:  # no display window recorded: the data window is the image
        return int(spec.width), int(spec.height), 0, 0
    ox, oy = int(spec.full_x) - int(spec.x), int(spec.full_y) - int(spec.y)
    if ox < 0 or oy < 0 or ox + fw > int(spec.width) or oy + fh > int(spec.height):
        raise ImageError(
            f"{what} {path}: its data window ({spec.x}, {spec.y}) + {spec.width} x {spec.height} does not "
            f"cover its display window ({spec.full_x}, {spec.full_y}) + {fw} x {fh}; texels outside the "
            "data window hold no value: write the map with a data window covering the display window"
        )
    return fw, fh, ox, oy


def map_info(path, tile=None, *, channel: int = 0, what: str = "map") -> MapInfo:
    """Open a map's header and check it can feed channel ``channel``.

    Scanline and tiled files (mip-mapped ones are read at their full-resolution level) are accepted; the map
    is the display window, which the data window must cover (an offset data window is fine).

    Raises
    ------
    ImageError
        If the file is missing, not a regular file (a folder, a FIFO), unreadable, too large, has too few
        channels, or its data window leaves part of its display window without values.

    """
    path = Path(path)
    why = not_a_file(path)
    if why is not None:
        raise ImageError(f"{what} {_where(path, tile)} {why}")
    inp = oiio.ImageInput.open(str(path))
    if inp is None:
        raise ImageError(f"{what} {_where(path, tile)} cannot be read by OpenImageIO: {oiio_error_text()}")
    try:
        spec = inp.spec()
        check_image_dims(max(int(spec.width), 1), max(int(spec.height), 1), 1, path=_where(path, tile))
        if int(spec.depth) > 1:
            raise ImageError(f"{what} {_where(path, tile)} is a volume ({spec.depth} slices); give a 2D map")
        fw, fh, ox, oy = _display_window(spec, _where(path, tile), what)
        info = MapInfo(
            path,
            tile,
            fw,
            fh,
            int(spec.nchannels),
            str(spec.format),
            str(spec.get_string_attribute("oiio:ColorSpace", "")),
            data_x=ox,
            data_y=oy,
            data_width=int(spec.width),
            data_height=int(spec.height),
            tile_height=int(spec.tile_height) if int(spec.tile_width) > 0 else 0,
            data_origin=(int(spec.x), int(spec.y), int(spec.z)),
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
        """Rows ``y0 .. y1-1`` of the map's display window, float32 (scanline or tiled file)."""
        inp, info, ch = self._inp, self.info, self.channel
        if inp is None:
            raise ImageError(f"{self.what} {info.path} is not open")
        x0, ybase, z0 = info.data_origin
        dw = info.data_width or info.width
        r0, r1 = info.data_y + y0, info.data_y + y1  # rows of the data window
        if info.tile_height > 0:
            th = info.tile_height
            a0 = (r0 // th) * th
            a1 = min(-(-r1 // th) * th, info.data_height or info.height)
            ys = (ybase + a0, ybase + a1)
            data = inp.read_tiles(0, 0, x0, x0 + dw, *ys, z0, z0 + 1, ch, ch + 1, oiio.FLOAT)
            want = (a1 - a0) * dw
        else:
            a0 = r0
            data = inp.read_scanlines(0, 0, ybase + r0, ybase + r1, z0, ch, ch + 1, oiio.FLOAT)
            want = (r1 - r0) * dw
        if data is None or not isinstance(data, np.ndarray) or data.size != want:
            msg = oiio_error_text(inp) or oiio_error_text() or "short read"
            raise ImageError(
                f"{self.what} {_where(info.path, info.tile)}: rows {y0}..{y1 - 1} cannot be "
                f"read ({msg}); the file may be truncated or corrupt"
            )
        rows = np.asarray(data, dtype=np.float32).reshape(-1, dw)
        return rows[r0 - a0 : r1 - a0, info.data_x : info.data_x + info.width]

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
