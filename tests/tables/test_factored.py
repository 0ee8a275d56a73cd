"""Factored reweighting against the transport engine's own reweighting, and the kernel against its twin."""

import numpy as np
import pytest

from matgen.tables import factored


def test_kernel_matches_python_twin():
    rng = np.random.default_rng(2)
    x_t = rng.random((4, 50))
    y = rng.random((50, 6))
    seg = np.array([0, 10, 10, 37, 50], dtype=np.int64)
    a = np.zeros((4, 4, 6))
    b = np.zeros((4, 4, 6))
    factored.segment_outer_sums(x_t, y, seg, a)
    factored.segment_outer_sums_python(x_t, y, seg, b)
    np.testing.assert_allclose(a, b, rtol=1e-13)
    # direct definition
    ref = np.stack([x_t[:, seg[s] : seg[s + 1]] @ y[seg[s] : seg[s + 1]] for s in range(4)])
    np.testing.assert_allclose(a, ref, rtol=1e-12)
    assert np.all(a[1] == 0)


def test_axis_groups_split_layers_by_their_axes():
    # 3 axes (3, 2, 4), 3 layers: layer 0 depends on axis 0, layer 1 on axes 1 and 2, layer 2 on nothing
    a0, a1, a2 = np.meshgrid(np.arange(3.0), np.arange(2.0), np.arange(4.0), indexing="ij")
    grid = np.stack([1 + a0, 2 + a1 * 0.5 + a2, np.full_like(a0, 3.0)], axis=-1)
    g1, g2, layers1 = factored.axis_groups(grid)
    assert (g1, g2, layers1) == ([0], [1, 2], [0])
    # a layer that couples axes 0 and 1 joins them: no split of {0, 1}; axis 2 then stands alone
    grid2 = np.stack([1 + a0 * a1, 2 + a2, np.full_like(a0, 3.0)], axis=-1)
    g1, g2, layers1 = factored.axis_groups(grid2)
    assert (g1, g2, layers1) == ([0, 1], [2], [0])
    # everything coupled: one group holding every layer
    grid3 = np.stack([1 + a0 + a1 * a2, 2 + a2 * a0, np.full_like(a0, 3.0)], axis=-1)
    g1, g2, _ = factored.axis_groups(grid3)
    assert g2 == [] and g1 == [0, 1, 2]


@pytest.fixture(scope="module")
def records_and_sets():
    from matgen.transport.simulate import default_ring_edges_mm, simulate
    from matgen.transport.stack import Stack

    stack = Stack(
        thickness_mm=[0.06, 0.3, 2.0],
        n=[1.4, 1.4, 1.4],
        mu_a=[0.2, 0.05, 0.02],
        mu_s=[30.0, 15.0, 10.0],
        g=[0.8, 0.8, 0.8],
        n_above=1.0,
        n_below=1.4,
    )
    _, rec = simulate(stack, 6000, seed=3, records=True)
    # grid 4 x 3: layer 0 varies with axis 0, layers 1-2 with axis 1
    m0 = np.array([0.2, 0.5, 1.5, 4.0])
    m1 = np.array([0.0, 0.1, 0.4])
    sets = np.array([[a, 0.05 + b, 0.02 + 0.5 * b] for a in m0 for b in m1])
    return rec, sets, default_ring_edges_mm()


@pytest.mark.parametrize("backend", ["numba", "python"])
def test_factored_matches_transport_reweight(records_and_sets, backend):
    """Reference: matgen.transport.reweight.reweight (unfactored sums over the same records)."""
    from matgen.transport.reweight import reweight

    rec, sets, rings = records_and_sets
    if backend == "python":  # the twin is slow: a short slice of the records
        rec = type(rec)(
            **{
                k: getattr(rec, k)[:400]
                for k in (
                    "path_mm",
                    "weighted_path_mm",
                    "exit_radius_mm",
                    "exit_cos",
                    "max_depth_mm",
                    "weight",
                    "side",
                )
            },
            meta=rec.meta,
        )
    f = factored.factored_reweight(rec, sets, (4, 3), rings, backend=backend)
    assert f["groups"]["group2_axes"] == [1]
    r = reweight(rec, sets, ring_edges_mm=rings)
    for k in (
        "diffuse_reflectance",
        "diffuse_reflectance_stderr",
        "radial_reflectance_per_mm2",
        "radial_stderr_per_mm2",
    ):
        np.testing.assert_allclose(f[k], getattr(r, k), rtol=1e-10, atol=1e-300, err_msg=k)
    # weight-averaged path of reflected light, checked against its definition
    refl = rec.side == 1
    dmu = sets - rec.mu_a_ref[None, :]
    for k in (0, 5, 11):
        w = rec.weight[refl] * np.exp(-(rec.path_mm[refl].astype(float) @ dmu[k]))
        expect = (w[:, None] * rec.path_mm[refl]).sum(0) / w.sum()
        np.testing.assert_allclose(f["reflected_path_mm"][k], expect, rtol=1e-9)


def test_reference_above_a_set_is_refused(records_and_sets):
    from matgen.errors import TableError

    rec, sets, rings = records_and_sets
    low = sets.copy()
    low[0, 0] = 0.0  # below the reference absorption of layer 0
    with pytest.raises(TableError, match="below the reference"):
        factored.factored_reweight(rec, low, (4, 3), rings)
