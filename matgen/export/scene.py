"""A preview scene for a spectral path tracer: Mitsuba 3 scene description (XML) of the baked material.

The scene holds one sphere of skin-like medium (``homogeneous`` medium with Henyey-Greenstein phase function
inside a ``dielectric`` boundary of the table's refractive index) under a uniform ``constant`` sky, seen by a
perspective camera. The medium is the material at its mean texel: per band the mean single-scattering
albedo of ``spectral/albedo_single`` and sigma_t = 1 / (mean of ``spectral/mean_free_path_mm``) converted to
1/scene unit, g the mean of the OpenPBR anisotropy map. It is a preview (and a check that the numbers load
into a spectral renderer), not a render of the textures: a homogeneous medium cannot vary per texel.

Spectra are written as Mitsuba wavelength:value lists. Mitsuba's spectral sensors sample 360-830 nm and read
an irregular spectrum as zero outside its samples, so when the stacks' bands do not reach that range the end
values are repeated at 360 and 830 nm (stated in the XML). Units: nm, scene units (``metres_per_scene_unit``).
"""

from __future__ import annotations

import numpy as np

from matgen.errors import DataError
from matgen.units import mm_to_scene_units

#: Wavelength range Mitsuba 3's spectral sensors sample, nm (from memory: Mitsuba's MI_CIE_MIN / MI_CIE_MAX;
#: RGB-upsampled inputs (Jakob & Hanika 2019 spectral upsampling) are zero outside it).
MITSUBA_SPECTRAL_RANGE_NM = (360.0, 830.0)

#: Sphere radius of the preview in metres (a head-sized ball), converted to scene units on writing.
PREVIEW_RADIUS_M = 0.09


def _spectrum(wl, values) -> str:
    return ", ".join(f"{w:g}:{v:.7g}" for w, v in zip(wl, values, strict=True))


def _padded(wl, values):
    wl = list(map(float, wl))
    values = list(map(float, values))
    lo, hi = MITSUBA_SPECTRAL_RANGE_NM
    padded = False
    if wl[0] > lo:
        wl, values, padded = [lo] + wl, [values[0]] + values, True
    if wl[-1] < hi:
        wl, values, padded = wl + [hi], values + [values[-1]], True
    return wl, values, padded


def mitsuba_scene_xml(
    wavelength_nm,
    albedo_single,
    mean_free_path_mm,
    anisotropy: float,
    ior: float,
    metres_per_scene_unit: float,
    *,
    name: str = "material",
    width: int = 256,
    samples: int = 64,
) -> str:
    """Mitsuba 3 XML of a sphere of the given homogeneous medium.

    Parameters
    ----------
    wavelength_nm : array_like, shape (B,)
        Band centres in nm, ascending.
    albedo_single : array_like, shape (B,)
        Single-scattering albedo per band (dimensionless, [0, 1]).
    mean_free_path_mm : array_like, shape (B,)
        Mean free path 1 / mu_t per band in mm (> 0).
    anisotropy : float
        Henyey-Greenstein g in (-1, 1).
    ior : float
        Refractive index of the boundary (>= 1).
    metres_per_scene_unit : float
        Metres per scene unit; sigma_t is written in 1/scene unit.
    name : str
        Material name for the comment.
    width, samples : int
        Default film width/height in pixels and samples per pixel (scene parameters ``width`` and ``spp``,
        overridable when loading: ``mitsuba.load_file(path, width=64, spp=16)``).

    Returns
    -------
    str
        The scene XML (Mitsuba 3 scene version 3.0.0).

    References
    ----------
    ``Jakob2022mitsuba3``: the ``homogeneous`` medium (albedo, sigma_t), ``hg`` phase, ``dielectric`` BSDF.

    """
    wl = np.asarray(wavelength_nm, dtype=np.float64)
    a = np.asarray(albedo_single, dtype=np.float64)
    mfp = np.asarray(mean_free_path_mm, dtype=np.float64)
    if not (wl.shape == a.shape == mfp.shape) or wl.ndim != 1 or wl.size == 0:
        raise DataError("scene spectra need equal, non-empty 1-D band, albedo and mean-free-path arrays")
    if np.any(~np.isfinite(a) | (a < 0) | (a > 1)) or np.any(~np.isfinite(mfp) | (mfp <= 0)):
        raise DataError("scene medium: albedo must lie in [0, 1] and mean free path be > 0 mm in every band")
    if not (-1 < anisotropy < 1) or not ior >= 1:
        raise DataError(f"scene medium: g = {anisotropy} must lie in (-1, 1) and ior = {ior} be >= 1")
    sigma_t = 1.0 / mm_to_scene_units(mfp, metres_per_scene_unit)
    wl_a, a_p, pad = _padded(wl, a)
    wl_s, s_p, _ = _padded(wl, sigma_t)
    radius = PREVIEW_RADIUS_M / metres_per_scene_unit
    note = (
        " End values repeated at 360 and 830 nm, the range Mitsuba's spectral sensors sample." if pad else ""
    )
    return f"""<?xml version="1.0" encoding="utf-8"?>
<!-- matgen preview scene of '{name}': a sphere of the material's mean-texel homogeneous medium.
     Lengths in scene units ({metres_per_scene_unit:g} m each); sigma_t in 1/scene unit.{note} -->
<scene version="3.0.0">
  <default name="width" value="{int(width)}"/>
  <default name="spp" value="{int(samples)}"/>
  <integrator type="volpath"><integer name="max_depth" value="-1"/></integrator>
  <sensor type="perspective">
    <float name="fov" value="30"/>
    <transform name="to_world">
      <lookat origin="0, 0, {4.5 * radius:g}" target="0, 0, 0" up="0, 1, 0"/>
    </transform>
    <film type="hdrfilm">
      <integer name="width" value="$width"/>
      <integer name="height" value="$width"/>
    </film>
    <sampler type="independent"><integer name="sample_count" value="$spp"/></sampler>
  </sensor>
  <emitter type="constant"><spectrum name="radiance" value="1.0"/></emitter>
  <shape type="sphere">
    <float name="radius" value="{radius:g}"/>
    <bsdf type="dielectric">
      <float name="int_ior" value="{ior:.6g}"/>
      <float name="ext_ior" value="1.0"/>
    </bsdf>
    <medium type="homogeneous" name="interior">
      <spectrum name="albedo" value="{_spectrum(wl_a, a_p)}"/>
      <spectrum name="sigma_t" value="{_spectrum(wl_s, s_p)}"/>
      <phase type="hg"><float name="g" value="{anisotropy:.6g}"/></phase>
    </medium>
  </shape>
</scene>
"""
