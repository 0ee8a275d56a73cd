"""Absorption reweighting against direct simulation (Graaff et al. 1993; Alerstam et al. 2008).

Reweighted tallies are unbiased estimates for the new absorption; a direct run with another seed is an
independent estimate, so the two must agree within 3 combined standard errors, sqrt(e1^2 + e2^2).
"""

import numpy as np
import pytest
from scipy import stats
from transport_cases import benchmark_stack, needs_jit

from matgen.errors import ParameterError
from matgen.transport.records import bytes_per_photon
from matgen.transport.reweight import reweight
from matgen.transport.simulate import simulate
from matgen.transport.stack import Stack


def _agree(a, ea, b, eb):
    return np.all(
        np.abs(np.asarray(a) - np.asarray(b)) <= 3.0 * np.sqrt(np.asarray(ea) ** 2 + np.asarray(eb) ** 2)
    )


@needs_jit
def test_reweighting_matches_direct_runs_for_random_absorption_sets():
    """Benchmark stack (5 layers) at 550 nm scattering; reference mu_a = 0.05/mm in every layer; 10 random
    absorption sets (log-uniform 0.05-3/mm per layer, seeded). Diffuse reflectance, transmittance and total
    absorption agree with direct runs within 3 combined standard errors for every set. The radial profile
    (15 rings centred 0.1-3 mm, 150 comparisons in all, too many for a per-ring 3-sigma bound) is tested per
    set by a chi-square of the ring differences over their combined variances: p-value above 1e-3."""
    ref_stack = benchmark_stack(550, mu_a=[0.05] * 5)
    _, rec = simulate(ref_stack, 60_000, seed=101, records=True)
    rng = np.random.default_rng(2026)
    sets = np.exp(rng.uniform(np.log(0.05), np.log(3.0), size=(10, 5)))
    rw = reweight(rec, sets)
    e = rw.ring_edges_mm
    rings = np.flatnonzero((0.5 * (e[:-1] + e[1:]) >= 0.1) & (0.5 * (e[:-1] + e[1:]) <= 3.0))
    for k in range(10):
        d = simulate(ref_stack.with_mu_a(sets[k]), 60_000, seed=2000 + k)
        assert _agree(
            rw.diffuse_reflectance[k],
            rw.diffuse_reflectance_stderr[k],
            d.diffuse_reflectance.value,
            d.diffuse_reflectance.stderr,
        ), k
        assert _agree(
            rw.transmittance[k], rw.transmittance_stderr[k], d.transmittance.value, d.transmittance.stderr
        ), k
        # total absorption: the reweighted per-photon estimate a = w_launch - w' is exact in expectation
        tot_rw = rw.absorbed[k].sum()
        tot_d = d.absorbed.sum()
        assert abs(tot_rw - tot_d) <= 3.0 * np.hypot(rw.absorbed_stderr[k].sum(), d.absorbed_stderr.sum()), k
        diff = rw.radial_reflectance_per_mm2[k, rings] - d.radial_reflectance_per_mm2[rings]
        var = rw.radial_stderr_per_mm2[k, rings] ** 2 + d.radial_stderr_per_mm2[rings] ** 2
        assert stats.chi2.sf(np.sum(diff**2 / var), rings.size) > 1e-3, k


def test_reweighting_at_the_reference_reproduces_the_run():
    """At mu_a = mu_a_ref the weights are unchanged: R, T, rings, angles and per-layer absorption equal the
    direct tallies of the same photons (float32 records: to 1e-6 relative)."""
    stack = benchmark_stack(550)
    res, rec = simulate(stack, 3000, seed=5, records=True)
    rw = reweight(rec, stack.mu_a).result(0)
    assert rw.diffuse_reflectance.value == pytest.approx(res.diffuse_reflectance.value, rel=1e-6)
    assert rw.transmittance.value == pytest.approx(res.transmittance.value, rel=1e-6)
    assert np.allclose(rw.radial_reflectance_per_mm2, res.radial_reflectance_per_mm2, rtol=1e-5, atol=1e-12)
    assert np.allclose(rw.exit_angle_per_sr, res.exit_angle_per_sr, rtol=1e-6)
    assert rw.mean_penetration_depth_mm.value == pytest.approx(res.mean_penetration_depth_mm.value, rel=1e-5)
    # per-layer absorption: photons ended by roulette keep their weight's roulette history only on average,
    # so compare within 3 standard errors rather than exactly
    assert np.all(np.abs(rw.absorbed - res.absorbed) <= 3.0 * res.absorbed_stderr + 1e-6)


@needs_jit
def test_one_layer_absorption_is_exact_and_white_reference_works():
    """One layer: per-layer absorption = 1 - R_sp - R_d - T is exact; a white reference (mu_a_ref = 0)
    reweighted to mu_a = 0.3/mm matches a direct run within 3 combined standard errors."""
    white = Stack([1.5], [1.4], [0.0], [8.0], [0.8])
    _, rec = simulate(white, 40_000, seed=8, records=True)
    rw = reweight(rec, [[0.3]])
    d = simulate(white.with_mu_a([0.3]), 40_000, seed=9)
    assert _agree(
        rw.diffuse_reflectance[0],
        rw.diffuse_reflectance_stderr[0],
        d.diffuse_reflectance.value,
        d.diffuse_reflectance.stderr,
    )
    assert _agree(rw.absorbed[0, 0], rw.absorbed_stderr[0, 0], d.absorbed[0], d.absorbed_stderr[0])
    balance = 1.0 - rw.specular_reflectance - rw.diffuse_reflectance[0] - rw.transmittance[0]
    assert rw.absorbed[0, 0] == pytest.approx(balance, abs=1e-9)


def test_reweighting_is_thread_independent_and_vectorised():
    stack = benchmark_stack(800)
    _, rec = simulate(stack, 2000, seed=3, records=True)
    sets = np.array([stack.mu_a * f for f in (0.5, 1.0, 2.0, 4.0)])
    a = reweight(rec, sets, threads=1)
    b = reweight(rec, sets, threads=2)
    c = reweight(rec, sets[2])
    for q in (
        "diffuse_reflectance",
        "transmittance",
        "absorbed",
        "radial_reflectance_per_mm2",
        "exit_angle_per_sr",
    ):
        assert np.array_equal(getattr(a, q), getattr(b, q)), q
        assert np.array_equal(getattr(a, q)[2], getattr(c, q)[0]), q
    # more absorption, less reflectance
    assert np.all(np.diff(a.diffuse_reflectance) < 0)


def test_record_memory_is_as_documented():
    stack = benchmark_stack(550)
    _, rec = simulate(stack, 1000, seed=1, records=True)
    assert rec.nbytes == 1000 * bytes_per_photon(5) == 57_000


def test_reweight_rejects_bad_absorption_sets():
    stack = benchmark_stack(550)
    _, rec = simulate(stack, 100, seed=1, records=True)
    with pytest.raises(ParameterError, match="shape"):
        reweight(rec, np.zeros((2, 4)))
    with pytest.raises(ParameterError, match=r"layer 3"):
        reweight(rec, [[0.1, 0.1, 0.1, -1.0, 0.1]])
    with pytest.raises(ParameterError, match="layer 0"):
        reweight(rec, [[np.nan, 0.1, 0.1, 0.1, 0.1]])


_ALL_QUANTITIES = (
    "diffuse_reflectance",
    "diffuse_reflectance_stderr",
    "transmittance",
    "transmittance_stderr",
    "absorbed",
    "absorbed_stderr",
    "radial_reflectance_per_mm2",
    "radial_stderr_per_mm2",
    "exit_angle_per_sr",
    "exit_angle_stderr_per_sr",
    "mean_penetration_depth_mm",
    "mean_penetration_depth_stderr_mm",
)


def test_few_set_kernel_gives_the_many_set_sums_bit_for_bit(monkeypatch):
    """The set-major kernel used for a few absorption sets and the photon-major kernel add the same terms
    in the same order: every tally and standard error is identical, on 1 and 2 threads."""
    import matgen.transport.reweight as R

    stack = benchmark_stack(550)
    _, rec = simulate(stack, 3000, seed=8, records=True)
    sets = np.array([stack.mu_a * f for f in (0.3, 1.0, 3.0)])
    few = reweight(rec, sets, threads=2)
    monkeypatch.setattr(R, "FEW_SETS", 0)
    many = reweight(rec, sets, threads=1)
    for q in _ALL_QUANTITIES:
        assert np.array_equal(getattr(few, q), getattr(many, q)), q


def test_per_records_preparation_is_cached_per_bin_layout():
    """Bins of exit radius, cosine and depth are computed once per records and bin layout; other edges get
    their own entry, the result does not depend on whether the entry was cached."""
    import matgen.transport.reweight as R

    stack = benchmark_stack(800)
    _, rec = simulate(stack, 2000, seed=9, records=True)
    first = reweight(rec, stack.mu_a)
    cached = rec.__dict__["_prepared_bins"]
    assert len(cached) == 1
    prepared = next(iter(cached.values()))[1]
    again = reweight(rec, stack.mu_a)
    assert next(iter(rec.__dict__["_prepared_bins"].values()))[1] is prepared
    for q in _ALL_QUANTITIES:
        assert np.array_equal(getattr(first, q), getattr(again, q)), q
    other = reweight(rec, stack.mu_a, ring_edges_mm=[0.0, 0.5, 1.0, 5.0])
    assert len(rec.__dict__["_prepared_bins"]) == 2
    assert other.radial_reflectance_per_mm2.shape == (1, 3)
    # a fresh object with the same arrays gives the same numbers without the cache
    fresh = type(rec)(**{f: getattr(rec, f) for f in rec.__dataclass_fields__})
    assert "_prepared_bins" not in fresh.__dict__
    for q in _ALL_QUANTITIES:
        assert np.array_equal(getattr(reweight(fresh, stack.mu_a), q), getattr(first, q)), q
    # replacing an array (not editing it) is seen: the identity is part of the key
    rec.exit_radius_mm = rec.exit_radius_mm * np.float32(2.0)
    moved = reweight(rec, stack.mu_a)
    assert len(rec.__dict__["_prepared_bins"]) <= R.PREPARED_CACHE_ENTRIES
    assert not np.array_equal(moved.radial_reflectance_per_mm2, first.radial_reflectance_per_mm2)
