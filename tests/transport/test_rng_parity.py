"""Random streams and kernel parity: numba kernel vs its pure-Python twin, exactly.

The twin (matgen.transport.kernels_py) is a plain-Python transcription with Python integers for the
generator; both must give identical integer tallies and identical records for the same photons. These
tests also run under NUMBA_DISABLE_JIT=1 (small photon counts).
"""

import numpy as np
import pytest
from scipy import stats
from transport_cases import benchmark_stack

from matgen.transport import kernels_py as P
from matgen.transport import simulate as S
from matgen.transport.rng import uniforms
from matgen.transport.stack import Stack


@pytest.mark.parametrize("seed,index", [(0, 0), (1, 2**40 + 7), (2**64 - 1, 123456789)])
def test_stream_matches_python_twin(seed, index):
    twin = P.PhotonStream(seed, index)
    expected = [twin.uniform() for _ in range(64)]
    assert np.array_equal(uniforms(seed, index, 64), np.array(expected))


@pytest.mark.parametrize("seed,index", [(0, 0), (9, 2**33 + 1)])
def test_exponential_draws_match_python_twin(seed, index):
    """The ziggurat exponential of the hop: numba and the twin give the same values and leave the stream
    in the same place (the tail and wedge branches are hit within 20,000 draws)."""
    from matgen.transport.rng import exponentials

    twin = P.PhotonStream(seed, index)
    expected = [twin.exponential() for _ in range(20_000)]
    assert np.array_equal(exponentials(seed, index, 20_000), np.array(expected))


def test_stream_depends_only_on_seed_and_index():
    a = uniforms(5, 1000, 16)
    uniforms(5, 999, 16)  # other photons drawn in between change nothing (no shared state)
    assert np.array_equal(a, uniforms(5, 1000, 16))
    assert not np.array_equal(a, uniforms(5, 1001, 16))
    assert not np.array_equal(a, uniforms(6, 1000, 16))


def test_uniformity_chi_square_within_and_across_photons():
    # within one photon's stream, and the first draw of 20000 consecutive photons
    within = uniforms(11, 3, 200_000)
    across = np.array([uniforms(11, i, 1)[0] for i in range(20_000)])
    for u in (within, across):
        counts, _ = np.histogram(u, bins=50, range=(0.0, 1.0))
        p = stats.chisquare(counts).pvalue
        assert p > 1e-4, p  # a false alarm at this level has probability 1e-4 per sample set
    # successive draws uncorrelated: |r| below 4 standard errors (1/sqrt(N))
    assert abs(np.corrcoef(within[:-1], within[1:])[0, 1]) < 4.0 / np.sqrt(within.size)


def _compare(stack, photons, seed, first, incidence_cos=1.0):
    res, rec = S.simulate(stack, photons, seed, first_photon=first, incidence_cos=incidence_cos, records=True)
    lay = S.layer_table(stack)
    _rsp, w0, ux0, uz0 = S.launch(stack, incidence_cos)
    tally, twin_rec = P.run_tallies(
        lay,
        w0,
        ux0,
        uz0,
        seed,
        first,
        photons,
        S.default_ring_edges_mm(),
        S.default_exit_cos_edges(),
        1.0 / stack.total_thickness_mm,
        records=True,
    )
    assert np.array_equal(res.extra["tally_fixed_point"], tally)
    for key, arr in twin_rec.items():
        assert np.array_equal(getattr(rec, key), arr), key
    # the tally-only kernel gives the same integers as the records kernel
    plain = S.simulate(stack, photons, seed, first_photon=first, incidence_cos=incidence_cos)
    assert np.array_equal(plain.extra["tally_fixed_point"], tally)


def test_parity_benchmark_stack():
    _compare(benchmark_stack(550), 150, seed=3, first=10_000)


def test_parity_clear_layers_oblique_and_index_steps():
    # a glass slide (clear) on a scattering layer, a clear coat between, oblique incidence at 40 degrees
    stack = Stack(
        [0.5, 0.3, 0.2, 1.0],
        [1.52, 1.40, 1.33, 1.40],
        [0.0, 0.5, 0.01, 0.2],
        [0.0, 10.0, 0.0, 8.0],
        [0.0, 0.7, 0.0, -0.3],
        n_above=1.0,
        n_below=1.2,
    )
    _compare(stack, 300, seed=7, first=0, incidence_cos=float(np.cos(np.radians(40.0))))


def test_parity_strong_absorption_exercises_roulette():
    stack = Stack([2.0], [1.37], [3.0], [5.0], [0.0])
    res = S.simulate(stack, 400, seed=2)
    assert res.extra["photon_counts"]["ended_by_roulette"] > 0
    _compare(stack, 400, seed=2, first=0)
