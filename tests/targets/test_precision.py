"""Precision that survives the file: quantising each stored map changes the rendered A by <= 0.1 %.

For skin-like effective media (A 0.015-0.6, g 0.75-0.9, n = 1.55, each inverted with the boundary-aware
inversion), every target's maps are rounded to the file's pixel type, the medium is rebuilt by the
target's ``from_inputs`` and the half-space's A is recomputed with the same forward model
(:func:`matgen.fit.inversion.albedo_multiple`). float32 (what the bake writes for every target map) keeps
the change below 1e-5; half floats would not (the albedo's step near 1 is a large share of 1 - alpha),
which is why the targets' maps are float32 whatever the config's pixel type.
"""

import numpy as np
import pytest

from matgen.fit.inversion import albedo_multiple, albedo_single, effective_medium
from matgen.targets import TARGETS, TargetOptions, TexelMedia

N_IOR = 1.55


def _media(channels):
    a = np.geomspace(0.015, 0.6, 24)
    g = np.array([0.75, 0.85, 0.9])
    aa, gg = np.meshgrid(a, g, indexing="ij")
    aa, gg = aa.reshape(-1), gg.reshape(-1)
    if channels == "rgb":  # three channels at one g per texel, as the RGB consumers read
        aa = np.stack([aa, 0.7 * aa, 0.45 * aa], axis=1)
        gg = np.repeat(gg[:, None], 3, axis=1)
    else:
        aa, gg = aa[:, None], gg[:, None]
    med = effective_medium(aa, 0.2 * np.ones_like(aa), gg, N_IOR)
    alpha = med["albedo_single"]
    return TexelMedia(alpha, 1 - alpha, med["mean_free_path_mm"], gg, np.full((aa.shape[0], 1), N_IOR), aa)


def _rendered_change(name, dtype, convention="spec_remap"):
    target = TARGETS[name]
    media = _media(target.channels)
    opts = TargetOptions(convention)
    texels = target.texel_inputs(media, 0.01, opts)
    const = {k: v["value"] for k, v in target.constant_inputs(N_IOR, opts).items()}
    worst = 0.0
    for k in range(media.albedo_single.shape[0]):
        inputs = dict(const, albedo_convention=convention)
        for spec in target.maps(opts):
            if spec.input is None:
                continue
            v = np.asarray(texels[spec.name][k], dtype=np.float64).astype(dtype).astype(np.float64)
            inputs[spec.input] = float(v[0]) if spec.layout == "y" else v
        m = target.from_inputs(inputs, metres_per_scene_unit=0.01)
        a = albedo_multiple(m.albedo_single, m.anisotropy, m.ior)
        worst = max(worst, float(np.max(np.abs(a / media.albedo_multiple[k] - 1))))
    return worst


@pytest.mark.parametrize("name", ["openpbr", "standard_surface", "spectral_medium", "reflectance_mfp"])
def test_float32_maps_keep_the_rendered_albedo_within_0p1_percent(name):
    assert _rendered_change(name, np.float32) <= 1e-5


def test_observed_convention_float32_also_survives():
    assert _rendered_change("openpbr", np.float32, "observed") <= 1e-5


def test_half_float_albedo_would_not():
    """The reason for float32: a half-float single-scattering albedo moves the rendered A by more than
    0.1 % for the high-albedo bands of skin."""
    assert _rendered_change("spectral_medium", np.float16) > 1e-3


def test_inverted_media_reproduce_their_reflectance():
    """Sanity of the fixture: each medium's A under the boundary-aware inversion is the A it was made for."""
    media = _media("bands")
    back = albedo_single(media.albedo_multiple, media.anisotropy, N_IOR)
    np.testing.assert_allclose(1 - back, media.one_minus_albedo, rtol=1e-9)
