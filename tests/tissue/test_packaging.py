"""Pigment packaging factors against independent numerical integration and their limits."""

import numpy as np
import pytest
from scipy.integrate import quad

from matgen.errors import ParameterError
from matgen.tissue import packaging as pk


def _sphere_absorption_by_quadrature(tau):
    """Fraction of light absorbed by a sphere of optical diameter tau, integrating 1 - exp(-mu * chord)
    over the
    cross-section (chord 2 sqrt(R^2 - b^2); ray optics, no refraction; van de Hulst 1957 Sec. 7)."""
    radius = 0.5
    mu = tau  # diameter 1

    def integrand(b):
        return (1 - np.exp(-mu * 2 * np.sqrt(radius**2 - b**2))) * 2 * np.pi * b

    val, _ = quad(integrand, 0, radius, epsabs=1e-13, epsrel=1e-12)
    return val / (np.pi * radius**2)


@pytest.mark.parametrize("tau", [0.001, 0.03, 0.05, 0.2, 1.0, 4.0, 30.0])
def test_duysens_factor_matches_quadrature(tau):
    """Duysens 1956: F(tau) = 3 Q(tau) / (2 tau) with Q the absorbed fraction of the cross-section."""
    q = _sphere_absorption_by_quadrature(tau)
    assert pk.duysens_sphere_factor(tau, 1.0) == pytest.approx(1.5 * q / tau, rel=1e-8)


def test_duysens_series_and_closed_form_agree_at_switch():
    """At the switch tau = 0.05 the series equals the closed form (cancellation error there ~ 1e-14)."""
    t = pk.SERIES_BELOW_TAU
    closed = 1.5 * (1 + 2 * ((1 + t) * np.exp(-t) - 1) / t**2) / t
    assert pk.duysens_sphere_factor_series(t) == pytest.approx(closed, rel=1e-11)
    assert pk.duysens_sphere_factor(t, 1.0) == pytest.approx(closed, rel=1e-11)


def test_duysens_limits():
    """Small particles: no flattening (F -> 1); black particles: F -> 3 / (2 tau) (Q -> 1)."""
    assert pk.duysens_sphere_factor(0.0, 1e-3) == 1.0
    assert pk.duysens_sphere_factor(1e4, 1.0) == pytest.approx(1.5e-4, rel=1e-3)
    f = pk.duysens_sphere_factor(np.linspace(0, 50, 200), 1.0)
    assert np.all(np.diff(f) < 0) and np.all((f > 0) & (f <= 1))


def test_vessel_factor():
    """van Veen et al. 2002: C = (1 - exp(-2 mu R)) / (2 mu R); C(0) = 1, C -> 1/(2 mu R) for opaque
    vessels."""
    assert pk.vessel_factor(0.0, 0.01) == 1.0
    assert pk.vessel_factor(10.0, 0.05) == pytest.approx((1 - np.exp(-1.0)) / 1.0)
    assert pk.vessel_factor(1e4, 0.05) == pytest.approx(1 / 1e3, rel=1e-6)
    with pytest.raises(ParameterError, match="vanVeen2002"):
        pk.vessel_factor(1.0, 0.01, method="Other1999")


def test_packaging_modes():
    assert pk.applies("on", "melanin") and pk.applies("on", "blood")
    assert pk.applies("melanin", "melanin") and not pk.applies("melanin", "blood")
    assert not pk.applies("off", "blood")
    with pytest.raises(ParameterError, match="on, off, melanin, blood"):
        pk.check_packaging("yes")
