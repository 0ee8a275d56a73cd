"""OpenEXR texture writing through OpenImageIO: streamed rows, spectral layout, optional tiled mip-maps.

Spectral stacks follow the spectral OpenEXR layout of Fichet, Pacanowski & Wilkie (2021, JCGT 10(3);
``Fichet2021``): one channel per band named ``T.<wavelength>nm`` with a decimal comma and six decimals
(``T.550,000000nm``) and the header attribute ``spectralLayoutVersion = "1.0"``. matgen adds its own
attributes under ``matgen:`` (quantity, unit). Pixels are half float by default (float on request) with
lossless compression (zip by default; DWA is refused because it is lossy on such data). The ``DateTime``
attribute is fixed so that the same texels always give the same bytes (the descriptor's checksums are then
reproducible).

Files are written in row order, one strip at a time (:class:`StreamingExr`), so a texture never needs to be
held whole; :func:`make_texture` turns a finished file into a tiled, mip-mapped texture, which reads the whole
image: about 2 x width x height x channels x 4 bytes (:data:`matgen.export.job.TEXTURE_MEMORY_FACTOR`), which
the bake checks against its memory budget before it starts.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import OpenImageIO as oiio

from matgen.errors import ImageError, PathError

#: Version string of the spectral OpenEXR layout written (Fichet2021).
SPECTRAL_LAYOUT_VERSION = "1.0"

#: Fixed ``DateTime`` header value, so that outputs are byte-reproducible.
FIXED_DATETIME = "1970:01:01 00:00:00"

#: Lossless EXR compressions accepted.
LOSSLESS_COMPRESSIONS = ("zip", "zips", "piz", "rle", "none")

_PIXEL_TYPES = {"half": oiio.HALF, "float": oiio.FLOAT}


def set_io_threads(n: int | None) -> None:
    """Let OpenImageIO (and OpenEXR's compression) use ``n`` threads; None leaves its default (all cores)."""
    if n:
        oiio.attribute("threads", int(n))
        oiio.attribute("exr_threads", int(n))


def _spec(width, height, channels, pixel_type, compression, attributes, tile_size=None):
    if pixel_type not in _PIXEL_TYPES:
        raise ImageError(f"EXR pixel type '{pixel_type}' is not one of {sorted(_PIXEL_TYPES)}")
    if compression not in LOSSLESS_COMPRESSIONS:
        raise ImageError(
            f"EXR compression '{compression}' is not lossless; use one of {LOSSLESS_COMPRESSIONS}"
        )
    spec = oiio.ImageSpec(int(width), int(height), len(channels), _PIXEL_TYPES[pixel_type])
    spec.channelnames = tuple(channels)
    spec.attribute("compression", compression)
    spec.attribute("DateTime", FIXED_DATETIME)
    for key, value in (attributes or {}).items():
        if isinstance(value, tuple):  # float arrays: chromaticities (float[8]), adoptedNeutral (float[2])
            spec.attribute(key, oiio.TypeDesc(f"float[{len(value)}]"), tuple(float(v) for v in value))
        else:
            spec.attribute(key, value)
    if tile_size:
        spec.tile_width = spec.tile_height = int(tile_size)
    return spec


class StreamingExr:
    """An EXR file written strip by strip in row order.

    Parameters
    ----------
    path : str or Path
        Destination (normally inside a staging folder; the caller moves it into place).
    width, height : int
        Size in texels.
    channels : sequence of str
        Channel names.
    pixel_type : {"half", "float"}
    compression : str
        One of :data:`LOSSLESS_COMPRESSIONS`.
    attributes : dict, optional
        Extra header attributes (strings, ints or floats; a tuple of floats becomes a float array, as the
        OpenEXR attributes ``chromaticities`` and ``adoptedNeutral`` are).

    """

    def __init__(
        self, path, width, height, channels, *, pixel_type="half", compression="zip", attributes=None
    ):
        self.path = Path(path)
        self.width, self.height, self.nchannels = int(width), int(height), len(channels)
        self._next_row = 0
        self._out = oiio.ImageOutput.create(str(self.path))
        if self._out is None:
            raise PathError(f"cannot create EXR writer for {self.path}: {oiio.geterror().strip()}")
        spec = _spec(width, height, channels, pixel_type, compression, attributes)
        if not self._out.open(str(self.path), spec):
            msg = self._out.geterror().strip()
            self._out = None
            raise PathError(f"cannot open {self.path} for writing: {msg}")

    def write_rows(self, y0: int, rows: np.ndarray) -> None:
        """Write rows ``y0 .. y0 + len(rows) - 1``; rows must follow each other from the top.

        Parameters
        ----------
        y0 : int
            First row.
        rows : ndarray of float16 or float32, shape (h, width, channels)
            The texels of those rows (float16 is written as is to a half file).

        """
        if self._out is None:
            raise ImageError(f"{self.path} is closed")
        if y0 != self._next_row:
            raise ImageError(
                f"{self.path}: rows must be written in order; expected row {self._next_row}, got {y0}"
            )
        rows = np.asarray(rows)
        if rows.dtype not in (np.float16, np.float32):
            rows = rows.astype(np.float32)
        rows = np.ascontiguousarray(rows)
        if rows.ndim != 3 or rows.shape[1:] != (self.width, self.nchannels):
            raise ImageError(
                f"{self.path}: strip of shape {rows.shape}; expected (h, {self.width}, {self.nchannels})"
            )
        if not self._out.write_scanlines(y0, y0 + rows.shape[0], 0, rows):
            raise PathError(
                f"writing rows {y0}..{y0 + rows.shape[0] - 1} of {self.path} failed: "
                f"{self._out.geterror().strip()}"
            )
        self._next_row = y0 + rows.shape[0]

    def close(self) -> None:
        """Finish the file; :class:`ImageError` if not every row was written."""
        if self._out is None:
            return
        out, self._out = self._out, None
        ok = out.close()
        if not ok:
            raise PathError(f"closing {self.path} failed: {out.geterror().strip()}")
        if self._next_row != self.height:
            raise ImageError(f"{self.path}: only {self._next_row} of {self.height} rows were written")

    def abort(self) -> None:
        """Close without checks (the caller discards the file)."""
        if self._out is not None:
            out, self._out = self._out, None
            out.close()


def write_exr(path, pixels: np.ndarray, channels, **kwargs) -> None:
    """Write a whole image (h, w, c) float32 to an EXR file (see :class:`StreamingExr` for options)."""
    pixels = np.asarray(pixels, dtype=np.float32)
    if pixels.ndim == 2:
        pixels = pixels[:, :, None]
    w = StreamingExr(path, pixels.shape[1], pixels.shape[0], channels, **kwargs)
    try:
        w.write_rows(0, pixels)
    except BaseException:
        w.abort()
        raise
    w.close()


def make_texture(src, dst, tile_size: int = 64) -> None:
    """Convert an EXR file into a tiled, mip-mapped texture (box-filtered levels), keeping its attributes.

    Memory: OpenImageIO holds the whole image of ``src`` as float32 about twice while the levels are made
    (peak measured at 2.01-2.03 x width x height x channels x 4 bytes, plus ~3 MiB, for 31-channel half files
    of 1024 and 2048 texels square with OpenImageIO 3.2).
    """
    cfg = oiio.ImageSpec()
    cfg.attribute("maketx:filtername", "box")
    cfg.attribute("tile_width", int(tile_size))
    cfg.attribute("tile_height", int(tile_size))
    cfg.attribute("maketx:fixnan", "none")
    cfg.attribute("DateTime", FIXED_DATETIME)
    if not oiio.ImageBufAlgo.make_texture(oiio.MakeTxTexture, str(src), str(dst), cfg):
        raise PathError(
            f"making a tiled mip-mapped texture {dst} from {src} failed: {oiio.geterror().strip()}"
        )


def read_exr(path):
    """Read an EXR file whole: returns (pixels float32 (h, w, c), channel names tuple, attributes dict).

    The declared width, height and channel count are checked against :mod:`matgen.limits` before any pixel
    memory is allocated.

    Raises
    ------
    ImageError
        If OpenImageIO cannot open or read it (missing, truncated, not an image; an error text holding the
        file's non-UTF-8 bytes is decoded loosely), or it declares a zero or negative size.
    LimitError
        If the declared size exceeds a ceiling (``image_side``, ``image_pixels``, ``image_channels``,
        ``image_bytes``).

    """
    from matgen.bake.maps import oiio_error_text
    from matgen.limits import check_image_dims

    path = Path(path)
    inp = oiio.ImageInput.open(str(path))
    if inp is None:
        raise ImageError(f"{path} cannot be read: {oiio_error_text()}")
    try:
        spec = inp.spec()
        width, height, nchannels = int(spec.width), int(spec.height), int(spec.nchannels)
        check_image_dims(width, height, nchannels, path=path)  # before read_image allocates
        data = inp.read_image(0, 0, 0, nchannels, oiio.FLOAT)
        if data is None:
            raise ImageError(f"{path} cannot be read: {oiio_error_text(inp)}")
        attrs = {a.name: a.value for a in spec.extra_attribs}
        return (
            np.asarray(data, dtype=np.float32).reshape(height, width, nchannels),
            tuple(spec.channelnames),
            attrs,
        )
    finally:
        inp.close()
