"""The albedo inverse over a lookup table: which axes are estimated, held or given a prior, and the solve.

Units: axis values in their fields' units (volume fractions, shares in [0, 1]); colours as linear RGB
albedo in the table's working space (white = 1) under the table's illuminant; features and residuals in CIE
units (CIELAB relative to the working space's white, ``CIE2004``; CIEDE2000, ``Sharma2005``).

Three colour channels cannot fix four table axes. An :class:`InverseModel` therefore splits the table's
axes into *estimated* ones (solved per texel) and *held* ones (a constant each); an estimated axis may
carry a Gaussian prior (mean, sigma in the axis' unit), a regularisation that decides it where colour alone
does not. Single-band captures (e.g. 365 nm and 850 nm images with their response curves) add one lightness
feature each and so constrain more axes.

The solve (:meth:`InverseModel.solve`):

1. *Coarse inverse grid*: candidates sample the estimated axes finely (``CANDIDATE_STEPS`` per grid cell in
   each axis' coordinate); for three features a regular grid over L*, a*, b* stores per cell the candidate
   nearest to its centre (a k-d tree, ``scipy.spatial.cKDTree``, built once), and each texel starts from its
   cell's candidate; with capture features the texels query the k-d tree directly.
2. *Refinement*: a few damped Gauss-Newton steps on the table's own multilinear interpolant
   (:mod:`matgen.estimate.kernels`), in CIELAB (Delta E*ab) plus capture lightness and prior rows.
3. *Residual*: CIEDE2000 between the input and the solution's colour; a texel whose colour no point of the
   box reproduces within the gamut tolerance is flagged out of gamut, and keeps the nearest skin colour found.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from matgen.errors import ParameterError, TableError
from matgen.estimate import kernels
from matgen.estimate.perceptual import delta_e2000, lightness, rgb_to_lab
from matgen.tables.interpolate import prepare

#: Table axes that can be estimated from colour (pigment fields; each changes absorption only).
ESTIMABLE_AXES = ("melanin_fraction", "blood_fraction", "eumelanin_share", "oxygen_saturation")

#: Axes estimated when none are named: the two that colour identifies best.
DEFAULT_ESTIMATED = ("melanin_fraction", "blood_fraction")

#: Held values of axes not estimated, when none is given: :class:`matgen.tissue.parameters.SkinParameters`
#: defaults (clipped into the table's axis).
DEFAULT_HELD = {"eumelanin_share": 0.7, "oxygen_saturation": 0.75}

#: Candidates per grid cell and axis of the coarse inverse grid, by number of estimated axes.
CANDIDATE_STEPS = {1: 16, 2: 6, 3: 3, 4: 2}

#: Cells per CIELAB axis of the inverse grid, and its margin (CIE units) around the candidates.
GRID_CELLS = 48
GRID_MARGIN = 12.0

#: Default largest number of Levenberg-Marquardt steps per texel.
DEFAULT_ITERATIONS = 10

#: Default gamut tolerance: CIEDE2000 above which a texel is flagged out of gamut (about one just
#: noticeable difference; common practice).
DEFAULT_GAMUT_TOLERANCE = 1.0


@dataclass
class Solution:
    """Per-texel result of a solve.

    Attributes
    ----------
    values : ndarray (N, k)
        Estimated axis values (axis units), in :attr:`InverseModel.estimated` order.
    features : ndarray (N, F)
        CIELAB of the solution's colour, then the lightness of each capture.
    de2000 : ndarray (N,)
        CIEDE2000 between the input colour and the solution's colour.
    capture_dl : ndarray (N, n_captures)
        Lightness difference (solution - input) of each capture, CIE units.
    out_of_gamut : ndarray of bool (N,)
        Texels whose colour (or capture lightness) the table does not reproduce within the tolerance.

    """

    values: np.ndarray
    features: np.ndarray
    de2000: np.ndarray
    capture_dl: np.ndarray
    out_of_gamut: np.ndarray


@dataclass
class InverseModel:
    """A table's albedo made invertible: estimated axes, held values, priors and capture responses.

    Build with :func:`build_model`.
    """

    axis_names: tuple
    estimated: tuple
    held: dict
    priors: dict
    captures: tuple
    working_space: str
    illuminant: str
    m_norm: np.ndarray
    axes: list
    arrays: tuple
    is_log: np.ndarray
    prior_mu: np.ndarray
    prior_isig: np.ndarray
    weights: np.ndarray
    cand_x: np.ndarray = field(repr=False, default=None)
    cand_f: np.ndarray = field(repr=False, default=None)
    grid_index: tuple | None = field(repr=False, default=None)
    tree: object = field(repr=False, default=None)
    gamut_tolerance: float = DEFAULT_GAMUT_TOLERANCE
    iterations: int = DEFAULT_ITERATIONS

    @property
    def n_features(self) -> int:
        """Features per texel: 3 (CIELAB) + one per capture."""
        return 3 + len(self.captures)

    # ------------------------------------------------------------------ coordinates
    def to_coords(self, values) -> np.ndarray:
        """Axis values (N, k) -> interpolation coordinates (log on log axes)."""
        v = np.asarray(values, dtype=np.float64).reshape(-1, len(self.estimated))
        return np.where(self.is_log, np.log(np.maximum(v, 1e-300)), v)

    def to_values(self, coords) -> np.ndarray:
        """Interpolation coordinates (N, k) -> axis values."""
        c = np.asarray(coords, dtype=np.float64)
        return np.where(self.is_log, np.exp(c), c)

    # ------------------------------------------------------------------ forward
    def features_of(self, rgb, captures=None, input_matrix=None) -> np.ndarray:
        """Features (N, F) of linear RGB (N, 3) and capture values (N, n_captures).

        ``rgb`` is in the working space, or in another linear space when ``input_matrix`` (3, 3) converts
        it to the working space (the two matrices are applied as one).
        """
        rgb = np.asarray(rgb).reshape(-1, 3)
        m = self.m_norm if input_matrix is None else self.m_norm @ np.asarray(input_matrix, dtype=np.float64)
        f = np.empty((rgb.shape[0], self.n_features))
        f[:, :3] = rgb_to_lab(rgb, m)
        if self.captures:
            cap = np.asarray(captures, dtype=np.float64).reshape(rgb.shape[0], len(self.captures))
            for c in range(cap.shape[1]):
                f[:, 3 + c] = lightness(cap[:, c])
        return f

    def forward(self, values) -> np.ndarray:
        """Features (N, F) of the table's interpolant at estimated-axis values (N, k), held axes as set."""
        x = np.ascontiguousarray(self.to_coords(values))
        out = np.empty((x.shape[0], self.n_features))
        coords, offsets, strides, grid = self.arrays
        kernels.forward_kernel(x, coords, offsets, strides, grid, self.m_norm, out)
        return out

    # ------------------------------------------------------------------ solve
    def initial_guess(self, target: np.ndarray, jobs: int | None = None) -> np.ndarray:
        """Find starting coordinates (N, k) of each texel in the coarse inverse grid (or the k-d tree)."""
        n, k = target.shape[0], len(self.estimated)
        out = np.empty((n, k))
        if self.grid_index is not None:
            origin, step, counts, index = self.grid_index
            kernels.grid_guess_kernel(target, origin, step, counts, index, self.cand_x, out)
            return out
        _, rows = self.tree.query(target * self.weights, workers=jobs or 1)
        return self.cand_x[rows]

    def solve(self, target: np.ndarray, jobs: int | None = None) -> Solution:
        """Estimate every texel of ``target`` features (N, F) (see :meth:`features_of`)."""
        target = np.ascontiguousarray(np.asarray(target, dtype=np.float64))
        if target.ndim != 2 or target.shape[1] != self.n_features:
            raise ParameterError(f"targets have shape {target.shape}; expected (N, {self.n_features})")
        x0 = np.ascontiguousarray(self.initial_guess(target, jobs))
        n, k = x0.shape
        out_x = np.empty((n, k))
        out_f = np.empty((n, self.n_features))
        out_c = np.empty(n)
        coords, offsets, strides, grid = self.arrays
        kernels.solve_kernel(
            target,
            x0,
            coords,
            offsets,
            strides,
            grid,
            self.m_norm,
            self.weights,
            self.is_log,
            self.prior_mu,
            self.prior_isig,
            int(self.iterations),
            out_x,
            out_f,
            out_c,
        )
        de = delta_e2000(target[:, :3], out_f[:, :3])
        dl = out_f[:, 3:] - target[:, 3:]
        oog = de > self.gamut_tolerance
        if dl.shape[1]:
            oog |= np.any(np.abs(dl) > self.gamut_tolerance, axis=1)
        return Solution(self.to_values(out_x), out_f, de, dl, oog)

    def describe(self) -> dict:
        """JSON-ready statement of what is estimated, held and regularised."""
        return {
            "estimated": list(self.estimated),
            "held": {k: float(v) for k, v in self.held.items()},
            "priors": {k: {"mean": float(m), "sigma": float(s)} for k, (m, s) in self.priors.items()},
            "captures": list(self.captures),
            "working_space": self.working_space,
            "illuminant": self.illuminant,
            "gamut_tolerance_de2000": float(self.gamut_tolerance),
            "iterations": int(self.iterations),
        }


def _space_matrix(space: str) -> np.ndarray:
    """Working-space RGB -> XYZ divided by the space's white (so RGB (1, 1, 1) gives (1, 1, 1))."""
    import colour

    from matgen.color import resolve_space

    cs = resolve_space(space)
    white = colour.xy_to_XYZ(cs.whitepoint)
    return np.ascontiguousarray(np.diag(1.0 / white) @ cs.matrix_RGB_to_XYZ)


def _check_roles(table, estimate, held, priors):
    names = [a.name for a in table.axes]
    estimable = [n for n in names if n in ESTIMABLE_AXES]
    if not estimable:
        raise TableError(
            f"the table's axes {names} hold none of the axes colour can estimate "
            f"({', '.join(ESTIMABLE_AXES)})"
        )
    if estimate is None:
        estimate = [n for n in DEFAULT_ESTIMATED if n in names] or estimable[:1]
    estimate = list(dict.fromkeys(estimate))
    for n in list(estimate) + list(held) + list(priors):
        if n not in names:
            raise ParameterError(f"'{n}' is not an axis of the table (its axes: {', '.join(names)})")
    for n in estimate:
        if n not in ESTIMABLE_AXES:
            raise ParameterError(f"axis '{n}' cannot be estimated from colour; estimable: {estimable}")
        if n in held:
            raise ParameterError(f"axis '{n}' is both estimated and held at {held[n]}; choose one")
    for n in priors:
        if n not in estimate:
            raise ParameterError(
                f"a prior is given for '{n}', which is not estimated; add it to the estimate"
            )
    if len(estimate) > 4:
        raise ParameterError("at most 4 axes can be estimated at once")
    return names, estimate


def _held_values(table, estimate, held) -> dict:
    out = {}
    for ax in table.axes:
        if ax.name in estimate:
            continue
        if ax.name in held:
            v = float(held[ax.name])
            if not (ax.values[0] <= v <= ax.values[-1]):
                raise ParameterError(
                    f"held value {ax.name} = {v:g} lies outside the table axis "
                    f"[{ax.values[0]:g}, {ax.values[-1]:g}]"
                )
        else:
            v = float(np.clip(DEFAULT_HELD.get(ax.name, np.median(ax.values)), ax.values[0], ax.values[-1]))
        out[ax.name] = v
    return out


def _sub_grid(table, estimate, held, capture_weights) -> tuple:
    """Channel values (RGB, then each capture) on the estimated axes' nodes, held axes blended in."""
    est_axes = [a for a in table.axes if a.name in estimate]
    est_axes.sort(key=lambda a: estimate.index(a.name))
    mesh = np.meshgrid(*[a.values for a in est_axes], indexing="ij")
    pts = np.empty((mesh[0].size, len(table.axes)))
    for i, ax in enumerate(table.axes):
        pts[:, i] = mesh[estimate.index(ax.name)].ravel() if ax.name in estimate else held[ax.name]
    names = ["rgb_albedo_multiple"] + (["albedo_multiple"] if capture_weights else [])
    vals, _ = table.lookup(pts, names)
    cols = [vals["rgb_albedo_multiple"].astype(np.float64)]
    for w in capture_weights:
        cols.append((vals["albedo_multiple"].astype(np.float64) @ w)[:, None])
    grid = np.concatenate(cols, axis=1).reshape(mesh[0].shape + (-1,))
    return est_axes, grid


def _candidates(model: InverseModel) -> None:
    steps = CANDIDATE_STEPS[len(model.estimated)]
    per_axis = []
    for ax in model.axes:
        c = ax.coords
        fine = [np.linspace(c[i], c[i + 1], steps, endpoint=False) for i in range(c.size - 1)]
        per_axis.append(np.concatenate(fine + [c[-1:]]))
    mesh = np.meshgrid(*per_axis, indexing="ij")
    cand_x = np.ascontiguousarray(np.stack([m.ravel() for m in mesh], axis=1))
    model.cand_x = cand_x
    model.cand_f = model.forward(model.to_values(cand_x))
    from scipy.spatial import cKDTree

    model.tree = cKDTree(model.cand_f * model.weights)
    if model.n_features == 3:
        lo = model.cand_f.min(axis=0) - GRID_MARGIN
        hi = model.cand_f.max(axis=0) + GRID_MARGIN
        counts = np.full(3, GRID_CELLS, dtype=np.int64)
        step = (hi - lo) / counts
        centres = np.meshgrid(
            *[lo[d] + (np.arange(GRID_CELLS) + 0.5) * step[d] for d in range(3)], indexing="ij"
        )
        centres = np.stack([c.ravel() for c in centres], axis=1)
        _, index = model.tree.query(centres * model.weights, workers=1)
        model.grid_index = (lo, step, counts, np.ascontiguousarray(index, dtype=np.int64))


def build_model(
    table,
    *,
    estimate=None,
    held=None,
    priors=None,
    captures=None,
    gamut_tolerance: float = DEFAULT_GAMUT_TOLERANCE,
    iterations: int = DEFAULT_ITERATIONS,
) -> InverseModel:
    """Make a table's RGB albedo invertible.

    Parameters
    ----------
    table : matgen.tables.store.Table
        Needs ``rgb_albedo_multiple`` (and ``albedo_multiple`` when captures are given).
    estimate : sequence of str, optional
        Axes to estimate (default :data:`DEFAULT_ESTIMATED` present in the table).
    held : dict, optional
        Axis -> constant value (axis unit) for axes not estimated (others: :data:`DEFAULT_HELD` or the
        axis' median node).
    priors : dict, optional
        Estimated axis -> (mean, sigma) in the axis' unit: a Gaussian regularisation (sigma > 0).
    captures : dict, optional
        Capture name -> response weights (B,) over the table's bands, summing to 1
        (:func:`matgen.color.pass_weights`).
    gamut_tolerance : float
        CIEDE2000 (and capture lightness difference) above which a texel is flagged out of gamut.
    iterations : int
        Largest number of Levenberg-Marquardt steps per texel.

    Returns
    -------
    InverseModel

    Raises
    ------
    TableError
        If the table has no estimable axis or lacks a needed quantity.
    ParameterError
        If an axis name, held value or prior is invalid.

    """
    held = dict(held or {})
    priors = dict(priors or {})
    captures = dict(captures or {})
    for q in ["rgb_albedo_multiple"] + (["albedo_multiple"] if captures else []):
        if q not in table.quantities:
            raise TableError(f"the table holds no quantity '{q}', which the estimate needs")
    names, estimate = _check_roles(table, estimate, held, priors)
    held_values = _held_values(table, estimate, held)
    for n, (mu, sigma) in priors.items():
        if not (np.isfinite(mu) and np.isfinite(sigma) and sigma > 0):
            raise ParameterError(f"prior of '{n}': mean {mu!r} and sigma {sigma!r} must be finite, sigma > 0")
    if not (np.isfinite(gamut_tolerance) and gamut_tolerance > 0):
        raise ParameterError(f"gamut tolerance is {gamut_tolerance!r}; must be > 0 (CIEDE2000)")
    if not 1 <= int(iterations) <= 100:
        raise ParameterError(f"iterations is {iterations!r}; must be 1..100")
    weights = [np.asarray(w, dtype=np.float64) for w in captures.values()]
    est_axes, grid = _sub_grid(table, estimate, held_values, weights)
    prepared = prepare([a.coords for a in est_axes], grid)
    coords, offsets, strides, _ = prepared
    model = InverseModel(
        axis_names=tuple(names),
        estimated=tuple(estimate),
        held=held_values,
        priors=priors,
        captures=tuple(captures),
        working_space=table.working_space,
        illuminant=table.illuminant,
        m_norm=_space_matrix(table.working_space),
        axes=est_axes,
        arrays=(coords, offsets, strides, np.ascontiguousarray(grid.reshape(-1, grid.shape[-1]))),
        is_log=np.array([a.spacing == "log" for a in est_axes]),
        prior_mu=np.array([priors.get(n, (0.0, 0.0))[0] for n in estimate], dtype=np.float64),
        prior_isig=np.array([1.0 / priors[n][1] if n in priors else 0.0 for n in estimate], dtype=np.float64),
        weights=np.ones(3 + len(captures)),
        gamut_tolerance=float(gamut_tolerance),
        iterations=int(iterations),
    )
    _candidates(model)
    return model
