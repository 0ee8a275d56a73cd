"""Inputs of an estimate: the colour albedo (RGB, any working space) and single-band captures, in strips.

Units: albedo and capture values are dimensionless reflectance-like values, white = 1.

Colour spaces. An albedo's colour space is the ``--colour-space`` option when given, else the file's own
tag (OpenImageIO's ``oiio:ColorSpace``: PNG files are tagged sRGB by OpenImageIO; EXR and TIFF files carry a
tag only when their writer set one); a file with neither is refused. Names accepted (case-insensitive):

=================================================  ==================  ==========================
name                                               primaries / white   values
=================================================  ==================  ==========================
``acescg``, ``lin_ap1``, ``lin_ap1_scene``          ACEScg (AP1, ~D60)  linear
``aces2065-1``, ``lin_ap0``, ``lin_ap0_scene``      ACES2065-1 (AP0)    linear
``lin_rec709``, ``lin_rec709_scene``, ``lin_srgb``  BT.709 / D65        linear
``srgb``, ``srgb_rec709_scene``, ``srgb_texture``   BT.709 / D65        sRGB-encoded (IEC 61966-2-1)
``lin_rec2020``, ``lin_rec2020_scene``              BT.2020 / D65       linear
``lin_p3d65``, ``lin_p3d65_scene``                  Display P3 / D65    linear
any name in ``colour.RGB_COLOURSPACES``              that space's        linear (``--transfer
                                                                        encoded`` decodes its CCTF)
=================================================  ==================  ==========================

Linear values are converted to the table's working space by colour-science's ``matrix_RGB_to_RGB`` with
CAT02 adaptation between the two whites (``Moroney2002``), the adaptation the table's RGB uses.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import OpenImageIO as oiio

from matgen.bake.config import UDIM_TOKEN
from matgen.bake.maps import discover_tiles, map_info, oiio_error_text, tile_path
from matgen.errors import ColourSpaceWarning, ImageError, ParameterError

#: Our names and the OpenImageIO / colour-interop tags -> (colour-science space, sRGB-encoded?).
INPUT_SPACES = {
    "acescg": ("ACEScg", False),
    "lin_ap1": ("ACEScg", False),
    "lin_ap1_scene": ("ACEScg", False),
    "aces - acescg": ("ACEScg", False),
    "aces2065-1": ("ACES2065-1", False),
    "lin_ap0": ("ACES2065-1", False),
    "lin_ap0_scene": ("ACES2065-1", False),
    "lin_rec709": ("ITU-R BT.709", False),
    "lin_rec709_scene": ("ITU-R BT.709", False),
    "lin_srgb": ("ITU-R BT.709", False),
    "linear": ("ITU-R BT.709", False),
    "srgb": ("sRGB", True),
    "srgb_rec709_scene": ("sRGB", True),
    "srgb_texture": ("sRGB", True),
    "srgb - texture": ("sRGB", True),
    "lin_rec2020": ("ITU-R BT.2020", False),
    "lin_rec2020_scene": ("ITU-R BT.2020", False),
    "lin_p3d65": ("Display P3", False),
    "lin_p3d65_scene": ("Display P3", False),
}

TRANSFERS = ("auto", "linear", "encoded")


@dataclass(frozen=True)
class InputSpace:
    """A resolved input colour space.

    Attributes
    ----------
    name : str
        The name as given (option or tag).
    source : str
        ``"option"`` or ``"file tag"``.
    space : str
        colour-science RGB colourspace name (primaries and white).
    encoded : bool
        True when values carry the space's transfer function (decoded before use).
    matrix : ndarray (3, 3)
        Linear input RGB -> linear table working-space RGB.

    """

    name: str
    source: str
    space: str
    encoded: bool
    matrix: np.ndarray

    def describe(self) -> dict:
        """JSON-ready form."""
        return {
            "name": self.name,
            "source": self.source,
            "primaries": self.space,
            "values": "encoded (decoded with the space's transfer function)" if self.encoded else "linear",
        }

    def decode(self, rgb: np.ndarray) -> np.ndarray:
        """Input values (N, 3) -> linear values in the input's primaries (decoded when encoded)."""
        import colour

        if not self.encoded:
            return np.asarray(rgb)
        return colour.RGB_COLOURSPACES[self.space].cctf_decoding(np.asarray(rgb, dtype=np.float64))

    def to_working(self, rgb: np.ndarray) -> np.ndarray:
        """Input values (N, 3) -> linear working-space RGB (N, 3), float64."""
        return np.asarray(self.decode(rgb), dtype=np.float64) @ self.matrix.T


def resolve_input_space(name: str, source: str, working_space: str, transfer: str = "auto") -> InputSpace:
    """Resolve an albedo colour-space name (table in the module docstring) against the working space.

    Raises
    ------
    ParameterError
        For a name neither matgen nor colour-science knows, or an unknown ``transfer``.

    """
    import colour

    from matgen.color import resolve_space

    if transfer not in TRANSFERS:
        raise ParameterError(f"transfer is {transfer!r}; use one of {', '.join(TRANSFERS)}")
    key = str(name).strip().lower()
    if key in INPUT_SPACES:
        space, encoded = INPUT_SPACES[key]
    elif name in colour.RGB_COLOURSPACES:
        space, encoded = name, False
    else:
        known = ", ".join(["acescg", "lin_rec709", "srgb", "lin_rec2020", "lin_p3d65"])
        raise ParameterError(
            f"colour space {name!r} ({source}) is unknown: use one of {known}, or a colour-science "
            "RGB colourspace name such as 'ACEScg' or 'ITU-R BT.709'"
        )
    if transfer != "auto":
        encoded = transfer == "encoded"
    src = colour.RGB_COLOURSPACES[space]
    dst = resolve_space(working_space)
    matrix = colour.matrix_RGB_to_RGB(src, dst, chromatic_adaptation_transform="CAT02")
    return InputSpace(str(name), source, space, bool(encoded), np.asarray(matrix, dtype=np.float64))


def integer_format(fmt: str) -> bool:
    """Tell whether an OpenImageIO pixel format is an integer one (``uint8``, ``uint16``...)."""
    return "int" in str(fmt).lower()


def warn_if_linear_8bit(info, space: InputSpace) -> None:
    """Warn when an 8-bit or sRGB-tagged file is declared linear, giving the evidence."""
    evidence = []
    if str(info.format).lower() == "uint8":
        evidence.append("it is an 8-bit file")
    if info.colorspace and "srgb" in info.colorspace.lower():
        evidence.append(f"it is tagged '{info.colorspace}'")
    if evidence and not space.encoded:
        warnings.warn(
            f"albedo {info.path}: {' and '.join(evidence)}, but is read as linear '{space.name}' "
            f"({space.source}); such files almost always hold sRGB-encoded values, which read as linear "
            "come out too bright and too saturated: give --colour-space srgb if so",
            ColourSpaceWarning,
            stacklevel=2,
        )


def tiles_of(pattern: Path) -> list:
    """UDIM tiles of ``pattern`` ([None] for a single file); :class:`ImageError` if a set has none."""
    if UDIM_TOKEN not in Path(pattern).name:
        return [None]
    found = discover_tiles(pattern)
    if not found:
        raise ImageError(f"no UDIM tiles found for {pattern}")
    return found


class RowReader:
    """Streams channels ``[0, n)`` of an image in rows as float32 (h, width, n)."""

    def __init__(self, info, nchannels: int, what: str):
        self.info, self.n, self.what = info, int(nchannels), what
        self._inp = None

    def __enter__(self):
        self._inp = oiio.ImageInput.open(str(self.info.path))
        if self._inp is None:
            raise ImageError(f"{self.what} {self.info.path} cannot be read: {oiio_error_text()}")
        return self

    def __exit__(self, *exc):
        if self._inp is not None:
            self._inp.close()
            self._inp = None
        return False

    def read_rows(self, y0: int, y1: int) -> np.ndarray:
        """Rows ``y0 .. y1-1``, float32 (y1 - y0, width, n)."""
        data = self._inp.read_scanlines(0, 0, y0, y1, 0, 0, self.n, oiio.FLOAT)
        w = self.info.width
        if data is None or not isinstance(data, np.ndarray) or data.size != (y1 - y0) * w * self.n:
            msg = oiio_error_text(self._inp) or oiio_error_text() or "short read"
            raise ImageError(
                f"{self.what} {self.info.path}: rows {y0}..{y1 - 1} cannot be read ({msg}); the file may "
                "be truncated or corrupt"
            )
        return np.asarray(data, dtype=np.float32).reshape(y1 - y0, w, self.n)


def open_albedo(path, tile) -> object:
    """Header of an albedo file: at least 3 channels (RGB; a fourth, alpha, is ignored)."""
    info = map_info(path, tile, channel=0, what="albedo")
    if info.nchannels < 3:
        raise ImageError(f"albedo {path} has {info.nchannels} channel(s); a colour albedo needs R, G, B")
    return info


def open_capture(path, tile, name: str, size) -> object:
    """Header of a single-band capture (channel 0 is read), which must match the albedo's size."""
    info = map_info(path, tile, channel=0, what=f"capture '{name}'")
    if (info.width, info.height) != tuple(size):
        raise ImageError(
            f"capture '{name}' {path} is {info.width} x {info.height} texels but the albedo is "
            f"{size[0]} x {size[1]}; captures must be registered to the albedo at its size"
        )
    if info.colorspace and "srgb" in info.colorspace.lower():
        warnings.warn(
            f"capture '{name}' {path} is tagged '{info.colorspace}' but is read as linear: a capture must "
            "hold the response-weighted albedo itself (white = 1), not display-encoded values",
            ColourSpaceWarning,
            stacklevel=2,
        )
    return info


def scan_rows(rows: np.ndarray, y0: int, stats: dict) -> None:
    """Count non-finite, negative and above-1 values of a strip (h, w, c); keep the first texel of each."""
    checks = (
        ("non-finite", ~np.isfinite(rows)),
        ("negative", rows < 0.0),
        ("above 1", rows > 1.0),
    )
    for label, bad in checks:
        bad = bad.any(axis=2)
        if bad.any():
            n, first = stats.get(label, (0, None))
            if first is None:
                yy, xx = np.argwhere(bad)[0]
                first = (int(xx), int(y0 + yy))
            stats[label] = (n + int(bad.sum()), first)


def scan_file(info, nchannels: int, what: str, rows_per_read: int = 256) -> None:
    """Read a whole file once; :class:`ImageError` naming counts and first texels of bad values."""
    stats: dict = {}
    with RowReader(info, nchannels, what) as reader:
        for y0 in range(0, info.height, rows_per_read):
            y1 = min(info.height, y0 + rows_per_read)
            scan_rows(reader.read_rows(y0, y1), y0, stats)
    if stats:
        where = f"{info.path}" + (f" (UDIM tile {info.tile})" if info.tile is not None else "")
        parts = [
            f"{n} texel(s) {label}, the first at texel (x={f[0]}, y={f[1]})"
            for label, (n, f) in stats.items()
        ]
        raise ImageError(
            f"{what} {where}: {'; '.join(parts)}; albedo and capture values must be finite and in [0, 1]"
        )


def tile_file(pattern, tile) -> Path:
    """Return the file of UDIM ``tile`` of ``pattern`` (the pattern itself for a single file)."""
    return tile_path(Path(pattern), tile)
