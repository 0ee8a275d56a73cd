"""Renderer conventions ("targets"): matgen's effective medium <-> each consumer's inputs.

Units: matgen's side in mm (mean free path) and 1/mm; the consumer's side in scene units, converted with an
explicit ``metres_per_scene_unit`` (0.01 for a centimetre scene). Every target has ``to_inputs(medium, *,
metres_per_scene_unit, ...)`` and ``from_inputs(inputs, *, metres_per_scene_unit)``; ``from_inputs`` applies
the consumer's documented remap, so ``from_inputs(to_inputs(m))`` returns ``m``. A value the consumer is
documented to clamp is clamped here too, with a :class:`~matgen.errors.ClampWarning` naming the consumer.

Targets (registry :data:`TARGETS`):

- ``openpbr``: OpenPBR Surface v0.4 (``OpenPBR2024``): ``subsurface_color`` C, ``subsurface_radius`` (scene
  units) and ``subsurface_radius_scale`` (RGB in [0, 1]) whose product is the mean free path per channel
  (mu_t = 1 / r), ``subsurface_scatter_anisotropy`` g, ``specular_ior``. matgen puts the largest channel's
  mean free path in ``subsurface_radius`` and the ratios in ``subsurface_radius_scale``. C is chosen so that
  the specification's published inversion alpha = (1 - s^2) / (1 - g s^2) returns matgen's alpha
  (``albedo_convention="spec_remap"``, default), or as the specification defines the observed colour,
  C = E_ms / (1 - E_spec) with E_ms matgen's A (``"observed"``; invert with matgen's boundary-aware table).
  OpenPBR has one scalar g: the mean of the channels' g is written (ClampWarning if they differ by > 1e-3).
- ``standard_surface``: Autodesk Standard Surface as carried by MaterialX 1.39 (``Georgiev2019``):
  ``subsurface_color``, ``subsurface_radius`` (RGB, the mean free path over ``subsurface_scale``),
  ``subsurface_scale`` (scene units), ``subsurface_anisotropy``. MaterialX's graph multiplies radius by scale
  into ``subsurface_bsdf``'s radius (the mean free path by the nodedef's documentation); the specification
  states no albedo inversion, so matgen writes the colour with the same van de Hulst remap as OpenPBR's.
- ``spectral_medium``: per band ``sigma_a``, ``sigma_s``, ``sigma_t`` (1/scene unit), ``albedo``, ``g``,
  ``eta``, as spectral path tracers take a homogeneous medium (e.g. Mitsuba 3's ``homogeneous``: albedo and
  sigma_t).
- ``reflectance_mfp``: per band ``reflectance`` (matgen's A) and ``mean_free_path`` (scene units), ``g``,
  ``eta`` and the name of the ``inversion`` that maps A back to alpha.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from matgen.errors import ClampWarning, FitError, ParameterError
from matgen.fit.inversion import (
    INVERSION_METHODS,
    albedo_multiple_vanDeHulst1980,
    albedo_single,
    albedo_single_OpenPBR2024,
    specular_reflectance_normal,
)
from matgen.units import mm_to_scene_units, scene_units_to_mm


@dataclass(frozen=True)
class EffectiveMedium:
    """A homogeneous half-space per channel (RGB channels or bands).

    Attributes
    ----------
    albedo_single : ndarray, shape (C,)
        Single-scattering albedo.
    mean_free_path_mm : ndarray, shape (C,)
        Mean free path 1 / mu_t in mm.
    anisotropy : ndarray, shape (C,)
        Henyey-Greenstein g.
    ior : float
        Refractive index of the medium (air outside).
    albedo_multiple : ndarray, shape (C,), optional
        The layered result's A the medium was fitted to (needed by the ``"observed"`` colour convention).

    """

    albedo_single: np.ndarray
    mean_free_path_mm: np.ndarray
    anisotropy: np.ndarray
    ior: float = 1.0
    albedo_multiple: np.ndarray | None = None

    def __post_init__(self):
        a = np.atleast_1d(np.asarray(self.albedo_single, dtype=np.float64))
        mfp = np.atleast_1d(np.asarray(self.mean_free_path_mm, dtype=np.float64))
        g = np.broadcast_to(np.asarray(self.anisotropy, dtype=np.float64), a.shape).copy()
        if mfp.shape != a.shape:
            raise ParameterError(f"mean_free_path_mm has shape {mfp.shape}; albedo_single has {a.shape}")
        if np.any(~np.isfinite(a) | (a < 0) | (a > 1)):
            raise ParameterError("albedo_single must lie in [0, 1] in every channel")
        if np.any(~np.isfinite(mfp) | (mfp <= 0)):
            raise ParameterError("mean_free_path_mm must be finite and > 0 mm in every channel")
        if np.any(~np.isfinite(g) | (g <= -1) | (g >= 1)):
            raise ParameterError("anisotropy must lie in (-1, 1) in every channel")
        if not np.isfinite(self.ior) or self.ior < 1:
            raise ParameterError(f"ior = {self.ior!r}; must be >= 1")
        object.__setattr__(self, "albedo_single", a)
        object.__setattr__(self, "mean_free_path_mm", mfp)
        object.__setattr__(self, "anisotropy", g)
        object.__setattr__(self, "ior", float(self.ior))
        if self.albedo_multiple is not None:
            object.__setattr__(
                self, "albedo_multiple", np.atleast_1d(np.asarray(self.albedo_multiple, dtype=np.float64))
            )

    @property
    def mu_t_per_mm(self) -> np.ndarray:
        """Extinction coefficient in 1/mm."""
        return 1.0 / self.mean_free_path_mm

    @classmethod
    def from_summary(cls, quantities: dict, index: int = 0, *, channels: str = "rgb") -> EffectiveMedium:
        """Build the medium of parameter set ``index`` from :func:`matgen.fit.summary.summarize` output.

        ``channels="rgb"`` takes the RGB quantities, ``"bands"`` the spectral ones.
        """
        pre = {"rgb": "rgb_", "bands": ""}.get(channels)
        if pre is None:
            raise ParameterError(f"channels must be 'rgb' or 'bands', not {channels!r}")
        g = quantities["anisotropy"][index]
        if channels == "rgb":
            a_b = quantities["albedo_multiple"][index]
            # same channel anisotropy as the summary: |W| A weighted mean is not stored; use the A-weighted mean
            g = np.full(3, float(np.sum(a_b * g) / np.sum(a_b)))
        return cls(
            albedo_single=quantities[pre + "albedo_single"][index],
            mean_free_path_mm=quantities[pre + "mean_free_path_mm"][index],
            anisotropy=g,
            ior=float(np.asarray(quantities["ior"][index]).reshape(-1)[0]),
            albedo_multiple=quantities[pre + "albedo_multiple"][index],
        )


def _check_scale(metres_per_scene_unit):
    try:
        m = float(metres_per_scene_unit)
    except (TypeError, ValueError):
        raise ParameterError(
            f"metres_per_scene_unit must be a number, not {metres_per_scene_unit!r}"
        ) from None
    if not np.isfinite(m) or m <= 0:
        raise ParameterError(f"metres_per_scene_unit = {m!r}; must be > 0 (0.01 for a centimetre scene)")
    return m


def _clamp(values, lo, hi, consumer, field):
    v = np.asarray(values, dtype=np.float64)
    c = np.clip(v, lo, hi)
    if np.any(c != v):
        warnings.warn(
            f"{consumer}: {field} {np.round(v, 6).tolist()} clamped to [{lo}, {hi}] as {consumer} accepts",
            ClampWarning,
            stacklevel=3,
        )
    return c


def _require(inputs, keys, target):
    missing = [k for k in keys if k not in inputs]
    if missing:
        raise FitError(f"{target} inputs lack {missing}")


class Target:
    """Base class of a renderer convention; subclasses set ``name``, ``consumer`` and the two mappings."""

    name = ""
    consumer = ""
    channels = "rgb"

    def to_inputs(self, medium: EffectiveMedium, *, metres_per_scene_unit: float, **options) -> dict:
        """Consumer inputs for ``medium`` (scene units)."""
        raise NotImplementedError

    def from_inputs(self, inputs: dict, *, metres_per_scene_unit: float) -> EffectiveMedium:
        """Return the medium the consumer builds from ``inputs`` by its documented remap."""
        raise NotImplementedError


class OpenPBRTarget(Target):
    """OpenPBR Surface v0.4 subsurface inputs (``OpenPBR2024``, Subsurface section)."""

    name = "openpbr"
    consumer = "OpenPBR Surface"

    def to_inputs(
        self, medium, *, metres_per_scene_unit, albedo_convention="spec_remap", min_radius_scene=None
    ):
        """Map the medium to OpenPBR inputs.

        ``subsurface_color``, ``subsurface_radius``, ``subsurface_radius_scale``,
        ``subsurface_scatter_anisotropy``, ``specular_ior`` (+ ``albedo_convention``).

        References
        ----------
        ``OpenPBR2024``; ``vandeHulst1980``.

        """
        m = _check_scale(metres_per_scene_unit)
        if medium.albedo_single.size != 3:
            raise ParameterError(
                f"{self.consumer} takes 3 RGB channels; the medium has {medium.albedo_single.size}"
            )
        g_all = medium.anisotropy
        g = float(np.mean(g_all))
        if np.ptp(g_all) > 1e-3:
            warnings.warn(
                f"{self.consumer}: subsurface_scatter_anisotropy is one scalar; channel values "
                f"{np.round(g_all, 4).tolist()} written as their mean {g:.4f}",
                ClampWarning,
                stacklevel=2,
            )
        g = float(_clamp(g, -1.0, 1.0, self.consumer, "subsurface_scatter_anisotropy"))
        if albedo_convention == "spec_remap":
            color = albedo_multiple_vanDeHulst1980(medium.albedo_single, g)
        elif albedo_convention == "observed":
            if medium.albedo_multiple is None:
                raise FitError("albedo_convention='observed' needs the medium's albedo_multiple")
            color = medium.albedo_multiple / (1.0 - specular_reflectance_normal(medium.ior))
        else:
            raise ParameterError(
                f"albedo_convention must be 'spec_remap' or 'observed', not {albedo_convention!r}"
            )
        color = _clamp(color, 0.0, 1.0, self.consumer, "subsurface_color")
        mfp_scene = mm_to_scene_units(medium.mean_free_path_mm, m)
        radius = float(np.max(mfp_scene))
        if min_radius_scene is not None and radius < min_radius_scene:
            warnings.warn(
                f"{self.consumer}: subsurface_radius {radius:.3g} scene units is below the consumer's stated "
                f"minimum {min_radius_scene:g}; it will be regularised",
                ClampWarning,
                stacklevel=2,
            )
        scale = _clamp(mfp_scene / radius, 0.0, 1.0, self.consumer, "subsurface_radius_scale")
        return {
            "subsurface_color": color.tolist(),
            "subsurface_radius": radius,
            "subsurface_radius_scale": scale.tolist(),
            "subsurface_scatter_anisotropy": g,
            "specular_ior": medium.ior,
            "albedo_convention": albedo_convention,
        }

    def from_inputs(self, inputs, *, metres_per_scene_unit):
        """Apply OpenPBR's remap.

        mfp = radius * radius_scale, mu_t = 1 / mfp; alpha from C by the specification's inversion
        (or matgen's boundary-aware table for ``albedo_convention="observed"``).

        References
        ----------
        ``OpenPBR2024``.

        """
        _require(
            inputs,
            (
                "subsurface_color",
                "subsurface_radius",
                "subsurface_radius_scale",
                "subsurface_scatter_anisotropy",
            ),
            self.name,
        )
        m = _check_scale(metres_per_scene_unit)
        c = np.asarray(inputs["subsurface_color"], dtype=np.float64)
        g = float(inputs["subsurface_scatter_anisotropy"])
        n = float(inputs.get("specular_ior", 1.0))
        mfp_mm = scene_units_to_mm(
            float(inputs["subsurface_radius"]) * np.asarray(inputs["subsurface_radius_scale"]), m
        )
        if inputs.get("albedo_convention", "spec_remap") == "observed":
            a_ms = c * (1.0 - specular_reflectance_normal(n))
            alpha = albedo_single(a_ms, g, n, method="boundary_table")
            return EffectiveMedium(alpha, mfp_mm, g, n, albedo_multiple=a_ms)
        return EffectiveMedium(albedo_single_OpenPBR2024(c, g), mfp_mm, g, n)


class StandardSurfaceTarget(Target):
    """Autodesk Standard Surface (MaterialX ``standard_surface``) subsurface inputs (``Georgiev2019``)."""

    name = "standard_surface"
    consumer = "MaterialX standard_surface"

    def to_inputs(self, medium, *, metres_per_scene_unit):
        """Map the medium to standard_surface inputs.

        ``subsurface_color``, ``subsurface_radius`` (RGB, max 1), ``subsurface_scale`` (scene units),
        ``subsurface_anisotropy``.

        References
        ----------
        ``Georgiev2019``; colour remap as ``OpenPBR2024`` (van de Hulst).

        """
        m = _check_scale(metres_per_scene_unit)
        if medium.albedo_single.size != 3:
            raise ParameterError(
                f"{self.consumer} takes 3 RGB channels; the medium has {medium.albedo_single.size}"
            )
        g = float(np.mean(medium.anisotropy))
        if np.ptp(medium.anisotropy) > 1e-3:
            warnings.warn(
                f"{self.consumer}: subsurface_anisotropy is one scalar; channel values written as their mean {g:.4f}",
                ClampWarning,
                stacklevel=2,
            )
        g = float(_clamp(g, -1.0, 1.0, self.consumer, "subsurface_anisotropy"))
        color = _clamp(
            albedo_multiple_vanDeHulst1980(medium.albedo_single, g),
            0.0,
            1.0,
            self.consumer,
            "subsurface_color",
        )
        mfp_scene = mm_to_scene_units(medium.mean_free_path_mm, m)
        scale = float(np.max(mfp_scene))
        return {
            "subsurface_color": color.tolist(),
            "subsurface_radius": (mfp_scene / scale).tolist(),
            "subsurface_scale": scale,
            "subsurface_anisotropy": g,
            "specular_IOR": medium.ior,
        }

    def from_inputs(self, inputs, *, metres_per_scene_unit):
        """Apply the remap: mfp = subsurface_radius * subsurface_scale (MaterialX graph); van de Hulst alpha."""
        _require(
            inputs,
            ("subsurface_color", "subsurface_radius", "subsurface_scale", "subsurface_anisotropy"),
            self.name,
        )
        m = _check_scale(metres_per_scene_unit)
        g = float(inputs["subsurface_anisotropy"])
        mfp_mm = scene_units_to_mm(
            np.asarray(inputs["subsurface_radius"], dtype=np.float64) * float(inputs["subsurface_scale"]), m
        )
        alpha = albedo_single_OpenPBR2024(np.asarray(inputs["subsurface_color"], dtype=np.float64), g)
        return EffectiveMedium(alpha, mfp_mm, g, float(inputs.get("specular_IOR", 1.0)))


class SpectralMediumTarget(Target):
    """A raw homogeneous medium per band: sigma_a, sigma_s, sigma_t (1/scene unit), albedo, g, eta."""

    name = "spectral_medium"
    consumer = "spectral homogeneous medium"
    channels = "bands"

    def to_inputs(self, medium, *, metres_per_scene_unit):
        """Per-band lists; sigma in 1/scene unit (mu in 1/mm times mm per scene unit).

        References
        ----------
        Radiative-transfer definitions (``vandeHulst1980``): albedo = sigma_s / sigma_t.

        """
        m = _check_scale(metres_per_scene_unit)
        mm_per_unit = scene_units_to_mm(1.0, m)
        sigma_t = medium.mu_t_per_mm * mm_per_unit
        albedo = _clamp(medium.albedo_single, 0.0, 1.0, self.consumer, "albedo")
        return {
            "sigma_a": (sigma_t * (1.0 - albedo)).tolist(),
            "sigma_s": (sigma_t * albedo).tolist(),
            "sigma_t": sigma_t.tolist(),
            "albedo": albedo.tolist(),
            "g": medium.anisotropy.tolist(),
            "eta": medium.ior,
        }

    def from_inputs(self, inputs, *, metres_per_scene_unit):
        """Apply the remap: alpha = sigma_s / (sigma_a + sigma_s), mfp = 1 / (sigma_a + sigma_s)."""
        _require(inputs, ("sigma_a", "sigma_s", "g"), self.name)
        m = _check_scale(metres_per_scene_unit)
        sa = np.asarray(inputs["sigma_a"], dtype=np.float64)
        ss = np.asarray(inputs["sigma_s"], dtype=np.float64)
        st = sa + ss
        return EffectiveMedium(
            ss / st, scene_units_to_mm(1.0 / st, m), np.asarray(inputs["g"]), float(inputs.get("eta", 1.0))
        )


class ReflectanceMfpTarget(Target):
    """Reflectance (matgen's A) and mean free path per band, with the inversion that maps A to alpha."""

    name = "reflectance_mfp"
    consumer = "reflectance + mean free path"
    channels = "bands"

    def to_inputs(self, medium, *, metres_per_scene_unit, inversion="boundary_table"):
        """Per-band ``reflectance``, ``mean_free_path`` (scene units), ``g``, ``eta``, ``inversion``.

        ``reflectance`` is the medium's own A under ``inversion`` (equal to the layered result's A when the
        medium was fitted with the same inversion).
        """
        from matgen.fit.inversion import albedo_multiple

        m = _check_scale(metres_per_scene_unit)
        if inversion not in INVERSION_METHODS:
            raise ParameterError(
                f"unknown inversion {inversion!r}; use one of {', '.join(INVERSION_METHODS)}"
            )
        refl = albedo_multiple(medium.albedo_single, medium.anisotropy, medium.ior, method=inversion)
        return {
            "reflectance": np.asarray(refl).tolist(),
            "mean_free_path": mm_to_scene_units(medium.mean_free_path_mm, m).tolist(),
            "g": medium.anisotropy.tolist(),
            "eta": medium.ior,
            "inversion": inversion,
        }

    def from_inputs(self, inputs, *, metres_per_scene_unit):
        """Apply the remap: alpha from reflectance by the named inversion; mfp converted to mm."""
        _require(inputs, ("reflectance", "mean_free_path", "g"), self.name)
        m = _check_scale(metres_per_scene_unit)
        g = np.asarray(inputs["g"], dtype=np.float64)
        n = float(inputs.get("eta", 1.0))
        refl = np.asarray(inputs["reflectance"], dtype=np.float64)
        alpha = albedo_single(refl, g, n, method=inputs.get("inversion", "boundary_table"))
        return EffectiveMedium(
            alpha,
            scene_units_to_mm(np.asarray(inputs["mean_free_path"], dtype=np.float64), m),
            g,
            n,
            albedo_multiple=refl,
        )


#: Registry of targets by name.
TARGETS = {
    t.name: t
    for t in (OpenPBRTarget(), StandardSurfaceTarget(), SpectralMediumTarget(), ReflectanceMfpTarget())
}


def get_target(name: str) -> Target:
    """Return the target called ``name``; :class:`ParameterError` listing the known names otherwise."""
    try:
        return TARGETS[name]
    except KeyError:
        raise ParameterError(f"unknown target {name!r}; use one of {', '.join(TARGETS)}") from None
