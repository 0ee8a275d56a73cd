"""Scenes for an independent spectral path tracer (Mitsuba 3, ``scalar_spectral``, CPU). Units: mm, 1/mm, nm.

Scene units are millimetres throughout, so ``sigma_t`` is given in 1/mm and thicknesses in mm.

Total reflectance by reciprocity
--------------------------------
For a laterally uniform slab, the total reflectance for normal collimated incidence equals the radiance seen
along the normal when the slab lies under a uniform sky of unit radiance (Helmholtz reciprocity, e.g.
Chandrasekhar 1960, Sec. 13 [Chandrasekhar1960]). The scene is therefore:

- a ``constant`` emitter of radiance 1 (a ``uniform`` spectrum, valid at every wavelength, also 300 nm and
  1000 nm; RGB-upsampled spectra would be zero outside 360-830 nm),
- an ``orthographic`` camera looking straight down (``-z``) at the centre of the slab,
- one ``rectangle`` per interface (top, between layers, bottom), each carrying the media on either side
  (``exterior`` above, ``interior`` below, since a rectangle's normal points up) and a ``dielectric`` BSDF, or
  a ``null`` BSDF where the indices match; a clear layer (``mu_a = mu_s = 0``) has no medium,
- a black ``rectangle`` below the stack so that the sky is not seen through it,
- the ``volpath`` integrator with unlimited depth.

``specfilm`` returns the integral of radiance times the band's sensitivity over wavelength, not an average: a
flat band of width ``w`` nm on the unit sky reads ``w``; values are divided by the band width here.

Russian roulette. ``volpath``'s default roulette (from depth 5, survival probability capped at 0.95) makes the
weights of long paths in high-albedo media heavy-tailed: the pixel mean then comes out low more often than
not and its sample variance understates the error (measured: albedo 0.99, 200 mean free paths deep, 1.5-2 %
low against adding-doubling). Roulette is therefore pushed to depth ``rr_depth`` (default 100000 events), so
every path runs until it leaves the stack; the weight of a path is then bounded by 1 and the pixel variance is
an honest error estimate.

Noise. Each pixel of the film is an independent estimate of the same value (the slab is laterally uniform
and the ``box`` reconstruction filter keeps each sample in its pixel); the standard error is the standard
deviation across pixels divided by the square root of their number.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from matgen._optional import require
from matgen.errors import ParameterError
from matgen.transport.results import Estimate
from matgen.transport.stack import Stack

#: Lateral half-width of every interface rectangle, in units of the stack's total thickness (and at least
#: 200 mm). Light that leaves this footprint sideways is lost; at this width the loss is far below the noise.
LATERAL_HALF_WIDTH_PER_THICKNESS = 200.0

#: Russian roulette starts after this many scattering events (see the module docstring).
DEFAULT_RR_DEPTH = 100_000

#: Film resolution (pixels per side) of a reflectance render: 32 x 32 = 1024 independent pixel estimates.
DEFAULT_RESOLUTION = 32

_VARIANT = "scalar_spectral"


def mitsuba():
    """Import Mitsuba 3 with the ``scalar_spectral`` variant set, or raise :class:`DependencyError`."""
    mi = require("mitsuba", "render with the spectral path tracer")
    if mi.variant() != _VARIANT:
        mi.set_variant(_VARIANT)
    return mi


def mitsuba_version() -> str:
    """Version string of the installed Mitsuba 3 (raises :class:`DependencyError` when absent)."""
    return str(mitsuba().__version__)


def _uniform(value: float) -> dict:
    return {"type": "uniform", "value": float(value)}


def band_sensitivity(lower_nm: float, upper_nm: float) -> dict:
    """Return a flat band sensitivity from ``lower_nm`` to ``upper_nm`` (nm) as a Mitsuba spectrum.

    The spectrum is of Mitsuba's ``regular`` type.
    """
    if not (math.isfinite(lower_nm) and math.isfinite(upper_nm) and 0 < lower_nm < upper_nm):
        raise ParameterError(f"band [{lower_nm}, {upper_nm}] nm is invalid; need 0 < lower < upper")
    return {
        "type": "regular",
        "wavelength_min": float(lower_nm),
        "wavelength_max": float(upper_nm),
        "values": "1, 1",
    }


@dataclass(frozen=True)
class TracerLayer:
    """One homogeneous layer as the path tracer sees it.

    Attributes
    ----------
    thickness_mm : float
        Layer thickness in mm.
    albedo : float
        Single-scattering albedo sigma_s / sigma_t (dimensionless).
    sigma_t_per_mm : float
        Extinction coefficient in 1/mm (0 = clear layer, no medium).
    g : float
        Henyey-Greenstein anisotropy.
    n : float
        Refractive index.

    """

    thickness_mm: float
    albedo: float
    sigma_t_per_mm: float
    g: float
    n: float

    @classmethod
    def from_coefficients(cls, thickness_mm, mu_a, mu_s, g, n) -> TracerLayer:
        """Layer from absorption and scattering coefficients in 1/mm."""
        sigma_t = float(mu_a) + float(mu_s)
        albedo = float(mu_s) / sigma_t if sigma_t > 0 else 0.0
        return cls(float(thickness_mm), albedo, sigma_t, float(g), float(n))


def layers_from_stack(stack: Stack) -> list[TracerLayer]:
    """Convert the layers of a :class:`~matgen.transport.stack.Stack` (1/mm, mm) to tracer layers."""
    return [
        TracerLayer.from_coefficients(
            stack.thickness_mm[i], stack.mu_a[i], stack.mu_s[i], stack.g[i], stack.n[i]
        )
        for i in range(stack.n_layers)
    ]


def _boundary_bsdf(n_inside: float, n_outside: float) -> dict:
    if abs(n_inside - n_outside) < 1e-12:
        return {"type": "null"}
    return {"type": "dielectric", "int_ior": float(n_inside), "ext_ior": float(n_outside)}


def _medium(layer: TracerLayer) -> dict | None:
    if layer.sigma_t_per_mm <= 0.0:
        return None
    return {
        "type": "homogeneous",
        "albedo": _uniform(layer.albedo),
        "sigma_t": _uniform(layer.sigma_t_per_mm),
        "scale": 1.0,
        "phase": {"type": "hg", "g": float(layer.g)},
    }


def _check_layers(layers, n_above, n_below):
    if not layers:
        raise ParameterError("the tracer stack has no layers")
    for i, la in enumerate(layers):
        if not (la.thickness_mm > 0 and math.isfinite(la.thickness_mm)):
            raise ParameterError(f"tracer layer {i}: thickness {la.thickness_mm} mm must be finite and > 0")
        if not (0.0 <= la.albedo <= 1.0):
            raise ParameterError(f"tracer layer {i}: albedo {la.albedo} must lie in [0, 1]")
        if not (la.sigma_t_per_mm >= 0 and math.isfinite(la.sigma_t_per_mm)):
            raise ParameterError(
                f"tracer layer {i}: sigma_t {la.sigma_t_per_mm} 1/mm must be finite and >= 0"
            )
        if not (-1.0 < la.g < 1.0):
            raise ParameterError(f"tracer layer {i}: g {la.g} must lie in (-1, 1)")
        if not la.n >= 1.0:
            raise ParameterError(f"tracer layer {i}: refractive index {la.n} must be >= 1")
    for name, v in (("n_above", n_above), ("n_below", n_below)):
        if not (math.isfinite(v) and v >= 1.0):
            raise ParameterError(f"{name} is {v}; must be finite and >= 1")


def stack_interfaces(layers, n_above: float, n_below: float, half_width_mm: float) -> dict:
    """Mitsuba shape dicts of the stack's interfaces (top at z = total thickness, bottom at z = 0), in mm.

    Parameters
    ----------
    layers : sequence of TracerLayer
        Layers from top to bottom.
    n_above, n_below : float
        Refractive indices of the ambient media above and below (no medium: clear).
    half_width_mm : float
        Lateral half-width of each interface rectangle in mm.

    Returns
    -------
    dict
        Scene entries ``interface_<i>`` (i = 0 at the top).

    """
    mi = mitsuba()
    T = mi.ScalarTransform4f
    total = float(sum(la.thickness_mm for la in layers))
    media = [_medium(la) for la in layers]
    shapes = {}
    z = total
    n_up, m_up = float(n_above), None
    for i in range(len(layers) + 1):
        n_dn = layers[i].n if i < len(layers) else float(n_below)
        m_dn = media[i] if i < len(layers) else None
        shape = {
            "type": "rectangle",
            "to_world": T().translate([0.0, 0.0, z]) @ T().scale([half_width_mm, half_width_mm, 1.0]),
            "bsdf": _boundary_bsdf(n_dn, n_up),
        }
        if m_dn is not None:
            shape["interior"] = m_dn
        if m_up is not None:
            shape["exterior"] = m_up
        shapes[f"interface_{i}"] = shape
        if i < len(layers):
            z -= layers[i].thickness_mm
        n_up, m_up = n_dn, m_dn
    return shapes


def reflectance_scene(
    layers,
    n_above,
    n_below,
    lower_nm,
    upper_nm,
    *,
    paths_per_pixel,
    seed=0,
    resolution=DEFAULT_RESOLUTION,
    rr_depth=DEFAULT_RR_DEPTH,
    empty=False,
):
    """Build the reciprocity scene (module docstring) for one band, as a loaded Mitsuba scene.

    Parameters
    ----------
    layers : sequence of TracerLayer
        Layers from top to bottom (mm, 1/mm).
    n_above, n_below : float
        Ambient refractive indices.
    lower_nm, upper_nm : float
        Band edges in nm.
    paths_per_pixel : int
        Samples per pixel.
    seed : int
        Sampler seed.
    resolution : int
        Film pixels per side.
    rr_depth : int
        Scattering events before Russian roulette starts.
    empty : bool
        Leave the stack and the black floor out (the camera then sees only the sky; a calibration check).

    """
    mi = mitsuba()
    T = mi.ScalarTransform4f
    _check_layers(layers, n_above, n_below)
    total = float(sum(la.thickness_mm for la in layers))
    half_width = max(LATERAL_HALF_WIDTH_PER_THICKNESS * total, 200.0)
    view_half = min(0.05 * total, 0.5)
    scene = {
        "type": "scene",
        "integrator": {"type": "volpath", "max_depth": -1, "rr_depth": int(rr_depth)},
        "sensor": {
            "type": "orthographic",
            "to_world": T().look_at(
                origin=[0.0, 0.0, total + 1.0], target=[0.0, 0.0, 0.0], up=[0.0, 1.0, 0.0]
            )
            @ T().scale([view_half, view_half, 1.0]),
            "sampler": {"type": "independent", "sample_count": int(paths_per_pixel), "seed": int(seed)},
            "film": {
                "type": "specfilm",
                "width": int(resolution),
                "height": int(resolution),
                "rfilter": {"type": "box"},
                "band": band_sensitivity(lower_nm, upper_nm),
            },
        },
        "sky": {"type": "constant", "radiance": _uniform(1.0)},
    }
    if not empty:
        scene.update(stack_interfaces(layers, n_above, n_below, half_width))
        scene["floor"] = {
            "type": "rectangle",
            "to_world": T().translate([0.0, 0.0, -1.0]) @ T().scale([2 * half_width, 2 * half_width, 1.0]),
            "bsdf": {"type": "diffuse", "reflectance": _uniform(0.0)},
        }
    return mi.load_dict(scene)


def render_reflectance(
    layers,
    n_above,
    n_below,
    lower_nm,
    upper_nm,
    *,
    paths=262_144,
    seed=0,
    resolution=DEFAULT_RESOLUTION,
    rr_depth=DEFAULT_RR_DEPTH,
    empty=False,
) -> Estimate:
    """Total reflectance (specular + diffuse) of a layered slab at normal incidence, by the path tracer.

    Source: Mitsuba 3 [Jakob2022mitsuba3], scene of the module docstring (reciprocity, [Chandrasekhar1960]).

    Parameters
    ----------
    layers : sequence of TracerLayer
        Layers from top to bottom (thickness in mm, sigma_t in 1/mm).
    n_above, n_below : float
        Ambient refractive indices above and below.
    lower_nm, upper_nm : float
        Edges of the band in nm; one band per render.
    paths : int
        Total camera paths (spread over ``resolution**2`` pixels, rounded up per pixel).
    seed : int
        Sampler seed.
    resolution : int
        Film pixels per side (>= 8, so that the noise estimate has at least 64 pixels).
    rr_depth : int
        Scattering events before Russian roulette.
    empty : bool
        Render the sky alone (the result should be exactly 1).

    Returns
    -------
    Estimate
        Band-averaged total reflectance (dimensionless) and its standard error from the pixel spread.

    """
    if resolution < 8:
        raise ParameterError(f"resolution {resolution} px is too small for a noise estimate; use >= 8")
    if paths < resolution * resolution:
        raise ParameterError(f"paths {paths} is below one per pixel ({resolution * resolution})")
    mi = mitsuba()
    spp = int(math.ceil(paths / (resolution * resolution)))
    scene = reflectance_scene(
        layers,
        n_above,
        n_below,
        lower_nm,
        upper_nm,
        paths_per_pixel=spp,
        seed=seed,
        resolution=resolution,
        rr_depth=rr_depth,
        empty=empty,
    )
    image = np.asarray(mi.render(scene), dtype=np.float64)[..., 0] / (float(upper_nm) - float(lower_nm))
    pixels = image.ravel()
    return Estimate(float(pixels.mean()), float(pixels.std(ddof=1) / math.sqrt(pixels.size)))


def render_stack_reflectance(stack: Stack, lower_nm: float, upper_nm: float, **kwargs) -> Estimate:
    """:func:`render_reflectance` for a transport :class:`~matgen.transport.stack.Stack` (mm, 1/mm)."""
    return render_reflectance(
        layers_from_stack(stack), stack.n_above, stack.n_below, lower_nm, upper_nm, **kwargs
    )
