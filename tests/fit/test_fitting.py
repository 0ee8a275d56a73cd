"""Gaussian-sum and dipole fits recover the parameters of profiles generated from their own formulas."""

import numpy as np
import pytest

from matgen.errors import FitError
from matgen.fit.fitting import fit_dipole_Jensen2001, fit_gaussians_dEon2007
from matgen.fit.models import (
    GAUSSIAN_VARIANCES_DEON2007_MM2,
    dipole_rings_Jensen2001,
    dipole_total_Jensen2001,
    gaussian_rings,
)

EDGES = np.concatenate(([0.0], np.logspace(-3.0, 2.0, 51)))


def test_gaussian_weights_recovered_nonnegative():
    """d'Eon & Luebke 2007 variance set (from memory); weights of a synthetic sum come back (NNLS, Lawson &
    Hanson 1974)."""
    w_true = np.array([[0.12, 0.0, 0.05, 0.08, 0.15, 0.02], [0.0, 0.3, 0.0, 0.1, 0.0, 0.05]])
    y = w_true @ gaussian_rings(EDGES, GAUSSIAN_VARIANCES_DEON2007_MM2)
    s = 0.01 * y
    out = fit_gaussians_dEon2007(EDGES, y, s, w_true.sum(axis=1))
    np.testing.assert_allclose(out["weights"], w_true, atol=1e-8)
    assert np.all(out["weights"] >= 0)
    np.testing.assert_allclose(out["weights"].sum(axis=1), w_true.sum(axis=1), rtol=1e-6)


def test_gaussian_fit_conserves_measured_albedo_on_other_shapes():
    """On a profile the Gaussians cannot match exactly, the weight sum still equals the measured A."""
    from matgen.fit.models import burley2015_rings

    y = burley2015_rings(EDGES, np.array([0.6]), np.array([0.3]))
    out = fit_gaussians_dEon2007(EDGES, y, 0.01 * y, np.array([0.6]))
    assert out["weights"].sum() == pytest.approx(0.6, rel=1e-4)
    assert out["fit_residual"][0] > 0


@pytest.mark.parametrize("mua, mus, n", [(0.02, 1.2, 1.0), (0.3, 2.5, 1.4)])
def test_dipole_recovers_coefficients(mua, mus, n):
    """Farrell 1992 / Jensen 2001 dipole: mu_a and mu_s' recovered to 1e-6 from its own ring profile."""
    y = dipole_rings_Jensen2001(EDGES, np.array([mua]), np.array([mus]), n)
    s = 0.01 * y
    a = dipole_total_Jensen2001(mus / (mua + mus), n)
    out = fit_dipole_Jensen2001(EDGES, y, s, np.array([a]), n_relative=n)
    assert out["mu_a_per_mm"][0] == pytest.approx(mua, rel=1e-6)
    assert out["mu_s_reduced_per_mm"][0] == pytest.approx(mus, rel=1e-6)


def test_gaussian_fit_needs_albedo_when_conserving():
    y = gaussian_rings(EDGES, GAUSSIAN_VARIANCES_DEON2007_MM2)[:1]
    with pytest.raises(FitError, match="albedo_multiple"):
        fit_gaussians_dEon2007(EDGES, y, 0.01 * y)
