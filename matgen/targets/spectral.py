"""Band targets: a spectral homogeneous medium, and reflectance + mean free path.

``spectral_medium``: per band the single-scattering albedo, the mean free path 1 / sigma_t in scene units
and the Henyey-Greenstein g, with the boundary index ``eta``, as spectral path tracers take a homogeneous
medium (Mitsuba 3's ``homogeneous``: ``albedo``, ``sigma_t`` = 1 / mean free path, ``hg`` phase ``g``;
radiative-transfer definitions of ``vandeHulst1980``). ``to_inputs`` also gives sigma_a, sigma_s and
sigma_t in 1/scene unit.

``reflectance_mfp``: per band the skin's diffuse reflectance A, the mean free path (scene units) and g, with
``eta`` and the name of the inversion that maps A to alpha under that boundary; a consumer rebuilds alpha
with :func:`matgen.fit.inversion.albedo_single`.

Both are data (never colour-managed) and are written as float32: the albedo near 1 needs it (a half float
steps by 4.9e-4 near alpha = 0.998, a large share of 1 - alpha).
"""

from __future__ import annotations

import numpy as np

from matgen.errors import ParameterError
from matgen.fit.inversion import albedo_single
from matgen.targets.base import MapSpec, Target
from matgen.targets.medium import EffectiveMedium, check_scale, require
from matgen.units import mm_to_scene_units, scene_units_to_mm


class SpectralMediumTarget(Target):
    """A homogeneous medium per band: albedo, mean free path (scene units), g, eta."""

    name = "spectral_medium"
    consumer = "spectral homogeneous medium"
    channels = "bands"
    shading_model = "homogeneous participating medium per band (e.g. Mitsuba 3 homogeneous, hg phase)"

    def maps(self, options):
        """Per-band stacks: albedo, mean_free_path, anisotropy."""
        return [
            MapSpec("albedo", "albedo", "bands", "1", False, None, "single-scattering albedo per band"),
            MapSpec(
                "mean_free_path",
                "mean_free_path",
                "bands",
                "scene_unit",
                False,
                None,
                "mean free path 1 / sigma_t per band, scene units",
            ),
            MapSpec("anisotropy", "g", "bands", "1", False, None, "Henyey-Greenstein g per band"),
        ]

    def texel_inputs(self, media, metres_per_scene_unit, options):
        """Texels of the three stacks."""
        m = check_scale(metres_per_scene_unit)
        return {
            "albedo": media.albedo_single,
            "mean_free_path": mm_to_scene_units(media.mean_free_path_mm, m),
            "anisotropy": media.anisotropy,
        }

    def constant_inputs(self, ior, options):
        """``eta``, the boundary index."""
        return {"eta": {"value": float(ior), "type": "float", "unit": "1"}}

    def conventions(self, options):
        """Descriptor lines: how the medium is rebuilt."""
        return {
            "anisotropy": options.anisotropy,
            "remap": "sigma_t = 1 / mean_free_path, sigma_s = albedo sigma_t, sigma_a = (1 - albedo) "
            "sigma_t (1/scene unit); phase Henyey-Greenstein g; dielectric boundary of index eta",
        }

    def to_inputs(self, medium, *, metres_per_scene_unit, **options):
        """Per-band lists, with sigma_a, sigma_s, sigma_t in 1/scene unit."""
        out = super().to_inputs(medium, metres_per_scene_unit=metres_per_scene_unit, **options)
        sigma_t = 1.0 / np.asarray(out["mean_free_path"])
        a = np.asarray(out["albedo"])
        out.update(
            sigma_t=sigma_t.tolist(), sigma_s=(sigma_t * a).tolist(), sigma_a=(sigma_t * (1 - a)).tolist()
        )
        return out

    def from_inputs(self, inputs, *, metres_per_scene_unit):
        """Alpha = albedo, mean free path from scene units (or from sigma_a + sigma_s when given)."""
        m = check_scale(metres_per_scene_unit)
        if "albedo" not in inputs and {"sigma_a", "sigma_s"} <= set(inputs):
            sa = np.asarray(inputs["sigma_a"], dtype=np.float64)
            ss = np.asarray(inputs["sigma_s"], dtype=np.float64)
            inputs = dict(inputs, albedo=ss / (sa + ss), mean_free_path=1.0 / (sa + ss))
        require(inputs, ("albedo", "mean_free_path", "g"), self.name)
        return EffectiveMedium(
            np.asarray(inputs["albedo"], dtype=np.float64),
            scene_units_to_mm(np.asarray(inputs["mean_free_path"], dtype=np.float64), m),
            np.asarray(inputs["g"], dtype=np.float64),
            float(inputs.get("eta", 1.0)),
        )


class ReflectanceMfpTarget(Target):
    """The skin's A and the mean free path per band, with g, eta and the inversion mapping A to alpha."""

    name = "reflectance_mfp"
    consumer = "reflectance + mean free path"
    channels = "bands"
    shading_model = "diffuse reflectance and mean free path per band, inverted by the consumer"
    inversion = "boundary_table"

    def maps(self, options):
        """Per-band stacks: reflectance, mean_free_path, anisotropy."""
        return [
            MapSpec(
                "reflectance",
                "reflectance",
                "bands",
                "1",
                False,
                None,
                "diffuse reflectance A per band (the half-space's, under the boundary eta)",
            ),
            MapSpec(
                "mean_free_path",
                "mean_free_path",
                "bands",
                "scene_unit",
                False,
                None,
                "mean free path per band, scene units",
            ),
            MapSpec("anisotropy", "g", "bands", "1", False, None, "Henyey-Greenstein g per band"),
        ]

    def texel_inputs(self, media, metres_per_scene_unit, options):
        """Texels of the three stacks."""
        m = check_scale(metres_per_scene_unit)
        return {
            "reflectance": media.albedo_multiple,
            "mean_free_path": mm_to_scene_units(media.mean_free_path_mm, m),
            "anisotropy": media.anisotropy,
        }

    def constant_inputs(self, ior, options):
        """``eta`` and the inversion's name."""
        return {
            "eta": {"value": float(ior), "type": "float", "unit": "1"},
            "inversion": {"value": self.inversion, "type": "string"},
        }

    def conventions(self, options):
        """Descriptor lines: how alpha is rebuilt."""
        return {
            "anisotropy": options.anisotropy,
            "remap": "alpha = matgen.fit.inversion.albedo_single(reflectance, g, eta, method=inversion)",
        }

    def to_inputs(self, medium, *, metres_per_scene_unit, inversion=None, **options):
        """Return per-band lists; ``reflectance`` is the medium's own A under ``inversion``.

        The default inversion is ``"boundary_table"``; A equals the skin's when the medium was inverted
        with it.
        """
        from matgen.fit.inversion import INVERSION_METHODS, albedo_multiple

        method = inversion or self.inversion
        if method not in INVERSION_METHODS:
            raise ParameterError(f"unknown inversion {method!r}; use one of {', '.join(INVERSION_METHODS)}")
        a = albedo_multiple(medium.albedo_single, medium.anisotropy, medium.ior, method=method)
        medium = EffectiveMedium(
            medium.albedo_single, medium.mean_free_path_mm, medium.anisotropy, medium.ior, albedo_multiple=a
        )
        out = super().to_inputs(medium, metres_per_scene_unit=metres_per_scene_unit, **options)
        out["inversion"] = method
        return out

    def from_inputs(self, inputs, *, metres_per_scene_unit):
        """Alpha from reflectance by the named inversion; mean free path converted to mm."""
        require(inputs, ("reflectance", "mean_free_path", "g"), self.name)
        m = check_scale(metres_per_scene_unit)
        g = np.asarray(inputs["g"], dtype=np.float64)
        n = float(inputs.get("eta", 1.0))
        refl = np.asarray(inputs["reflectance"], dtype=np.float64)
        alpha = albedo_single(refl, g, n, method=inputs.get("inversion", self.inversion))
        return EffectiveMedium(
            alpha,
            scene_units_to_mm(np.asarray(inputs["mean_free_path"], dtype=np.float64), m),
            g,
            n,
            albedo_multiple=refl,
        )
