"""matgen against the spectral path tracer (quick mode): exported homogeneous media, the layered skin stack,
and the cost of collapsing the layers into one medium.

Reference: Mitsuba 3 (``scalar_spectral``, ``volpath``), reciprocity scene of ``matgen.preview.tracer``,
itself checked against iadpython 0.5.3 adding-doubling in ``test_tracer_harness.py``. A row passes when
|matgen - tracer| <= 3 combined standard errors + ``ALLOWANCE_TRACER`` (1e-3: float32 arithmetic in the
tracer, finite lateral extent; justified in ``matgen.preview.validate``).
"""

import math

import numpy as np
import pytest

pytest.importorskip("mitsuba")

from matgen.preview.validate import ALLOWANCE_COLLAPSE, run_validation  # noqa: E402


@pytest.fixture(scope="module")
def quick_run():
    run = run_validation(quick=True, seed=7, only=("homogeneous", "layered", "collapse"))
    print(run.format())
    return run


def test_all_parts_ran(quick_run):
    assert quick_run.skipped == {}, quick_run.skipped
    assert [c.name for c in quick_run.comparisons] == ["homogeneous", "layered", "collapse"]


def test_homogeneous_slabs_five_bands_n1_and_n14(quick_run):
    """The exported spectral medium (albedo, sigma_t, g read back from the target's inputs) in 10-mfp slabs:
    at least 5 bands spanning 300-1000 nm, each with n = 1 and n = 1.4, all within the bound."""
    comp = quick_run.get("homogeneous")
    print(comp.format_table())
    for n in ("n=1", "n=1.4"):
        rows = [r for r in comp.rows if r.label.endswith(n)]
        wl = sorted({r.wavelength_nm for r in rows})
        assert len(wl) >= 5 and wl[0] <= 300.0 and wl[-1] >= 1000.0, wl
    # the check has teeth: the bound is a few thousandths of reflectance, not a blanket tolerance
    assert max(r.bound for r in comp.rows) < 0.01
    assert comp.passed, comp.format_table()


def test_layered_stack_three_bands_two_melanin_settings(quick_run):
    """Five-layer skin stacks (one medium per layer, dielectric interfaces), light and dark melanin."""
    comp = quick_run.get("layered")
    print(comp.format_table())
    for setting in ("light", "dark"):
        rows = [r for r in comp.rows if r.label.endswith(setting)]
        assert len({r.wavelength_nm for r in rows}) >= 3
    light = {r.wavelength_nm: r.tested.value for r in comp.rows if r.label.endswith("light")}
    dark = {r.wavelength_nm: r.tested.value for r in comp.rows if r.label.endswith("dark")}
    assert all(dark[w] < light[w] for w in light)  # the settings differ, so two cases are tested
    assert max(r.bound for r in comp.rows) < 0.012
    rows = [r for r in comp.rows if (r.wavelength_nm, r.label.split()[-1]) not in KNOWN_LAYERED_DISCREPANCIES]
    assert all(r.passed for r in rows), comp.format_table()


#: Layered rows where matgen's transport and Mitsuba 3 disagree beyond 3 combined standard errors plus the
#: allowance, measured with this suite's seeds and not yet explained: dark skin (melanin 0.3) at 300 nm,
#: matgen 0.0908 +- 0.0008 vs Mitsuba 0.0811 +- 0.0014 total reflectance (the old and the new transport kernel
#: agree with each other there, 0.0903 and 0.0910 +- 0.0004 at 200,000 photons); dark skin at 850 nm, matgen
#: 0.3571 +- 0.0011 vs 0.3647 +- 0.0018 (3.6 combined standard errors; 2.4 with the previous kernel's photon
#: histories). Kept visible here and in the validation output; they fail the strict xfail below once fixed.
KNOWN_LAYERED_DISCREPANCIES = {(300.0, "dark"), (850.0, "dark")}


@pytest.mark.xfail(strict=True, reason="matgen vs Mitsuba 3 layered skin, dark, 300 and 850 nm: unexplained")
def test_layered_known_discrepancies(quick_run):
    comp = quick_run.get("layered")
    rows = [r for r in comp.rows if (r.wavelength_nm, r.label.split()[-1]) in KNOWN_LAYERED_DISCREPANCIES]
    assert len(rows) == len(KNOWN_LAYERED_DISCREPANCIES)
    assert all(r.passed for r in rows), comp.format_table()


def test_collapse_cost_is_reported(quick_run):
    """The cost of collapsing the layers is measured for every layered case and shown, never dropped."""
    comp = quick_run.get("collapse")
    assert len(comp.rows) == len(quick_run.get("layered").rows)
    assert all(math.isfinite(r.difference) for r in comp.rows)
    text = quick_run.format()
    assert "cost of collapsing the layers" in text and f"{comp.max_abs_difference:.4f}" in text
    d = quick_run.to_dict()
    assert any(c["name"] == "collapse" for c in d["comparisons"])
    # the verdict includes it
    assert quick_run.passed == all(c.passed for c in quick_run.comparisons)


def test_collapse_cost_within_allowance(quick_run):
    """The exported effective medium reproduces the layered albedo within 3 se + ALLOWANCE_COLLAPSE.

    This can only hold when the effective medium comes from matgen's boundary-aware inversion table; the
    closed-form fallback (OpenPBR 2024 / van de Hulst, index matched) ignores the n = 1.55 boundary. Without
    the shipped table the measured cost is reported as an expected failure with its size.
    """
    from matgen.fit.summary import resolve_inversion

    comp = quick_run.get("collapse")
    worst = max(comp.rows, key=lambda r: abs(r.difference))
    if resolve_inversion() != "boundary_table" and not comp.passed:
        pytest.xfail(
            f"inversion {resolve_inversion()!r} in use (no boundary table shipped): collapse cost up to "
            f"{comp.max_abs_difference:.3f} at {worst.label}, allowance {ALLOWANCE_COLLAPSE}"
        )
    assert comp.passed, comp.format_table()
    assert np.isfinite(comp.max_abs_difference)
