"""Samplers and boundary formulas against closed forms.

Henyey-Greenstein: normalisation of the density (scipy.integrate.quad) and a chi-square test of sampled
cosines against the closed-form CDF (Henyey & Greenstein 1941). Fresnel: the unpolarised reflectance
against Born & Wolf's (1999, sec. 1.5.2) sine/tangent form r_s = -sin(ti - tt)/sin(ti + tt),
r_p = tan(ti - tt)/tan(ti + tt), the normal-incidence value ((n1 - n2)/(n1 + n2))^2 and total internal
reflection beyond the critical angle.
"""

import math

import numpy as np
import pytest
from scipy import integrate, stats

from matgen.transport.boundary import fresnel
from matgen.transport.phase import hg_cdf_mu, hg_pdf_mu, hg_sample_mu_array
from matgen.transport.rng import uniforms


@pytest.mark.parametrize("g", [-0.6, 0.0, 0.3, 0.75, 0.9, 0.98])
def test_hg_density_normalised_and_mean_is_g(g):
    total, _ = integrate.quad(lambda m: hg_pdf_mu(m, g), -1.0, 1.0, points=[1.0], limit=200)
    mean, _ = integrate.quad(lambda m: m * hg_pdf_mu(m, g), -1.0, 1.0, points=[1.0], limit=200)
    assert total == pytest.approx(1.0, abs=1e-8)
    assert mean == pytest.approx(g, abs=1e-8)


@pytest.mark.parametrize("g", [-0.6, 0.0, 0.3, 0.75, 0.9, 0.98])
def test_hg_sampling_chi_square(g):
    u = uniforms(42, int(1000 * (g + 1)), 100_000)
    mu = hg_sample_mu_array(g, u)
    # 40 bins of equal probability under the reference CDF
    grid = np.linspace(-1.0, 1.0, 200_001)
    cdf = hg_cdf_mu(grid, g)
    edges = np.interp(np.linspace(0.0, 1.0, 41), cdf, grid)
    edges[0], edges[-1] = -1.0, 1.0
    counts, _ = np.histogram(mu, bins=edges)
    expected = np.diff(hg_cdf_mu(edges, g)) * mu.size
    p = stats.chisquare(counts, expected).pvalue
    assert p > 1e-4, p


def _born_wolf(n1, n2, theta_i):
    if theta_i == 0.0:
        return ((n1 - n2) / (n1 + n2)) ** 2
    s = n1 / n2 * math.sin(theta_i)
    if s >= 1.0:
        return 1.0
    theta_t = math.asin(s)
    rs = -math.sin(theta_i - theta_t) / math.sin(theta_i + theta_t)
    rp = math.tan(theta_i - theta_t) / math.tan(theta_i + theta_t)
    return 0.5 * (rs * rs + rp * rp)


@pytest.mark.parametrize("n1,n2", [(1.0, 1.4), (1.4, 1.0), (1.55, 1.40), (1.0, 1.33), (1.44, 1.40)])
def test_fresnel_against_born_wolf(n1, n2):
    for deg in np.linspace(0.0, 89.0, 60):
        th = math.radians(deg)
        r, cos_t = fresnel(n1, n2, math.cos(th))
        assert r == pytest.approx(_born_wolf(n1, n2, th), abs=1e-12)
        s = n1 / n2 * math.sin(th)
        if s < 1.0:
            assert cos_t == pytest.approx(math.sqrt(1.0 - s * s), abs=1e-12)
        else:
            assert r == 1.0 and cos_t == 0.0


def test_fresnel_matched_index_passes_unchanged():
    assert fresnel(1.4, 1.4, 0.3) == (0.0, 0.3)


def test_ziggurat_layers_have_equal_area():
    """Marsaglia & Tsang 2000: every layer of the exponential ziggurat has area v; the base layer is the
    rectangle [0, r] x [0, e^-r] plus the tail integral e^-r."""
    from matgen.transport.rng import ZIG_F, ZIG_X, ZIGGURAT_R, ZIGGURAT_V

    assert ZIG_X[1] == ZIGGURAT_R and ZIG_X[256] == 0.0
    assert np.all(np.diff(ZIG_X[1:]) < 0)
    base = ZIGGURAT_R * math.exp(-ZIGGURAT_R) + math.exp(-ZIGGURAT_R)
    assert base == pytest.approx(ZIGGURAT_V, rel=1e-12)
    assert ZIG_X[0] * ZIG_F[1] == pytest.approx(ZIGGURAT_V, rel=1e-12)
    areas = ZIG_X[1:256] * (ZIG_F[2:257] - ZIG_F[1:256])
    assert np.allclose(areas, ZIGGURAT_V, rtol=1e-11, atol=0.0)


@pytest.mark.parametrize("seed", [1, 2])
def test_exponential_sampler_against_the_exponential_distribution(seed):
    """Unit exponential (the hop's scattering depth): a chi-square over 60 bins of equal probability under
    the exact CDF 1 - e^-x (1e6 samples), the tail beyond r = 7.697 (probability e^-r = 4.5e-4) within 4
    standard errors, and mean and variance 1 within 4 standard errors."""
    from matgen.transport.rng import ZIGGURAT_R, exponentials

    x = exponentials(seed, 77, 1_000_000)
    edges = -np.log1p(-np.linspace(0.0, 1.0, 61)[:-1])
    counts = np.histogram(x, bins=np.append(edges, np.inf))[0]
    assert stats.chisquare(counts).pvalue > 1e-4
    p_tail = math.exp(-ZIGGURAT_R)
    n_tail = np.count_nonzero(x > ZIGGURAT_R)
    assert abs(n_tail - p_tail * x.size) <= 4.0 * math.sqrt(p_tail * x.size)
    assert abs(x.mean() - 1.0) <= 4.0 / math.sqrt(x.size)
    assert abs(x.var() - 1.0) <= 4.0 * math.sqrt(8.0 / x.size)  # var of (X-1)^2 for Exp(1) is 8
    assert x.min() >= 0.0
