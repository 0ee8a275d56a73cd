"""Whether a pigment map's file states a colour space itself, or OpenImageIO only assumed one.

OpenImageIO reports ``oiio:ColorSpace = srgb_rec709_scene`` for every PNG, stated or not, so a warning
about sRGB-tagged pigment maps would fire for every 8- or 16-bit PNG. A PNG states a colour encoding only
through its ``sRGB``, ``iCCP``, ``gAMA`` or ``cHRM`` chunks (the colour space information chunks of the
PNG specification, ISO/IEC 15948); :func:`states_colour_space` looks for them before the first ``IDAT``
chunk. Other formats report what their headers say, so they are taken at OpenImageIO's word.
"""

from __future__ import annotations

import struct
from pathlib import Path

#: PNG chunks that state a colour encoding.
PNG_COLOUR_CHUNKS = {b"sRGB", b"iCCP", b"gAMA", b"cHRM"}
_PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
#: Most chunk headers read before giving up (a PNG's colour chunks come before IDAT).
_MAX_CHUNKS = 256


def states_colour_space(path) -> bool:
    """Tell whether the file itself states a colour space (True for non-PNG files and unreadable PNGs)."""
    path = Path(path)
    if path.suffix.lower() != ".png":
        return True
    try:
        with open(path, "rb") as f:
            if f.read(8) != _PNG_SIGNATURE:
                return True
            for _ in range(_MAX_CHUNKS):
                head = f.read(8)
                if len(head) < 8:
                    return False
                length, kind = struct.unpack(">I4s", head)
                if kind in PNG_COLOUR_CHUNKS:
                    return True
                if kind == b"IDAT":
                    return False
                f.seek(length + 4, 1)  # chunk data and CRC
    except OSError:
        return True
    return True
