"""Colour-space tags of the files matgen writes: EXR header attributes and the names other formats use.

One home for the colour-space names of a working space (practice 17). A colour map (an albedo in the working
space) carries, in its EXR header:

- ``chromaticities``: the OpenEXR standard attribute, eight floats (red x, y, green x, y, blue x, y,
  white x, y; CIE 1931 xy), taken from colour-science's definition of the space (``colour.RGB_COLOURSPACES``);
- ``adoptedNeutral``: the OpenEXR standard attribute for the adopted white (xy), the space's white point;
- ``oiio:ColorSpace``: the colour interop identifier of the space (``lin_ap1_scene`` for ACEScg), which
  OpenImageIO 3 writes as the ``colorInteropID`` header attribute and which OpenColorIO's built-in configs
  (``ocio://default``; checked with OpenColorIO 2.6) resolve to their colour space ("ACEScg").

A data map (spectral stacks, lengths, ratios, anisotropy, pass and QA maps) carries ``oiio:ColorSpace =
"data"`` (OpenColorIO's built-in "Raw" space, which has ``isdata: true``) and no chromaticities, so that no
colour management touches its values.

The MaterialX names (``acescg``, ``lin_rec709``, ...) are those of the MaterialX 1.39 specification's colour
spaces; the USD ``colorSpace`` metadata uses the interop identifier, as OpenUSD's colour-space names do.

References: ``colour2024`` (primaries and white points), ``MaterialX139``; OpenEXR standard attributes
``chromaticities`` and ``adoptedNeutral`` (OpenEXR 3 documentation, "Standard Attributes"); colour interop
identifiers as carried by OpenColorIO 2.6's built-in configs (``ColorSpace.getInteropID()``).
"""

from __future__ import annotations

from dataclasses import dataclass

from matgen.errors import ParameterError

#: The interop identifier and OpenColorIO name of non-colour data.
DATA_INTEROP_ID = "data"
DATA_OCIO_NAME = "Raw"
#: MaterialX's reserved name for "no colour space conversion" (MaterialX 1.39 specification).
DATA_MATERIALX_NAME = "none"


@dataclass(frozen=True)
class SpaceNames:
    """Names of one linear working space in the formats matgen writes.

    Attributes
    ----------
    interop_id : str
        Colour interop identifier (``oiio:ColorSpace`` / ``colorInteropID``, USD ``colorSpace``).
    ocio_name : str
        Colour space name in OpenColorIO's built-in configs.
    materialx_name : str or None
        MaterialX 1.39 colour-space name; None where MaterialX has none.

    """

    interop_id: str
    ocio_name: str
    materialx_name: str | None


#: colour-science space name -> names elsewhere (linear encodings only; matgen's RGB is linear).
SPACE_NAMES = {
    "ACEScg": SpaceNames("lin_ap1_scene", "ACEScg", "acescg"),
    "ACES2065-1": SpaceNames("lin_ap0_scene", "ACES2065-1", None),
    "ITU-R BT.709": SpaceNames("lin_rec709_scene", "Linear Rec.709 (sRGB)", "lin_rec709"),
    "sRGB": SpaceNames("lin_rec709_scene", "Linear Rec.709 (sRGB)", "lin_rec709"),
    "ITU-R BT.2020": SpaceNames("lin_rec2020_scene", "Linear Rec.2020", None),
    "P3-D65": SpaceNames("lin_p3d65_scene", "Linear P3-D65", "lin_displayp3"),
    "Display P3": SpaceNames("lin_p3d65_scene", "Linear P3-D65", "lin_displayp3"),
    "Adobe RGB (1998)": SpaceNames("lin_adobergb_scene", "Linear AdobeRGB", "lin_adobergb"),
}

#: Output quantities that are colours in the working space (every other map is data).
COLOUR_QUANTITIES = ("rgb_albedo_multiple", "rgb_albedo_single", "subsurface_color")


def space_names(working_space: str) -> tuple:
    """Return ``(colour-science space, SpaceNames)`` for a working space name or alias.

    Raises
    ------
    ParameterError
        If colour-science does not know the space, or matgen knows no OpenColorIO name for it (the message
        lists the spaces that have both).

    """
    from matgen.color.colorimetry import resolve_space

    known = ", ".join(SPACE_NAMES)
    try:
        cs = resolve_space(working_space)
    except ParameterError:
        raise ParameterError(
            f"working space {working_space!r} is unknown to colour-science and has no OpenColorIO name; "
            f"use one of {known}"
        ) from None
    if cs.name not in SPACE_NAMES:
        raise ParameterError(
            f"working space {working_space!r} (colour-science '{cs.name}') has no OpenColorIO name that "
            f"matgen can tag files with; use one of {known}"
        )
    return cs, SPACE_NAMES[cs.name]


def is_colour(quantity: str, channels) -> bool:
    """Tell whether an output holding ``quantity`` in ``channels`` is a colour of the working space."""
    return quantity in COLOUR_QUANTITIES and len(tuple(channels)) == 3


def exr_colour_attributes(working_space: str) -> dict:
    """EXR header attributes of a colour map in ``working_space``.

    Returns
    -------
    dict
        ``chromaticities`` (tuple of 8 float, CIE 1931 xy), ``adoptedNeutral`` (tuple of 2 float, xy),
        ``oiio:ColorSpace`` (interop identifier) and ``matgen:working_space`` (the colour-science name).
        Tuples are written by :func:`matgen.export.exr` as float arrays.

    """
    cs, names = space_names(working_space)
    (rx, ry), (gx, gy), (bx, by) = (tuple(float(v) for v in p) for p in cs.primaries)
    wx, wy = (float(v) for v in cs.whitepoint)
    return {
        "chromaticities": (rx, ry, gx, gy, bx, by, wx, wy),
        "adoptedNeutral": (wx, wy),
        "oiio:ColorSpace": names.interop_id,
        "matgen:working_space": cs.name,
    }


def exr_data_attributes() -> dict:
    """EXR header attributes of a data map: ``oiio:ColorSpace = "data"`` (OpenColorIO "Raw")."""
    return {"oiio:ColorSpace": DATA_INTEROP_ID}


def exr_attributes(quantity: str, channels, working_space: str) -> dict:
    """Colour or data attributes for an output, chosen by :func:`is_colour`."""
    if is_colour(quantity, channels):
        return exr_colour_attributes(working_space)
    return exr_data_attributes()


def materialx_name(working_space: str) -> str:
    """MaterialX colour-space name of ``working_space``; :class:`ParameterError` where MaterialX has none."""
    cs, names = space_names(working_space)
    if names.materialx_name is None:
        have = ", ".join(k for k, v in SPACE_NAMES.items() if v.materialx_name)
        raise ParameterError(
            f"working space '{cs.name}' has no MaterialX colour-space name; use one of {have}"
        )
    return names.materialx_name
