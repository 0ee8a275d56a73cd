"""Reproducibility: bit-identical tallies for any thread count and any split of the photons."""

import numpy as np
from transport_cases import benchmark_stack

from matgen.transport.records import PhotonRecords
from matgen.transport.simulate import combine, simulate


def _same(a, b):
    assert np.array_equal(a.extra["tally_fixed_point"], b.extra["tally_fixed_point"])
    for q in ("diffuse_reflectance", "transmittance", "mean_penetration_depth_mm"):
        assert getattr(a, q) == getattr(b, q), q
    for q in ("absorbed", "radial_reflectance_per_mm2", "exit_angle_per_sr", "radial_stderr_per_mm2"):
        assert np.array_equal(getattr(a, q), getattr(b, q)), q


def test_one_vs_two_threads_bit_identical():
    stack = benchmark_stack(800)
    _same(simulate(stack, 4000, seed=12, threads=1), simulate(stack, 4000, seed=12, threads=2))


def test_one_run_vs_three_chunks_bit_identical():
    stack = benchmark_stack(550)
    whole = simulate(stack, 3001, seed=4)
    parts = [
        simulate(stack, 1000, seed=4, first_photon=0, threads=1),
        simulate(stack, 1500, seed=4, first_photon=1000, threads=2),
        simulate(stack, 501, seed=4, first_photon=2500),
    ]
    _same(whole, combine(parts, stack))


def test_combine_refuses_runs_of_different_simulations():
    """Overlapping photon ranges, other seeds, other incidence or another stack would silently give a wrong
    result; each is one ParameterError naming the problem."""
    import pytest

    from matgen.errors import ParameterError

    stack = benchmark_stack(550)
    a = simulate(stack, 500, seed=4, first_photon=0)
    cases = {
        "overlap": [a, simulate(stack, 500, seed=4, first_photon=400)],
        "seed": [a, simulate(stack, 500, seed=5, first_photon=500)],
        "incidence_cos": [a, simulate(stack, 500, seed=4, first_photon=500, incidence_cos=0.5)],
        "another stack": [a, simulate(benchmark_stack(800), 500, seed=4, first_photon=500)],
    }
    for words, parts in cases.items():
        with pytest.raises(ParameterError, match=words.split()[-1] if words != "another stack" else "stack"):
            combine(parts, stack)
    # disjoint ranges in any order are fine
    combine([simulate(stack, 500, seed=4, first_photon=500), a], stack)


def test_records_of_chunks_concatenate_to_one_run(tmp_path):
    stack = benchmark_stack(550)
    _, whole = simulate(stack, 900, seed=6, records=True)
    parts = []
    for first, count in ((0, 300), (300, 200), (500, 400)):
        _, rec = simulate(stack, count, seed=6, first_photon=first, records=True)
        path = tmp_path / f"part{first}.npz"
        rec.save(path)
        parts.append(PhotonRecords.load(path))
    joined = PhotonRecords.concatenate(parts)
    for name in (
        "path_mm",
        "weighted_path_mm",
        "exit_radius_mm",
        "exit_cos",
        "max_depth_mm",
        "weight",
        "side",
    ):
        assert np.array_equal(getattr(joined, name), getattr(whole, name)), name
    assert joined.photons == 900


def test_other_seed_changes_result():
    stack = benchmark_stack(550)
    a = simulate(stack, 500, seed=1)
    b = simulate(stack, 500, seed=2)
    assert a.diffuse_reflectance.value != b.diffuse_reflectance.value
