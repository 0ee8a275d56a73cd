"""The inverse model: its interpolant is the table's, its gradient is exact, and the solve finds the point.

Expectations come from the table API (``Table.lookup``) and colour-science, never from numbers of today's
shipped table.
"""

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from matgen.color import pass_weights
from matgen.errors import ParameterError, TableError
from matgen.estimate import kernels
from matgen.estimate.solver import build_model
from matgen.spectra.bands import BandSet
from matgen.tables.store import Axis, Table

ROOT = Path(__file__).resolve().parents[2]
HELD = {"eumelanin_share": 0.55, "oxygen_saturation": 0.8}


def _truth_points(table, rng, n, held=HELD):
    names = [a.name for a in table.axes]
    pts = np.empty((n, len(names)))
    for i, ax in enumerate(table.axes):
        if ax.name in held:
            pts[:, i] = held[ax.name]
        elif ax.spacing == "log":
            pts[:, i] = np.exp(rng.uniform(np.log(ax.values[0] * 1.01), np.log(ax.values[-1] * 0.99), n))
        else:
            pts[:, i] = rng.uniform(ax.values[0] + 0.01, ax.values[-1] - 0.01, n)
    return pts


def test_sub_grid_interpolant_equals_the_tables_lookup(table):
    """Blending the held axes first gives the table's own multilinear value (Table.lookup)."""
    model = build_model(table, held=HELD)
    rng = np.random.default_rng(1)
    pts = _truth_points(table, rng, 500)
    rgb = table.lookup(pts, "rgb_albedo_multiple")[0]["rgb_albedo_multiple"]
    est = pts[:, [table.axis_names.index(n) for n in model.estimated]]
    assert np.max(np.abs(model.forward(est) - model.features_of(rgb))) < 1e-3  # float32 table values


def test_interpolant_gradient_matches_central_differences(table):
    caps = {n: pass_weights(n, table.bands) for n in ("uv365", "nir850")}
    model = build_model(table, estimate=list(table.axis_names), captures=caps)
    coords, offsets, strides, grid = model.arrays
    rng = np.random.default_rng(2)
    k = len(model.estimated)
    nc = grid.shape[1]
    for _ in range(50):
        x = np.array([rng.uniform(a.coords[0], a.coords[-1]) for a in model.axes])
        vals, dvals = np.empty(nc), np.empty((nc, k))
        feat, jac = np.empty(nc), np.empty((nc, k))
        cell, t, h = np.empty(k, dtype=np.int64), np.empty(k), np.empty(k)
        kernels._interp_grad(x, coords, offsets, strides, grid, vals, dvals, cell, t, h)
        kernels._features(vals, dvals, model.m_norm, feat, jac)
        for j in range(k):
            step = 1e-6 * h[j]
            if not (step < t[j] * h[j] and step < (1 - t[j]) * h[j]):
                continue  # a node: the blend has a kink there
            xp, xm = x.copy(), x.copy()
            xp[j] += step
            xm[j] -= step
            fd = (
                model.forward(model.to_values(xp[None]))[0] - model.forward(model.to_values(xm[None]))[0]
            ) / (2 * step)
            assert np.allclose(jac[:, j], fd, rtol=1e-4, atol=1e-4 * np.abs(fd).max())


@pytest.mark.parametrize("estimate,use_captures", [(None, False), ("all", True)])
def test_noise_free_colours_are_inverted_exactly(table, estimate, use_captures):
    """Colours made by the table's lookup come back as the points that made them."""
    caps = {n: pass_weights(n, table.bands) for n in ("uv365", "nir850")} if use_captures else {}
    est = list(table.axis_names) if estimate == "all" else None
    held = {} if est else HELD
    model = build_model(table, estimate=est, held=held, captures=caps)
    rng = np.random.default_rng(3)
    pts = _truth_points(table, rng, 3000, held)
    q = table.lookup(pts, ["rgb_albedo_multiple", "albedo_multiple"])[0]
    cap = np.stack([q["albedo_multiple"].astype(float) @ w for w in caps.values()], 1) if caps else None
    sol = model.solve(model.features_of(q["rgb_albedo_multiple"], cap))
    truth = pts[:, [table.axis_names.index(n) for n in model.estimated]]
    rel = np.abs(sol.values / truth - 1)
    assert np.percentile(rel, 99) < 1e-3, np.percentile(rel, [50, 99, 100])
    assert np.percentile(sol.de2000, 99) < 1e-3
    assert not sol.out_of_gamut.any()


def test_out_of_gamut_colours_get_the_nearest_skin_colour_and_a_flag(table):
    model = build_model(table, held=HELD)
    odd = np.array([[0.05, 0.5, 0.05], [0.1, 0.1, 0.6], [0.9, 0.9, 0.9], [0.02, 0.02, 0.02], [0.6, 0.3, 0.3]])
    target = model.features_of(odd)
    sol = model.solve(target)
    # brute force over a dense grid of the two estimated axes, through the table's lookup
    axes = {a.name: a for a in table.axes}
    m = np.geomspace(axes["melanin_fraction"].values[0], axes["melanin_fraction"].values[-1], 300)
    b = np.geomspace(axes["blood_fraction"].values[0], axes["blood_fraction"].values[-1], 300)
    mm, bb = np.meshgrid(m, b, indexing="ij")
    pts = np.stack([mm.ravel(), np.full(mm.size, 0.55), bb.ravel(), np.full(mm.size, 0.8)], 1)
    lab = model.features_of(table.lookup(pts, "rgb_albedo_multiple")[0]["rgb_albedo_multiple"])
    for i in range(len(odd)):
        brute = np.min(np.linalg.norm(lab - target[i], axis=1))
        ours = np.linalg.norm(sol.features[i] - target[i])
        assert ours <= brute + 0.05, (i, ours, brute)
    assert sol.out_of_gamut[:4].all()  # green, blue, near-white, near-black: no skin of the table
    for i, ax in enumerate(model.axes):
        assert np.all((sol.values[:, i] >= ax.values[0]) & (sol.values[:, i] <= ax.values[-1]))


def test_a_prior_decides_an_axis_colour_leaves_open(table):
    """With eumelanin share estimated from RGB alone, a tight prior pulls it to the prior's mean."""
    rng = np.random.default_rng(4)
    pts = _truth_points(table, rng, 500, {"eumelanin_share": 0.3, "oxygen_saturation": 0.8})
    rgb = table.lookup(pts, "rgb_albedo_multiple")[0]["rgb_albedo_multiple"]
    est = ["melanin_fraction", "eumelanin_share", "blood_fraction"]
    free = build_model(table, estimate=est, held={"oxygen_saturation": 0.8})
    tight = build_model(
        table, estimate=est, held={"oxygen_saturation": 0.8}, priors={"eumelanin_share": (0.6, 0.01)}
    )
    f = free.solve(free.features_of(rgb))
    t = tight.solve(tight.features_of(rgb))
    assert np.median(np.abs(f.values[:, 1] - 0.3)) < 0.02  # noise-free: colour alone finds it
    assert np.median(np.abs(t.values[:, 1] - 0.6)) < 0.05  # the prior wins
    assert np.median(t.de2000) > np.median(f.de2000)  # at a colour cost


def test_bad_requests_name_the_axis(table):
    with pytest.raises(ParameterError, match="eumelanin_share = 1.5"):
        build_model(table, held={"eumelanin_share": 1.5})
    with pytest.raises(ParameterError, match="'thickness' is not an axis"):
        build_model(table, estimate=["thickness"])
    with pytest.raises(ParameterError, match="both estimated and held"):
        build_model(table, estimate=["melanin_fraction"], held={"melanin_fraction": 0.1})
    with pytest.raises(ParameterError, match="not estimated"):
        build_model(table, priors={"eumelanin_share": (0.5, 0.1)})
    bands = BandSet.regular(400.0, 700.0, 100.0)
    odd = Table(
        axes=[Axis("dermis_water_fraction", np.array([0.5, 0.7]))],
        bands=bands,
        quantities={"rgb_albedo_multiple": np.full((2, 3), 0.5, np.float32)},
    )
    with pytest.raises(TableError, match="none of the axes colour can estimate"):
        build_model(odd)


SOLVE_TWIN = r"""
import json, sys
import numpy as np
from matgen.tables.store import load_default_table
from matgen.estimate.solver import build_model
t = load_default_table()
m = build_model(t, estimate=["melanin_fraction", "eumelanin_share", "blood_fraction"],
                priors={"eumelanin_share": (0.5, 0.2)})
rng = np.random.default_rng(9)
rgb = rng.uniform(0.05, 0.6, (40, 3))
s = m.solve(m.features_of(rgb))
json.dump({"x": s.values.tolist(), "de": s.de2000.tolist()}, sys.stdout)
"""


def test_solver_kernel_matches_its_pure_python_twin():
    outs = []
    for jit in (True, False):
        env = dict(os.environ, PYTHONPATH=str(ROOT))
        if not jit:
            env["NUMBA_DISABLE_JIT"] = "1"
        proc = subprocess.run(
            [sys.executable, "-c", SOLVE_TWIN], capture_output=True, text=True, env=env, cwd=ROOT
        )
        assert proc.returncode == 0, proc.stderr
        outs.append(json.loads(proc.stdout))
    assert np.max(np.abs(np.array(outs[0]["x"]) - np.array(outs[1]["x"]))) < 1e-8
    assert np.max(np.abs(np.array(outs[0]["de"]) - np.array(outs[1]["de"]))) < 1e-8
