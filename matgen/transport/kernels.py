"""numba kernels of the layered Monte Carlo: launch, hop, drop, spin, cross boundary, roulette.

Units: mm, 1/mm, dimensionless weights. Geometry: z points down, the top of layer 0 is z = 0.

Method (Wang, Jacques & Zheng 1995, with absorption applied continuously, as in Alerstam et al. 2008):

* **launch**: the packet enters at the origin with weight 1 - R_sp (Fresnel at entry) along the refracted
  direction.
* **hop**: a dimensionless scattering depth ``tau`` (unit exponential, drawn by the ziggurat method of
  :func:`matgen.transport.rng.exponential`) is spent across layers (``mu_s * s`` per
  segment). Free paths are sampled on ``mu_s`` alone, so the geometric path never depends on ``mu_a``.
  A clear layer (``mu_s = 0``) spends nothing: the packet crosses it to the next boundary.
* **drop**: along a path of length ``s`` in layer ``j`` the weight decays as ``exp(-mu_a_j s)``
  (microscopic Beer-Lambert); the loss is absorbed in layer ``j``, and ``s`` adds to the layer's path length.
  The path of a whole layer visit is summed and its exponential evaluated once: when the packet leaves the
  layer, leaves the stack, or may have fallen below the roulette weight (see :func:`trace_photon`).
* **cross boundary**: at an index step the packet is reflected with the unpolarised Fresnel probability
  (one uniform drawn), else refracted by Snell's law; without an index step it passes unchanged and no
  uniform is drawn. Leaving the top is diffuse reflectance, leaving the bottom transmittance.
* **spin**: Henyey-Greenstein polar cosine (one uniform) and a uniform azimuth (rejection from the unit disc).
* **roulette**: after a scattering event, below weight ``ROULETTE_WEIGHT`` the packet survives with
  probability ``ROULETTE_CHANCE`` and weight divided by it (unbiased), else it ends (one uniform drawn).

Random numbers per photon come in this order: hop, [boundary draws], spin polar, spin azimuth (pairs until
one falls in the unit disc), [roulette], hop, ... The pure-Python twin :mod:`matgen.transport.kernels_py`
follows the same order, and the parity test compares both.

Tallies are integers: each photon's contribution ``x`` in [0, 1] to a tally (weight, weight squared, ...)
is rounded to ``round(x * 2^32)`` and summed in int64. Integer sums are associative, so totals are
bit-identical whatever the thread count and however photons are split into chunks or runs; they stay exact
below 2^31 photons (``matgen.constants.MAX_PHOTONS``); the rounding error, at most 2^-33 per photon and tally,
is far below any statistical error. Depth tallies use depth / total thickness, which is in [0, 1].

Two kernels share one photon history: :func:`run_tallies` (tallies only) and :func:`run_tallies_records`
(tallies plus per-photon records for absorption reweighting), compiled separately.

References: ``Wang1995mcml``, ``Alerstam2008white``, ``HenyeyGreenstein1941``, ``BornWolf1999``.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from matgen.transport.boundary import fresnel
from matgen.transport.phase import hg_constants, hg_sample_mu_with, spin
from matgen.transport.rng import exponential, photon_state, uniform

#: Roulette threshold weight and survival chance (Wang, Jacques & Zheng 1995, sec. 3.9: 1e-4 and 0.1).
ROULETTE_WEIGHT = 1.0e-4
ROULETTE_CHANCE = 0.1
#: Natural logarithms of the roulette weight and of the survivor's weight gain 1 / ROULETTE_CHANCE.
LOG_ROULETTE_WEIGHT = math.log(ROULETTE_WEIGHT)
LOG_ROULETTE_GAIN = -math.log(ROULETTE_CHANCE)
#: Margin (in log-weight) by which the roulette path bound errs early: the tracked log-weight may drift
#: from log(w) by rounding (about 1e-15 per drop); a packet within this margin above the threshold has its
#: weight evaluated once more than needed, never a test skipped.
ROULETTE_LOG_MARGIN = 1.0e-9

#: Fixed-point scale of the integer tallies: 2^32 per unit.
FIXED_SCALE = 4294967296.0

# Columns of the per-layer table handed to the kernels.
Z_TOP, Z_BOT, N_LAYER, N_UP, N_DOWN, MU_A, MU_S, G = range(8)
LAYER_COLUMNS = 8

# Exit sides.
SIDE_NONE, SIDE_TOP, SIDE_BOTTOM = 0, 1, 2

# Offsets of the scalar tallies at the head of the tally vector.
T_RD, T_RD2, T_TT, T_TT2, T_DA, T_DA2, T_DAW, T_N_TOP, T_N_BOTTOM, T_N_ENDED = range(10)
N_SCALAR_TALLIES = 10

_INF = math.inf
_TWO_PI = 2.0 * math.pi


def tally_layout(n_layers: int, n_rings: int, n_cos: int) -> dict:
    """Offsets of each tally block in the integer tally vector, and its total size."""
    o_abs = N_SCALAR_TALLIES
    o_ring = o_abs + 2 * n_layers
    o_cos = o_ring + 2 * n_rings
    return {"absorbed": o_abs, "ring": o_ring, "cos": o_cos, "size": o_cos + 2 * n_cos}


@njit(cache=True, inline="always")
def _fixed(x):
    """Round a contribution in [0, 1] to the fixed-point integer (x * 2^32, nearest)."""
    return np.int64(x * FIXED_SCALE + 0.5)


@njit(cache=True, inline="always")
def _bin(edges, v):
    """Index k with edges[k] <= v < edges[k+1]; the last edge belongs to the last bin; -1 outside."""
    m = edges.size - 1
    if v < edges[0] or v > edges[m]:
        return -1
    k = np.searchsorted(edges, v, side="right") - 1
    if k >= m:
        k = m - 1
    return k


@njit(cache=True, inline="always")
def sample_azimuth(s0, s1):
    """Uniform azimuth as (cos_phi, sin_phi) by rejection from the unit disc with angle doubling.

    Draws pairs of uniforms until the point (2u1 - 1, 2u2 - 1) falls inside the unit disc (acceptance
    pi/4); cos_phi = (x^2 - y^2)/r^2, sin_phi = 2xy/r^2 (``vonNeumann1951``). Returns (cos, sin, s0, s1).
    """
    while True:
        u1, s0, s1 = uniform(s0, s1)
        u2, s0, s1 = uniform(s0, s1)
        x = 2.0 * u1 - 1.0
        y = 2.0 * u2 - 1.0
        r2 = x * x + y * y
        if 0.0 < r2 <= 1.0:
            inv = 1.0 / r2
            return (x * x - y * y) * inv, 2.0 * x * y * inv, s0, s1


@njit(cache=True, inline="always")
def _roulette_path(mua, log_w):
    """Path length (mm) after which a packet of log-weight ``log_w`` falls below ``ROULETTE_WEIGHT``.

    ``w exp(-mua s) < ROULETTE_WEIGHT`` holds only for ``s > (log_w - ln ROULETTE_WEIGHT) / mua``; the
    bound is lowered by ``ROULETTE_LOG_MARGIN`` so that rounding never hides a packet below the threshold
    (the exact test on the flushed weight decides). Infinite without absorption.
    """
    if mua > 0.0:
        return (log_w - LOG_ROULETTE_WEIGHT - ROULETTE_LOG_MARGIN) / mua
    return _INF


@njit(cache=True, error_model="numpy")
def trace_photon(s0, s1, lay, w0, log_w0, ux0, uz0, path, absorbed, wpath):
    """Follow one packet from launch to exit or roulette end.

    Parameters
    ----------
    s0, s1 : uint64
        The photon's generator state.
    lay : ndarray (L, 8)
        Per-layer table: z_top, z_bot (mm), n, n above, n below, mu_a, mu_s (1/mm), g.
    w0, log_w0 : float
        Launch weight and its natural logarithm.
    ux0, uz0 : float
        Refracted launch direction (x and z components; y is 0).
    path, absorbed, wpath : ndarray (L,)
        Scratch, overwritten: path length per layer (mm), weight absorbed per layer, and the sum of
        w * s over the layer's segments (mm; the exact weighted path where mu_a = 0).

    Returns
    -------
    tuple
        (side, weight, x_mm, y_mm, exit_cos, max_depth_mm, scatterings): side 1 top, 2 bottom, 0 ended by
        roulette (weight 0); exit_cos is the cosine of the exit direction in the ambient medium;
        scatterings counts the scattering events (spins).

    Notes
    -----
    Drop per layer visit: the path travelled since the packet entered the layer (or since the last flush)
    is summed in ``visit_mm`` and the weight ``w exp(-mu_a visit_mm)`` is evaluated once, when the packet
    changes layer, leaves the stack or may have fallen below the roulette weight (tested on the path,
    :func:`_roulette_path`, with the log-weight tracked alongside). The weight is the product of the same
    exponential factors as per-segment decay, up to rounding, and the roulette decision is the exact test
    ``w < ROULETTE_WEIGHT`` on the flushed weight. Hot-loop form: the current layer's constants live in
    locals (with 1 / mu_s and the Henyey-Greenstein constants of :func:`hg_constants`, two divisions
    fewer per scattering event), the boundary test compares ``tau |uz| < mu_s * distance`` without a
    division, and the azimuth comes from a rejection sampler (no trigonometric call).

    """
    n_layers = lay.shape[0]
    for j in range(n_layers):
        path[j] = 0.0
        absorbed[j] = 0.0
        wpath[j] = 0.0
    layer = 0
    x = 0.0
    y = 0.0
    z = 0.0
    ux = ux0
    uy = 0.0
    uz = uz0
    w = w0
    log_w = log_w0
    zmax = 0.0
    scatterings = 0
    # constants of the current layer
    z_top = lay[0, Z_TOP]
    z_bot = lay[0, Z_BOT]
    mus = lay[0, MU_S]
    inv_mus = 1.0 / mus if mus > 0.0 else 0.0  # clear layer: never used
    mua = lay[0, MU_A]
    iso, hg1, hg2, hg3, hg4, hg5 = hg_constants(lay[0, G])
    visit = 0.0  # path (mm) in this layer since the last drop
    visit_limit = _roulette_path(mua, log_w)
    while True:
        # hop: scattering depth to spend before the next scattering event (unit exponential)
        tau, s0, s1 = exponential(s0, s1)
        while True:
            if uz > 0.0:
                dist = z_bot - z
                auz = uz
            else:
                dist = z - z_top
                auz = -uz
            if tau * auz < mus * dist:
                # scatters inside this layer: move
                s = tau * inv_mus
                x += s * ux
                y += s * uy
                z += s * uz
                visit += s
                if z > zmax:
                    zmax = z
                break
            if auz == 0.0:
                # clear layer travelled exactly sideways: the packet never reaches a boundary
                wn = w * math.exp(-mua * visit)
                absorbed[layer] += w - wn
                path[layer] += visit
                wpath[layer] += w * visit
                return SIDE_NONE, 0.0, x, y, 0.0, zmax, scatterings
            # move to the boundary
            db = dist / auz
            tau -= mus * db
            x += db * ux
            y += db * uy
            visit += db
            if uz > 0.0:
                z = z_bot
                n_t = lay[layer, N_DOWN]
                if z > zmax:
                    zmax = z
            else:
                z = z_top
                n_t = lay[layer, N_UP]
            # cross boundary
            n_i = lay[layer, N_LAYER]
            r, cos_t = fresnel(n_i, n_t, auz)
            reflect = False
            if r >= 1.0:
                reflect = True
            elif r > 0.0:
                u, s0, s1 = uniform(s0, s1)
                reflect = u < r
            if reflect:
                uz = -uz
                continue
            # drop: the layer visit ends
            e = mua * visit
            wn = w * math.exp(-e)
            absorbed[layer] += w - wn
            path[layer] += visit
            wpath[layer] += w * visit
            w = wn
            log_w -= e
            visit = 0.0
            if uz > 0.0:
                if layer == n_layers - 1:
                    return SIDE_BOTTOM, w, x, y, cos_t, zmax, scatterings
                layer += 1
            else:
                if layer == 0:
                    return SIDE_TOP, w, x, y, cos_t, zmax, scatterings
                layer -= 1
            if n_i != n_t:
                ratio = n_i / n_t
                ux *= ratio
                uy *= ratio
                uz = math.copysign(cos_t, uz)
            z_top = lay[layer, Z_TOP]
            z_bot = lay[layer, Z_BOT]
            mus = lay[layer, MU_S]
            inv_mus = 1.0 / mus if mus > 0.0 else 0.0  # clear layer: never used
            mua = lay[layer, MU_A]
            iso, hg1, hg2, hg3, hg4, hg5 = hg_constants(lay[layer, G])
            visit_limit = _roulette_path(mua, log_w)
        # spin
        scatterings += 1
        u, s0, s1 = uniform(s0, s1)
        mu = hg_sample_mu_with(iso, hg1, hg2, hg3, hg4, hg5, u)
        cos_phi, sin_phi, s0, s1 = sample_azimuth(s0, s1)
        ux, uy, uz = spin(ux, uy, uz, mu, cos_phi, sin_phi)
        # roulette: only when the weight may have fallen below the threshold is it evaluated
        if visit > visit_limit:
            e = mua * visit
            wn = w * math.exp(-e)
            absorbed[layer] += w - wn
            path[layer] += visit
            wpath[layer] += w * visit
            w = wn
            log_w -= e
            visit = 0.0
            if w < ROULETTE_WEIGHT:
                u, s0, s1 = uniform(s0, s1)
                if u < ROULETTE_CHANCE:
                    w = w / ROULETTE_CHANCE
                    log_w += LOG_ROULETTE_GAIN
                else:
                    return SIDE_NONE, 0.0, x, y, 0.0, zmax, scatterings
            visit_limit = _roulette_path(mua, log_w)


@njit(cache=True, inline="always")
def _tally_photon(row, side, w, x, y, cos_exit, zmax, absorbed, ring_edges, cos_edges, inv_depth_mm):
    """Add one photon's contributions (fixed point) to a tally row."""
    n_layers = absorbed.size
    n_rings = ring_edges.size - 1
    n_cos = cos_edges.size - 1
    o_abs = N_SCALAR_TALLIES
    o_ring = o_abs + 2 * n_layers
    o_cos = o_ring + 2 * n_rings
    for j in range(n_layers):
        a = absorbed[j]
        if a > 0.0:
            row[o_abs + j] += _fixed(a)
            row[o_abs + n_layers + j] += _fixed(a * a)
    if side == SIDE_TOP:
        qw = _fixed(w)
        qw2 = _fixed(w * w)
        row[T_RD] += qw
        row[T_RD2] += qw2
        row[T_N_TOP] += 1
        k = _bin(ring_edges, math.sqrt(x * x + y * y))
        if k >= 0:
            row[o_ring + k] += qw
            row[o_ring + n_rings + k] += qw2
        k = _bin(cos_edges, cos_exit)
        if k >= 0:
            row[o_cos + k] += qw
            row[o_cos + n_cos + k] += qw2
        d = zmax * inv_depth_mm
        if d > 1.0:
            d = 1.0
        a = w * d
        row[T_DA] += _fixed(a)
        row[T_DA2] += _fixed(a * a)
        row[T_DAW] += _fixed(a * w)
    elif side == SIDE_BOTTOM:
        row[T_TT] += _fixed(w)
        row[T_TT2] += _fixed(w * w)
        row[T_N_BOTTOM] += 1
    else:
        row[T_N_ENDED] += 1


@njit(cache=True, parallel=True, error_model="numpy")
def run_tallies(
    lay, w0, ux0, uz0, seed, first_photon, n_photons, n_chunks, ring_edges, cos_edges, inv_depth_mm
):
    """Trace photons ``first_photon .. first_photon + n_photons - 1`` and return the integer tally vector.

    Chunks run in parallel (prange); each photon's stream depends only on (seed, global index).
    """
    n_layers = lay.shape[0]
    log_w0 = math.log(w0)
    size = N_SCALAR_TALLIES + 2 * n_layers + 2 * (ring_edges.size - 1) + 2 * (cos_edges.size - 1)
    out = np.zeros((n_chunks, size), dtype=np.int64)
    for c in prange(n_chunks):
        start = (n_photons * c) // n_chunks
        stop = (n_photons * (c + 1)) // n_chunks
        path = np.empty(n_layers)
        absorbed = np.empty(n_layers)
        wpath = np.empty(n_layers)
        row = out[c]
        for i in range(start, stop):
            s0, s1 = photon_state(seed, np.uint64(first_photon + i))
            side, w, x, y, cos_exit, zmax, _ = trace_photon(
                s0, s1, lay, w0, log_w0, ux0, uz0, path, absorbed, wpath
            )
            _tally_photon(row, side, w, x, y, cos_exit, zmax, absorbed, ring_edges, cos_edges, inv_depth_mm)
    return out.sum(axis=0)


@njit(cache=True, parallel=True, error_model="numpy")
def run_tallies_records(
    lay,
    w0,
    ux0,
    uz0,
    seed,
    first_photon,
    n_photons,
    n_chunks,
    ring_edges,
    cos_edges,
    inv_depth_mm,
    rec_path,
    rec_wpath,
    rec_radius,
    rec_cos,
    rec_depth,
    rec_weight,
    rec_side,
):
    """As :func:`run_tallies`, and store each photon's record at its local index (arrays of n_photons)."""
    n_layers = lay.shape[0]
    log_w0 = math.log(w0)
    size = N_SCALAR_TALLIES + 2 * n_layers + 2 * (ring_edges.size - 1) + 2 * (cos_edges.size - 1)
    out = np.zeros((n_chunks, size), dtype=np.int64)
    for c in prange(n_chunks):
        start = (n_photons * c) // n_chunks
        stop = (n_photons * (c + 1)) // n_chunks
        path = np.empty(n_layers)
        absorbed = np.empty(n_layers)
        wpath = np.empty(n_layers)
        row = out[c]
        for i in range(start, stop):
            s0, s1 = photon_state(seed, np.uint64(first_photon + i))
            side, w, x, y, cos_exit, zmax, _ = trace_photon(
                s0, s1, lay, w0, log_w0, ux0, uz0, path, absorbed, wpath
            )
            _tally_photon(row, side, w, x, y, cos_exit, zmax, absorbed, ring_edges, cos_edges, inv_depth_mm)
            for j in range(n_layers):
                rec_path[i, j] = path[j]
                # weight-averaged path: integral of w ds over the layer, exact for exponential decay
                mua = lay[j, MU_A]
                if mua > 0.0:
                    rec_wpath[i, j] = absorbed[j] / (mua * w0)
                else:
                    rec_wpath[i, j] = wpath[j] / w0
            rec_radius[i] = math.sqrt(x * x + y * y)
            rec_cos[i] = cos_exit
            rec_depth[i] = zmax
            rec_weight[i] = w
            rec_side[i] = side
    return out.sum(axis=0)
