"""Profile models: closed-form ring integrals against numerical quadrature of the point profiles."""

import numpy as np
import pytest
from scipy.integrate import quad

from matgen.errors import ParameterError
from matgen.fit.models import (
    GAUSSIAN_VARIANCES_DEON2007_MM2,
    burley2015_cdf,
    burley2015_profile,
    burley2015_rings,
    dipole_cdf_Jensen2001,
    dipole_profile_Jensen2001,
    dipole_total_Jensen2001,
    gaussian_rings,
    gaussian_sum_profile,
    shape_scaling,
)


@pytest.mark.parametrize("d", [0.05, 0.7, 3.0])
def test_burley_cdf_matches_quadrature_of_profile(d):
    """Christensen & Burley 2015 Eq. 3 integrated numerically (scipy.integrate.quad) vs our closed form."""
    for r in (0.01, 0.3, 2.0, 10.0):
        num, _ = quad(lambda x: 2 * np.pi * x * burley2015_profile(x, 1.0, d), 0, r, limit=200)
        assert num == pytest.approx(float(burley2015_cdf(r, d)), rel=1e-8)
    # total over the plane is A (the profile is normalised)
    tot, _ = quad(lambda x: 2 * np.pi * x * burley2015_profile(x, 0.42, d), 0, np.inf, limit=400)
    assert tot == pytest.approx(0.42, rel=1e-7)


def test_burley_rings_sum_to_caught_fraction():
    e = np.concatenate(([0.0], np.logspace(-3, 2, 51)))
    y = burley2015_rings(e, np.array([0.5]), np.array([0.4]))[0]
    area = np.pi * (e[1:] ** 2 - e[:-1] ** 2)
    assert np.sum(y * area) == pytest.approx(0.5 * float(burley2015_cdf(e[-1], 0.4)), rel=1e-12)


def test_dipole_cdf_matches_quadrature_and_total():
    """Farrell 1992 Eq. 12 / Jensen 2001 Eq. 4 integrated by quad vs our closed-form disc integral, and its
    limit vs Jensen 2001 Eq. 11 (total diffuse reflectance)."""
    for mua, mus, n in ((0.01, 1.5, 1.0), (0.1, 2.0, 1.4), (1.0, 3.0, 1.33)):
        for r in (0.05, 1.0, 8.0):
            num, _ = quad(
                lambda x, mua=mua, mus=mus, n=n: 2 * np.pi * x * dipole_profile_Jensen2001(x, mua, mus, n),
                0,
                r,
                limit=400,
            )
            assert num == pytest.approx(float(dipole_cdf_Jensen2001(r, mua, mus, n)), rel=1e-7)
        big = float(dipole_cdf_Jensen2001(1e6, mua, mus, n))
        assert big == pytest.approx(float(dipole_total_Jensen2001(mus / (mua + mus), n)), rel=1e-9)


def test_gaussians_normalised_and_rings():
    """d'Eon & Luebke 2007 Gaussians (variances from memory) integrate to 1; the ring integrals match
    quadrature."""
    e = np.array([0.0, 0.1, 0.5, 2.0])
    g = gaussian_rings(e, GAUSSIAN_VARIANCES_DEON2007_MM2)
    area = np.pi * (e[1:] ** 2 - e[:-1] ** 2)
    w = np.zeros(6)
    w[2] = 1.0
    for k in range(3):
        num, _ = quad(lambda x: 2 * np.pi * x * gaussian_sum_profile(x, w), e[k], e[k + 1])
        assert num == pytest.approx(g[2, k] * area[k], rel=1e-9)
    tot, _ = quad(lambda x: 2 * np.pi * x * gaussian_sum_profile(x, w), 0, np.inf)
    assert tot == pytest.approx(1.0, rel=1e-9)


def test_shape_scaling_values_and_errors():
    """The three published s(A) fits (Christensen & Burley 2015, coefficients from memory) at A = 0.8
    and A = 0.33, where each polynomial term vanishes: 1.05, 1.1, 3.5."""
    assert float(shape_scaling(0.8, "Christensen2015_searchlight_mfp")) == pytest.approx(1.05)
    assert float(shape_scaling(0.8, "Christensen2015_diffuse_mfp")) == pytest.approx(1.1)
    assert float(shape_scaling(0.33, "Christensen2015_searchlight_dmfp")) == pytest.approx(3.5)
    with pytest.raises(ParameterError, match="Christensen2015_searchlight_mfp"):
        shape_scaling(0.5, "nonsense")
