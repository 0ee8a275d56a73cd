"""Pure-Python twin of :mod:`matgen.transport.kernels` and :mod:`matgen.transport.rng` (for parity tests).

A literal, unoptimised transcription of the same method in plain Python: 64-bit integers are Python ints
masked to 64 bits, floats are Python floats, nothing is compiled. It draws random numbers in the same
order as the numba kernel (hop, boundary draws, spin polar, spin azimuth, roulette) and returns the same
integer tally vector and records, so a parity test can compare the two exactly. Slow: a few thousand
scattering events per second. Units: mm, 1/mm.

References: ``Wang1995mcml``, ``Alerstam2008white``, ``Blackman2018xoroshiro``, ``Steele2014splitmix``.
"""

from __future__ import annotations

import math

import numpy as np

from matgen.transport import kernels as K
from matgen.transport import rng as _R

MASK64 = (1 << 64) - 1
_ZIG_X = [float(v) for v in _R.ZIG_X]
_ZIG_F = [float(v) for v in _R.ZIG_F]
GOLDEN = 0x9E3779B97F4A7C15


def mix64(z: int) -> int:
    """SplitMix64 finaliser on Python ints. Source: Steele2014splitmix."""
    z &= MASK64
    z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & MASK64
    z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & MASK64
    return z ^ (z >> 31)


def _rotl(x: int, k: int) -> int:
    return ((x << k) | (x >> (64 - k))) & MASK64


class PhotonStream:
    """xoroshiro128++ stream of one photon (seed, global index). Source: Blackman2018xoroshiro."""

    def __init__(self, seed: int, index: int):
        key = mix64(seed + GOLDEN)
        self.s0 = mix64(key + ((2 * index + 1) * GOLDEN))
        self.s1 = mix64(key + ((2 * index + 2) * GOLDEN))
        if self.s0 == 0 and self.s1 == 0:
            self.s1 = 1

    def next_u64(self) -> int:
        """Next 64-bit output (xoroshiro128++, a=49, b=21, c=28)."""
        s0, s1 = self.s0, self.s1
        result = (_rotl((s0 + s1) & MASK64, 17) + s0) & MASK64
        s1 ^= s0
        self.s0 = _rotl(s0, 49) ^ s1 ^ ((s1 << 21) & MASK64)
        self.s1 = _rotl(s1, 28)
        return result

    def uniform(self) -> float:
        """Uniform in [0, 1)."""
        return (self.next_u64() >> 11) * (1.0 / 9007199254740992.0)

    def uniform_open0(self) -> float:
        """Uniform in (0, 1]."""
        return ((self.next_u64() >> 11) + 1.0) * (1.0 / 9007199254740992.0)

    def exponential(self) -> float:
        """Unit-mean exponential by the ziggurat, as :func:`matgen.transport.rng.exponential` draws it."""
        while True:
            r = self.next_u64()
            i = r & 255
            x = (r >> 11) * (1.0 / 9007199254740992.0) * _ZIG_X[i]
            if x < _ZIG_X[i + 1]:
                return x
            if i == 0:
                return _R.ZIGGURAT_R - math.log(self.uniform_open0())
            u = self.uniform()
            if _ZIG_F[i] + u * (_ZIG_F[i + 1] - _ZIG_F[i]) < math.exp(-x):
                return x


def fresnel(n_i: float, n_t: float, cos_i: float):
    """Unpolarised Fresnel reflectance and transmitted cosine. Source: BornWolf1999 sec. 1.5.2."""
    if n_i == n_t:
        return 0.0, cos_i
    sin_t2 = (n_i / n_t) ** 2 * (1.0 - cos_i * cos_i)
    if sin_t2 >= 1.0:
        return 1.0, 0.0
    cos_t = math.sqrt(1.0 - sin_t2)
    rs = (n_i * cos_i - n_t * cos_t) / (n_i * cos_i + n_t * cos_t)
    rp = (n_t * cos_i - n_i * cos_t) / (n_t * cos_i + n_i * cos_t)
    return 0.5 * (rs * rs + rp * rp), cos_t


def hg_sample(g: float, u: float) -> float:
    """Henyey-Greenstein cosine by inversion, as the kernel computes it. Source: Wang1995mcml eq. 3.28."""
    if abs(g) < 1.0e-6:
        return 2.0 * u - 1.0
    one_minus_g2, one_minus_g, two_g, one_plus_g2, inv_two_g = (
        1.0 - g * g,
        1.0 - g,
        2.0 * g,
        1.0 + g * g,
        1.0 / (2.0 * g),
    )
    t = one_minus_g2 / (one_minus_g + two_g * u)
    return min(1.0, max(-1.0, (one_plus_g2 - t * t) * inv_two_g))


def spin(d, mu: float, cos_phi: float, sin_phi: float):
    """Return the direction after scattering by polar cosine mu and azimuth. Source: Wang1995mcml eq. 3.30."""
    ux, uy, uz = d
    sin_t = math.sqrt(max(0.0, 1.0 - mu * mu))
    if abs(uz) > 1.0 - 1.0e-12:
        return [sin_t * cos_phi, sin_t * sin_phi, mu if uz > 0.0 else -mu]
    tmp = math.sqrt(1.0 - uz * uz)
    f = sin_t / tmp
    return [
        f * (ux * uz * cos_phi - uy * sin_phi) + ux * mu,
        f * (uy * uz * cos_phi + ux * sin_phi) + uy * mu,
        -sin_t * cos_phi * tmp + uz * mu,
    ]


def azimuth(stream: PhotonStream):
    """(cos_phi, sin_phi) of a uniform azimuth by rejection from the unit disc (angle doubling)."""
    while True:
        x = 2.0 * stream.uniform() - 1.0
        y = 2.0 * stream.uniform() - 1.0
        r2 = x * x + y * y
        if 0.0 < r2 <= 1.0:
            return (x * x - y * y) * (1.0 / r2), 2.0 * x * y * (1.0 / r2)


def _roulette_path(mu_a: float, log_w: float) -> float:
    """Twin of :func:`matgen.transport.kernels._roulette_path` (mm)."""
    if mu_a > 0.0:
        return (log_w - K.LOG_ROULETTE_WEIGHT - K.ROULETTE_LOG_MARGIN) / mu_a
    return math.inf


def trace(stream: PhotonStream, layers: list[dict], w0: float, ux0: float, uz0: float):
    """Follow one packet; returns (side, weight, x, y, exit_cos, zmax, path, absorbed, wpath, scatterings).

    The weight decays per layer visit: the visit's path is summed and its exponential taken when the packet
    leaves the layer or may have fallen below the roulette weight, as in the numba kernel.
    """
    nl = len(layers)
    path = [0.0] * nl
    absorbed = [0.0] * nl
    wpath = [0.0] * nl
    j = 0
    pos = [0.0, 0.0, 0.0]
    d = [ux0, 0.0, uz0]
    w = w0
    log_w = math.log(w0)
    zmax = 0.0
    n_scat = 0
    visit = 0.0
    limit = _roulette_path(layers[0]["mu_a"], log_w)

    def drop():
        nonlocal w, log_w, visit
        e = layers[j]["mu_a"] * visit
        wn = w * math.exp(-e)
        absorbed[j] += w - wn
        path[j] += visit
        wpath[j] += w * visit
        w = wn
        log_w -= e
        visit = 0.0

    while True:
        tau = stream.exponential()
        while True:
            lay = layers[j]
            if d[2] > 0.0:
                dist, auz = lay["z_bot"] - pos[2], d[2]
            else:
                dist, auz = pos[2] - lay["z_top"], -d[2]
            if tau * auz < lay["mu_s"] * dist:
                s = tau * (1.0 / lay["mu_s"])
                pos = [pos[0] + s * d[0], pos[1] + s * d[1], pos[2] + s * d[2]]
                visit += s
                zmax = max(zmax, pos[2])
                break
            if auz == 0.0:
                drop()
                return 0, 0.0, pos[0], pos[1], 0.0, zmax, path, absorbed, wpath, n_scat
            db = dist / auz
            tau -= lay["mu_s"] * db
            pos[0] += db * d[0]
            pos[1] += db * d[1]
            visit += db
            going_down = d[2] > 0.0
            if going_down:
                pos[2] = lay["z_bot"]
                zmax = max(zmax, pos[2])
                n_t = lay["n_down"]
            else:
                pos[2] = lay["z_top"]
                n_t = lay["n_up"]
            r, cos_t = fresnel(lay["n"], n_t, auz)
            if r >= 1.0:
                reflect = True
            elif r > 0.0:
                reflect = stream.uniform() < r
            else:
                reflect = False
            if reflect:
                d[2] = -d[2]
                continue
            drop()
            if going_down:
                if j == nl - 1:
                    return 2, w, pos[0], pos[1], cos_t, zmax, path, absorbed, wpath, n_scat
                j += 1
            else:
                if j == 0:
                    return 1, w, pos[0], pos[1], cos_t, zmax, path, absorbed, wpath, n_scat
                j -= 1
            if lay["n"] != n_t:
                ratio = lay["n"] / n_t
                d = [d[0] * ratio, d[1] * ratio, cos_t if d[2] > 0.0 else -cos_t]
            limit = _roulette_path(layers[j]["mu_a"], log_w)
        n_scat += 1
        mu = hg_sample(layers[j]["g"], stream.uniform())
        cos_phi, sin_phi = azimuth(stream)
        d = spin(d, mu, cos_phi, sin_phi)
        if visit > limit:
            drop()
            if w < K.ROULETTE_WEIGHT:
                if stream.uniform() < K.ROULETTE_CHANCE:
                    w = w / K.ROULETTE_CHANCE
                    log_w += K.LOG_ROULETTE_GAIN
                else:
                    return 0, 0.0, pos[0], pos[1], 0.0, zmax, path, absorbed, wpath, n_scat
            limit = _roulette_path(layers[j]["mu_a"], log_w)


def _fixed(x: float) -> int:
    return int(x * K.FIXED_SCALE + 0.5)


def _bin(edges, v: float) -> int:
    m = len(edges) - 1
    if v < edges[0] or v > edges[m]:
        return -1
    for k in range(m):
        if edges[k] <= v < edges[k + 1]:
            return k
    return m - 1


def run_tallies(
    lay: np.ndarray,
    w0,
    ux0,
    uz0,
    seed,
    first_photon,
    n_photons,
    ring_edges,
    cos_edges,
    inv_depth_mm,
    records: bool = False,
):
    """Twin of :func:`matgen.transport.kernels.run_tallies` (and, with records, of ``run_tallies_records``).

    Returns the int64 tally vector, and with ``records`` a dict of per-photon record arrays.
    """
    layers = [
        {
            "z_top": float(r[K.Z_TOP]),
            "z_bot": float(r[K.Z_BOT]),
            "n": float(r[K.N_LAYER]),
            "n_up": float(r[K.N_UP]),
            "n_down": float(r[K.N_DOWN]),
            "mu_a": float(r[K.MU_A]),
            "mu_s": float(r[K.MU_S]),
            "g": float(r[K.G]),
        }
        for r in np.asarray(lay)
    ]
    nl = len(layers)
    ring_edges = [float(v) for v in ring_edges]
    cos_edges = [float(v) for v in cos_edges]
    nr, nc = len(ring_edges) - 1, len(cos_edges) - 1
    layout = K.tally_layout(nl, nr, nc)
    tally = [0] * layout["size"]
    recs = {
        "path_mm": [],
        "weighted_path_mm": [],
        "exit_radius_mm": [],
        "exit_cos": [],
        "max_depth_mm": [],
        "weight": [],
        "side": [],
    }
    for i in range(n_photons):
        stream = PhotonStream(int(seed), int(first_photon) + i)
        side, w, x, y, cexit, zmax, path, absorbed, wpath, _ = trace(stream, layers, w0, ux0, uz0)
        for j in range(nl):
            if absorbed[j] > 0.0:
                tally[layout["absorbed"] + j] += _fixed(absorbed[j])
                tally[layout["absorbed"] + nl + j] += _fixed(absorbed[j] ** 2)
        if side == 1:
            tally[K.T_RD] += _fixed(w)
            tally[K.T_RD2] += _fixed(w * w)
            tally[K.T_N_TOP] += 1
            k = _bin(ring_edges, math.sqrt(x * x + y * y))
            if k >= 0:
                tally[layout["ring"] + k] += _fixed(w)
                tally[layout["ring"] + nr + k] += _fixed(w * w)
            k = _bin(cos_edges, cexit)
            if k >= 0:
                tally[layout["cos"] + k] += _fixed(w)
                tally[layout["cos"] + nc + k] += _fixed(w * w)
            a = w * min(1.0, zmax * inv_depth_mm)
            tally[K.T_DA] += _fixed(a)
            tally[K.T_DA2] += _fixed(a * a)
            tally[K.T_DAW] += _fixed(a * w)
        elif side == 2:
            tally[K.T_TT] += _fixed(w)
            tally[K.T_TT2] += _fixed(w * w)
            tally[K.T_N_BOTTOM] += 1
        else:
            tally[K.T_N_ENDED] += 1
        if records:
            recs["path_mm"].append(path)
            recs["weighted_path_mm"].append(
                [
                    absorbed[j] / (layers[j]["mu_a"] * w0) if layers[j]["mu_a"] > 0.0 else wpath[j] / w0
                    for j in range(nl)
                ]
            )
            recs["exit_radius_mm"].append(math.sqrt(x * x + y * y))
            recs["exit_cos"].append(cexit)
            recs["max_depth_mm"].append(zmax)
            recs["weight"].append(w)
            recs["side"].append(side)
    tally = np.array(tally, dtype=np.int64)
    if not records:
        return tally
    out = {k: np.asarray(v, dtype=np.uint8 if k == "side" else np.float32) for k, v in recs.items()}
    out["path_mm"] = out["path_mm"].reshape(n_photons, nl)
    out["weighted_path_mm"] = out["weighted_path_mm"].reshape(n_photons, nl)
    return tally, out
