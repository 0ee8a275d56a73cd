"""Counter-based random streams for photon transport: photon i's stream depends only on (seed, i).

Each photon packet owns a xoroshiro128++ generator (Blackman & Vigna 2018) whose 128-bit state is seeded
by two SplitMix64 hashes (Steele, Lea & Flood 2014) of the run seed and the photon's global index. No state
is shared between photons, so tallies do not depend on how photons are spread over threads, chunks or
machines. Uniform doubles carry the top 53 bits of a 64-bit output.

Stream of photon ``i`` under seed ``s``::

    key = mix64(s + GOLDEN)
    s0  = mix64(key + (2 i + 1) GOLDEN),  s1 = mix64(key + (2 i + 2) GOLDEN)   (mod 2^64)

``uniform_open0`` returns values in (0, 1] (safe for ``-log``), ``uniform`` in [0, 1).
All integers are unsigned 64-bit; the functions are numba-compiled with a pure-Python twin in
:mod:`matgen.transport.kernels_py` (Python integers masked to 64 bits).

References: ``Blackman2018xoroshiro``, ``Steele2014splitmix`` in BIBLIOGRAPHY.bib.
"""

from __future__ import annotations

import numpy as np
from numba import njit

#: 2^64 / golden ratio, the SplitMix64 increment (Steele, Lea & Flood 2014).
GOLDEN = np.uint64(0x9E3779B97F4A7C15)
_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)
_S30 = np.uint64(30)
_S27 = np.uint64(27)
_S31 = np.uint64(31)
_S11 = np.uint64(11)
_S17 = np.uint64(17)
_S47 = np.uint64(47)
_S21 = np.uint64(21)
_S43 = np.uint64(43)
_S28 = np.uint64(28)
_S36 = np.uint64(36)
_S49 = np.uint64(49)
_S15 = np.uint64(15)
_ONE = np.uint64(1)
_TWO = np.uint64(2)
#: 2^-53: scales a 53-bit integer to [0, 1).
INV_2_53 = 1.0 / 9007199254740992.0


@njit(cache=True, inline="always")
def mix64(z):
    """SplitMix64 finaliser: a bijective 64-bit hash (uint64 -> uint64). Source: Steele2014splitmix."""
    z = (z ^ (z >> _S30)) * _M1
    z = (z ^ (z >> _S27)) * _M2
    return z ^ (z >> _S31)


@njit(cache=True, inline="always")
def photon_state(seed, index):
    """Initial xoroshiro128++ state (s0, s1) of photon ``index`` (global) under run ``seed`` (both uint64)."""
    key = mix64(seed + GOLDEN)
    s0 = mix64(key + (_TWO * index + _ONE) * GOLDEN)
    s1 = mix64(key + (_TWO * index + _TWO) * GOLDEN)
    if s0 == 0 and s1 == 0:  # the all-zero state is the one fixed point of xoroshiro
        s1 = _ONE
    return s0, s1


@njit(cache=True, inline="always")
def next_u64(s0, s1):
    """One xoroshiro128++ step: returns (output, s0, s1). Source: Blackman2018xoroshiro (a=49, b=21, c=28)."""
    t = s0 + s1
    result = ((t << _S17) | (t >> _S47)) + s0
    s1 = s1 ^ s0
    s0 = ((s0 << _S49) | (s0 >> _S15)) ^ s1 ^ (s1 << _S21)
    s1 = (s1 << _S28) | (s1 >> _S36)
    return result, s0, s1


@njit(cache=True, inline="always")
def uniform(s0, s1):
    """Uniform double in [0, 1) and the advanced state: returns (u, s0, s1)."""
    r, s0, s1 = next_u64(s0, s1)
    return float(r >> _S11) * INV_2_53, s0, s1


@njit(cache=True, inline="always")
def uniform_open0(s0, s1):
    """Uniform double in (0, 1] (never 0, so ``-log(u)`` is finite) and the advanced state."""
    r, s0, s1 = next_u64(s0, s1)
    return (float(r >> _S11) + 1.0) * INV_2_53, s0, s1


@njit(cache=True)
def _uniforms(seed, index, count):
    out = np.empty(count, dtype=np.float64)
    s0, s1 = photon_state(seed, index)
    for k in range(count):
        out[k], s0, s1 = uniform(s0, s1)
    return out


def uniforms(seed: int, index: int, count: int) -> np.ndarray:
    """The first ``count`` uniforms in [0, 1) of photon ``index`` under ``seed`` (for tests and inspection)."""
    with np.errstate(over="ignore"):
        return _uniforms(np.uint64(seed), np.uint64(index), int(count))
