"""matgen's side of the validation: skin stacks, transport runs, table quantities and the exported medium.

Units: nm, mm, 1/mm inside; the exported medium is read back from scene units with an explicit
``metres_per_scene_unit``. Every function here calls the pipeline through its public interfaces
(``matgen.tissue``, ``matgen.transport``, ``matgen.fit``, ``matgen.tables.merge``) and raises
:class:`~matgen.errors.DependencyError` when a stage is missing from the build.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from matgen.errors import DependencyError
from matgen.fit.layered import effective_anisotropy as effective_anisotropy_of_paths
from matgen.fit.layered import layer_path_lengths_mm
from matgen.spectra.bands import BandSet
from matgen.transport.stack import Stack

#: Optical thickness of the deep-slab (half-space stand-in) cases, at least, in mean free paths.
DEEP_DEPTH_MFP = 40.0


@dataclass(frozen=True)
class ExportedMedium:
    """Per-band parameters of a homogeneous medium as a spectral path tracer receives them.

    Attributes
    ----------
    bands : BandSet
    albedo : ndarray (B,)
        Single-scattering albedo.
    sigma_t_per_mm : ndarray (B,)
        Extinction coefficient in 1/mm.
    g : ndarray (B,)
        HG anisotropy.
    ior : float
        Boundary refractive index.
    source : str
        How the numbers were obtained.

    """

    bands: BandSet
    albedo: np.ndarray
    sigma_t_per_mm: np.ndarray
    g: np.ndarray
    ior: float
    source: str


@dataclass
class SkinRuns:
    """matgen's transport runs of one skin parameter set, one per band.

    Attributes
    ----------
    label : str
        Name of the setting ("light", "dark").
    params : SkinParameters
    bands : BandSet
    stacks : list of Stack
        Per-band layer stacks (mm, 1/mm) from ``matgen.tissue.optics.skin_optics``.
    results : list of TransportResult
        matgen's transport per band, with radial profiles on the default rings.

    """

    label: str
    params: object
    bands: BandSet
    stacks: list
    results: list


def base_skin(preset_name: str = "cheek"):
    """Return the preset skin parameter set of the skin comparisons (``matgen.tissue.presets.preset``)."""
    try:
        from matgen.tissue.presets import preset
    except ImportError as exc:
        raise DependencyError(f"the tissue model is not available ({exc})") from exc
    return preset(preset_name)


def skin_stacks(params, bands: BandSet) -> list[Stack]:
    """One transport Stack per band for a skin parameter set (``matgen.tissue.optics.skin_optics``)."""
    try:
        from matgen.tissue.optics import skin_optics
    except ImportError as exc:
        raise DependencyError(f"the tissue model is not available ({exc})") from exc
    optics = skin_optics(params, bands)
    return [Stack(**optics.band(b)) for b in range(len(bands))]


def skin_runs(label: str, params, bands: BandSet, photons: int, seed: int = 0) -> SkinRuns:
    """Matgen's transport for a skin parameter set in every band (seed ``seed + band index``)."""
    try:
        from matgen.transport.simulate import default_ring_edges_mm, simulate
    except ImportError as exc:
        raise DependencyError(f"matgen's transport engine is not available ({exc})") from exc
    stacks = skin_stacks(params, bands)
    edges = default_ring_edges_mm()
    results = [simulate(st, photons, seed=seed + b, ring_edges_mm=edges) for b, st in enumerate(stacks)]
    return SkinRuns(label, params, bands, stacks, results)


def effective_anisotropy(stack: Stack, absorbed) -> float:
    """Mean HG g over the scattering events in a layered stack (``matgen.fit.layered``).

    The path length of light in layer i comes from its absorbed fraction, ``l_i = absorbed_i / mu_a,i``
    (:func:`matgen.fit.layered.layer_path_lengths_mm`; a layer with mu_a = 0 uses its thickness). The table
    build weights the same sum by the path lengths of reflected light only, where photon records are at hand;
    for the effective medium's g the two differ little, and the collapse comparison prints the g it used.

    Parameters
    ----------
    stack : Stack
        Layers (1/mm, mm).
    absorbed : ndarray (L,)
        Fraction of launched weight absorbed per layer (matgen's transport).

    Returns
    -------
    float
        Effective anisotropy.

    """
    path = layer_path_lengths_mm(stack.mu_a, absorbed, stack.thickness_mm)
    return float(effective_anisotropy_of_paths(stack.g, stack.mu_s, path))


def skin_summary(runs: SkinRuns) -> dict:
    """Table quantities of a skin parameter set, assembled as the table merge assembles them.

    Per band: A and its standard error, the radial profile, the effective anisotropy
    (:func:`effective_anisotropy`) and the top layer's index as the boundary index (averaged over the
    bands); then ``matgen.fit.summary.summarize``.

    Returns
    -------
    dict of ndarray
        The table quantities, leading axis of length 1.

    """
    try:
        from matgen.fit.summary import summarize
    except ImportError as exc:
        raise DependencyError(f"the fit summary is not available in this build ({exc})") from exc
    res, stacks = runs.results, runs.stacks
    albedo = np.array([[r.diffuse_reflectance.value for r in res]])
    albedo_se = np.array([[r.diffuse_reflectance.stderr for r in res]])
    radial = np.array([[r.radial_reflectance_per_mm2 for r in res]])
    radial_se = np.array([[r.radial_stderr_per_mm2 for r in res]])
    g_eff = np.array([[effective_anisotropy(st, r.absorbed) for st, r in zip(stacks, res, strict=True)]])
    n_top = float(np.mean([st.n[0] for st in stacks]))
    return dict(
        summarize(runs.bands, res[0].ring_edges_mm, albedo, albedo_se, radial, radial_se, g_eff, n_top)
    )


#: Scene scale used when reading back the exported spectral medium (a centimetre scene).
EXPORT_METRES_PER_SCENE_UNIT = 0.01


def exported_medium(
    summary: dict, bands: BandSet, metres_per_scene_unit: float = EXPORT_METRES_PER_SCENE_UNIT
) -> ExportedMedium:
    """Return the raw spectral-medium target's inputs for a summary, read back into mm and 1/mm.

    Goes through ``matgen.targets.TARGETS["spectral_medium"].to_inputs`` (each band inverted with its g) so
    that what is validated is what matgen exports (``albedo``, ``sigma_t`` per scene unit, ``g``, ``eta``);
    sigma_t is converted back to 1/mm here with ``metres_per_scene_unit``, independently of the target's own
    ``from_inputs``.
    """
    try:
        from matgen.targets import TARGETS
        from matgen.targets.solve import TexelInverter, summary_media
    except ImportError as exc:
        raise DependencyError(f"matgen's renderer targets are not available ({exc})") from exc
    from matgen.units import scene_units_to_mm

    n = float(np.asarray(summary["ior"]).reshape(-1)[0])
    medium = summary_media(summary, 0, "bands", TexelInverter(n)).medium(0)
    inputs = TARGETS["spectral_medium"].to_inputs(medium, metres_per_scene_unit=metres_per_scene_unit)
    albedo = np.asarray(inputs["albedo"], dtype=np.float64).reshape(-1)
    per_scene_unit = np.asarray(inputs["sigma_t"], dtype=np.float64).reshape(-1)
    sigma_t = per_scene_unit / scene_units_to_mm(1.0, metres_per_scene_unit)
    g = np.broadcast_to(np.asarray(inputs["g"], dtype=np.float64).reshape(-1), albedo.shape).copy()
    ior = float(np.asarray(inputs["eta"], dtype=np.float64).reshape(-1)[0])
    return ExportedMedium(
        bands, albedo, sigma_t, g, ior, f"spectral_medium inputs, {metres_per_scene_unit:g} m per scene unit"
    )


def deep_depth_mfp(albedo: float, g: float) -> float:
    """Depth (mean free paths) of a deep slab standing for a half-space: 40, or 10 diffusion lengths if more.

    The diffusion length in mean free paths is 1 / sqrt(3 (1 - a)(1 - a g)) (diffusion theory,
    [Farrell1992]); capped at 400 so that renders stay affordable. matgen's transmittance is printed beside.
    """
    mu_eff = math.sqrt(max(3.0 * (1.0 - albedo) * (1.0 - albedo * g), 1e-12))
    return float(min(max(DEEP_DEPTH_MFP, 10.0 / mu_eff), 400.0))
