"""Mie scattering of sphere populations (miepython) against the analytic Rayleigh limit and the
extinction paradox."""

import numpy as np
import pytest

from matgen.errors import ParameterError
from matgen.spectra.bands import BandSet

pytest.importorskip("miepython")
from matgen.spectra import mie  # noqa: E402


def test_rayleigh_limit():
    """Small spheres (x = pi d n_med / lambda = 0.05): Q_sca = (8/3) x^4 |(m^2 - 1)/(m^2 + 2)|^2 with m the
    relative index (van de Hulst 1957, Sec. 6.1), and g -> 0."""
    n_med, n_p, wl = 1.35, 1.55, 600.0
    d = 0.05 * wl / (np.pi * n_med)
    x = np.pi * d * n_med / wl
    m = n_p / n_med
    expected = 8.0 / 3.0 * x**4 * abs((m**2 - 1) / (m**2 + 2)) ** 2
    q, g = mie.sphere_efficiencies(d, n_p, n_med, wl)
    assert q[0] == pytest.approx(expected, rel=0.01)
    assert abs(g[0]) < 0.01


def _mean_fresnel_reflectance(m):
    """Unpolarised Fresnel reflectance of an interface air -> m, averaged over the face of a sphere (weight
    2 sin(t) cos(t) dt), computed here by quadrature."""
    from scipy.integrate import quad

    def r(t):
        c, s = np.cos(t), np.sin(t)
        ct = np.sqrt(1 - (s / m) ** 2 + 0j)
        rs = (c - m * ct) / (c + m * ct)
        rp = (m * c - ct) / (m * c + ct)
        return 0.5 * (abs(rs) ** 2 + abs(rp) ** 2)

    return quad(lambda t: r(t) * 2 * np.sin(t) * np.cos(t), 0, np.pi / 2)[0]


def test_large_absorbing_sphere_geometric_limit():
    """Large, opaque spheres (x = 150): Q_sca -> 1 (diffraction, the extinction paradox) + the face-averaged
    Fresnel reflectance (van de Hulst 1957, Secs. 8.2 and 12.3); allowance 0.05 for edge corrections of order
    x^(-2/3) = 0.035 (van de Hulst 1957, Sec. 17). Strongly forward scattering (g > 0.85)."""
    m = 1.55 + 0.5j
    q, g = mie.sphere_efficiencies(30000.0, m, 1.0, 628.0)
    assert abs(q[0] - (1.0 + _mean_fresnel_reflectance(m))) < 0.05
    assert g[0] > 0.85


def test_population_number_density_and_band_average():
    """mu_s = N sigma_sca with N = f / V for identical spheres; a narrow band reproduces the point value."""
    band = BandSet([500.0], [499.99], [500.01])
    d_nm, f = 400.0, 0.01
    mu_s, g = mie.population_scattering(band, f, d_nm, 1.5, 1.35)
    q, g1 = mie.sphere_efficiencies(d_nm, 1.5, 1.35, 500.0)
    d_mm = d_nm * 1e-6
    expected = f / (np.pi * d_mm**3 / 6) * q[0] * np.pi * d_mm**2 / 4
    assert mu_s[0] == pytest.approx(expected, rel=1e-6)
    assert g[0] == pytest.approx(g1[0], rel=1e-6)


def test_lognormal_narrow_tends_to_monodisperse_and_inputs_checked():
    band = BandSet([600.0], [595.0], [605.0])
    mono = mie.population_scattering(band, 0.02, 300.0, 1.5, 1.35)[0]
    narrow = mie.population_scattering(band, 0.02, 300.0, 1.5, 1.35, geometric_sigma=1.001)[0]
    assert narrow[0] == pytest.approx(mono[0], rel=1e-3)
    with pytest.raises(ParameterError):
        mie.population_scattering(band, 1.5, 300.0, 1.5, 1.35)
    with pytest.raises(ParameterError):
        mie.sphere_efficiencies(-1.0, 1.5, 1.35, 600.0)
