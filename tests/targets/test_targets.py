"""Targets: each round trip (medium -> inputs -> the consumer's documented remap -> medium).

OpenPBR's remap is inverted exactly, so 1 - alpha comes back to 1e-9 relative; mean free paths to 1e-12."""

import warnings

import numpy as np
import pytest

from matgen.errors import ClampWarning, ParameterError
from matgen.targets import TARGETS, EffectiveMedium, get_target

RGB = EffectiveMedium(
    albedo_single=np.array([0.995, 0.97, 0.93]),
    mean_free_path_mm=np.array([0.9, 0.35, 0.2]),
    anisotropy=np.full(3, 0.8),
    ior=1.4,
    albedo_multiple=np.array([0.62, 0.41, 0.30]),
)
BANDS = EffectiveMedium(
    albedo_single=np.linspace(0.8, 0.999, 8),
    mean_free_path_mm=np.linspace(0.05, 2.0, 8),
    anisotropy=np.linspace(0.7, 0.9, 8),
    ior=1.4,
)


def _close(a, b, rtol=1e-9):
    np.testing.assert_allclose(1 - a.albedo_single, 1 - b.albedo_single, rtol=rtol)
    np.testing.assert_allclose(a.mean_free_path_mm, b.mean_free_path_mm, rtol=1e-12)
    np.testing.assert_allclose(a.anisotropy, b.anisotropy, rtol=1e-2, atol=1e-9)
    assert a.ior == pytest.approx(b.ior)


@pytest.mark.parametrize("scale", [0.01, 1.0, 0.001])
@pytest.mark.parametrize(
    "name, medium", [("openpbr", RGB), ("standard_surface", RGB), ("spectral_medium", BANDS)]
)
def test_round_trip(name, medium, scale):
    """OpenPBR v0.4 remap (mfp = radius * radius_scale, mu_t = 1/r, van de Hulst inversion); Standard Surface
    as carried by MaterialX 1.39 (radius * scale); raw spectral medium (albedo = sigma_s / sigma_t)."""
    t = get_target(name)
    with warnings.catch_warnings():
        warnings.simplefilter("error", ClampWarning)
        inputs = t.to_inputs(medium, metres_per_scene_unit=scale)
    _close(t.from_inputs(inputs, metres_per_scene_unit=scale), medium)


def test_reflectance_mfp_round_trip_with_closed_form():
    t = TARGETS["reflectance_mfp"]
    inputs = t.to_inputs(BANDS, metres_per_scene_unit=0.01, inversion="OpenPBR2024")
    _close(t.from_inputs(inputs, metres_per_scene_unit=0.01), BANDS, rtol=1e-3)


def test_openpbr_convention_values():
    """Largest channel mfp as subsurface_radius, ratios as radius_scale (in [0, 1]); centimetre scene."""
    inputs = TARGETS["openpbr"].to_inputs(RGB, metres_per_scene_unit=0.01)
    assert inputs["subsurface_radius"] == pytest.approx(0.09)  # 0.9 mm = 0.09 cm
    np.testing.assert_allclose(inputs["subsurface_radius_scale"], [1.0, 0.35 / 0.9, 0.2 / 0.9])
    assert inputs["subsurface_scatter_anisotropy"] == pytest.approx(0.8)


def test_openpbr_observed_convention_is_documented_colour():
    """'observed': C = E_ms / (1 - E_spec), with E_spec = ((n-1)/(n+1))^2 (Fresnel at normal incidence)."""
    inputs = TARGETS["openpbr"].to_inputs(RGB, metres_per_scene_unit=0.01, albedo_convention="observed")
    np.testing.assert_allclose(inputs["subsurface_color"], RGB.albedo_multiple / (1 - (0.4 / 2.4) ** 2))


def test_scalar_g_consumers_refuse_mixed_channel_g():
    """OpenPBR and standard_surface read one g: a medium whose channels were inverted at different g cannot
    be written for them without breaking self-consistency, so it is refused rather than averaged."""
    m = EffectiveMedium(RGB.albedo_single, RGB.mean_free_path_mm, np.array([0.7, 0.8, 0.9]), 1.4)
    for name in ("openpbr", "standard_surface"):
        with pytest.raises(ParameterError, match="one scalar anisotropy"):
            TARGETS[name].to_inputs(m, metres_per_scene_unit=0.01)


def test_spec_remap_colour_is_exact_inverse_of_openpbr_remap():
    """The OpenPBR specification's remap (recalled) applied to the written C returns alpha to 1e-9 in
    1 - alpha; van de Hulst's forward formula, which the remap fits, would be off by up to ~1e-4."""
    from matgen.fit.inversion import albedo_single_OpenPBR2024
    from matgen.targets.openpbr import color_for_remap

    alpha = 1 - np.logspace(-5, np.log10(0.3), 400)
    for g in (0.0, 0.75, 0.9):
        back = albedo_single_OpenPBR2024(color_for_remap(alpha, g), g)
        np.testing.assert_allclose(1 - back, 1 - alpha, rtol=1e-9)


def test_bad_scale_and_name():
    with pytest.raises(ParameterError, match="metres_per_scene_unit"):
        TARGETS["openpbr"].to_inputs(RGB, metres_per_scene_unit=0.0)
    with pytest.raises(ParameterError, match="openpbr"):
        get_target("nope")
    with pytest.raises(ParameterError, match="3 RGB"):
        TARGETS["openpbr"].to_inputs(BANDS, metres_per_scene_unit=0.01)


@pytest.mark.parametrize(
    "name, nodedef",
    [
        ("openpbr", "ND_open_pbr_surface_surfaceshader"),
        ("standard_surface", "ND_standard_surface_surfaceshader"),
    ],
)
def test_input_names_and_types_match_materialx(name, nodedef):
    """Every input the target writes exists on the MaterialX 1.39 nodedef with the matching arity
    (color3 -> 3 values, float -> 1); MaterialX's own library is the outside reference."""
    mx = pytest.importorskip("MaterialX")
    lib = mx.createDocument()
    mx.loadLibraries(mx.getDefaultDataLibraryFolders(), mx.getDefaultDataSearchPath(), lib)
    nd = lib.getNodeDef(nodedef)
    types = {i.getName(): i.getType() for i in nd.getActiveInputs()}
    inputs = TARGETS[name].to_inputs(RGB, metres_per_scene_unit=0.01)
    for key, value in inputs.items():
        if key in ("albedo_convention", "fit_residual"):
            continue
        assert key in types, key
        assert (3 if types[key] == "color3" else 1) == np.size(value), key


def test_round_trips_through_boundary_table():
    """reflectance_mfp with the boundary-aware table, and OpenPBR's 'observed' colour convention."""
    from matgen.fit.inversion import has_default_table

    if not has_default_table():
        pytest.skip("inversion table not built")
    t = TARGETS["reflectance_mfp"]
    _close(
        t.from_inputs(t.to_inputs(BANDS, metres_per_scene_unit=0.01), metres_per_scene_unit=0.01),
        BANDS,
        rtol=1e-6,
    )
    from matgen.fit.inversion import albedo_multiple

    rgb = EffectiveMedium(
        RGB.albedo_single,
        RGB.mean_free_path_mm,
        RGB.anisotropy,
        RGB.ior,
        albedo_multiple=albedo_multiple(RGB.albedo_single, RGB.anisotropy, RGB.ior),
    )
    o = TARGETS["openpbr"]
    inputs = o.to_inputs(rgb, metres_per_scene_unit=0.01, albedo_convention="observed")
    _close(o.from_inputs(inputs, metres_per_scene_unit=0.01), rgb, rtol=1e-6)
