"""Autodesk Standard Surface subsurface inputs (``Georgiev2019``; MaterialX 1.39 ``standard_surface``).

Maps of its own: ``subsurface_color`` (colour, working space), ``subsurface_radius`` (RGB, the per-channel
mean free path over ``subsurface_scale``, data), ``subsurface_scale`` (scene units, the largest channel's
mean free path), ``subsurface_anisotropy`` (one scalar g per texel). MaterialX's graph of the node multiplies
radius by scale into its ``subsurface_bsdf`` radius, the mean free path by that nodedef's documentation.
``specular_IOR`` is the table's boundary index. The specification states no albedo remap; matgen writes C
with the same van de Hulst convention as OpenPBR's (``"spec_remap"``), or the observed colour
(``"observed"``), and ``from_inputs`` applies the matching inverse.
"""

from __future__ import annotations

import numpy as np

from matgen.fit.inversion import albedo_single, albedo_single_OpenPBR2024, specular_reflectance_normal
from matgen.targets.base import MapSpec, Target
from matgen.targets.medium import EffectiveMedium, check_scale, require
from matgen.targets.openpbr import radius_and_scale, subsurface_color
from matgen.units import scene_units_to_mm


class StandardSurfaceTarget(Target):
    """MaterialX ``standard_surface`` subsurface inputs (``Georgiev2019``)."""

    name = "standard_surface"
    consumer = "MaterialX standard_surface"
    channels = "rgb"
    scalar_g = True
    shading_model = "Autodesk Standard Surface (MaterialX 1.39 standard_surface)"
    node = "standard_surface"

    def maps(self, options):
        """Return the standard_surface maps (see the module docstring)."""
        return [
            MapSpec(
                "subsurface_color",
                "subsurface_color",
                "rgb",
                "1",
                True,
                "color3",
                f"standard_surface subsurface_color, convention '{options.albedo_convention}'",
            ),
            MapSpec(
                "subsurface_radius",
                "subsurface_radius",
                "rgb",
                "1",
                False,
                "color3",
                "standard_surface subsurface_radius: per-channel mean free path / subsurface_scale",
            ),
            MapSpec(
                "subsurface_scale",
                "subsurface_scale",
                "y",
                "scene_unit",
                False,
                "float",
                "standard_surface subsurface_scale: largest channel mean free path, scene units",
            ),
            MapSpec(
                "subsurface_anisotropy",
                "subsurface_anisotropy",
                "y",
                "1",
                False,
                "float",
                "standard_surface subsurface_anisotropy: the g every channel was inverted with",
            ),
        ]

    def texel_inputs(self, media, metres_per_scene_unit, options):
        """Texels of every standard_surface map from a strip of media."""
        scale, ratio = radius_and_scale(media, check_scale(metres_per_scene_unit))
        return {
            "subsurface_color": np.clip(subsurface_color(media, options.albedo_convention), 0.0, 1.0),
            "subsurface_radius": ratio,
            "subsurface_scale": scale,
            "subsurface_anisotropy": media.anisotropy[:, :1],
        }

    def constant_inputs(self, ior, options):
        """``subsurface`` 1 and ``specular_IOR``."""
        return {
            "subsurface": {"value": 1.0, "type": "float"},
            "specular_IOR": {"value": float(ior), "type": "float", "unit": "1"},
        }

    def conventions(self, options):
        """Descriptor lines: the colour convention and the remap."""
        return {
            "albedo_convention": options.albedo_convention,
            "anisotropy": options.anisotropy,
            "remap": "mean free path = subsurface_radius * subsurface_scale; alpha from subsurface_color as "
            "for OpenPBR under the same albedo_convention",
            "inputs_extra": {"albedo_convention": options.albedo_convention},
        }

    def from_inputs(self, inputs, *, metres_per_scene_unit):
        """Mfp = subsurface_radius * subsurface_scale (MaterialX graph); alpha by the colour convention."""
        require(
            inputs,
            ("subsurface_color", "subsurface_radius", "subsurface_scale", "subsurface_anisotropy"),
            self.name,
        )
        m = check_scale(metres_per_scene_unit)
        g = float(inputs["subsurface_anisotropy"])
        n = float(inputs.get("specular_IOR", 1.0))
        mfp_mm = scene_units_to_mm(
            np.asarray(inputs["subsurface_radius"], dtype=np.float64) * float(inputs["subsurface_scale"]), m
        )
        c = np.asarray(inputs["subsurface_color"], dtype=np.float64)
        if inputs.get("albedo_convention", "spec_remap") == "observed":
            a_ms = c * (1.0 - specular_reflectance_normal(n))
            return EffectiveMedium(
                albedo_single(a_ms, g, n, method="boundary_table"), mfp_mm, g, n, albedo_multiple=a_ms
            )
        return EffectiveMedium(albedo_single_OpenPBR2024(c, g), mfp_mm, g, n)
