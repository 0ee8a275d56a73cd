"""Monte Carlo checks of the fits and inversions against matgen's transport engine.

Each run: a homogeneous half-space (slab of 500 mean free paths, sigma_t = 1/mm) at normal incidence.
Tolerances come from the runs' standard errors (3 sigma) plus stated allowances.
"""

import numpy as np
import pytest

from matgen.fit.diffusion import fit_burley2015_result
from matgen.fit.inversion import (
    albedo_single_ChiangKutzBurley2016,
    default_inversion_table,
    has_default_table,
)
from matgen.fit.models import shape_scaling_Christensen2015
from matgen.transport.simulate import simulate
from matgen.transport.stack import Stack

PHOTONS = 100_000


def _half_space(alpha, g=0.0, n=1.0, photons=PHOTONS, seed=7):
    thickness = max(500.0, 30.0 / np.sqrt(3.0 * (1.0 - alpha) * (1.0 - alpha * g)))
    stack = Stack([thickness], [n], [1.0 - alpha], [alpha], [g], n_above=1.0, n_below=n)
    return simulate(stack, photons, seed=seed)


@pytest.fixture(scope="module")
def isotropic_runs():
    return {a: _half_space(a) for a in (0.8, 0.9, 0.95, 0.99)}


@pytest.mark.parametrize("alpha, exact", [(0.8, 0.285255), (0.9, 0.414947), (0.99, 0.752721)])
def test_albedo_matches_exact_isotropic_half_space(isotropic_runs, alpha, exact):
    """A(alpha) from matgen's transport vs R = 1 - H(1) sqrt(1 - alpha) (van de Hulst 1980; Chandrasekhar
    1960 H-function; values re-derived from the H-function in test_inversion.py), within 3 SE."""
    r = isotropic_runs[alpha].diffuse_reflectance
    assert abs(r.value - exact) < 3.0 * r.stderr


SHAPE_ALLOWANCE = 0.10
SHAPE_DOC = (
    "The memo's own accuracy statement could not be re-read for this check (coefficients from memory);"
    """
    the allowance is 10 %: the fitted d depends on how rings are weighted (ours: 1/stderr^2 on log-spaced
    rings; the memo's weighting is not known here) and the profile model itself misfits the Monte Carlo
    profile by a few percent (fit_residual 0.03-0.05 here). The statistical error of s is below 0.5 % at
    1e5 photons."""
)


@pytest.mark.parametrize("alpha", [0.8, 0.9, 0.95])
def test_fitted_shape_scaling_matches_christensen_burley_mfp(isotropic_runs, alpha):
    """Fitted s = l / d on an index-matched isotropic half-space vs Christensen & Burley 2015's searchlight
    mean-free-path fit s = 1.85 - A + 7|A - 0.8|^3, l = 1/sigma_t, within 10 % (see SHAPE_DOC)."""
    r = isotropic_runs[alpha]
    fit = fit_burley2015_result(r)
    s_mfp = 1.0 / fit["shape_distance_mm"]  # sigma_t = 1/mm
    expect = float(shape_scaling_Christensen2015(r.diffuse_reflectance.value, "searchlight_mfp"))
    assert s_mfp == pytest.approx(expect, rel=SHAPE_ALLOWANCE)


@pytest.mark.parametrize(
    "alpha",
    [
        pytest.param(
            0.8, marks=pytest.mark.xfail(strict=True, reason="measured 11 % below the dmfp fit at A = 0.28")
        ),
        0.9,
        0.95,
    ],
)
def test_fitted_shape_scaling_matches_christensen_burley_dmfp(isotropic_runs, alpha):
    """As above for the diffuse-mean-free-path fit s = 3.5 + 100 (A - 0.33)^4, l = 1/sqrt(3 sigma_a sigma_t').
    Known disagreement: at alpha = 0.8 (A = 0.28) our fitted s is 11 % below the fit (kept as a strict xfail).
    """
    r = isotropic_runs[alpha]
    fit = fit_burley2015_result(r)
    dmfp = 1.0 / np.sqrt(3.0 * (1.0 - alpha) * 1.0)
    expect = float(shape_scaling_Christensen2015(r.diffuse_reflectance.value, "searchlight_dmfp"))
    assert dmfp / fit["shape_distance_mm"] == pytest.approx(expect, rel=SHAPE_ALLOWANCE)


def test_ckb_closed_form_difference_is_recorded(isotropic_runs):
    """Chiang, Kutz & Burley 2016 inverted on matgen's normal-incidence A underestimates alpha: the closed
    form follows van de Hulst's formula, closer to the diffuse-incidence albedo. We assert the sign and an
    upper bound of 0.08 on the difference (measured: about 0.06 at alpha 0.8, 0.04 at 0.9, 0.006 at 0.99)."""
    for alpha, run in isotropic_runs.items():
        diff = alpha - float(albedo_single_ChiangKutzBurley2016(run.diffuse_reflectance.value))
        assert 0.0 < diff < 0.08


needs_table = pytest.mark.skipif(not has_default_table(), reason="inversion table not built")


#: Interpolation allowance of the shipped table (absolute A). Leave-one-node-out along g (at equal similarity
#: parameter) predicts dropped nodes to 0.013 and along n to 0.008 at doubled node spacing; linear
#: interpolation error scales with the spacing squared, so about 0.004 (g) and 0.002 (n) at the real spacing.
TABLE_ALLOWANCE = 0.006


@needs_table
@pytest.mark.parametrize(
    "alpha, g, n",
    [(0.95, 0.0, 1.0), (0.93, 0.8, 1.4), (0.985, 0.75, 1.44), (0.99, 0.85, 1.36), (0.97, 0.2, 1.2)],
)
def test_boundary_table_reproduces_transport(alpha, g, n):
    """The shipped boundary-aware table vs a fresh transport run (another seed) at on- and off-node points:
    within 3 x the combined standard error of the run and the table nodes, plus TABLE_ALLOWANCE; and the
    inversion of the run's A returns alpha within 0.01."""
    tab = default_inversion_table()
    run = _half_space(alpha, g, n, photons=60_000, seed=99)
    a_tab = float(tab.albedo_multiple_of(alpha, g, n))
    node_err = float(np.max(tab.albedo_multiple_stderr))
    tol = 3.0 * np.hypot(run.diffuse_reflectance.stderr, node_err) + TABLE_ALLOWANCE
    assert abs(a_tab - run.diffuse_reflectance.value) < tol
    alpha_back = float(tab.invert(np.array([run.diffuse_reflectance.value]), g, n)[0][0])
    assert alpha_back == pytest.approx(alpha, abs=0.01)
