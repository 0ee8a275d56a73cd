"""summarize(): the fixed table quantities from band tallies, on synthetic normalised-diffusion profiles."""

import json

import numpy as np
import pytest

from matgen.cli import main
from matgen.color import channel_weights
from matgen.errors import FitError, ParameterError
from matgen.fit.channels import channel_profiles
from matgen.fit.diffusion import fit_burley2015
from matgen.fit.models import burley2015_rings
from matgen.fit.summary import TABLE_QUANTITIES, summarize
from matgen.spectra.bands import BandSet
from matgen.transport.results import Estimate, TransportResult

EDGES = np.concatenate(([0.0], np.logspace(-3.0, 2.0, 51)))
BANDS = BandSet.regular(380.0, 780.0, 20.0)


def _inputs(n=3, seed=0):
    rng = np.random.default_rng(seed)
    nb = len(BANDS)
    a = np.clip(0.1 + 0.5 * (BANDS.centre_nm - 380) / 400 + 0.05 * rng.standard_normal((n, nb)), 0.05, 0.9)
    d = 0.05 + 1.5 * ((BANDS.centre_nm - 380) / 400) ** 2 * rng.uniform(0.8, 1.2, (n, 1))
    y = burley2015_rings(EDGES, a, d)
    s = 0.01 * y
    return a, 1e-3 * a, y, s, d


def test_keys_shapes_and_band_values():
    a, a_err, y, s, d = _inputs()
    q = summarize(BANDS, EDGES, a, a_err, y, s, np.full(len(BANDS), 0.8), 1.4, inversion="OpenPBR2024")
    assert set(q) == set(TABLE_QUANTITIES)
    for k, c in TABLE_QUANTITIES.items():
        assert q[k].shape == (3, len(BANDS) if c == "B" else c), k
    np.testing.assert_allclose(q["shape_distance_mm"], d, rtol=1e-6)
    np.testing.assert_allclose(q["albedo_multiple"], a)
    assert np.all(q["fit_residual"] < 1e-6)
    assert np.all(q["ior"] == 1.4)
    assert np.all((q["albedo_single"] > 0) & (q["albedo_single"] < 1))


def test_rgb_from_spectral_A_and_channel_profile_fit():
    """RGB colour = ACEScg weights @ spectral A; RGB radius = fit of the channel-weighted profile (not an
    average of band radii): checked by refitting the weighted profile independently."""
    a, a_err, y, s, _ = _inputs(n=2, seed=4)
    q = summarize(BANDS, EDGES, a, a_err, y, s, 0.0, 1.0, inversion="ChiangKutzBurley2016")
    w = channel_weights(BANDS, "ACEScg", "D65")
    np.testing.assert_allclose(q["rgb_albedo_multiple"], a @ w.T, rtol=1e-12)
    prof, err, _ = channel_profiles(w, y, s)
    ref = fit_burley2015(EDGES, prof.reshape(6, -1), err.reshape(6, -1), (a @ w.T).reshape(-1))
    np.testing.assert_allclose(q["rgb_shape_distance_mm"].reshape(-1), ref["shape_distance_mm"], rtol=1e-9)
    band_mean = (q["shape_distance_mm"] @ np.abs(w.T)) / np.abs(w).sum(axis=1)
    assert not np.allclose(q["rgb_shape_distance_mm"], band_mean, rtol=1e-3)


def test_bad_inputs():
    a, a_err, y, s, _ = _inputs(n=1)
    g = np.zeros(len(BANDS))
    with pytest.raises(FitError, match="albedo_multiple"):
        summarize(BANDS, EDGES, a[:, :-1], a_err, y, s, g, 1.4)
    with pytest.raises(ParameterError, match="working space"):
        summarize(BANDS, EDGES, a, a_err, y, s, g, 1.4, working_space="nope", inversion="OpenPBR2024")
    with pytest.raises(ParameterError, match="illuminant"):
        summarize(BANDS, EDGES, a, a_err, y, s, g, 1.4, illuminant="nope", inversion="OpenPBR2024")
    bad = y.copy()
    bad[0, 2, 5] = np.nan
    with pytest.raises(FitError, match="finite"):
        summarize(BANDS, EDGES, a, a_err, bad, s, g, 1.4, inversion="OpenPBR2024")


def _result_dict(a, y, s):
    return TransportResult(
        photons=100000,
        specular_reflectance=Estimate(0.028, 0.0),
        diffuse_reflectance=Estimate(float(a), 1e-3),
        transmittance=Estimate(0.0, 0.0),
        absorbed=np.zeros(1),
        absorbed_stderr=np.zeros(1),
        ring_edges_mm=EDGES,
        radial_reflectance_per_mm2=y,
        radial_stderr_per_mm2=s,
        exit_cos_edges=np.linspace(0, 1, 3),
        exit_angle_per_sr=np.zeros(2),
        exit_angle_stderr_per_sr=np.zeros(2),
        mean_penetration_depth_mm=Estimate(0.0, 0.0),
    ).to_dict()


def test_cli_fit_per_band_json(tmp_path, capsys):
    a, _, y, s, d = _inputs(n=1, seed=2)
    doc = {
        "bands": BANDS.to_dict(),
        "results": [_result_dict(a[0, b], y[0, b], s[0, b]) for b in range(len(BANDS))],
    }
    path = tmp_path / "result.json"
    path.write_text(json.dumps(doc))
    rc = main(
        ["fit", str(path), "--json", "--inversion", "OpenPBR2024", "--anisotropy", "0.8", "--ior", "1.4"]
    )
    assert rc == 0
    out = json.loads(capsys.readouterr().out)
    assert len(out["bands"]) == len(BANDS)
    np.testing.assert_allclose([e["shape_distance_mm"] for e in out["bands"]], d[0], rtol=1e-6)
    assert set(out["targets"]) == {"openpbr", "standard_surface", "spectral_medium", "reflectance_mfp"}
    assert len(out["targets"]["openpbr"]["subsurface_color"]) == 3
    assert "fit_residual" in out["targets"]["openpbr"]


def test_cli_fit_single_band_text_and_errors(tmp_path, capsys):
    a, _, y, s, _ = _inputs(n=1)
    path = tmp_path / "one.json"
    path.write_text(json.dumps(_result_dict(a[0, 3], y[0, 3], s[0, 3])))
    assert main(["fit", str(path), "--inversion", "OpenPBR2024"]) == 0
    text = capsys.readouterr().out
    assert "target spectral_medium" in text and "target openpbr" not in text
    bad = tmp_path / "bad.json"
    bad.write_text("{not json")
    assert main(["fit", str(bad)]) == 2
    assert "not JSON" in capsys.readouterr().err
    noprof = _result_dict(a[0, 3], y[0, 3], s[0, 3])
    del noprof["profile"]
    bad.write_text(json.dumps(noprof))
    assert main(["fit", str(bad)]) == 2
    assert "no radial profile" in capsys.readouterr().err


def test_default_inversion_is_the_shipped_table():
    from matgen.fit.inversion import default_inversion_table, has_default_table
    from matgen.fit.summary import resolve_inversion

    assert has_default_table() and resolve_inversion() == "boundary_table"
    a, a_err, y, s, d = _inputs(n=2, seed=8)
    q = summarize(BANDS, EDGES, a, a_err, y, s, np.full(len(BANDS), 0.8), 1.4)
    alpha, scale = default_inversion_table().invert(a, 0.8, 1.4)
    np.testing.assert_allclose(q["albedo_single"], alpha, rtol=1e-12)
    np.testing.assert_allclose(q["mean_free_path_mm"], scale * d, rtol=1e-6)


def test_pass_value_is_weighted_band_albedo():
    from matgen.color import pass_weights
    from matgen.fit.channels import pass_value
    from matgen.spectra.bands import default_bands

    b = default_bands()
    a = np.linspace(0.1, 0.6, len(b))
    v = pass_value("nir850", b, a)
    assert v == pytest.approx(float(pass_weights("nir850", b) @ a))
    assert 0.1 < v < 0.6


def test_simulate_then_fit_end_to_end(tmp_path, capsys):
    """`matgen simulate STACK.json --profile --json` output (three visible bands) read by `matgen fit`."""
    stack = {
        "n_above": 1.0,
        "n_below": 1.4,
        "wavelength_nm": [450.0, 550.0, 650.0],
        "layers": [
            {"name": "bulk", "thickness_mm": 20.0, "n": 1.4, "mu_a": [0.3, 0.1, 0.02], "mu_s": 20.0, "g": 0.8}
        ],
    }
    (tmp_path / "stack.json").write_text(json.dumps(stack))
    assert main(["simulate", str(tmp_path / "stack.json"), "--photons", "20000", "--profile", "--json"]) == 0
    (tmp_path / "result.json").write_text(capsys.readouterr().out)
    assert main(["fit", str(tmp_path / "result.json"), "--json", "--anisotropy", "0.8", "--ior", "1.4"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert [b["wavelength_nm"] for b in out["bands"]] == [450.0, 550.0, 650.0]
    a = [b["albedo_multiple"] for b in out["bands"]]
    assert a[0] < a[1] < a[2]  # less absorption, more reflectance
    # the effective medium reproduces the stack's own albedo: same mu_a / mu_s, g and n as the table node
    alpha_true = 20.0 / (20.0 + np.array([0.3, 0.1, 0.02]))
    np.testing.assert_allclose([b["albedo_single"] for b in out["bands"]], alpha_true, atol=0.01)
    assert "openpbr" in out["targets"]


def test_fit_takes_the_effective_g_and_n_from_the_stack_and_reports_passes(tmp_path, capsys):
    """Without --anisotropy / --ior, `matgen fit` uses the stack that `matgen simulate --json` writes beside
    each result: n of the first layer, and g as the scattering-weighted mean layer g (a single homogeneous
    layer must give back its own g exactly). Passes and the spectral targets' fit residuals are reported."""
    stack = {
        "n_above": 1.0,
        "n_below": 1.4,
        "wavelength_nm": [350.0, 550.0, 850.0],
        "layers": [
            {"name": "top", "thickness_mm": 0.1, "n": 1.45, "mu_a": [2.0, 1.0, 0.3], "mu_s": 30.0, "g": 0.7},
            {
                "name": "bulk",
                "thickness_mm": 20.0,
                "n": 1.45,
                "mu_a": [0.3, 0.1, 0.02],
                "mu_s": 20.0,
                "g": 0.9,
            },
        ],
    }
    (tmp_path / "stack.json").write_text(json.dumps(stack))
    assert main(["simulate", str(tmp_path / "stack.json"), "--photons", "4000", "--profile", "--json"]) == 0
    (tmp_path / "result.json").write_text(capsys.readouterr().out)
    assert main(["fit", str(tmp_path / "result.json"), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["ior"] == 1.45
    g = np.array([b["anisotropy"] for b in out["bands"]])
    assert np.all((g > 0.7) & (g < 0.9))  # strictly between the layers' g: both layers scatter
    # deeper-reaching light (less absorption, longer wavelength) spends more of its path in the g = 0.9 bulk
    assert g[0] < g[1] < g[2]
    for name in ("spectral_medium", "reflectance_mfp"):
        assert len(out["targets"][name]["fit_residual"]) == 3
    assert set(out["passes"]) == {"uv365", "nir850"}  # nir940 lies outside the 845-855 nm band
    assert out["passes"]["nir850"]["value"] == pytest.approx(out["bands"][2]["albedo_multiple"], rel=1e-12)
    # explicit options win over the stack
    assert main(["fit", str(tmp_path / "result.json"), "--json", "--anisotropy", "0.5", "--ior", "1.3"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["ior"] == 1.3 and all(b["anisotropy"] == 0.5 for b in out["bands"])


def test_effective_anisotropy_of_one_layer_and_of_equal_paths():
    from matgen.fit.layered import effective_anisotropy, layer_path_lengths_mm

    path = layer_path_lengths_mm([0.5, 0.0], [0.1, 0.2], [1.0, 3.0])
    np.testing.assert_allclose(path, [0.2, 3.0])  # absorbed / mu_a; thickness where mu_a = 0
    assert effective_anisotropy([0.8], [10.0], [[0.4]])[0] == pytest.approx(0.8)
    # equal scattering events in both layers: the plain mean
    assert effective_anisotropy([0.6, 0.9], [10.0, 20.0], [2.0, 1.0]) == pytest.approx(0.75)
    # no light scattered anywhere: the plain mean of g, not a division by zero
    assert effective_anisotropy([0.6, 0.9], [0.0, 0.0], [1.0, 1.0]) == pytest.approx(0.75)


def test_fit_refuses_unknown_working_space_without_visible_bands(tmp_path, capsys):
    """An unknown working space is an error even when no band reaches the visible (it used to be ignored)."""
    stack = {
        "n_above": 1.0,
        "n_below": 1.0,
        "wavelength_nm": [900.0],
        "layers": [{"thickness_mm": 5.0, "n": 1.0, "mu_a": [0.05], "mu_s": 10.0, "g": 0.0}],
    }
    (tmp_path / "stack.json").write_text(json.dumps(stack))
    assert main(["simulate", str(tmp_path / "stack.json"), "--photons", "2000", "--profile", "--json"]) == 0
    (tmp_path / "result.json").write_text(capsys.readouterr().out)
    assert main(["fit", str(tmp_path / "result.json"), "--working-space", "no-such-space"]) == 2
    assert "no-such-space" in capsys.readouterr().err
