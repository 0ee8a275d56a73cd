"""USD material (``material.usda``) of a baked material, written with ``usd-core`` (the ``pxr`` API).

The layer is built from the material descriptor (``material.json``) alone, so it can be written for any
bake folder after the fact (``matgen usd``). Layout (prim paths under ``/Materials/<name>``)::

    Material <name>
        outputs:mtlx:surface  -> OpenPBR.outputs:out          (MaterialX render context)
        outputs:surface       -> PreviewSurface.outputs:surface (universal fallback for viewers)
        matgen:spectral:<quantity>:file (asset, <UDIM> pattern), :wavelengths_nm (float[]), :unit (string)
        matgen:pass:<name>:file (asset), :unit
        Shader OpenPBR          info:id = ND_open_pbr_surface_surfaceshader, inputs as in material.mtlx
        Shader <input>_image    info:id = ND_image_<type> (data colours: ND_image_vector3 + ND_convert)
        Shader PreviewSurface   info:id = UsdPreviewSurface (diffuseColor from subsurface_color, ior)
        Shader preview_color / st_reader   UsdUVTexture / UsdPrimvarReader_float2

Conventions, each from its specification: node and input names of MaterialX 1.39's ``open_pbr_surface``
(``MaterialX139``, ``OpenPBR2024``) and the MaterialX-in-USD convention of OpenUSD's usdMtlx (a shader's
``info:id`` is the node definition name, the render context ``mtlx``); ``UsdPreviewSurface``,
``UsdUVTexture`` and ``UsdPrimvarReader_float2`` as defined in OpenUSD's UsdPreviewSurface specification,
texture coordinates from the primvar ``st``. Texture paths are relative to the layer (the bake folder), with
``<UDIM>`` for a UDIM set, which OpenUSD resolves tile by tile (``UsdShade.UdimUtils``). Colour textures
carry the ``colorSpace`` metadata of :mod:`matgen.color.tags` (``lin_ap1_scene`` for ACEScg); data textures
``colorSpace = "data"`` and, on the preview reader, ``sourceColorSpace = "raw"``. UDIM tiles are read with
clamped wrap modes, so a tile's edge texels do not blend with the opposite edge.

The preview surface is a look-alike for viewers without subsurface scattering: its diffuse colour is the
subsurface colour map and its roughness OpenPBR's default specular roughness 0.3 (OpenPBR 1.1 default).
"""

from __future__ import annotations

from pathlib import Path
from types import SimpleNamespace

from matgen._optional import require
from matgen.color.tags import DATA_INTEROP_ID, space_names
from matgen.errors import DataError

#: File name of the USD layer inside the bake folder.
USD_FILE = "material.usda"

#: OpenPBR input type (MaterialX) -> (Sdf value type name, image node type used to read it as data).
_TYPES = {"float": ("Float", "float"), "color3": ("Color3f", "vector3")}

#: OpenPBR's default specular roughness (OpenPBR 1.1 specification), used by the preview surface.
PREVIEW_ROUGHNESS = 0.3


def _safe(name: str) -> str:
    out = "".join(c if c.isalnum() or c == "_" else "_" for c in name)
    return out if out and not out[0].isdigit() else f"m_{out}"


def stack_patterns(doc: dict) -> dict:
    """Key -> (texture entry of the first tile, path pattern with ``<UDIM>`` where the set has tiles)."""
    out = {}
    for t in doc["textures"]:
        if t["key"] in out:
            continue
        path = t["path"]
        if t.get("udim") is not None:
            path = path.replace(f".{int(t['udim'])}.exr", ".<UDIM>.exr")
        out[t["key"]] = (t, path)
    return out


def _asset_input(shader, name, path, colour_space, Sdf):
    inp = shader.CreateInput(name, Sdf.ValueTypeNames.Asset)
    inp.Set(Sdf.AssetPath(path))
    inp.GetAttr().SetColorSpace(colour_space)
    return inp


def _image(material_path, stage, key, entry, interop, pxr, udim):
    """Define an ND_image_* shader (plus ND_convert for data colours) reading one input's texture."""
    Sdf, UsdShade = pxr.Sdf, pxr.UsdShade
    sdf_type, data_read = _TYPES[entry["type"]]
    colour = key == "subsurface_color"
    read = entry["type"] if colour or entry["type"] == "float" else data_read
    img = UsdShade.Shader.Define(stage, material_path.AppendChild(f"{key}_image"))
    img.CreateIdAttr(f"ND_image_{read}")
    _asset_input(img, "file", entry["texture"], interop if colour else DATA_INTEROP_ID, Sdf)
    if udim:
        for mode in ("uaddressmode", "vaddressmode"):
            img.CreateInput(mode, Sdf.ValueTypeNames.String).Set("clamp")
    read_type = sdf_type if read == entry["type"] else "Float3"
    out = img.CreateOutput("out", getattr(Sdf.ValueTypeNames, read_type))
    if read == entry["type"]:
        return out
    conv = UsdShade.Shader.Define(stage, material_path.AppendChild(f"{key}_{entry['type']}"))
    conv.CreateIdAttr(f"ND_convert_{read}_{entry['type']}")
    conv.CreateInput("in", Sdf.ValueTypeNames.Float3).ConnectToSource(out)
    return conv.CreateOutput("out", getattr(Sdf.ValueTypeNames, sdf_type))


def _openpbr(material, stage, inputs, interop, pxr, udim):
    Sdf, UsdShade = pxr.Sdf, pxr.UsdShade
    mpath = material.GetPath()
    shader = UsdShade.Shader.Define(stage, mpath.AppendChild("OpenPBR"))
    shader.CreateIdAttr("ND_open_pbr_surface_surfaceshader")
    for key, entry in inputs.items():
        if entry.get("type") not in _TYPES:
            raise DataError(
                f"descriptor input '{key}' has type {entry.get('type')!r}; expected float or color3"
            )
        sdf_type = getattr(Sdf.ValueTypeNames, _TYPES[entry["type"]][0])
        inp = shader.CreateInput(key, sdf_type)
        if "texture" in entry:
            inp.ConnectToSource(_image(mpath, stage, key, entry, interop, pxr, udim))
        elif entry["type"] == "float":
            inp.Set(float(entry["value"]))
        else:
            inp.Set(pxr.Gf.Vec3f(*(float(v) for v in entry["value"])))
    out = shader.CreateOutput("out", Sdf.ValueTypeNames.Token)
    material.CreateSurfaceOutput("mtlx").ConnectToSource(out)


def _preview(material, stage, inputs, interop, pxr, udim):
    Sdf, UsdShade = pxr.Sdf, pxr.UsdShade
    mpath = material.GetPath()
    surf = UsdShade.Shader.Define(stage, mpath.AppendChild("PreviewSurface"))
    surf.CreateIdAttr("UsdPreviewSurface")
    surf.CreateInput("roughness", Sdf.ValueTypeNames.Float).Set(PREVIEW_ROUGHNESS)
    ior = inputs.get("specular_ior", {})
    if "value" in ior:
        surf.CreateInput("ior", Sdf.ValueTypeNames.Float).Set(float(ior["value"]))
    colour = inputs.get("subsurface_color", {})
    if "texture" in colour:
        st = UsdShade.Shader.Define(stage, mpath.AppendChild("st_reader"))
        st.CreateIdAttr("UsdPrimvarReader_float2")
        st.CreateInput("varname", Sdf.ValueTypeNames.String).Set("st")  # string in OpenUSD's Sdr
        tex = UsdShade.Shader.Define(stage, mpath.AppendChild("preview_color"))
        tex.CreateIdAttr("UsdUVTexture")
        _asset_input(tex, "file", colour["texture"], interop, Sdf)
        tex.CreateInput("sourceColorSpace", Sdf.ValueTypeNames.Token).Set("raw")  # linear, no decoding
        tex.CreateInput("st", Sdf.ValueTypeNames.Float2).ConnectToSource(
            st.CreateOutput("result", Sdf.ValueTypeNames.Float2)
        )
        if udim:
            for mode in ("wrapS", "wrapT"):
                tex.CreateInput(mode, Sdf.ValueTypeNames.Token).Set("clamp")
        rgb = tex.CreateOutput("rgb", Sdf.ValueTypeNames.Float3)
        surf.CreateInput("diffuseColor", Sdf.ValueTypeNames.Color3f).ConnectToSource(rgb)
    material.CreateSurfaceOutput().ConnectToSource(surf.CreateOutput("surface", Sdf.ValueTypeNames.Token))


def _stacks(material, doc, pxr):
    """Spectral stacks and pass maps as asset attributes on the material prim (namespace ``matgen:``)."""
    Sdf = pxr.Sdf
    prim = material.GetPrim()
    for key, (entry, path) in stack_patterns(doc).items():
        if entry["kind"] not in ("spectral", "pass"):
            continue
        if entry["kind"] == "spectral":
            ns = f"matgen:spectral:{entry['quantity']}"
        else:
            ns = f"matgen:pass:{key.split('/')[-1]}"
        attr = prim.CreateAttribute(f"{ns}:file", Sdf.ValueTypeNames.Asset, custom=True)
        attr.Set(Sdf.AssetPath(path))
        attr.SetColorSpace(DATA_INTEROP_ID)
        prim.CreateAttribute(f"{ns}:unit", Sdf.ValueTypeNames.String, custom=True).Set(str(entry["unit"]))
        if entry["kind"] == "spectral":
            wl = [float(c.split(".", 1)[1].removesuffix("nm").replace(",", ".")) for c in entry["channels"]]
            prim.CreateAttribute(f"{ns}:wavelengths_nm", Sdf.ValueTypeNames.FloatArray, custom=True).Set(wl)


def usd_text(doc: dict) -> str:
    """Return the ``material.usda`` text of a material descriptor.

    Parameters
    ----------
    doc : dict
        A validated material descriptor (``matgen.export.descriptor.load_descriptor``).

    Returns
    -------
    str
        USDA text; texture paths relative to the descriptor's folder.

    Raises
    ------
    DependencyError
        If ``usd-core`` is not installed (``pip install "matgen[usd]"``).
    DataError
        If the descriptor has no OpenPBR target to take the shader from.
    ParameterError
        If its working space has no colour-space tag (:func:`matgen.color.tags.space_names`).

    """
    pxr = SimpleNamespace(
        **{m: require(f"pxr.{m}", "write USD materials") for m in ("Usd", "Sdf", "UsdShade", "Gf")}
    )
    Usd = pxr.Usd
    openpbr = doc.get("targets", {}).get("openpbr")
    if not openpbr:
        raise DataError(
            f"material '{doc.get('name')}' was baked without the openpbr target; add \"openpbr\" to "
            "outputs.targets and bake again to write USD"
        )
    _, names = space_names(doc["working_space"])
    udim = bool(doc.get("udim_tiles"))
    stage = Usd.Stage.CreateInMemory(USD_FILE)
    root = pxr.Sdf.Path("/Materials")
    stage.DefinePrim(root, "Scope")
    stage.SetDefaultPrim(stage.GetPrimAtPath(root))
    material = pxr.UsdShade.Material.Define(stage, root.AppendChild(_safe(doc["name"])))
    material.GetPrim().SetDocumentation(
        f"matgen material '{doc['name']}': OpenPBR surface (render context mtlx), "
        "UsdPreviewSurface fallback; "
        f"colour maps in {doc['working_space']}, lengths in scene units "
        f"({doc['units']['metres_per_scene_unit']} m per unit)"
    )
    _openpbr(material, stage, openpbr["inputs"], names.interop_id, pxr, udim)
    _preview(material, stage, openpbr["inputs"], names.interop_id, pxr, udim)
    _stacks(material, doc, pxr)
    stage.GetRootLayer().customLayerData = {"matgen:descriptor": "material.json"}
    stage.SetMetadata("metersPerUnit", float(doc["units"]["metres_per_scene_unit"]))
    return stage.GetRootLayer().ExportToString()


def write_usd(descriptor_path, out=None) -> Path:
    """Write ``material.usda`` beside a material descriptor (or to ``out``, which must be in its folder).

    Returns the path written. Written atomically (:func:`matgen.fsutil.atomic_write_text`).
    """
    from matgen.export.descriptor import load_descriptor
    from matgen.fsutil import atomic_write_text

    descriptor_path = Path(descriptor_path)
    doc = load_descriptor(descriptor_path)
    text = usd_text(doc)
    target = Path(out) if out is not None else descriptor_path.parent / USD_FILE
    if target.resolve().parent != descriptor_path.resolve().parent:
        raise DataError(
            f"{target}: the USD layer must lie in the bake folder {descriptor_path.parent}, because its "
            "texture paths are relative to it"
        )
    atomic_write_text(target, text)
    return target
