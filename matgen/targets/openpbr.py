"""OpenPBR Surface subsurface inputs (``OpenPBR2024``, Subsurface section; MaterialX ``open_pbr_surface``).

Maps: ``subsurface_color`` C (colour, working space), ``subsurface_radius`` (the largest channel's mean free
path, scene units), ``subsurface_radius_scale`` (per-channel mean free path / radius, data),
``subsurface_scatter_anisotropy`` (one scalar g per texel, data), plus ``skin_albedo`` (the skin's own
diffuse reflectance per channel, colour, wired to nothing: what the skin looks like, for people).
``specular_ior`` is the table's boundary index. OpenPBR reads one scalar g: every channel is inverted with
that g (the mean of the channels' g), so the g written is the g each channel's albedo was made for.

Colour conventions (``albedo_convention``):

- ``"spec_remap"`` (default): C is the exact inverse of the specification's remap
  (:func:`color_for_remap`; close to van de Hulst's A(alpha, g), ``vandeHulst1980``), so that the remap,
  s = 4.09712 + 4.20863 C - sqrt(9.59217 + 41.6808 C + 17.7126 C^2),
  alpha = (1 - s^2) / (1 - g s^2) (from the OpenPBR specification, recalled: not re-read here), returns
  matgen's alpha exactly and a conformant renderer reproduces the skin's reflectance under the dielectric
  boundary. The remap assumes an index-matched boundary, so C is brighter than the skin looks (the
  ``skin_albedo`` map shows the skin's own colour).
- ``"observed"``: C = A / (1 - R_specular(n)), the colour the skin shows; a renderer must then invert it
  with matgen's boundary-aware inversion (``from_inputs`` does), because the specification's remap would
  give too small an alpha and too dark a skin.
"""

from __future__ import annotations

import numpy as np

from matgen.fit.inversion import (
    albedo_single,
    albedo_single_OpenPBR2024,
    specular_reflectance_normal,
)
from matgen.targets.base import MapSpec, Target
from matgen.targets.medium import EffectiveMedium, check_scale, require
from matgen.units import mm_to_scene_units, scene_units_to_mm

#: Coefficients of the specification's remap s(C) = K0 + K1 C - sqrt(Q0 + Q1 C + Q2 C^2) (``OpenPBR2024``,
#: after ``Chiang2016``; recalled, not re-read here).
_K0, _K1, _Q0, _Q1, _Q2 = 4.09712, 4.20863, 9.59217, 41.6808, 17.7126


def color_for_remap(albedo_single_value, g) -> np.ndarray:
    """Return the C whose OpenPBR remap gives alpha exactly at anisotropy g (dimensionless).

    s = sqrt((1 - alpha) / (1 - g alpha)) is the remap's similarity parameter; s(C) = K0 + K1 C -
    sqrt(Q0 + Q1 C + Q2 C^2) squared out is the quadratic (K1^2 - Q2) C^2 + (2 (K0 - s) K1 - Q1) C +
    (K0 - s)^2 - Q0 = 0, whose leading coefficient is nearly zero (K1^2 = Q2 to 3e-6); the root is taken in
    the form that stays exact as it vanishes. Van de Hulst's A(alpha, g), the forward formula the remap
    fits, differs from it by up to a few 1e-4 in alpha.

    References
    ----------
    ``OpenPBR2024`` (Subsurface section); ``Chiang2016``.

    """
    a = np.asarray(albedo_single_value, dtype=np.float64)
    gv = np.asarray(g, dtype=np.float64)
    s = np.sqrt(np.clip((1.0 - a) / (1.0 - gv * a), 0.0, None))
    k = _K0 - s
    lead = _K1 * _K1 - _Q2
    lin = 2.0 * k * _K1 - _Q1  # < 0 for s in [0, 1]
    const = k * k - _Q0
    return 2.0 * const / (-lin + np.sqrt(lin * lin - 4.0 * lead * const))


def subsurface_color(media, convention: str) -> np.ndarray:
    """C per texel and channel (N, 3) under ``convention`` (see the module docstring)."""
    if convention == "observed":
        return media.albedo_multiple / (1.0 - specular_reflectance_normal(media.ior))
    return color_for_remap(media.albedo_single, media.anisotropy)


def radius_and_scale(media, metres_per_scene_unit: float):
    """(largest mean free path (N, 1) in scene units, per-channel ratio to it (N, 3))."""
    mfp = mm_to_scene_units(media.mean_free_path_mm, metres_per_scene_unit)
    radius = mfp.max(axis=1, keepdims=True)
    return radius, np.divide(mfp, radius, out=np.ones_like(mfp), where=radius > 0)


class OpenPBRTarget(Target):
    """OpenPBR Surface v0.4 / 1.1 subsurface inputs (``OpenPBR2024``)."""

    name = "openpbr"
    consumer = "OpenPBR Surface"
    channels = "rgb"
    scalar_g = True
    shading_model = "OpenPBR Surface (MaterialX 1.39 open_pbr_surface)"
    node = "open_pbr_surface"

    def maps(self, options):
        """Return the OpenPBR maps (see the module docstring)."""
        return [
            MapSpec(
                "subsurface_color",
                "subsurface_color",
                "rgb",
                "1",
                True,
                "color3",
                f"OpenPBR subsurface_color, convention '{options.albedo_convention}'",
            ),
            MapSpec(
                "subsurface_radius",
                "subsurface_radius",
                "y",
                "scene_unit",
                False,
                "float",
                "OpenPBR subsurface_radius: largest channel mean free path, scene units",
            ),
            MapSpec(
                "subsurface_radius_scale",
                "subsurface_radius_scale",
                "rgb",
                "1",
                False,
                "color3",
                "OpenPBR subsurface_radius_scale: per-channel mean free path / subsurface_radius",
            ),
            MapSpec(
                "subsurface_scatter_anisotropy",
                "subsurface_scatter_anisotropy",
                "y",
                "1",
                False,
                "float",
                "OpenPBR subsurface_scatter_anisotropy: the g every channel was inverted with",
            ),
            MapSpec(
                "skin_albedo",
                None,
                "rgb",
                "1",
                True,
                None,
                "the skin's diffuse reflectance per channel (what it looks like; not a shader input)",
            ),
        ]

    def texel_inputs(self, media, metres_per_scene_unit, options):
        """Texels of every OpenPBR map from a strip of media (one g per texel)."""
        radius, scale = radius_and_scale(media, check_scale(metres_per_scene_unit))
        return {
            "subsurface_color": np.clip(subsurface_color(media, options.albedo_convention), 0.0, 1.0),
            "subsurface_radius": radius,
            "subsurface_radius_scale": scale,
            "subsurface_scatter_anisotropy": media.anisotropy[:, :1],
            "skin_albedo": media.albedo_multiple,
        }

    def constant_inputs(self, ior, options):
        """``subsurface_weight`` 1 and ``specular_ior``."""
        return {
            "subsurface_weight": {"value": 1.0, "type": "float"},
            "specular_ior": {"value": float(ior), "type": "float", "unit": "1"},
        }

    def conventions(self, options):
        """Descriptor lines: the colour convention and the remap the consumer applies."""
        remap = {
            "spec_remap": "alpha = (1 - s^2) / (1 - g s^2), s = 4.09712 + 4.20863 C - sqrt(9.59217 + "
            "41.6808 C + 17.7126 C^2) with g = subsurface_scatter_anisotropy (OpenPBR specification)",
            "observed": "C = A / (1 - R_specular(specular_ior)); alpha from A by matgen's boundary-aware "
            "inversion (matgen.fit.inversion.albedo_single, method 'boundary_table')",
        }[options.albedo_convention]
        return {
            "albedo_convention": options.albedo_convention,
            "anisotropy": options.anisotropy,
            "remap": remap + "; mean free path = subsurface_radius * subsurface_radius_scale",
            "inputs_extra": {"albedo_convention": options.albedo_convention},
        }

    def from_inputs(self, inputs, *, metres_per_scene_unit):
        """Apply OpenPBR's remap: mfp = radius * radius_scale; alpha from C (module docstring)."""
        require(
            inputs,
            (
                "subsurface_color",
                "subsurface_radius",
                "subsurface_radius_scale",
                "subsurface_scatter_anisotropy",
            ),
            self.name,
        )
        m = check_scale(metres_per_scene_unit)
        c = np.asarray(inputs["subsurface_color"], dtype=np.float64)
        g = float(inputs["subsurface_scatter_anisotropy"])
        n = float(inputs.get("specular_ior", 1.0))
        mfp_mm = scene_units_to_mm(
            float(inputs["subsurface_radius"])
            * np.asarray(inputs["subsurface_radius_scale"], dtype=np.float64),
            m,
        )
        if inputs.get("albedo_convention", "spec_remap") == "observed":
            a_ms = c * (1.0 - specular_reflectance_normal(n))
            return EffectiveMedium(
                albedo_single(a_ms, g, n, method="boundary_table"), mfp_mm, g, n, albedo_multiple=a_ms
            )
        return EffectiveMedium(albedo_single_OpenPBR2024(c, g), mfp_mm, g, n)
