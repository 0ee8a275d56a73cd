"""Counter-based random streams for photon transport: photon i's stream depends only on (seed, i).

Each photon packet owns a xoroshiro128++ generator (Blackman & Vigna 2018) whose 128-bit state is seeded
by two SplitMix64 hashes (Steele, Lea & Flood 2014) of the run seed and the photon's global index. No state
is shared between photons, so tallies do not depend on how photons are spread over threads, chunks or
machines. Uniform doubles carry the top 53 bits of a 64-bit output.

Stream of photon ``i`` under seed ``s``::

    key = mix64(s + GOLDEN)
    s0  = mix64(key + (2 i + 1) GOLDEN),  s1 = mix64(key + (2 i + 2) GOLDEN)   (mod 2^64)

``uniform_open0`` returns values in (0, 1] (safe for ``-log``), ``uniform`` in [0, 1), ``exponential`` a
unit-mean exponential variate by the ziggurat method (Marsaglia & Tsang 2000): one 64-bit draw in about
98.9 % of calls, no logarithm except in the tail.
All integers are unsigned 64-bit; the functions are numba-compiled with a pure-Python twin in
:mod:`matgen.transport.kernels_py` (Python integers masked to 64 bits).

References: ``Blackman2018xoroshiro``, ``Steele2014splitmix``, ``Marsaglia2000ziggurat`` in BIBLIOGRAPHY.bib.
"""

from __future__ import annotations

import math

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
    """Return the xoroshiro128++ state (s0, s1) of photon ``index`` (global) under ``seed`` (uint64)."""
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


#: Ziggurat of the unit exponential density exp(-x) in 256 layers of equal area (Marsaglia & Tsang 2000,
#: section 4: r = 7.69711747013104972, v = 0.0039496598225815571993).
ZIGGURAT_R = 7.69711747013104972
ZIGGURAT_V = 0.0039496598225815571993
_S8 = np.uint64(8)
_LOW8 = np.uint64(255)


def ziggurat_tables() -> tuple[np.ndarray, np.ndarray]:
    """Layer edges x_0..x_256 and densities exp(-x_i) of the exponential ziggurat (dimensionless).

    x_0 = v e^r is the base layer's width (rectangle [0, r] x [0, e^-r] plus the tail beyond r, area v),
    x_1 = r, x_(i+1) = -ln(v / x_i + e^(-x_i)), x_256 = 0 (the recursion lands within 4e-15 of it; the top
    layer's area then equals v to 6e-17). Source: Marsaglia2000ziggurat.
    """
    x = [0.0] * 257
    x[0] = ZIGGURAT_V * math.exp(ZIGGURAT_R)
    x[1] = ZIGGURAT_R
    for i in range(1, 255):
        x[i + 1] = -math.log(ZIGGURAT_V / x[i] + math.exp(-x[i]))
    x[256] = 0.0
    xs = np.array(x, dtype=np.float64)
    return xs, np.exp(-xs)


ZIG_X, ZIG_F = ziggurat_tables()


@njit(cache=True, inline="always")
def exponential(s0, s1):
    """Unit-mean exponential variate and the advanced state: returns (x, s0, s1).

    Ziggurat method (Marsaglia2000ziggurat): a 64-bit draw gives the layer i (low 8 bits) and a uniform u
    in [0, 1) (top 53 bits); x = u x_i is accepted at once when x < x_(i+1). Otherwise the base layer
    (i = 0) returns r - ln(u') (the tail beyond r, by memorylessness; u' in (0, 1]), and the other layers
    accept x when a uniform height between e^(-x_i) and e^(-x_(i+1)) falls below e^(-x), else draw again.
    """
    while True:
        r, s0, s1 = next_u64(s0, s1)
        i = np.intp(r & _LOW8)
        x = float(r >> _S11) * INV_2_53 * ZIG_X[i]
        if x < ZIG_X[i + 1]:
            return x, s0, s1
        if i == 0:
            u, s0, s1 = uniform_open0(s0, s1)
            return ZIGGURAT_R - math.log(u), s0, s1
        u, s0, s1 = uniform(s0, s1)
        if ZIG_F[i] + u * (ZIG_F[i + 1] - ZIG_F[i]) < math.exp(-x):
            return x, s0, s1


@njit(cache=True)
def _exponentials(seed, index, count):
    out = np.empty(count, dtype=np.float64)
    s0, s1 = photon_state(seed, index)
    for k in range(count):
        out[k], s0, s1 = exponential(s0, s1)
    return out


def exponentials(seed: int, index: int, count: int) -> np.ndarray:
    """Return the first ``count`` exponential variates of photon ``index`` under ``seed`` (for tests)."""
    with np.errstate(over="ignore"):
        return _exponentials(np.uint64(seed), np.uint64(index), int(count))


@njit(cache=True)
def _uniforms(seed, index, count):
    out = np.empty(count, dtype=np.float64)
    s0, s1 = photon_state(seed, index)
    for k in range(count):
        out[k], s0, s1 = uniform(s0, s1)
    return out


def uniforms(seed: int, index: int, count: int) -> np.ndarray:
    """Return the first ``count`` uniforms in [0, 1) of photon ``index`` under ``seed`` (for tests)."""
    with np.errstate(over="ignore"):
        return _uniforms(np.uint64(seed), np.uint64(index), int(count))
