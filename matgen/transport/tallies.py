"""From integer tally vectors to estimates with standard errors.

Units: fractions of launched weight, mm^-2, sr^-1, mm.

Every tally is a mean over N launched photons of a per-photon contribution x_p (zero for photons that do
not contribute). The estimate is S1 / N and its standard error sqrt((S2 / N - (S1 / N)^2) / (N - 1)),
from the per-photon sums S1 = sum x_p and S2 = sum x_p^2. The mean penetration depth is a ratio of two
means (sum w z / sum w over reflected photons); its standard error follows from the delta method.

References: ``Wang1995mcml`` (sec. 4.1, tallies), ``Alerstam2008white``.
"""

from __future__ import annotations

import math

import numpy as np

from matgen.transport import kernels as K
from matgen.transport.results import Estimate, TransportResult, ring_areas_mm2


def mean_and_stderr(s1, s2, n: int):
    """Mean and standard error of the mean from sums of x and x^2 over ``n`` samples (arrays or floats)."""
    s1 = np.asarray(s1, dtype=np.float64)
    s2 = np.asarray(s2, dtype=np.float64)
    mean = s1 / n
    if n < 2:
        return mean, np.full_like(mean, np.inf)
    var = np.maximum(s2 / n - mean * mean, 0.0) * (n / (n - 1.0))
    return mean, np.sqrt(var / n)


def ratio_and_stderr(sa, saa, sab, sb, sbb, n: int):
    """Ratio of means sum(a)/sum(b) and its delta-method standard error (arrays or floats)."""
    sa, saa, sab, sb, sbb = (np.asarray(v, dtype=np.float64) for v in (sa, saa, sab, sb, sbb))
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(sb > 0, sa / np.where(sb > 0, sb, 1.0), 0.0)
        ma, mb = sa / n, sb / n
        var_a = saa / n - ma * ma
        var_b = sbb / n - mb * mb
        cov = sab / n - ma * mb
        var = (var_a - 2.0 * ratio * cov + ratio * ratio * var_b) / np.where(mb > 0, mb * mb, 1.0)
        stderr = np.where(sb > 0, np.sqrt(np.maximum(var, 0.0) / max(n - 1, 1)), 0.0)
    return ratio, stderr


def projected_solid_angle_sr(cos_edges) -> np.ndarray:
    """Projected solid angle of each exit-cosine bin, pi (mu1^2 - mu0^2), in sr."""
    e = np.asarray(cos_edges, dtype=np.float64)
    return np.pi * (e[1:] ** 2 - e[:-1] ** 2)


def result_from_tallies(
    tally: np.ndarray,
    photons: int,
    n_layers: int,
    ring_edges_mm,
    exit_cos_edges,
    specular: float,
    depth_scale_mm: float,
    extra: dict | None = None,
    photons_per_second: float = 0.0,
) -> TransportResult:
    """Build a :class:`TransportResult` from the integer tally vector of :mod:`matgen.transport.kernels`.

    Parameters
    ----------
    tally : ndarray of int64
        Fixed-point sums (2^32 per unit) laid out as :func:`matgen.transport.kernels.tally_layout`.
    photons : int
        Photons launched.
    n_layers : int
        Layers of the stack.
    ring_edges_mm, exit_cos_edges : ndarray
        Bin edges used by the run (mm; dimensionless).
    specular : float
        Specular reflectance at entry (exact, no statistical error).
    depth_scale_mm : float
        Total stack thickness in mm (depth tallies are stored as a fraction of it).
    extra : dict, optional
        Further entries merged into the result's ``extra`` (after ``photon_counts``).
    photons_per_second : float
        Throughput of the run (photons/s).

    """
    ring_edges_mm = np.asarray(ring_edges_mm, dtype=np.float64)
    exit_cos_edges = np.asarray(exit_cos_edges, dtype=np.float64)
    n_rings = ring_edges_mm.size - 1
    n_cos = exit_cos_edges.size - 1
    lay = K.tally_layout(n_layers, n_rings, n_cos)
    v = np.asarray(tally, dtype=np.int64).astype(np.float64) / K.FIXED_SCALE
    n = int(photons)
    rd, rd_e = mean_and_stderr(v[K.T_RD], v[K.T_RD2], n)
    tt, tt_e = mean_and_stderr(v[K.T_TT], v[K.T_TT2], n)
    oa = lay["absorbed"]
    ab, ab_e = mean_and_stderr(v[oa : oa + n_layers], v[oa + n_layers : oa + 2 * n_layers], n)
    orr = lay["ring"]
    ring, ring_e = mean_and_stderr(v[orr : orr + n_rings], v[orr + n_rings : orr + 2 * n_rings], n)
    area = ring_areas_mm2(ring_edges_mm)
    oc = lay["cos"]
    ang, ang_e = mean_and_stderr(v[oc : oc + n_cos], v[oc + n_cos : oc + 2 * n_cos], n)
    psa = projected_solid_angle_sr(exit_cos_edges)
    depth, depth_e = ratio_and_stderr(v[K.T_DA], v[K.T_DA2], v[K.T_DAW], v[K.T_RD], v[K.T_RD2], n)
    counts = {
        "exited_top": int(tally[K.T_N_TOP]),
        "exited_bottom": int(tally[K.T_N_BOTTOM]),
        "ended_by_roulette": int(tally[K.T_N_ENDED]),
    }
    ex = {"photon_counts": counts}
    ex.update(extra or {})
    return TransportResult(
        photons=n,
        specular_reflectance=Estimate(float(specular), 0.0),
        diffuse_reflectance=Estimate(float(rd), float(rd_e)),
        transmittance=Estimate(float(tt), float(tt_e)),
        absorbed=np.asarray(ab, dtype=np.float64),
        absorbed_stderr=np.asarray(ab_e, dtype=np.float64),
        ring_edges_mm=ring_edges_mm,
        radial_reflectance_per_mm2=ring / area,
        radial_stderr_per_mm2=ring_e / area,
        exit_cos_edges=exit_cos_edges,
        exit_angle_per_sr=ang / psa,
        exit_angle_stderr_per_sr=ang_e / psa,
        mean_penetration_depth_mm=Estimate(float(depth) * depth_scale_mm, float(depth_e) * depth_scale_mm),
        photons_per_second=float(photons_per_second),
        extra=ex,
    )


def standard_error_ok(
    value: float, reference: float, stderr: float, sigmas: float = 3.0, allowance: float = 0.0
) -> bool:
    """Return True when |value - reference| <= sigmas * stderr + allowance (for tests and reports)."""
    return math.isfinite(value) and abs(value - reference) <= sigmas * stderr + allowance
