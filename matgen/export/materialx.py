"""MaterialX document: one surface per renderer target (OpenPBR, standard_surface) reading its baked maps.

References: ``MaterialX139`` (the MaterialX 1.39 specification), ``OpenPBR2024`` (the surface's inputs).
Written with the ``materialx`` package (1.39, which ships the ``open_pbr_surface`` node definition) and
checked with its own ``Document.validate()`` against the standard data libraries before it is written, so
a misspelt input or a wrong type is refused. Image nodes use MaterialX's ``<UDIM>`` token for UDIM sets.
The inputs, their types and which are colours come from the targets (:mod:`matgen.targets`).

Colour management: only the inputs a target marks as colours (``subsurface_color``) are colour-managed;
its image's file carries the working space, so a renderer in another working space converts it. Every
other map is data (a ratio of lengths, a length, g) and must reach the shader unchanged: MaterialX colour-
manages only colour types (the "color" type semantic of the MaterialX 1.39 specification), so such maps
are read by images of a non-colour type (``float``, or ``vector3`` turned into the ``color3`` input by a
``convert`` node) whose file input says ``colorspace = "none"``, the name MaterialX reserves for "no
colour space conversion".
"""

from __future__ import annotations

from matgen._optional import require
from matgen.errors import DataError

#: matgen working-space names -> MaterialX colour-space names.
MATERIALX_COLORSPACES = {
    "ACEScg": "acescg",
    "Rec.709": "lin_rec709",
    "sRGB linear": "lin_rec709",
    "ITU-R BT.709": "lin_rec709",
}

#: MaterialX's reserved colour-space name for "no conversion" (MaterialX 1.39 specification, Color Spaces).
RAW_COLORSPACE = "none"


def _libraries(mx):
    lib = mx.createDocument()
    mx.loadLibraries(mx.getDefaultDataLibraryFolders(), mx.getDefaultDataSearchPath(), lib)
    return lib


def material_document(name: str, shaders: list, working_space: str):
    """Build and validate a MaterialX document with one material per renderer target's node.

    Parameters
    ----------
    name : str
        Material name (letters, digits, underscores).
    shaders : list of (str, dict)
        ``(node category, inputs)`` per target (:func:`matgen.export.descriptor.shader_inputs`); inputs map
        an input name to ``{"texture": relative path (may hold <UDIM>)}`` or ``{"value": number}``, with
        its MaterialX ``type`` and ``colour_managed`` flag, as the target declares them.
    working_space : str
        Working space of the colour maps (a key of :data:`MATERIALX_COLORSPACES`).

    Returns
    -------
    MaterialX.Document

    Raises
    ------
    DataError
        If the working space has no MaterialX name or the document fails MaterialX validation.

    """
    mx = require("MaterialX", "write MaterialX documents")
    if working_space not in MATERIALX_COLORSPACES:
        raise DataError(
            f"working space '{working_space}' has no MaterialX colour-space name; known: "
            f"{sorted(MATERIALX_COLORSPACES)}"
        )
    cs = MATERIALX_COLORSPACES[working_space]
    safe = "".join(ch if ch.isalnum() or ch == "_" else "_" for ch in name) or "material"
    if safe[0].isdigit():
        safe = "m_" + safe
    doc = mx.createDocument()
    doc.setDataLibrary(_libraries(mx))
    doc.setColorSpace(cs)
    for category, inputs in shaders:
        prefix = f"{safe}_{category}" if len(shaders) > 1 else safe
        shader = doc.addNode(category, f"{prefix}_shader", "surfaceshader")
        for key, entry in inputs.items():
            _add_input(doc, shader, prefix, key, entry, cs)
        doc.addMaterialNode(prefix, shader)
    ok, message = doc.validate()
    if not ok:
        raise DataError(f"the MaterialX document for '{name}' fails MaterialX validation: {message.strip()}")
    return doc


def _add_input(doc, shader, prefix: str, key: str, entry: dict, cs: str) -> None:
    """One shader input: a constant, or an image node (colour-managed only for colour inputs)."""
    typ = entry.get("type", "float")
    if typ not in ("float", "color3"):
        raise DataError(f"MaterialX input '{key}' has type '{typ}'; matgen writes float and color3 inputs")
    inp = shader.addInput(key, typ)
    if "texture" not in entry:
        inp.setValue(float(entry["value"]))
        return
    colour = bool(entry.get("colour_managed", False))
    # data maps: a non-colour image type, so that no colour management touches the values
    read = typ if colour or typ == "float" else "vector3"
    img = doc.addNode("image", f"{prefix}_{key}_image", read)
    f = img.addInput("file", "filename")
    f.setValueString(entry["texture"])
    f.setColorSpace(cs if colour else RAW_COLORSPACE)
    if read == typ:
        inp.setNodeName(img.getName())
    else:
        conv = doc.addNode("convert", f"{prefix}_{key}_{typ}", typ)
        conv.addInput("in", read).setNodeName(img.getName())
        inp.setNodeName(conv.getName())


def document_text(doc) -> str:
    """XML text of a MaterialX document (without the data libraries)."""
    mx = require("MaterialX", "write MaterialX documents")
    opts = mx.XmlWriteOptions()
    opts.writeXIncludeEnable = False
    return mx.writeToXmlString(doc, opts)


def validate_file(path) -> tuple:
    """Read a ``.mtlx`` file, attach the standard libraries and validate: returns (ok, message)."""
    mx = require("MaterialX", "validate MaterialX documents")
    doc = mx.createDocument()
    mx.readFromXmlFile(doc, str(path))
    doc.setDataLibrary(_libraries(mx))
    return doc.validate()
