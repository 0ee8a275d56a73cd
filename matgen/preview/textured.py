"""A textured spectral render of a baked material: a flat patch of skin whose medium varies texel by texel.

Units: mm for every length in the scene (the texture spans ``patch_mm`` x ``patch_mm``), 1/mm for sigma_t,
nm for wavelengths.

Recipe (one Mitsuba 3 render per band, ``scalar_spectral`` variant, CPU) [Jakob2022mitsuba3]:

1. The baked spectral stacks are found through the descriptor (``material.json``): ``spectral/albedo_single``
   and ``spectral/mean_free_path_mm`` (first UDIM tile, or the one asked for). Their channel at the band is
   box-averaged down to ``grid`` x ``grid`` texels.
2. Each becomes a ``gridvolume`` (Mitsuba's ``.vol`` format, one channel, written beside the scene):
   ``albedo`` = single-scattering albedo, ``sigma_t`` = 1 / mean free path (1/mm). One channel means the
   same value at every wavelength: each render covers one narrow band (the stack's band, 10 nm by
   default), recorded by a ``specfilm`` whose sensitivity is 1 over that band.
3. The grids fill a box ``patch_mm`` wide and :func:`slab_depth_mm` deep (laterally the texture, the same
   at every depth: a pigment map says nothing about depth), a ``heterogeneous`` medium with a
   Henyey-Greenstein phase function of the material's mean anisotropy (the OpenPBR anisotropy map's mean,
   else the anisotropy stack's). Its surface is index-matched (``null`` BSDF) by default, so that every
   scattering event can be joined to the light (next-event estimation through the boundary) and the render
   converges in seconds; ``boundary="dielectric"`` uses a GGX rough dielectric of the material's index
   (alpha 0.3) instead, which the effective medium was fitted for but which converges far more slowly
   (volpath cannot join medium vertices to the light through it). The index-matched patch is brighter than
   the baked albedo A, because light that a boundary would reflect back inside escapes.
4. A point light at :data:`LIGHT_HEIGHT_FACTOR` x ``patch_mm`` above the centre lights the patch (irradiance
   1 at the centre, about 0.7 at the corners); an orthographic camera looks straight down.
5. Russian roulette is deferred (``rr_depth`` 100000, as in :mod:`matgen.preview.tracer`: early roulette
   makes high-albedo path weights heavy-tailed) and paths end after :data:`MAX_DEPTH` scattering events
   (at single-scattering albedo 0.99 a path that long keeps 0.99^256 = 7.6 % of its weight, so the cut
   darkens the brightest texels by a few per cent: a preview, not a measurement).

The visible view combines the visible bands' renders with colour-science weights for those bands
(:func:`matgen.color.colorimetry.channel_weights`, linear sRGB), so it has only the hues those few bands can
make; a pass view is the render of the band that carries most of the pass's weight. Every scene file used
(``scene.xml`` and the two ``.vol`` grids per band) is kept in ``<out>/scenes/<band>nm/`` so it can be
rendered again with more samples (``mitsuba scene.xml``).
"""

from __future__ import annotations

import json
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from matgen.errors import DataError, ParameterError

#: Defaults: patch side (mm), render pixels, samples per pixel, grid texels per side.
PATCH_MM = 40.0
PIXELS = 32
SPP = 32
GRID = 64
#: Point light height as a multiple of the patch side.
LIGHT_HEIGHT_FACTOR = 1.0
#: Scattering events after which a path ends.
MAX_DEPTH = 256
#: Deferred Russian roulette (see :mod:`matgen.preview.tracer`).
RR_DEPTH = 100000
#: GGX roughness of the dielectric boundary option.
SURFACE_ROUGHNESS = 0.3
#: Visible band centres (nm) rendered for the colour view, where the stacks have them (nearest band).
VISIBLE_NM = (460.0, 550.0, 610.0)
#: Pass band centres (nm) of the UV and IR views (the built-in passes' peaks).
PASS_NM = {"uv365": 365.0, "nir850": 850.0}
#: Exposure of the display images in stops.
EXPOSURE_STOPS = 1.5

BOUNDARIES = ("null", "dielectric")


@dataclass
class BandRender:
    """One band's render: linear values (P, P) and the files used."""

    wavelength_nm: float
    lower_nm: float
    upper_nm: float
    image: np.ndarray
    scene: Path
    seconds: float


def _channel_nm(name: str) -> float:
    return float(name.split(".", 1)[1].removesuffix("nm").replace(",", "."))


def stack_file(folder: Path, doc: dict, quantity: str, tile=None):
    """Texture entry and path of a spectral stack (first tile, or UDIM ``tile``) named by the descriptor."""
    for t in doc["textures"]:
        if t["kind"] == "spectral" and t["quantity"] == quantity and (tile is None or t.get("udim") == tile):
            return t, folder / t["path"]
    tiles = f" for UDIM tile {tile}" if tile is not None else ""
    raise DataError(
        f"the bake has no spectral stack '{quantity}'{tiles}; add \"{quantity}\" to outputs.spectral and "
        "bake again to render it"
    )


def stack_bands(entry: dict) -> list:
    """Band centres (nm) of a stack's channels."""
    return [_channel_nm(c) for c in entry["channels"]]


def nearest_band(entry: dict, wavelength_nm: float, tolerance_nm: float = 5.0) -> int:
    """Channel index of the band centred within ``tolerance_nm`` of ``wavelength_nm``; DataError otherwise."""
    centres = np.array(stack_bands(entry))
    i = int(np.argmin(np.abs(centres - wavelength_nm)))
    if abs(centres[i] - wavelength_nm) > tolerance_nm:
        raise DataError(
            f"the spectral stacks have no band near {wavelength_nm:g} nm (they hold {centres.size} bands, "
            f"{centres.min():g}-{centres.max():g} nm); add it to outputs.spectral_bands (e.g. "
            "'360:850:10') and bake again"
        )
    return i


def read_channel(path: Path, channel: int) -> np.ndarray:
    """Read one channel of an image whole as float64 (H, W); size checked before allocation."""
    import OpenImageIO as oiio

    from matgen.bake.maps import oiio_error_text
    from matgen.limits import check_image_dims

    inp = oiio.ImageInput.open(str(path))
    if inp is None:
        raise DataError(f"{path} cannot be read: {oiio_error_text()}")
    try:
        spec = inp.spec()
        check_image_dims(spec.width, spec.height, 1, path=path)
        data = inp.read_image(0, 0, channel, channel + 1, oiio.FLOAT)
        if data is None:
            raise DataError(f"{path} cannot be read: {oiio_error_text(inp)}")
        return np.asarray(data, dtype=np.float64).reshape(spec.height, spec.width)
    finally:
        inp.close()


def box_downsample(img: np.ndarray, n: int) -> np.ndarray:
    """Area-average an (H, W) image to (min(n, H), min(n, W)) texels (blocks of nearly equal size)."""
    h, w = img.shape
    ny, nx = min(n, h), min(n, w)
    ys = np.linspace(0, h, ny + 1).astype(int)
    xs = np.linspace(0, w, nx + 1).astype(int)
    rows = np.add.reduceat(img, ys[:-1], axis=0) / np.diff(ys)[:, None]
    return np.add.reduceat(rows, xs[:-1], axis=1) / np.diff(xs)[None, :]


def slab_depth_mm(mean_free_path_mm: np.ndarray, patch_mm: float) -> float:
    """Depth of the patch: 20 of the largest mean free paths, at least 1 mm, at most the patch side."""
    return float(min(max(20.0 * float(np.max(mean_free_path_mm)), 1.0), patch_mm))


def _scene_xml(depth_mm, patch_mm, g, ior, band, pixels, spp, seed, boundary) -> str:
    half = patch_mm / 2.0
    h = LIGHT_HEIGHT_FACTOR * patch_mm
    if boundary == "null":
        bsdf = '<bsdf type="null"/>'
    else:
        bsdf = (
            f'<bsdf type="roughdielectric"><string name="distribution" value="ggx"/>'
            f'<float name="alpha" value="{SURFACE_ROUGHNESS}"/><float name="int_ior" value="{ior:.6g}"/>'
            '<float name="ext_ior" value="1"/></bsdf>'
        )
    grid_to_world = (
        f'<transform name="to_world"><scale x="{patch_mm:.6g}" y="{patch_mm:.6g}" z="{depth_mm:.6g}"/>'
        f'<translate x="{-half:.6g}" y="{-half:.6g}" z="{-depth_mm:.6g}"/></transform>'
    )
    lo, hi = band
    return f"""<?xml version="1.0"?>
<!-- matgen textured patch, one band {lo:g}-{hi:g} nm; lengths mm, sigma_t 1/mm (matgen.preview.textured) -->
<scene version="3.0.0">
  <integrator type="volpath">
    <integer name="max_depth" value="{MAX_DEPTH}"/>
    <integer name="rr_depth" value="{RR_DEPTH}"/>
  </integrator>
  <sensor type="orthographic">
    <transform name="to_world">
      <scale x="{half:.6g}" y="{half:.6g}" z="1"/>
      <lookat origin="0, 0, 50" target="0, 0, 0" up="0, 1, 0"/>
    </transform>
    <sampler type="independent">
      <integer name="sample_count" value="{spp}"/><integer name="seed" value="{seed}"/>
    </sampler>
    <film type="specfilm">
      <integer name="width" value="{pixels}"/><integer name="height" value="{pixels}"/>
      <rfilter type="box"/>
      <spectrum type="regular" name="band">
        <float name="wavelength_min" value="{lo:.6g}"/><float name="wavelength_max" value="{hi:.6g}"/>
        <string name="values" value="1, 1"/>
      </spectrum>
    </film>
  </sensor>
  <emitter type="point">
    <point name="position" x="0" y="0" z="{h:.6g}"/>
    <spectrum type="uniform" name="intensity"><float name="value" value="{h * h:.6g}"/></spectrum>
  </emitter>
  <shape type="cube">
    <transform name="to_world">
      <scale x="{half:.6g}" y="{half:.6g}" z="{depth_mm / 2:.6g}"/>
      <translate x="0" y="0" z="{-depth_mm / 2:.6g}"/>
    </transform>
    {bsdf}
    <medium type="heterogeneous" name="interior">
      <volume type="gridvolume" name="albedo">
        <string name="filename" value="albedo.vol"/>{grid_to_world}
      </volume>
      <volume type="gridvolume" name="sigma_t">
        <string name="filename" value="sigma_t.vol"/>{grid_to_world}
      </volume>
      <float name="scale" value="1"/>
      <phase type="hg"><float name="g" value="{g:.6g}"/></phase>
    </medium>
  </shape>
</scene>
"""


def _anisotropy(folder: Path, doc: dict, tile, band_index_of) -> float:
    for t in doc["textures"]:
        if t["quantity"] == "subsurface_scatter_anisotropy" and (tile is None or t.get("udim") == tile):
            return float(np.mean(read_channel(folder / t["path"], 0)))
    try:
        entry, path = stack_file(folder, doc, "anisotropy", tile)
    except DataError:
        raise DataError(
            'the bake has neither the OpenPBR anisotropy map nor an anisotropy stack; add "openpbr" to '
            'outputs.targets or "anisotropy" to outputs.spectral and bake again'
        ) from None
    return float(np.mean(read_channel(path, band_index_of(entry))))


def _ior(doc: dict) -> float:
    ior = doc.get("targets", {}).get("openpbr", {}).get("inputs", {}).get("specular_ior", {})
    return float(ior.get("value", 1.4))


def render_band(
    descriptor_path,
    wavelength_nm: float,
    out_dir,
    *,
    patch_mm=PATCH_MM,
    pixels=PIXELS,
    spp=SPP,
    grid=GRID,
    seed=0,
    boundary="null",
    tile=None,
) -> BandRender:
    """Render one band of a baked material as a textured patch; write its scene files; return the image.

    Parameters
    ----------
    descriptor_path : str or Path
        The bake's ``material.json``.
    wavelength_nm : float
        Band wanted (nm); the stack band centred within 5 nm of it is used.
    out_dir : str or Path
        Folder for ``scenes/<band>nm/{scene.xml, albedo.vol, sigma_t.vol}``.
    patch_mm : float
        Side of the patch the texture spans (mm).
    pixels, spp, grid : int
        Render pixels per side, samples per pixel, grid texels per side.
    seed : int
        Sampler seed.
    boundary : {"null", "dielectric"}
        Index-matched or GGX rough dielectric surface (see the module docstring).
    tile : int, optional
        UDIM tile to render (default: the first).

    Returns
    -------
    BandRender
        Linear image (P, P): radiance over the band / band width, for a light of irradiance 1 at the centre.

    Raises
    ------
    DataError
        Missing stacks or band (naming what to add to the config), unreadable files.
    DependencyError
        Without Mitsuba 3 (``pip install "matgen[validate]"``).

    """
    from matgen.export.descriptor import load_descriptor
    from matgen.preview import tracer

    if boundary not in BOUNDARIES:
        raise ParameterError(f"boundary {boundary!r} is not one of {', '.join(BOUNDARIES)}")
    for name, v in (("pixels", pixels), ("spp", spp), ("grid", grid)):
        if not 1 <= int(v) <= 4096:
            raise ParameterError(f"{name} = {v} is outside 1-4096")
    if not 0 < patch_mm <= 10000:
        raise ParameterError(f"patch_mm = {patch_mm} is outside (0, 10000] mm")
    mi = tracer.mitsuba()
    descriptor_path = Path(descriptor_path)
    folder = descriptor_path.parent
    doc = load_descriptor(descriptor_path)
    a_entry, a_path = stack_file(folder, doc, "albedo_single", tile)
    m_entry, m_path = stack_file(folder, doc, "mean_free_path_mm", tile)
    ia, im = nearest_band(a_entry, wavelength_nm), nearest_band(m_entry, wavelength_nm)
    centre = stack_bands(a_entry)[ia]
    stack = doc["bands"]["spectral_stacks"]
    j = int(np.argmin(np.abs(np.asarray(stack["centre_nm"]) - centre)))
    band = (float(stack["lower_nm"][j]), float(stack["upper_nm"][j]))
    albedo = np.clip(box_downsample(read_channel(a_path, ia), grid), 0.0, 1.0)
    mfp = np.maximum(box_downsample(read_channel(m_path, im), grid), 1e-6)
    g = _anisotropy(folder, doc, tile, lambda e: nearest_band(e, wavelength_nm))
    depth = slab_depth_mm(mfp, patch_mm)
    scene_dir = Path(out_dir) / "scenes" / f"{centre:g}nm"
    scene_dir.mkdir(parents=True, exist_ok=True)
    # grid index (z, y, x); grid y grows upwards in the scene, texture rows downwards: flip the rows
    for name, values in (("albedo", albedo), ("sigma_t", 1.0 / mfp)):
        vol = np.repeat(values[::-1][None, :, :, None], 2, axis=0).astype(np.float32)
        mi.VolumeGrid(vol).write(str(scene_dir / f"{name}.vol"))
    xml = _scene_xml(depth, patch_mm, g, _ior(doc), band, int(pixels), int(spp), int(seed), boundary)
    (scene_dir / "scene.xml").write_text(xml)
    t0 = time.perf_counter()
    scene = mi.load_file(str(scene_dir / "scene.xml"))
    img = np.asarray(mi.render(scene), dtype=np.float64)[..., 0] / (band[1] - band[0])
    return BandRender(centre, band[0], band[1], img, scene_dir / "scene.xml", time.perf_counter() - t0)


def render_views(
    descriptor_path, out_dir, *, visible_nm=VISIBLE_NM, passes=PASS_NM, strict=False, **kwargs
) -> dict:
    """Render the visible view and the pass views a bake's stacks allow; write PNGs and ``render.json``.

    Bands the stacks do not hold are skipped and listed under ``skipped`` (with the reason) rather than
    failing the whole set, unless ``strict``; asking for nothing the stacks hold is a :class:`DataError`.
    ``kwargs`` go to :func:`render_band`.

    Returns
    -------
    dict
        ``{"visible": Path, "<pass>": Path, ..., "summary": Path}``.

    """
    from matgen.color.colorimetry import channel_weights
    from matgen.preview.images import linear_to_display, write_png
    from matgen.spectra.bands import BandSet

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    renders, skipped, written = {}, {}, {}
    wanted = [("visible", wl) for wl in visible_nm] + [(name, wl) for name, wl in passes.items()]
    for view, wl in wanted:
        try:
            r = render_band(descriptor_path, wl, out, **kwargs)
        except DataError as exc:
            if strict or "no band near" not in str(exc):
                raise
            skipped[f"{view} {wl:g} nm"] = str(exc)
            continue
        renders.setdefault(view, []).append(r)
    if not renders:
        raise DataError("nothing to render: " + "; ".join(skipped.values()))
    gain = 2.0**EXPOSURE_STOPS * np.pi  # pi: radiance of a white Lambertian patch under irradiance 1 is 1/pi
    vis = {r.wavelength_nm: r for r in renders.pop("visible", [])}
    if vis:
        rs = [vis[k] for k in sorted(vis)]
        bands = BandSet([r.wavelength_nm for r in rs], [r.lower_nm for r in rs], [r.upper_nm for r in rs])
        stack = np.stack([r.image for r in rs], axis=-1)
        rgb = stack @ channel_weights(bands, "sRGB", "D65").T if len(rs) >= 2 else np.repeat(stack, 3, -1)
        written["visible"] = write_png(out / "visible.png", _srgb(np.clip(rgb * gain, 0, 1)))
    for view, rs in renders.items():
        written[view] = write_png(out / f"{view}.png", linear_to_display(rs[0].image * gain))
    summary = {
        "descriptor": str(descriptor_path),
        "method": "Mitsuba 3 scalar_spectral, heterogeneous medium from the spectral stacks "
        "(matgen.preview.textured)",
        "settings": {k: v for k, v in kwargs.items()},
        "bands": [
            {
                "view": v,
                "wavelength_nm": r.wavelength_nm,
                "band_nm": [r.lower_nm, r.upper_nm],
                "scene": str(r.scene.relative_to(out)),
                "seconds": round(r.seconds, 3),
            }
            for v, rs in [("visible", list(vis.values()))] + list(renders.items())
            for r in rs
        ],
        "skipped": skipped,
        "not_modelled": "fluorescence; depth variation of the pigments (the texture is the same at "
        "every depth)",
    }
    written["summary"] = out / "render.json"
    (out / "render.json").write_text(json.dumps(summary, indent=1) + "\n")
    return written


def _srgb(linear_rgb):
    import colour

    return np.clip(colour.cctf_encoding(linear_rgb, function="sRGB"), 0.0, 1.0)
