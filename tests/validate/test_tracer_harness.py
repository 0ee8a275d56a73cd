"""The path-tracer scene measures total reflectance: checked against adding-doubling before judging matgen.

References: iadpython 0.5.3 adding-doubling (Prahl 1993), 32 quadrature points, total reflectance for
normal collimated incidence with the specular part included (``Sample(...).rt()[0]``), slides given by
``n_above`` / ``n_below``. Mitsuba 3 ``scalar_spectral`` is the path tracer under test.
"""

import math

import pytest

pytest.importorskip("mitsuba")
pytest.importorskip("iadpython")

from matgen.errors import ParameterError  # noqa: E402
from matgen.preview import tracer  # noqa: E402
from matgen.preview.validate import (  # noqa: E402
    ALLOWANCE_TRACER,
    SIGMA_BOUND,
    Comparison,
    Row,
    adding_doubling_reflectance,
    harness_check,
)
from matgen.transport.results import Estimate  # noqa: E402


@pytest.mark.parametrize("centre_nm", [300.0, 550.0, 1000.0])
def test_unit_sky_reads_one_per_nm_of_band(centre_nm):
    """specfilm integrates over the band: a 10 nm band of the unit sky reads 10, 1 after dividing by width.

    Bands at 300 and 1000 nm render because the sky is a uniform spectrum (not RGB-upsampled).
    """
    est = tracer.render_reflectance(
        [tracer.TracerLayer(1.0, 0.5, 1.0, 0.0, 1.0)],
        1.0,
        1.0,
        centre_nm - 5.0,
        centre_nm + 5.0,
        paths=4096,
        empty=True,
    )
    assert est.value == pytest.approx(1.0, abs=1e-5)


def test_harness_matches_adding_doubling_quick():
    """Homogeneous slabs at 300, 550 and 1000 nm, n = 1 and 1.4: tracer within 3 se + 1e-3 of iadpython."""
    comp = harness_check(quick=True, seed=11)
    print(comp.format_table())
    assert len(comp.rows) == 3
    assert comp.passed, comp.format_table()


def _within(est, ref):
    return abs(est.value - ref) <= SIGMA_BOUND * est.stderr + ALLOWANCE_TRACER


def test_split_slab_equals_single_slab():
    """A slab cut into three identical layers (null interfaces between them) renders as the whole slab.

    Reference: iadpython 0.5.3, a = 0.95, b = 10, g = 0.5, n = 1.4, 32 points.
    """
    a, g, n = 0.95, 0.5, 1.4
    layers = [tracer.TracerLayer(t, a, 1.0, g, n) for t in (2.0, 3.0, 5.0)]
    est = tracer.render_reflectance(layers, 1.0, 1.0, 545.0, 555.0, paths=32768, seed=3)
    ref = adding_doubling_reflectance(a, 10.0, g, n)
    assert _within(est, ref), (est, ref)


def test_nested_dielectric_interfaces_match_glass_slides():
    """Clear glass layers (n = 1.5) above and below a scattering slab: dielectric interfaces in series.

    Reference: iadpython 0.5.3, n_above = n_below = 1.5 slides, a = 0.9, b = 10, g = 0, n = 1.4, 32 points.
    """
    import iadpython

    a, g, n = 0.9, 0.0, 1.4
    layers = [
        tracer.TracerLayer(1.0, 0.0, 0.0, 0.0, 1.5),
        tracer.TracerLayer(10.0, a, 1.0, g, n),
        tracer.TracerLayer(1.0, 0.0, 0.0, 0.0, 1.5),
    ]
    est = tracer.render_reflectance(layers, 1.0, 1.0, 645.0, 655.0, paths=32768, seed=4)
    ref = float(iadpython.Sample(a=a, b=10.0, g=g, n=n, n_above=1.5, n_below=1.5, quad_pts=32).rt()[0])
    # the slides add reflectance: the check is not vacuous
    assert ref - adding_doubling_reflectance(a, 10.0, g, n) > 0.004
    assert _within(est, ref), (est, ref)


def test_isotropic_half_space_chandrasekhar():
    """Isotropic half-space, n = 1, albedo 0.9: R = 1 - H(1) sqrt(1 - a) = 0.414947 (Chandrasekhar 1960,
    computed from the H-function); a 40-mfp slab stands in for the half-space (its transmittance ~ 1e-6)."""
    est = tracer.render_reflectance(
        [tracer.TracerLayer(40.0, 0.9, 1.0, 0.0, 1.0)], 1.0, 1.0, 495.0, 505.0, paths=32768, seed=5
    )
    assert _within(est, 0.414947), est


def test_verdict_fails_beyond_the_bound():
    """The verdict is not vacuous: a difference of 3 se + allowance + a little fails, just inside passes."""
    se = 0.002
    bound = SIGMA_BOUND * math.hypot(se, se) + ALLOWANCE_TRACER
    ok = Row("inside", 550.0, Estimate(0.5 + 0.99 * bound, se), Estimate(0.5, se), ALLOWANCE_TRACER)
    bad = Row("outside", 550.0, Estimate(0.5 + 1.01 * bound, se), Estimate(0.5, se), ALLOWANCE_TRACER)
    nan = Row("nan", 550.0, Estimate(float("nan"), se), Estimate(0.5, se), ALLOWANCE_TRACER)
    assert ok.passed and not bad.passed and not nan.passed
    comp = Comparison("x", "x", "a", "b", rows=[ok, bad])
    assert not comp.passed and "NO" in comp.format_table()
    assert not Comparison("empty", "x", "a", "b").passed


def test_bad_layers_raise_parameter_errors():
    with pytest.raises(ParameterError, match="albedo"):
        tracer.render_reflectance(
            [tracer.TracerLayer(1.0, 1.5, 1.0, 0.0, 1.0)], 1.0, 1.0, 545, 555, paths=4096
        )
    with pytest.raises(ParameterError, match="thickness"):
        tracer.render_reflectance(
            [tracer.TracerLayer(0.0, 0.5, 1.0, 0.0, 1.0)], 1.0, 1.0, 545, 555, paths=4096
        )
    with pytest.raises(ParameterError, match="band"):
        tracer.render_reflectance(
            [tracer.TracerLayer(1.0, 0.5, 1.0, 0.0, 1.0)], 1.0, 1.0, 555, 545, paths=4096
        )
