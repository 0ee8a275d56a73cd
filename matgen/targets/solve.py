"""Per-texel effective media: interpolate A and d over the pigment axes, then invert each texel.

The table's quantities that vary smoothly over the pigment axes are the layered skin's diffuse reflectance A
and its fitted profile width d (normalised diffusion, ``Christensen2015``); the single-scattering albedo
alpha that reproduces A is a steep function of A near alpha = 1, so it is not interpolated. Each texel's
channels (or bands) are inverted with exactly the anisotropy g and boundary index n that the targets write
for them, through the public inversion :func:`matgen.fit.inversion.effective_medium`.

Speed: inverting every texel through the inversion's own bisection would cost milliseconds per thousand texels
per channel. :class:`TexelInverter` therefore evaluates the public inversion once on a regular grid of (A, g)
at the bake's n (1025 x 96 nodes by default, about 1.4 s) and interpolates the similarity parameter s =
sqrt((1 - alpha) / (1 - g alpha)) and the scaling l / d bilinearly per texel (a numba kernel with a
pure-Python twin). s is smooth and nearly linear in A, so the interpolation error in the rebuilt A is far
below the table's own statistical error (``tests/targets/test_solve.py`` bounds it at 5e-5 relative through
the forward model; measured 3.7e-5); a better inversion drops in unchanged, because the grid is built from
whatever :func:`~matgen.fit.inversion.effective_medium` returns. alpha and 1 - alpha are then formed from s in
closed form (1 - alpha = s^2 (1 - g) / (1 - g s^2)), so 1 - alpha keeps its relative precision as alpha
approaches 1. Units: mm for lengths, A, alpha and g dimensionless.
"""

from __future__ import annotations

from functools import lru_cache

import numba
import numpy as np

from matgen.errors import DataError, FitError
from matgen.fit.channels import rgb_weights
from matgen.fit.inversion import albedo_multiple, effective_medium, specular_reflectance_normal
from matgen.targets.medium import TexelMedia

#: Uniform similarity-parameter nodes of the forward grid (breakpoints of the inversion are added).
GRID_S_NODES = 1025
#: Uniform anisotropy step of the forward grid (the inversion's own g nodes are added). The forward model
#: is smooth (cubic) in g between its nodes, so the grid is much finer than they are: at 0.01 the rebuilt A
#: is within 3.7e-5 relative of the forward model over 15,000 random (A, g) cases (about 1.4 s to build;
#: 0.005 gives 1.4e-5 in 2.5 s, a cost every bake process pays).
GRID_G_STEP = 0.01
#: g range of the grid when the inversion states none (closed forms).
DEFAULT_G_RANGE = (0.0, 0.95)


def _inversion_nodes(method: str):
    """(alpha nodes, g nodes) where the inversion's forward model has kinks, or (None, None)."""
    if method != "boundary_table":
        return None, None
    from matgen.fit.inversion import default_inversion_table

    tab = default_inversion_table()
    return np.asarray(tab.albedo_single, dtype=np.float64), np.asarray(tab.g, dtype=np.float64)


def inversion_g_range(method: str = "boundary_table") -> tuple:
    """Return (g_min, g_max), the g range the inversion covers.

    The written g is kept inside it, so that the g written is the g inverted with.
    """
    _, g = _inversion_nodes(method)
    return DEFAULT_G_RANGE if g is None else (float(g[0]), float(g[-1]))


@numba.njit(cache=True, inline="always")
def _solve_one(a, g, s_nodes, g_nodes, f_grid, l_grid):  # pragma: no cover - compiled
    ng = g_nodes.size
    j = 0
    while j < ng - 2 and g > g_nodes[j + 1]:
        j += 1
    t = (g - g_nodes[j]) / (g_nodes[j + 1] - g_nodes[j])
    t = min(max(t, 0.0), 1.0)
    # the blended column A(s_i) decreases along i (s ascending); find col[lo] >= a > col[hi]
    lo, hi = 0, s_nodes.size - 1
    while hi - lo > 1:
        mid = (lo + hi) // 2
        col = (1.0 - t) * f_grid[mid, j] + t * f_grid[mid, j + 1]
        if col >= a:
            lo = mid
        else:
            hi = mid
    c0 = (1.0 - t) * f_grid[lo, j] + t * f_grid[lo, j + 1]
    c1 = (1.0 - t) * f_grid[hi, j] + t * f_grid[hi, j + 1]
    u = (c0 - a) / (c0 - c1) if c0 != c1 else 0.0
    u = min(max(u, 0.0), 1.0)
    s = s_nodes[lo] + u * (s_nodes[hi] - s_nodes[lo])
    l0 = (1.0 - t) * l_grid[lo, j] + t * l_grid[lo, j + 1]
    l1 = (1.0 - t) * l_grid[hi, j] + t * l_grid[hi, j + 1]
    return s, l0 + u * (l1 - l0)


@numba.njit(cache=True, parallel=True)
def _invert_kernel(a, g, s_nodes, g_nodes, f_grid, l_grid, s_out, l_out):  # pragma: no cover - compiled
    n, c = a.shape
    for k in numba.prange(n):
        for j in range(c):
            s_out[k, j], l_out[k, j] = _solve_one(a[k, j], g[k, j], s_nodes, g_nodes, f_grid, l_grid)


def _invert_python(a, g, s_nodes, g_nodes, f_grid, l_grid):
    """Pure-Python twin of :func:`_invert_kernel` (same steps, numpy-vectorised over texels)."""
    j = np.clip(np.searchsorted(g_nodes, g, side="left") - 1, 0, g_nodes.size - 2)
    t = np.clip((g - g_nodes[j]) / (g_nodes[j + 1] - g_nodes[j]), 0.0, 1.0)
    lo = np.zeros(a.shape, dtype=np.int64)
    hi = np.full(a.shape, s_nodes.size - 1, dtype=np.int64)

    def col(grid, i):
        return (1.0 - t) * grid[i, j] + t * grid[i, j + 1]

    while np.any(hi - lo > 1):
        mid = (lo + hi) // 2
        active = hi - lo > 1
        up = col(f_grid, mid) >= a
        lo = np.where(active & up, mid, lo)
        hi = np.where(active & ~up, mid, hi)
    c0, c1 = col(f_grid, lo), col(f_grid, hi)
    u = np.clip(np.divide(c0 - a, c0 - c1, out=np.zeros_like(a), where=c0 != c1), 0.0, 1.0)
    s = s_nodes[lo] + u * (s_nodes[hi] - s_nodes[lo])
    l0, l1 = col(l_grid, lo), col(l_grid, hi)
    return s, l0 + u * (l1 - l0)


class TexelInverter:
    """alpha and the scaling l / d of the half-space reproducing A at anisotropy g under index n.

    Parameters
    ----------
    n : float
        Boundary refractive index (air outside).
    method : str
        Inversion method of :func:`matgen.fit.inversion.albedo_multiple` / ``effective_medium``.
    backend : {"numba", "python"}
        Compiled kernel or its pure-Python twin.

    """

    def __init__(self, n: float, method: str = "boundary_table", backend: str = "numba"):
        self.n = float(n)
        self.method = method
        self.g_range = inversion_g_range(method)
        self.backend = backend
        self.a_max = 1.0 - float(specular_reflectance_normal(self.n))
        self.s_nodes, self.g_nodes, self.f_grid, self.l_grid = _grid(self.n, method)

    def clip_g(self, g) -> np.ndarray:
        """G limited to the range the inversion covers (the g that is written and inverted with)."""
        return np.clip(np.asarray(g, dtype=np.float64), self.g_range[0], self.g_range[1])

    def __call__(self, albedo_multiple, g):
        """Invert A (N, C) at g (N, C): returns (alpha, 1 - alpha, l / d), float64 (N, C).

        Raises
        ------
        FitError
            When an A lies outside (0, 1 - R_specular(n)).

        """
        a = np.ascontiguousarray(albedo_multiple, dtype=np.float64)
        g = np.ascontiguousarray(np.broadcast_to(self.clip_g(g), a.shape))
        bad = ~((a > 0.0) & (a < self.a_max))
        if bad.any():
            i = int(np.argmax(bad.reshape(-1)))
            raise FitError(
                f"albedo_multiple {a.reshape(-1)[i]:.6g} is not reachable by a half-space of index "
                f"{self.n:g}: it must lie in (0, {self.a_max:.6g})"
            )
        args = (self.s_nodes, self.g_nodes, self.f_grid, self.l_grid)
        if self.backend == "python":
            s, scale = _invert_python(a, g, *args)
        else:
            s, scale = np.empty_like(a), np.empty_like(a)
            _invert_kernel(a, g, *args, s, scale)
        s2 = s * s
        one_minus = s2 * (1.0 - g) / (1.0 - g * s2)
        return 1.0 - one_minus, one_minus, scale


@lru_cache(maxsize=8)
def _grid(n, method):
    """Forward grid A(s_i, g_j) and l/d(s_i, g_j) from the public inversion functions.

    The s nodes hold the similarity parameters of the inversion's own alpha nodes at each of its g nodes
    (where a piecewise-linear forward model bends); a smooth model is followed by the fine g step.
    """
    alpha_k, g_k = _inversion_nodes(method)
    g_lo, g_hi = inversion_g_range(method)
    g = np.unique(
        np.round(
            np.concatenate([np.arange(g_lo, g_hi + 1e-9, GRID_G_STEP), [g_hi], [] if g_k is None else g_k]),
            12,
        )
    )
    s = [np.linspace(0.0, 1.0, GRID_S_NODES)]
    if alpha_k is not None:
        for gj in g_k:
            s.append(np.sqrt(np.clip((1.0 - alpha_k) / (1.0 - gj * alpha_k), 0.0, 1.0)))
    s = np.unique(np.round(np.concatenate(s), 14))
    ss, gg = np.meshgrid(s, g, indexing="ij")
    alpha = (1.0 - ss**2) / (1.0 - gg * ss**2)
    f = np.asarray(albedo_multiple(alpha, gg, n, method=method), dtype=np.float64)
    # l/d at interior nodes through the public inversion; the ends (A = 0, A = A_max) take their neighbour's
    inner = slice(1, -1)
    med = effective_medium(f[inner], np.ones_like(f[inner]), gg[inner], n, method=method)
    lgrid = np.empty_like(f)
    lgrid[inner] = med["shape_scaling"]
    lgrid[0], lgrid[-1] = lgrid[1], lgrid[-2]
    return s, g, np.ascontiguousarray(f), np.ascontiguousarray(lgrid)


@lru_cache(maxsize=8)
def cached_inverter(n: float, method: str = "boundary_table", backend: str = "numba") -> TexelInverter:
    """Return a :class:`TexelInverter` shared by every bake of one process at this n and method."""
    return TexelInverter(n, method, backend=backend)


# -- what a bake looks up in the table, and the media it makes of it ------------------------------------


def table_ior(table) -> float:
    """Return the table's boundary index (one value over its grid); :class:`DataError` otherwise."""
    if "ior" not in table.quantities:
        raise DataError("the table holds no boundary refractive index (quantity 'ior')")
    q = np.asarray(table.quantities["ior"], dtype=np.float64)
    if np.ptp(q) > 1e-9:
        raise DataError(
            f"the table's boundary index varies over its grid ({q.min():g}-{q.max():g}); "
            "a bake inverts at one index"
        )
    return float(q.reshape(-1)[0])


def media_request(table, channels: str, band_index=None) -> tuple:
    """Table quantities (name -> channel indices or None) and derived grids the media of ``channels`` need.

    RGB media need the channel anisotropy, the mean of the band g weighted by |W_cb| A_b
    (:func:`matgen.fit.channels.channel_anisotropy`); its numerator and denominator are linear in the
    table's values, so they are formed on the grid once and blended like A.
    """
    if channels == "bands":
        idx = np.asarray(band_index, dtype=np.int64)
        return {"albedo_multiple": idx, "shape_distance_mm": idx, "anisotropy": idx}, {}
    a = np.asarray(table.quantities["albedo_multiple"], dtype=np.float64)
    g = np.asarray(table.quantities["anisotropy"], dtype=np.float64)
    w = np.abs(rgb_weights(table.bands, table.working_space, table.illuminant))  # (3, B)
    derived = {"rgb_g_num": (a * g) @ w.T, "rgb_g_den": a @ w.T}
    return {"rgb_albedo_multiple": None, "rgb_shape_distance_mm": None}, derived


def channel_g(vals: dict) -> np.ndarray:
    """Per-texel channel anisotropy (N, 3) from the blended numerator and denominator."""
    num = vals["rgb_g_num"].astype(np.float64)
    den = vals["rgb_g_den"].astype(np.float64)
    return np.divide(num, den, out=np.zeros_like(num), where=den > 0)


def texel_media(
    vals: dict, channels: str, inverter: TexelInverter, *, scalar_g: bool = False, isotropic: bool = False
) -> TexelMedia:
    """Effective media of a strip of texels from the looked-up A, d and g.

    Parameters
    ----------
    vals : dict
        Looked-up quantities (:func:`media_request`'s names), float32 (N, C).
    channels : {"rgb", "bands"}
        RGB channels or bands.
    inverter : TexelInverter
        The per-texel inversion at the bake's index.
    scalar_g : bool
        One g per texel (the mean of its channels' g), for consumers with one scalar anisotropy; every
        channel is inverted with it.
    isotropic : bool
        Isotropic equivalent: g = 0 with the similarity-scaled mean free path mfp / (1 - alpha g), the
        transport mean free path 1 / (mu_a + mu_s (1 - g)) of the anisotropic medium (``vandeHulst1980``,
        similarity relations), and alpha inverted afresh at g = 0 so that the rendered A stays the skin's.
        The similarity relation's own alpha (1 - g) / (1 - alpha g) would not: under the n = 1.55 boundary
        it renders A 0.03 as 0.046-0.049 and A 0.1 as 0.116-0.117 (g 0.75-0.9; measured with the
        boundary-aware forward model), so only the length scale is taken from it.

    """
    if channels == "bands":
        a = vals["albedo_multiple"].astype(np.float64)
        d = vals["shape_distance_mm"].astype(np.float64)
        g = vals["anisotropy"].astype(np.float64)
    else:
        a = vals["rgb_albedo_multiple"].astype(np.float64)
        d = vals["rgb_shape_distance_mm"].astype(np.float64)
        g = channel_g(vals)
    g = inverter.clip_g(g)
    if scalar_g:
        g = np.broadcast_to(g.mean(axis=1, keepdims=True), a.shape).copy()
    alpha, one_minus, scale = inverter(a, g)
    mfp = scale * d
    if isotropic:
        mfp = mfp / (1.0 - alpha * g)
        g = np.zeros_like(a)
        alpha, one_minus, _ = inverter(a, g)
    ior = np.full((a.shape[0], 1), inverter.n)
    return TexelMedia(alpha, one_minus, mfp, g, ior, a)


def summary_media(
    quantities: dict,
    index: int,
    channels: str,
    inverter: TexelInverter,
    *,
    scalar_g: bool = False,
    isotropic: bool = False,
    rgb_anisotropy=None,
) -> TexelMedia:
    """Make the media of parameter set ``index`` of :func:`matgen.fit.summary.summarize` as a bake does.

    A and d are inverted at the g written; ``rgb_anisotropy`` (3,) is the channels' g, which the summary
    does not store.
    """
    if channels == "bands":
        vals = {
            k: np.asarray(quantities[k], dtype=np.float64)[index][None, :]
            for k in ("albedo_multiple", "shape_distance_mm", "anisotropy")
        }
    else:
        g = np.asarray(rgb_anisotropy, dtype=np.float64).reshape(1, 3)
        vals = {
            "rgb_albedo_multiple": np.asarray(quantities["rgb_albedo_multiple"], dtype=np.float64)[index][
                None, :
            ],
            "rgb_shape_distance_mm": np.asarray(quantities["rgb_shape_distance_mm"], dtype=np.float64)[index][
                None, :
            ],
            "rgb_g_num": g,
            "rgb_g_den": np.ones_like(g),
        }
    return texel_media(vals, channels, inverter, scalar_g=scalar_g, isotropic=isotropic)
