"""Rendered previews of a flat skin patch lit by a small light, in the visible and in a UV and an IR pass.

Units: mm for every length (patch field, light radius), nm for wavelengths.

Two methods:

- ``"tracer"``: Mitsuba 3 (``scalar_spectral``) renders a deep slab of the effective homogeneous medium
  (per band single-scattering albedo, mean free path, HG g, boundary index, a rough dielectric surface of
  GGX roughness :data:`SURFACE_ROUGHNESS`) under a small point light :data:`LIGHT_HEIGHT_MM` above it,
  seen from straight above by an orthographic camera. The irradiance on the patch is
  E(r) = (1 + (r / h)^2)^(-3/2) (1 at the foot of the light): bright within about h of the centre, with
  tails over the whole patch, so that light entering anywhere can be connected to the light and the render
  converges. The visible view is one spectral render to Mitsuba's RGB
  film (linear sRGB primaries); a pass is one render to a ``specfilm`` whose sensitivity is the pass curve.
  [Jakob2022mitsuba3]
- ``"builtin"``: a clearly labelled approximation without a path tracer: the irradiance of the same small
  light convolved with matgen's fitted normalised-diffusion profile R(r) = A (e^{-r/d} + e^{-r/3d}) /
  (8 pi d r) per band [Christensen2015], then reduced to working-space RGB with the colour weights or to a
  pass with its weights. It shows the colour and the spread of light under the skin; it has no specular
  highlight, no single scattering and no boundary effects beyond those in A and d.

``"auto"`` uses the tracer when Mitsuba is installed, the built-in approximation otherwise. Every image is
labelled with the method that made it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from matgen.errors import DependencyError, ParameterError

#: Default patch: field of view (mm), height of the small light above the patch (mm), pixels per side.
FIELD_MM = 12.0
LIGHT_HEIGHT_MM = 1.5
PIXELS = 128

#: Exposure of the previews in stops: the lit disc saturates so that the glow around it is visible.
EXPOSURE_STOPS = 2.0

#: GGX roughness (alpha) of the patch surface in the tracer preview. A smooth dielectric would hide a point
#: light from every path under the surface (a delta interface cannot be connected to a point light); a
#: rough one can, and skin is not optically smooth.
SURFACE_ROUGHNESS = 0.3

#: Passes shown beside the visible view.
DEFAULT_PASSES = ("uv365", "nir850")

BUILTIN_LABEL = "built-in approximation (light pattern convolved with the fitted diffusion profile)"


@dataclass(frozen=True)
class PatchMedium:
    """The per-band effective medium of one texel or parameter set (all arrays shape (B,)).

    Attributes
    ----------
    bands : BandSet
    albedo_multiple : ndarray
        Total diffuse reflectance A (1).
    shape_distance_mm : ndarray
        Normalised-diffusion shape distance d (mm).
    albedo_single : ndarray
        Single-scattering albedo of the effective medium (1).
    mean_free_path_mm : ndarray
        Mean free path 1 / sigma_t (mm).
    anisotropy : ndarray
        HG g.
    ior : float
        Boundary refractive index.
    label : str
        What it is (preset, texel).

    """

    bands: object
    albedo_multiple: np.ndarray
    shape_distance_mm: np.ndarray
    albedo_single: np.ndarray
    mean_free_path_mm: np.ndarray
    anisotropy: np.ndarray
    ior: float
    label: str = ""

    @classmethod
    def from_quantities(cls, bands, quantities: dict, index: int = 0, label: str = "") -> PatchMedium:
        """From table quantities (``summarize`` output or a table lookup): row ``index`` of each array."""

        def row(name):
            try:
                return np.asarray(quantities[name], dtype=np.float64)[index].reshape(-1)
            except KeyError:
                raise ParameterError(f"the preview needs table quantity {name!r}") from None

        ior = float(row("ior")[0]) if "ior" in quantities else 1.4
        return cls(
            bands,
            row("albedo_multiple"),
            row("shape_distance_mm"),
            row("albedo_single"),
            row("mean_free_path_mm"),
            row("anisotropy"),
            ior,
            label,
        )


def disc_kernel(medium: PatchMedium, field_mm: float, pixels: int) -> np.ndarray:
    """Per band, the reflectance each pixel receives from a unit point source at the centre (B, P, P).

    Pixel (i, j) holds R(r_ij) times the pixel area; the centre pixel, where R has its 1/r singularity,
    holds A F(r_eq) with the exact cumulative fraction F of the profile over the disc of equal area. Where d
    is not much larger than a pixel, sampling R at pixel centres misstates the energy near the centre; the
    other pixels are therefore rescaled so that the kernel's total is A F(r_grid), the exact fraction inside
    the disc of the grid's area. [Christensen2015]
    """
    from matgen.fit.models import burley2015_cdf, burley2015_profile

    px = field_mm / pixels
    c = (np.arange(pixels) - (pixels - 1) / 2.0) * px
    r = np.hypot(c[None, :], c[:, None])
    a = medium.albedo_multiple[:, None, None]
    d = np.maximum(medium.shape_distance_mm, 1e-6)[:, None, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        k = burley2015_profile(np.maximum(r, 1e-12), a, d) * px * px
    k = np.nan_to_num(k)
    if pixels % 2 == 1:
        r_eq = px / math.sqrt(math.pi)
        centre = medium.albedo_multiple * burley2015_cdf(r_eq, d[:, 0, 0])
        k[:, pixels // 2, pixels // 2] = 0.0
        target = medium.albedo_multiple * burley2015_cdf(field_mm / math.sqrt(math.pi), d[:, 0, 0]) - centre
        rest = k.sum(axis=(1, 2))
        k *= np.where(rest > 0, target / np.where(rest > 0, rest, 1.0), 0.0)[:, None, None]
        k[:, pixels // 2, pixels // 2] = centre
    return k


def light_irradiance(radius_mm, light_height_mm: float = LIGHT_HEIGHT_MM):
    """Irradiance on the patch from a unit point light of intensity h^2 at height h: (1 + (r/h)^2)^(-3/2).

    Inverse-square law with the cosine of incidence (E = I cos(theta) / distance^2); 1 at r = 0.
    """
    r = np.asarray(radius_mm, dtype=np.float64)
    return (1.0 + (r / light_height_mm) ** 2) ** -1.5


def builtin_band_images(
    medium: PatchMedium,
    field_mm: float = FIELD_MM,
    pixels: int = PIXELS,
    light_height_mm: float = LIGHT_HEIGHT_MM,
) -> np.ndarray:
    """Compute the exitant diffuse reflectance (B, P, P) of the patch under the small light (FFT convolution).

    Source: the fitted profile of [Christensen2015]; the convolution of irradiance with a radially symmetric
    profile is the standard diffusion-profile rendering of translucent materials ([Jensen2001]).
    """
    if pixels < 16 or pixels > 2048:
        raise ParameterError(f"preview pixels {pixels} must lie in [16, 2048]")
    if not (0 < light_height_mm <= field_mm):
        raise ParameterError(f"light height {light_height_mm} mm must lie in (0, field = {field_mm} mm]")
    n = pixels | 1  # odd, so the light and kernel centres fall on a pixel
    px = field_mm / n
    c = (np.arange(n) - (n - 1) / 2.0) * px
    light = light_irradiance(np.hypot(c[None, :], c[:, None]), light_height_mm)
    kern = disc_kernel(medium, field_mm, n)
    size = 2 * n
    f_light = np.fft.rfft2(light, s=(size, size))
    out = np.fft.irfft2(np.fft.rfft2(kern, s=(size, size)) * f_light[None], s=(size, size))
    h = n // 2
    return np.clip(out[:, h : h + n, h : h + n], 0.0, None)


def builtin_views(
    medium: PatchMedium,
    passes=DEFAULT_PASSES,
    working_space: str = "ACEScg",
    illuminant: str = "D65",
    **kwargs,
) -> dict:
    """Display images (P, P, 3) of the built-in approximation: ``visible`` and one per pass."""
    from matgen.color import channel_weights, pass_weights
    from matgen.preview.images import linear_to_display, working_to_display

    imgs = builtin_band_images(medium, **kwargs)
    views = {}
    w = channel_weights(medium.bands, working_space, illuminant)
    rgb = np.tensordot(imgs, w.T, axes=([0], [0]))
    views["visible"] = working_to_display(
        rgb, "ACEScg" if working_space.lower() == "acescg" else working_space, EXPOSURE_STOPS
    )
    for name in passes:
        pw = pass_weights(name, medium.bands)
        grey = linear_to_display(np.tensordot(imgs, pw, axes=([0], [0])) * 2.0**EXPOSURE_STOPS)
        views[name] = np.repeat(grey[..., None], 3, axis=2)
    return views


# ----------------------------------------------------------------------------------------------------------
# spectral path tracer


def _irregular(bands, values) -> dict:
    wl = ", ".join(f"{w:.3f}" for w in bands.centre_nm)
    vals = ", ".join(f"{max(float(v), 0.0):.6g}" for v in values)
    return {"type": "irregular", "wavelengths": wl, "values": vals}


def _tracer_scene(
    medium: PatchMedium, film: dict, field_mm: float, light_height_mm: float, spp: int, seed: int
):
    from matgen.preview import tracer

    mi = tracer.mitsuba()
    T = mi.ScalarTransform4f
    mfp_max = float(np.max(medium.mean_free_path_mm))
    depth = float(min(max(40.0 * mfp_max, 10.0), 60.0))
    sigma_t = 1.0 / np.maximum(medium.mean_free_path_mm, 1e-6)
    med = {
        "type": "homogeneous",
        "albedo": _irregular(medium.bands, np.clip(medium.albedo_single, 0, 1)),
        "sigma_t": _irregular(medium.bands, sigma_t),
        "scale": 1.0,
        "phase": {"type": "hg", "g": float(np.mean(medium.anisotropy))},
    }
    half = 400.0
    scene = {
        "type": "scene",
        "integrator": {"type": "volpath", "max_depth": -1},
        "sensor": {
            "type": "orthographic",
            "to_world": T().look_at(origin=[0, 0, 50.0], target=[0, 0, 0], up=[0, 1, 0])
            @ T().scale([field_mm / 2, field_mm / 2, 1.0]),
            "sampler": {"type": "independent", "sample_count": int(spp), "seed": int(seed)},
            "film": film,
        },
        "light": {
            "type": "point",
            "position": [0.0, 0.0, float(light_height_mm)],
            "intensity": {"type": "uniform", "value": float(light_height_mm) ** 2},
        },
        "top": {
            "type": "rectangle",
            "to_world": T().scale([half, half, 1.0]),
            "bsdf": {
                "type": "roughdielectric",
                "distribution": "ggx",
                "alpha": SURFACE_ROUGHNESS,
                "int_ior": float(medium.ior),
                "ext_ior": 1.0,
            },
            "interior": med,
        },
        "bottom": {
            "type": "rectangle",
            "to_world": T().translate([0, 0, -depth]) @ T().scale([half, half, 1.0]),
            "bsdf": {"type": "null"},
            "exterior": med,
        },
        "floor": {
            "type": "rectangle",
            "to_world": T().translate([0, 0, -depth - 1.0]) @ T().scale([half, half, 1.0]),
            "bsdf": {"type": "diffuse", "reflectance": {"type": "uniform", "value": 0.0}},
        },
    }
    return mi, mi.load_dict(scene)


def tracer_views(
    medium: PatchMedium,
    passes=DEFAULT_PASSES,
    *,
    field_mm: float = FIELD_MM,
    light_height_mm: float = LIGHT_HEIGHT_MM,
    pixels: int = 96,
    spp: int = 16,
    seed: int = 0,
) -> dict:
    """Display images (P, P, 3) rendered by Mitsuba 3: ``visible`` (RGB film) and one per pass (specfilm).

    Needs the table bands to cover the pass curves and 400-700 nm; the visible view uses Mitsuba's own
    spectral-to-RGB film (linear sRGB primaries), then the sRGB encoding.
    """
    from matgen.color import pass_weights
    from matgen.preview.images import linear_to_display

    views = {}
    film = {
        "type": "hdrfilm",
        "width": pixels,
        "height": pixels,
        "pixel_format": "rgb",
        "rfilter": {"type": "box"},
    }
    mi, scene = _tracer_scene(medium, film, field_mm, light_height_mm, spp, seed)
    rgb = np.asarray(mi.render(scene), dtype=np.float64)[..., :3]
    import colour

    views["visible"] = np.clip(
        colour.cctf_encoding(np.clip(rgb * 2.0**EXPOSURE_STOPS, 0, 1), function="sRGB"), 0, 1
    )
    for k, name in enumerate(passes):
        pw = pass_weights(name, medium.bands)
        keep = pw > 0
        sub = medium.bands.subset(keep)
        if sub.centre_nm.size < 2:
            lo, hi = float(sub.lower_nm[0]), float(sub.upper_nm[0])
            band = {"type": "regular", "wavelength_min": lo, "wavelength_max": hi, "values": "1, 1"}
            norm = hi - lo
        else:
            band = _irregular(sub, pw[keep] / np.max(pw[keep]))
            norm = float(np.trapezoid(pw[keep] / np.max(pw[keep]), sub.centre_nm))
        pfilm = {
            "type": "specfilm",
            "width": pixels,
            "height": pixels,
            "rfilter": {"type": "box"},
            "band": band,
        }
        mi, pscene = _tracer_scene(medium, pfilm, field_mm, light_height_mm, spp, seed + k + 1)
        grey = np.asarray(mi.render(pscene), dtype=np.float64)[..., 0] / norm
        views[name] = np.repeat(linear_to_display(grey * 2.0**EXPOSURE_STOPS)[..., None], 3, axis=2)
    return views


def tracer_available() -> bool:
    """Whether Mitsuba 3 can be imported."""
    try:
        from matgen.preview import tracer

        tracer.mitsuba()
    except DependencyError:
        return False
    return True


def patch_preview(
    path,
    medium: PatchMedium,
    *,
    method: str = "auto",
    passes=DEFAULT_PASSES,
    working_space: str = "ACEScg",
    illuminant: str = "D65",
    **kwargs,
) -> tuple:
    """Write a PNG with the visible view and one view per pass of a flat patch lit by a small light.

    Parameters
    ----------
    path : str or Path
        PNG to write.
    medium : PatchMedium
        The effective medium per band.
    method : {"auto", "tracer", "builtin"}
        See the module docstring; ``"auto"`` uses the tracer when Mitsuba is installed.
    passes : sequence of str
        Pass names (``matgen.color.pass_weights``).
    working_space, illuminant : str
        Colour of the built-in visible view.
    **kwargs
        Passed on to :func:`tracer_views` or :func:`builtin_views` (e.g. ``field_mm`` and
        ``light_height_mm`` in mm, ``pixels``).

    Returns
    -------
    (Path, str)
        The file written and the method used (``"tracer"`` or ``"builtin"``).

    """
    from matgen.preview.plots import plot_contact_sheet

    if method not in ("auto", "tracer", "builtin"):
        raise ParameterError(f"preview method {method!r}; use 'auto', 'tracer' or 'builtin'")
    from matgen.color import pass_weights
    from matgen.errors import DataError

    covered, left_out = [], []
    for name in passes:
        try:
            pass_weights(name, medium.bands)
            covered.append(name)
        except DataError:
            left_out.append(name)
    passes = tuple(covered)
    use = method
    if method == "auto":
        use = "tracer" if tracer_available() else "builtin"
    if use == "tracer":
        views = tracer_views(medium, passes, **kwargs)
        label = "Mitsuba 3 spectral path tracer"
    else:
        views = builtin_views(medium, passes, working_space, illuminant, **kwargs)
        label = BUILTIN_LABEL
    names = {
        "visible": "visible (sRGB view)",
        "uv365": "UV 365 nm pass",
        "nir850": "near-IR 850 nm pass",
        "nir940": "near-IR 940 nm pass",
    }
    panels = [{"title": names.get(k, k), "image": v} for k, v in views.items()]
    height = kwargs.get("light_height_mm", LIGHT_HEIGHT_MM)
    field_mm = kwargs.get("field_mm", FIELD_MM)
    title = (
        f"{medium.label + ': ' if medium.label else ''}flat patch, small light {height:g} mm above, "
        f"{field_mm:g} mm field, +{EXPOSURE_STOPS:g} stops\n{label}"
        + (f"\n(passes {', '.join(left_out)} left out: not covered by the bands)" if left_out else "")
    )
    out = plot_contact_sheet(path, panels, title=title, columns=len(panels), panel_px=280)
    return out, use
