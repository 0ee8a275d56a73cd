"""Per-texel inversion: every channel's alpha reproduces its A at exactly the g it is written with.

The reference is the inversion's own forward model, :func:`matgen.fit.inversion.albedo_multiple` (the
boundary-aware table, n = 1.55, the skin's top index), evaluated at the inverted alpha. The grid inversion
interpolates that smooth (cubic in g and in the critical cosine, monotone cubic in s) forward model
bilinearly on a fine grid, so it is not exact: it must return A, 1 - alpha and l/d within 5e-5 relative of
the public functions (measured worst 3.7e-5 over 15,000 random cases; the inversion itself is held to
adding-doubling within 3e-3, the table's statistical error of A is up to 1e-2). The numba kernel and its
pure-Python twin agree bit for bit.
"""

import numpy as np
import pytest

from matgen.errors import FitError
from matgen.fit.inversion import albedo_multiple, albedo_single, effective_medium, has_default_table
from matgen.targets.solve import TexelInverter, inversion_g_range, texel_media

pytestmark = pytest.mark.skipif(not has_default_table(), reason="inversion table not built")
N = 1.5499999523162842  # the default table's boundary index as stored (float32 1.55)
#: Bound of the grid inversion's interpolation error, relative (see the module docstring).
GRID_RTOL = 5e-5


@pytest.fixture(scope="module")
def inverter():
    return TexelInverter(N)


def _cases(seed=1, n=4000):
    rng = np.random.default_rng(seed)
    a = np.concatenate([rng.uniform(0.012, 0.65, (n, 3)), rng.uniform(0.65, 0.93, (n // 4, 3))])
    g = rng.uniform(0.0, 0.9, a.shape)
    return a, g


def test_grid_inversion_reproduces_a_through_the_forward_model(inverter):
    a, g = _cases()
    alpha, one_minus, _ = inverter(a, g)
    np.testing.assert_allclose(albedo_multiple(alpha, g, N), a, rtol=GRID_RTOL)
    # near alpha = 1, 1 - alpha ~ 1e-4: there 1e-7 absolute in 1 - alpha moves A by less than GRID_RTOL
    # (the assertion above holds A itself)
    np.testing.assert_allclose(one_minus, 1 - albedo_single(a, g, N), rtol=GRID_RTOL, atol=1e-7)


def test_scaling_matches_the_public_effective_medium(inverter):
    a, g = _cases(2, 500)
    _, _, scale = inverter(a, g)
    ref = effective_medium(a, np.ones_like(a), g, N)["shape_scaling"]
    np.testing.assert_allclose(scale, ref, rtol=GRID_RTOL)


def test_kernel_and_python_twin_agree(inverter):
    a, g = _cases(3, 300)
    twin = TexelInverter(N, backend="python")
    for x, y in zip(inverter(a, g), twin(a, g), strict=True):
        np.testing.assert_array_equal(x, y)


def test_written_g_is_the_inverted_g_inside_the_inversions_range(inverter):
    """Band g above the inversion's range (it covers skin's 0.91 at 1000 nm and stops at 0.95) is written
    as the clipped value, and the albedo is inverted at that same value."""
    lo, hi = inversion_g_range()
    vals = {
        "albedo_multiple": np.array([[0.3, 0.4]], dtype=np.float32),
        "shape_distance_mm": np.array([[0.2, 0.3]], dtype=np.float32),
        "anisotropy": np.array([[0.85, 0.97]], dtype=np.float32),
    }
    media = texel_media(vals, "bands", inverter)
    np.testing.assert_allclose(media.anisotropy[0], [0.85, hi], rtol=1e-6)
    np.testing.assert_allclose(
        albedo_multiple(media.albedo_single, media.anisotropy, N), [[0.3, 0.4]], rtol=GRID_RTOL
    )


def test_isotropic_equivalent_keeps_a_and_the_transport_mean_free_path():
    """g = 0, alpha inverted afresh at g = 0 (A kept), mean free path mfp / (1 - alpha g): the transport
    mean free path 1 / (mu_a + mu_s (1 - g)) of the anisotropic medium (similarity relations, van de Hulst
    1980)."""
    inv = TexelInverter(N)
    vals = {
        "albedo_multiple": np.array([[0.1, 0.45]], dtype=np.float32),
        "shape_distance_mm": np.array([[0.2, 0.5]], dtype=np.float32),
        "anisotropy": np.array([[0.8, 0.8]], dtype=np.float32),
    }
    hg = texel_media(vals, "bands", inv)
    iso = texel_media(vals, "bands", inv, isotropic=True)
    assert np.all(iso.anisotropy == 0)
    np.testing.assert_allclose(albedo_multiple(iso.albedo_single, 0.0, N), [[0.1, 0.45]], rtol=GRID_RTOL)
    mu_t = 1 / hg.mean_free_path_mm
    transport = mu_t * (1 - hg.albedo_single) + mu_t * hg.albedo_single * (1 - hg.anisotropy)
    np.testing.assert_allclose(1 / iso.mean_free_path_mm, transport, rtol=1e-9)


def test_unreachable_albedo_is_refused(inverter):
    with pytest.raises(FitError, match="not reachable"):
        inverter(np.array([[0.97]]), np.array([[0.5]]))
