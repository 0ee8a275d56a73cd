"""Baked texels equal the table lookup at the same parameters; strips, UDIM tiles and resampling.

The table is test data (smooth invented functions, see conftest.py); what is tested is that the bake feeds
each texel's decoded parameters through the table's own interpolation, whatever the strip height or tiling.
"""

import numpy as np
import OpenImageIO as oiio
import pytest

from matgen.bake.config import load_config
from matgen.bake.lookup import TexelLookup
from matgen.bake.maps import MapReader, map_info
from matgen.bake.run import plan_bake
from matgen.export.exr import read_exr
from matgen.export.job import bake
from matgen.fit.channels import rgb_weights
from matgen.fit.inversion import albedo_multiple, albedo_single_OpenPBR2024, effective_medium
from matgen.tables.store import Table
from matgen.targets.solve import inversion_g_range


def _read_map(path):
    inp = oiio.ImageInput.open(str(path))
    a = inp.read_image(0, 0, 0, 1, oiio.FLOAT)[..., 0]
    inp.close()
    return a.astype(np.float64)


def _expected_params(root, table, tile=None):
    sfx = "" if tile is None else f".{tile}"
    mel = _read_map(root / "maps" / f"melanin{sfx}.exr")
    eu = _read_map(root / "maps" / f"eumelanin{sfx}.exr")
    blood = _read_map(root / "maps" / f"blood{sfx}.png")
    pts = np.stack(
        [0.005 + mel * (0.45 - 0.005), eu, 0.002 + blood * (0.1 - 0.002), np.full_like(mel, 0.75)], axis=-1
    )
    return pts


def test_baked_texels_equal_table_lookup(tmp_path, kit):
    cfg = kit.make_project(tmp_path / "p", 24, 40, pixel_type="float")
    out = tmp_path / "out"
    res = bake(load_config(cfg), out, rows=7)  # strips of 7 rows: strip edges do not line up with the map
    table = Table.load(tmp_path / "p" / "table.npz")
    pts = _expected_params(tmp_path / "p", table)
    rng = np.random.default_rng(3)
    ys, xs = rng.integers(0, 24, 40), rng.integers(0, 40, 40)
    ref, _ = table.lookup(
        pts[ys, xs],
        [
            "albedo_multiple",
            "mean_free_path_mm",
            "rgb_albedo_multiple",
            "rgb_mean_free_path_mm",
            "rgb_albedo_single",
            "anisotropy",
            "ior",
        ],
    )
    band_idx = [table.bands.index_of(c) for c in (400, 450, 500, 550, 600, 650, 700)]
    pix, chans, attrs = read_exr(out / "spectral" / "albedo_multiple.exr")
    order = [chans.index(f"T.{c},000000nm") for c in (400, 450, 500, 550, 600, 650, 700)]
    np.testing.assert_array_equal(pix[ys, xs][:, order], ref["albedo_multiple"][:, band_idx])
    pix, chans, _ = read_exr(out / "spectral" / "mean_free_path_mm.exr")
    order = [chans.index(f"T.{c},000000nm") for c in (400, 450, 500, 550, 600, 650, 700)]
    np.testing.assert_array_equal(pix[ys, xs][:, order], ref["mean_free_path_mm"][:, band_idx])
    pix, chans, _ = read_exr(out / "rgb" / "albedo_multiple.exr")
    assert chans == ("R", "G", "B")
    np.testing.assert_array_equal(pix[ys, xs], ref["rgb_albedo_multiple"])
    # OpenPBR maps, read back through the consumer's remap: each channel's alpha is the exact inversion of
    # the texel's interpolated A at the one g written, and radius x scale is the mean free path l = (l/d) d
    maps = {
        k: read_exr(out / "openpbr" / f"{k}.exr")[0][ys, xs].astype(np.float64)
        for k in (
            "subsurface_color",
            "subsurface_radius",
            "subsurface_radius_scale",
            "subsurface_scatter_anisotropy",
        )
    }
    _check_openpbr_texels(table, pts[ys, xs], maps)
    assert res.table_clamped == 0 and res.texels == 40 * 24


def _channel_g(table, pts):
    """Channel g, built independently: sum_b |W_cb| A_b g_b and sum_b |W_cb| A_b formed on the table's
    grid, interpolated by the table's own lookup (an auxiliary Table holding just those two), divided."""
    a = table.quantities["albedo_multiple"].astype(np.float64)
    g = table.quantities["anisotropy"].astype(np.float64)
    w = np.abs(rgb_weights(table.bands, table.working_space, table.illuminant))
    aux = Table(
        axes=table.axes,
        bands=table.bands,
        quantities={"num": ((a * g) @ w.T).astype(np.float32), "den": (a @ w.T).astype(np.float32)},
        working_space=table.working_space,
        illuminant=table.illuminant,
        manifest={"name": "aux"},
    )
    r, _ = aux.lookup(np.asarray(pts, dtype=np.float64), ["num", "den"])
    return r["num"].astype(np.float64) / r["den"]


def _check_openpbr_texels(table, pts, maps, a_tol=5e-5):
    """a_tol: the per-texel grid inversion's bound through the forward model (tests/targets/test_solve.py)."""
    ref, _ = table.lookup(pts, ["rgb_albedo_multiple", "rgb_shape_distance_mm", "ior"])
    a = ref["rgb_albedo_multiple"].astype(np.float64)
    d = ref["rgb_shape_distance_mm"].astype(np.float64)
    n = float(ref["ior"][0, 0])
    lo, hi = inversion_g_range()
    g = np.clip(_channel_g(table, pts).mean(axis=1), lo, hi)  # g as far as the inversion covers it
    g_file = maps["subsurface_scatter_anisotropy"][:, 0]
    np.testing.assert_allclose(g_file, g, rtol=1e-6)
    gg = np.repeat(g_file[:, None], 3, axis=1)
    # OpenPBR's remap of the stored colour, then the half-space forward model: the skin's A comes back
    alpha = albedo_single_OpenPBR2024(maps["subsurface_color"], gg)
    np.testing.assert_allclose(albedo_multiple(alpha, gg, n), a, rtol=a_tol)
    med = effective_medium(a, d, gg, n)
    mfp_cm = maps["subsurface_radius"] * maps["subsurface_radius_scale"]
    np.testing.assert_allclose(mfp_cm * 10.0, med["mean_free_path_mm"], rtol=1e-5)


def test_openpbr_at_grid_nodes_reproduces_each_nodes_reflectance(tmp_path, kit):
    """At texels on the table's grid nodes, the OpenPBR maps read back through the specification's remap
    and the boundary-aware forward model return the node's own RGB A, with g varying from node to node."""
    table = kit.make_test_table()
    mel_nodes, eu_nodes, blood_nodes = (table.axes[i].values for i in range(3))
    cfg = kit.make_project(tmp_path / "p", len(blood_nodes), len(mel_nodes), pixel_type="float")
    cfg.write_text(cfg.read_text().replace("maps/blood.png", "maps/blood.exr"))
    ix, iy = np.meshgrid(np.arange(len(mel_nodes)), np.arange(len(blood_nodes)))
    ie = (ix + iy) % len(eu_nodes)  # every eumelanin node appears
    maps = tmp_path / "p" / "maps"
    kit.write_map(maps / "melanin.exr", (mel_nodes[ix] - 0.005) / (0.45 - 0.005))
    kit.write_map(maps / "eumelanin.exr", eu_nodes[ie])
    kit.write_map(maps / "blood.exr", (blood_nodes[iy] - 0.002) / (0.1 - 0.002))
    out = tmp_path / "out"
    bake(load_config(cfg), out, table=table)
    names = (
        "subsurface_color",
        "subsurface_radius",
        "subsurface_radius_scale",
        "subsurface_scatter_anisotropy",
    )
    maps = {
        k: read_exr(out / "openpbr" / f"{k}.exr")[0].reshape(ix.size, -1).astype(np.float64) for k in names
    }
    i_s = float(table.axes[3].values[1])
    pts = np.column_stack(
        [mel_nodes[ix].ravel(), eu_nodes[ie].ravel(), blood_nodes[iy].ravel(), np.full(ix.size, i_s)]
    )
    _check_openpbr_texels(table, pts, maps)
    assert np.ptp(maps["subsurface_scatter_anisotropy"]) > 0.05  # g differs from node to node


def test_half_float_output_within_half_precision(tmp_path, kit):
    cfg = kit.make_project(tmp_path / "p", 16, 16, pixel_type="half")
    bake(load_config(cfg), tmp_path / "out")
    table = Table.load(tmp_path / "p" / "table.npz")
    pts = _expected_params(tmp_path / "p", table).reshape(-1, 4)
    ref, _ = table.lookup(pts, ["rgb_albedo_multiple"])
    pix, _, _ = read_exr(tmp_path / "out" / "rgb" / "albedo_multiple.exr")
    # half has an 11-bit significand: relative rounding error <= 2**-11
    np.testing.assert_allclose(pix.reshape(-1, 3), ref["rgb_albedo_multiple"], rtol=2.0**-11, atol=0)


def test_texel_lookup_kernel_and_python_twin_agree(test_table):
    rng = np.random.default_rng(0)
    pts = np.column_stack(
        [
            rng.uniform(0.001, 0.6, 50),
            rng.uniform(-0.1, 1.1, 50),
            rng.uniform(0.001, 0.2, 50),
            rng.uniform(0.4, 1.0, 50),
        ]
    )
    req = {"albedo_multiple": np.array([10, 25]), "rgb_fit_residual": None}
    a, ca = TexelLookup(test_table, req)(pts)
    b, cb = TexelLookup(test_table, req, backend="python")(pts)
    np.testing.assert_array_equal(ca, cb)
    for k in a:
        np.testing.assert_allclose(a[k], b[k], rtol=1e-6)
    ref, n = test_table.lookup(pts, ["albedo_multiple"])
    np.testing.assert_array_equal(a["albedo_multiple"], ref["albedo_multiple"][:, [10, 25]])
    assert int(ca.sum()) == n > 0


def test_udim_tiles_bake_alone_and_together_identically(tmp_path, kit):
    cfg = kit.make_project(tmp_path / "p", 16, 12, tiles=[1001, 1002, 1011])
    config = load_config(cfg)
    whole = bake(config, tmp_path / "whole")
    assert (tmp_path / "whole" / "material.mtlx").is_file()
    for t in (1001, 1002, 1011):
        r = bake(config, tmp_path / "farm", tile=t)
        assert r.files[-1] == f"material.{t}.json"
    for rel in whole.files:
        if not rel.endswith(".exr"):
            continue
        a, ca, _ = read_exr(tmp_path / "whole" / rel)
        b, cb, _ = read_exr(tmp_path / "farm" / rel)
        assert ca == cb
        np.testing.assert_array_equal(a, b)
        assert (tmp_path / "whole" / rel).read_bytes() == (tmp_path / "farm" / rel).read_bytes()
    # tiles differ from each other (different seeded maps), so the comparison above is not vacuous
    a, _, _ = read_exr(tmp_path / "whole" / "rgb" / "albedo_multiple.1001.exr")
    b, _, _ = read_exr(tmp_path / "whole" / "rgb" / "albedo_multiple.1002.exr")
    assert not np.array_equal(a, b)


def test_udim_tile_not_in_set_refused(tmp_path, kit):
    cfg = kit.make_project(tmp_path / "p", 8, 8, tiles=[1001, 1002])
    with pytest.raises(Exception, match="1005"):
        bake(load_config(cfg), tmp_path / "out", tile=1005)


def test_bilinear_resample_reader(tmp_path, kit):
    src = np.arange(4 * 6, dtype=np.float32).reshape(4, 6) / 24.0
    kit.write_map(tmp_path / "m.exr", src)
    info = map_info(tmp_path / "m.exr")
    with MapReader(info, 0, (12, 8)) as r:
        up = np.concatenate([r.read_rows(0, 3), r.read_rows(3, 8)])
    # bilinear upsampling by 2 of a function linear in x and y reproduces it at the new texel centres
    yy, xx = np.mgrid[0:8, 0:12]
    sy = np.clip((yy + 0.5) / 2 - 0.5, 0, 3)
    sx = np.clip((xx + 0.5) / 2 - 0.5, 0, 5)
    np.testing.assert_allclose(up, (sy * 6 + sx) / 24.0, atol=1e-6)
    with MapReader(info, 0) as r:
        np.testing.assert_array_equal(r.read_rows(1, 3), src[1:3])


def test_resolution_mismatch_error_or_resample(tmp_path, kit):
    cfg = kit.make_project(tmp_path / "p", 16, 16)
    mel, _, _ = (np.full((8, 8), 0.5, np.float32),) * 3
    kit.write_map(tmp_path / "p" / "maps" / "melanin.exr", mel)
    with pytest.raises(Exception, match=r"8 x 8.*16 x 16|resample"):
        plan_bake(load_config(cfg), kit.make_test_table())
    text = cfg.read_text().replace("passes = []", "passes = []\n") + '\n[input]\nresample = "bilinear"\n'
    cfg.write_text(text)
    res = bake(load_config(cfg), tmp_path / "out")
    assert res.texels == 256
