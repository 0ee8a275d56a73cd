"""Table store and multilinear lookup: exact node values, linear reproduction, clamping, file integrity."""

import itertools
import json

import numpy as np
import pytest

from matgen.errors import ParameterError, TableError
from matgen.spectra.bands import BandSet
from matgen.tables import interpolate
from matgen.tables.store import Axis, Table


def _table(rng=None, n_bands=4):
    rng = rng or np.random.default_rng(7)
    axes = [
        Axis("melanin_fraction", [0.002, 0.01, 0.05, 0.3], "log"),
        Axis("eumelanin_share", [0.0, 0.5, 1.0], "linear"),
        Axis("blood_fraction", [0.005, 0.02, 0.08], "log"),
    ]
    bands = BandSet.regular(400, 400 + 10 * (n_bands - 1), 10)
    shape = tuple(a.values.size for a in axes)
    q = {
        "albedo_multiple": rng.random(shape + (n_bands,)).astype(np.float32),
        "rgb_albedo_multiple": rng.random(shape + (3,)).astype(np.float32),
        "ior": np.full(shape + (1,), 1.4, np.float32),
    }
    return Table(axes, bands, q, manifest={"note": "synthetic"})


def test_axis_rejects_bad_values():
    with pytest.raises(ParameterError, match="at least 2"):
        Axis("blood_fraction", [0.1])
    with pytest.raises(ParameterError, match="increase strictly"):
        Axis("blood_fraction", [0.1, 0.1, 0.2])
    with pytest.raises(ParameterError, match="log axes need values > 0"):
        Axis("melanin_fraction", [0.0, 0.1], "log")
    with pytest.raises(ParameterError, match="spacing"):
        Axis("melanin_fraction", [0.01, 0.1], "cubic")


def test_lookup_at_nodes_is_exact():
    t = _table()
    pts = t.grid_points()
    vals, n_clamped = t.lookup(pts, ["albedo_multiple", "rgb_albedo_multiple"])
    assert n_clamped == 0
    assert np.array_equal(vals["albedo_multiple"], t.quantities["albedo_multiple"].reshape(-1, 4))
    assert np.array_equal(vals["rgb_albedo_multiple"], t.quantities["rgb_albedo_multiple"].reshape(-1, 3))


def test_multilinear_reproduces_a_multilinear_function_in_transformed_coordinates():
    # f = 1 + 2 log(m) + 3 s + 0.5 log(m) s + log(b): multilinear in (log m, s, log b), so the blend is exact
    axes = [
        Axis("melanin_fraction", [0.002, 0.01, 0.05, 0.3], "log"),
        Axis("eumelanin_share", [0.0, 0.5, 1.0], "linear"),
        Axis("blood_fraction", [0.005, 0.02, 0.08], "log"),
    ]

    def f(m, s, b):
        return 1 + 2 * np.log(m) + 3 * s + 0.5 * np.log(m) * s + np.log(b)

    mesh = np.meshgrid(*[a.values for a in axes], indexing="ij")
    t = Table(axes, BandSet.regular(500, 500, 10), {"albedo_multiple": f(*mesh)[..., None]})
    rng = np.random.default_rng(3)
    m = np.exp(rng.uniform(np.log(0.002), np.log(0.3), 500))
    s = rng.uniform(0, 1, 500)
    b = np.exp(rng.uniform(np.log(0.005), np.log(0.08), 500))
    vals, n = t.lookup(np.stack([m, s, b], 1), "albedo_multiple")
    assert n == 0
    # float32 storage: tolerance = a few float32 ulps of values of magnitude <= 20
    np.testing.assert_allclose(vals["albedo_multiple"][:, 0], f(m, s, b), atol=2e-5 * 20)


def test_numba_kernel_matches_python_twin():
    rng = np.random.default_rng(11)
    coords = [np.sort(rng.random(n)) for n in (3, 4, 2, 5)]
    values = rng.standard_normal((3, 4, 2, 5, 6)).astype(np.float32)
    pts = np.stack([rng.uniform(-0.2, 1.2, 300) for _ in range(4)], 1)
    a, ca = interpolate.multilinear(coords, values, pts, backend="numba")
    b, cb = interpolate.multilinear(coords, values, pts, backend="python")
    assert np.array_equal(ca, cb)
    assert ca.any() and not ca.all()
    # both accumulate in float64 in the same order and round once to float32
    np.testing.assert_allclose(a, b, rtol=0, atol=1e-6)
    nodes = np.array(
        [[coords[i][j[i]] for i in range(4)] for j in itertools.product(*[range(c.size) for c in coords])]
    )
    for backend in ("numba", "python"):
        out, _ = interpolate.multilinear(coords, values, nodes, backend=backend)
        assert np.array_equal(out, values.reshape(-1, 6))


def test_zero_weight_corner_nan_does_not_leak():
    coords = [np.array([0.0, 1.0, 2.0])]
    values = np.array([[1.0], [2.0], [np.nan]], np.float32)
    out, _ = interpolate.multilinear(coords, values, np.array([[1.0], [0.5]]))
    assert out[0, 0] == 2.0 and out[1, 0] == 1.5


def test_clamp_counts_and_error_names_axis():
    t = _table()
    pts = np.array([[0.001, 0.5, 0.02], [0.01, 0.5, 0.02], [0.01, 1.5, 0.2]])
    vals, n = t.lookup(pts, "rgb_albedo_multiple")
    assert n == 2
    edge, _ = t.lookup(np.array([[0.002, 0.5, 0.02], [0.01, 1.0, 0.08]]), "rgb_albedo_multiple")
    np.testing.assert_array_equal(vals["rgb_albedo_multiple"][[0, 2]], edge["rgb_albedo_multiple"])
    with pytest.raises(ParameterError, match="melanin_fraction = 0.001 lies outside"):
        t.lookup(pts, "rgb_albedo_multiple", out_of_range="error")
    with pytest.raises(ParameterError, match="must be finite"):
        t.lookup(np.array([[np.nan, 0.5, 0.02]]))
    with pytest.raises(TableError, match="did you mean 'rgb_albedo_multiple'"):
        t.lookup(pts, "rgb_albedo_multipel")


def test_save_load_roundtrip_is_deterministic(tmp_path):
    t = _table()
    p1 = t.save(tmp_path / "a.npz", build_stats={"wall_s": 1.0})
    p2 = t.save(tmp_path / "b.npz", build_stats={"wall_s": 2.0})
    assert p1.read_bytes() == p2.read_bytes()  # run-dependent stats stay out of the .npz
    u = Table.load(p1)
    assert u.axis_names == t.axis_names and u.grid_shape == t.grid_shape
    assert [a.spacing for a in u.axes] == ["log", "linear", "log"]
    for n, v in t.quantities.items():
        assert u.quantities[n].dtype == np.float32
        assert np.array_equal(u.quantities[n], v)
    assert u.manifest == {"note": "synthetic"} and u.build_stats == {"wall_s": 1.0}
    assert np.array_equal(u.bands.centre_nm, t.bands.centre_nm)
    doc = json.loads((tmp_path / "a.json").read_text())
    assert doc["format_version"] == 1 and len(doc["npz_sha256"]) == 64


def test_load_detects_truncation_and_tampering(tmp_path):
    p = _table().save(tmp_path / "t.npz")
    data = p.read_bytes()
    p.write_bytes(data[: len(data) // 2])
    with pytest.raises(TableError, match="SHA-256"):
        Table.load(p)
    with pytest.raises(TableError, match="truncated or corrupt"):
        Table.load(p, verify=False)
    with pytest.raises(TableError, match="does not exist"):
        Table.load(tmp_path / "nope.npz")


def test_channel_count_is_checked():
    t = _table()
    with pytest.raises(TableError, match="channels"):
        Table(t.axes, t.bands, {"rgb_albedo_multiple": np.zeros(t.grid_shape + (4,), np.float32)})
