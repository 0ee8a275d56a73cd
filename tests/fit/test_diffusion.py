"""Normalised-diffusion fit: recovery of synthetic profiles and clear errors on bad input."""

import numpy as np
import pytest

from matgen.errors import FitError
from matgen.fit.diffusion import fit_burley2015, fit_burley2015_result
from matgen.fit.models import burley2015_rings
from matgen.transport.results import Estimate, TransportResult

EDGES = np.concatenate(([0.0], np.logspace(-3.0, 2.0, 51)))


def _synthetic(n=200, seed=3):
    rng = np.random.default_rng(seed)
    a = rng.uniform(0.02, 0.95, n)
    d = np.exp(rng.uniform(np.log(0.005), np.log(15.0), n))
    y = burley2015_rings(EDGES, a, d)
    s = 0.01 * y * rng.uniform(0.5, 2.0, y.shape)  # stand-in ring errors; zero where a ring is empty
    return a, d, y, s


def test_recovers_A_and_d_to_1e6_conserving_A():
    """Profiles generated from Christensen & Burley 2015 Eq. 3 (exact ring integrals): d to 1e-6, A kept."""
    a, d, y, s = _synthetic()
    out = fit_burley2015(EDGES, y, s, a)
    np.testing.assert_allclose(out["shape_distance_mm"], d, rtol=1e-6)
    np.testing.assert_allclose(out["albedo_multiple"], a, rtol=1e-12)
    assert np.all(out["fit_residual"] < 1e-6)
    assert not out["at_search_edge"].any()


def test_recovers_A_and_d_to_1e6_with_free_A():
    """With A free and a wrong starting A, both A and d come back to 1e-6."""
    a, d, y, s = _synthetic(seed=5)
    out = fit_burley2015(EDGES, y, s, np.clip(a * 1.05, 0.01, 0.99), conserve_albedo=False)
    np.testing.assert_allclose(out["shape_distance_mm"], d, rtol=1e-6)
    np.testing.assert_allclose(out["albedo_multiple"], a, rtol=1e-6)


def test_noisy_profile_fit_is_consistent_with_its_errors():
    """Gaussian noise of the stated stderr: reduced chi-square near 1 and d within a few percent."""
    rng = np.random.default_rng(11)
    a, d = np.full(50, 0.5), np.full(50, 0.3)
    y0 = burley2015_rings(EDGES, a, d)
    s = 0.02 * y0
    y = np.abs(y0 + s * rng.standard_normal(y0.shape))
    out = fit_burley2015(EDGES, y, s, a)
    assert 0.7 < np.median(out["chi2_reduced"]) < 1.3
    np.testing.assert_allclose(out["shape_distance_mm"], d, rtol=0.02)


def test_wrong_shape_gives_nonzero_residual():
    """A profile that is not normalised diffusion (a single exponential) leaves a visible residual."""
    r = 0.5 * (EDGES[1:] + EDGES[:-1])
    y = np.exp(-r / 0.2)[None, :] / (2 * np.pi * 0.04)
    out = fit_burley2015(EDGES, y, 0.01 * y, np.array([0.5]), conserve_albedo=False)
    assert out["fit_residual"][0] > 0.05


@pytest.mark.parametrize(
    "mutate, match",
    [
        (lambda y, s, a: (np.where(np.arange(y.shape[-1]) == 3, np.nan, y), s, a), "finite"),
        (lambda y, s, a: (np.where(np.arange(y.shape[-1]) == 3, -1.0, y), s, a), ">= 0"),
        (lambda y, s, a: (np.zeros_like(y), s, a), "empty"),
        (lambda y, s, a: (y, s, np.array([1.2])), r"\(0, 1\)"),
        (lambda y, s, a: (y, s, np.array([0.0])), r"\(0, 1\)"),
        (lambda y, s, a: (y, np.where(np.arange(y.shape[-1]) == 0, s, 0.0), a), "fewer than 2 rings"),
    ],
)
def test_bad_profiles_raise_fit_error(mutate, match):
    a, _, y, s = _synthetic(n=1)
    y2, s2, a2 = mutate(y, s, a)
    with pytest.raises(FitError, match=match):
        fit_burley2015(EDGES, y2, s2, a2)


def test_single_ring_and_bad_edges():
    with pytest.raises(FitError, match="at least 3 edges"):
        fit_burley2015([0.0, 1.0], [[1.0]], [[0.1]], [0.5])
    with pytest.raises(FitError, match="ascending"):
        fit_burley2015([0.0, 2.0, 1.0], [[1.0, 1.0]], [[0.1, 0.1]], [0.5])


def test_wrapper_on_transport_result():
    a, d, y, s = _synthetic(n=1, seed=9)
    res = TransportResult(
        photons=1,
        specular_reflectance=Estimate(0.0, 0.0),
        diffuse_reflectance=Estimate(float(a[0]), 1e-4),
        transmittance=Estimate(0.0, 0.0),
        absorbed=np.zeros(1),
        absorbed_stderr=np.zeros(1),
        ring_edges_mm=EDGES,
        radial_reflectance_per_mm2=y[0],
        radial_stderr_per_mm2=s[0],
        exit_cos_edges=np.zeros(0),
        exit_angle_per_sr=np.zeros(0),
        exit_angle_stderr_per_sr=np.zeros(0),
        mean_penetration_depth_mm=Estimate(0.0, 0.0),
    )
    out = fit_burley2015_result(res)
    assert out["shape_distance_mm"] == pytest.approx(float(d[0]), rel=1e-6)
