"""Images a person looks at: display view of working-space colour, texture reading, PNG writing, image checks.

Units: texture values as stored (dimensionless albedo, mm, scene units); display images are sRGB-encoded
floats in [0, 1] or 8-bit integers.

View transform. Baked RGB maps hold scene-linear colour in the table's working space (ACEScg by default).
Showing those numbers as if they were sRGB code values would be wrong twice (primaries and encoding). The
view used here converts working-space RGB to linear sRGB / Rec. 709 primaries with the Bradford chromatic
adaptation from the working space's white to D65 (colour-science ``RGB_to_RGB``, [colour2024]), optionally
scales by an exposure in stops, clips to the display gamut [0, 1] and applies the sRGB encoding
(IEC 61966-2-1, [IEC1999srgb]). Albedo-like maps stay below 1, so no tone curve is applied.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from matgen.errors import ImageError, ParameterError

#: Smallest pixel variance (of values in [0, 1]) a preview must exceed to count as "not blank".
BLANK_VARIANCE_FLOOR = 1.0e-5


def _colour():
    import colour

    return colour


def working_to_display(rgb, working_space: str = "ACEScg", exposure_stops: float = 0.0) -> np.ndarray:
    """Scene-linear working-space RGB -> sRGB-encoded display RGB in [0, 1].

    Parameters
    ----------
    rgb : ndarray, shape (..., 3)
        Scene-linear RGB in ``working_space`` (dimensionless).
    working_space : str
        colour-science name of the working space (``"ACEScg"``, ``"ITU-R BT.709"``, ``"sRGB"`` ...).
    exposure_stops : float
        Exposure applied before encoding, in stops (factor 2**stops).

    Returns
    -------
    ndarray, shape (..., 3)
        sRGB-encoded values clipped to [0, 1].

    References
    ----------
    [colour2024] (``RGB_to_RGB``, Bradford adaptation); [IEC1999srgb] (sRGB encoding).

    """
    colour = _colour()
    arr = np.asarray(rgb, dtype=np.float64)
    if arr.shape[-1] != 3:
        raise ParameterError(f"working_to_display needs (..., 3) RGB; got shape {arr.shape}")
    try:
        src = colour.RGB_COLOURSPACES[working_space]
    except KeyError:
        raise ParameterError(
            f"unknown working space {working_space!r}; e.g. 'ACEScg', 'ITU-R BT.709'"
        ) from None
    dst = colour.RGB_COLOURSPACES["sRGB"]
    lin = colour.RGB_to_RGB(
        np.nan_to_num(arr, nan=0.0),
        src,
        dst,
        chromatic_adaptation_transform="Bradford",
        apply_cctf_decoding=False,
        apply_cctf_encoding=False,
    )
    lin = np.clip(lin * 2.0 ** float(exposure_stops), 0.0, 1.0)
    return np.clip(colour.cctf_encoding(lin, function="sRGB"), 0.0, 1.0)


def linear_to_display(values) -> np.ndarray:
    """Scene-linear grey values (a UV or IR pass) -> sRGB-encoded display values in [0, 1] (no gamut step)."""
    colour = _colour()
    v = np.clip(np.nan_to_num(np.asarray(values, dtype=np.float64), nan=0.0), 0.0, 1.0)
    return np.clip(colour.cctf_encoding(v, function="sRGB"), 0.0, 1.0)


def read_texture(path) -> tuple[np.ndarray, list]:
    """Read an image (EXR, TIFF, PNG) with OpenImageIO as float32 (H, W, C) and its channel names.

    The declared width, height and channel count are checked against :mod:`matgen.limits` before any pixel
    memory is allocated.

    Raises
    ------
    ImageError
        Naming the path when the file cannot be opened or read, or declares a zero or negative size.
    LimitError
        When the declared size exceeds a ceiling (``image_side``, ``image_pixels``, ``image_channels``,
        ``image_bytes``).

    """
    import OpenImageIO as oiio

    from matgen.bake.maps import oiio_error_text
    from matgen.limits import check_image_dims

    p = Path(path)
    inp = oiio.ImageInput.open(str(p))
    if inp is None:
        raise ImageError(f"cannot open texture {p}: {oiio_error_text() or 'unreadable'}")
    try:
        spec = inp.spec()
        width, height, nchannels = int(spec.width), int(spec.height), int(spec.nchannels)
        check_image_dims(width, height, nchannels, path=p)  # before read_image allocates
        pixels = inp.read_image(0, 0, 0, nchannels, oiio.FLOAT)
        if pixels is None:
            raise ImageError(f"cannot read pixels of {p}: {oiio_error_text(inp) or 'read failed'}")
        names = list(spec.channelnames)
    finally:
        inp.close()
    arr = np.asarray(pixels, dtype=np.float32).reshape(height, width, nchannels)
    return arr, names


def to_uint8(display) -> np.ndarray:
    """Display values in [0, 1] -> uint8 with rounding."""
    return np.round(np.clip(np.asarray(display, dtype=np.float64), 0.0, 1.0) * 255.0).astype(np.uint8)


def write_png(path, display) -> Path:
    """Write display values in [0, 1], shape (H, W) or (H, W, 3), as an 8-bit sRGB PNG (atomic replace)."""
    import OpenImageIO as oiio

    from matgen.fsutil import atomic_path

    img = to_uint8(display)
    if img.ndim == 2:
        img = img[:, :, None]
    spec = oiio.ImageSpec(img.shape[1], img.shape[0], img.shape[2], oiio.UINT8)
    spec.attribute("oiio:ColorSpace", "sRGB")
    path = Path(path)
    with atomic_path(path) as tmp:
        out = oiio.ImageOutput.create(str(tmp))
        if out is None or not out.open(str(tmp), spec):
            raise ImageError(f"cannot write {path}: {oiio.geterror()}")
        ok = out.write_image(np.ascontiguousarray(img))
        out.close()
        if not ok:
            raise ImageError(f"cannot write pixels of {path}")
    return path


def image_check(path) -> dict:
    """Size and spread of a preview image: ``width``, ``height``, ``channels``, ``variance`` (of [0, 1]).

    ``blank`` is True when the variance is below :data:`BLANK_VARIANCE_FLOOR` (a flat image).
    """
    arr, _ = read_texture(path)
    var = float(np.var(arr[..., :3] if arr.shape[2] >= 3 else arr))
    return {
        "width": int(arr.shape[1]),
        "height": int(arr.shape[0]),
        "channels": int(arr.shape[2]),
        "variance": var,
        "blank": bool(var < BLANK_VARIANCE_FLOOR),
    }
