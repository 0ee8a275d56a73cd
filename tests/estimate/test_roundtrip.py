"""Round trip and recovery on synthetic ground truth: pigment maps -> bake -> albedo (+ noise) -> estimate.

Ground truth and noise model: see ``conftest.py`` (seeded random pigment maps, baked with the shipped
default table by matgen's own bake; capture-like noise 0.2 % relative + 0.0002 absolute per channel).
The re-bake of the estimate goes through ``matgen bake`` on the written ``material.toml`` as it is, and the
colours are compared in CIEDE2000 by colour-science 0.4.7 (``delta_E(method="CIE 2000")``) in CIELAB
relative to the ACEScg white, the table's working space (D65 illuminant).
"""

import numpy as np
import pytest

from matgen.cli import main

SIZE = 48
HELD = {"eumelanin_share": 0.55, "oxygen_saturation": 0.8}


def _lab(rgb):
    import colour

    cs = colour.RGB_COLOURSPACES["ACEScg"]
    return colour.XYZ_to_Lab(
        np.asarray(rgb, dtype=float).reshape(-1, 3) @ cs.matrix_RGB_to_XYZ.T, cs.whitepoint
    )


def _de(a, b):
    import colour

    return colour.delta_E(_lab(a), _lab(b), method="CIE 2000")


@pytest.fixture(scope="module")
def truth(tmp_path_factory, ekit):
    """Melanin 0.006-0.35 and blood 0.003-0.12 (log-uniform), eumelanin share and saturation constant."""
    rng = np.random.default_rng(21)
    folder = tmp_path_factory.mktemp("truth")
    maps = {
        "melanin_fraction": ekit.log_uniform(rng, 0.006, 0.35, (SIZE, SIZE)),
        "blood_fraction": ekit.log_uniform(rng, 0.003, 0.12, (SIZE, SIZE)),
    }
    out = ekit.bake_truth(folder, maps, HELD)
    return folder, maps, out


def _estimate(folder, albedo, *extra):
    out = folder / "est"
    args = ["estimate", str(albedo), "--colour-space", "acescg", "--out", str(out), "--quiet", *extra]
    assert main(args) == 0
    return out


def _rebake(folder, est):
    assert main(["bake", str(est / "material.toml"), "--out", str(folder / "rebake"), "--quiet"]) == 0
    return folder / "rebake" / "rgb" / "albedo_multiple.exr"


def _fix_args(held):
    return [a for k, v in held.items() for a in ("--fix", f"{k}={v}")]


def test_round_trip_noise_free(truth, ekit, tmp_path):
    """bake(estimate(albedo)) reproduces the albedo: CIEDE2000 median <= 0.5, p95 <= 1.0 (all in gamut)."""
    _, _, baked = truth
    albedo = ekit.read(baked / "rgb" / "albedo_multiple.exr")
    est = _estimate(tmp_path, baked / "rgb" / "albedo_multiple.exr", *_fix_args(HELD))
    again = ekit.read(_rebake(tmp_path, est))
    de = _de(albedo, again)
    assert np.median(de) <= 0.5 and np.percentile(de, 95) <= 1.0
    # the re-bake writes half floats: what remains is their rounding, far below the requirement
    assert np.percentile(de, 95) < 0.1, np.percentile(de, [50, 95, 100])
    flags = ekit.read(est / "qa" / "out_of_gamut.exr")
    assert flags.sum() == 0


def test_round_trip_with_capture_noise(truth, ekit, tmp_path):
    """Noisy albedo in; on texels the estimate calls in gamut, the re-bake is within the requirement."""
    _, _, baked = truth
    rng = np.random.default_rng(22)
    albedo = ekit.noisy(ekit.read(baked / "rgb" / "albedo_multiple.exr"), rng)
    path = tmp_path / "scan.exr"
    ekit.write_image(path, albedo)
    est = _estimate(tmp_path, path, *_fix_args(HELD))
    again = ekit.read(_rebake(tmp_path, est))
    inside = ekit.read(est / "qa" / "out_of_gamut.exr").reshape(-1) == 0
    assert inside.mean() > 0.95  # noise of this size leaves almost every texel in gamut
    de = _de(albedo, again)[inside]
    assert np.median(de) <= 0.5 and np.percentile(de, 95) <= 1.0, np.percentile(de, [50, 95])
    # the residual map says what the re-bake shows (the re-bake adds only half-float rounding)
    res = ekit.read(est / "qa" / "residual_de2000.exr").reshape(-1)[inside]
    assert np.max(np.abs(res - de)) < 0.1


@pytest.fixture(scope="module")
def grid_truth(tmp_path_factory, ekit):
    """Blocks of constant pigments (12 x 12 texels each) so that errors can be read per pigment pair."""
    mel = np.array([0.01, 0.03, 0.06, 0.1, 0.3])
    blood = np.array([0.003, 0.01, 0.03, 0.08])
    block = 12
    m = np.repeat(np.repeat(mel[:, None] * np.ones((1, blood.size)), block, 0), block, 1)
    b = np.repeat(np.repeat(np.ones((mel.size, 1)) * blood[None, :], block, 0), block, 1)
    folder = tmp_path_factory.mktemp("grid")
    out = ekit.bake_truth(folder, {"melanin_fraction": m, "blood_fraction": b}, HELD)
    return folder, m, b, out


def _blockwise_p95(err, shape, block=12):
    h, w = shape
    e = (
        err.reshape(h // block, block, w // block, block)
        .transpose(0, 2, 1, 3)
        .reshape(h // block, w // block, -1)
    )
    return np.percentile(e, 95, axis=2)


def test_recovery_within_five_percent_where_identifiable(grid_truth, ekit, tmp_path):
    """Melanin and blood within 5 % relative (95 % of the texels of each block) where colour identifies them.

    Measured with the noise model of conftest.py, eumelanin share and saturation held at their true values
    (p95 relative error per block, melanin rows 0.01/0.03/0.06/0.1/0.3 x blood columns 0.003/0.01/0.03/0.08):

    * melanin is identifiable from 0.03 up, whatever the blood (p95 1.2-4.3 %); at 0.01 it is not (6.6-7.5 %);
    * blood is identifiable at 0.03-0.08 under melanin up to 0.1 (p95 2.3-4.6 %); at 0.01 it is borderline
      (4.7-6.1 %, not claimed); at 0.003 it is not (13-23 %: it changes the colour less than the noise);
      under melanin 0.3 it is not (8.5-11.8 %: the epidermis hides the dermis).

    The test asserts both sides, so a change that made the hidden cases look recoverable would be noticed.
    """
    _, m, b, baked = grid_truth
    rng = np.random.default_rng(23)
    albedo = ekit.noisy(ekit.read(baked / "rgb" / "albedo_multiple.exr"), rng)
    path = tmp_path / "scan.exr"
    ekit.write_image(path, albedo)
    est = _estimate(tmp_path, path, *_fix_args(HELD))
    em = np.abs(ekit.read(est / "maps" / "melanin_fraction.exr")[..., 0] / m - 1)
    eb = np.abs(ekit.read(est / "maps" / "blood_fraction.exr")[..., 0] / b - 1)
    pm, pb = _blockwise_p95(em, m.shape), _blockwise_p95(eb, b.shape)
    print("p95 melanin\n", np.round(pm, 3), "\np95 blood\n", np.round(pb, 3))
    assert np.all(pm[1:, :] <= 0.05), pm
    assert np.all(pb[:4, 2:] <= 0.05), pb
    assert np.all(pm[0, :] > 0.05)  # melanin 0.01
    assert np.all(pb[:, 0] > 0.10)  # blood 0.003
    assert np.all(pb[4, :] > 0.05)  # blood under melanin 0.3


def test_captures_make_all_four_axes_estimable(tmp_path_factory, ekit, table):
    """RGB + 365 nm + 850 nm captures (built-in responses, as the pass maps) fix all four table axes.

    Measured effect on the same noisy albedo: with eumelanin share and saturation varying per texel but held
    at one value, melanin and blood errors are several times larger than when the captures let all four
    axes be estimated.
    """
    rng = np.random.default_rng(24)
    n = 32
    maps = {
        "melanin_fraction": ekit.log_uniform(rng, 0.03, 0.15, (n, n)),
        "eumelanin_share": rng.uniform(0.2, 0.9, (n, n)),
        "blood_fraction": ekit.log_uniform(rng, 0.01, 0.05, (n, n)),
        "oxygen_saturation": rng.uniform(0.5, 0.95, (n, n)),
    }
    folder = tmp_path_factory.mktemp("four")
    baked = ekit.bake_truth(folder, maps, {})
    files = {}
    for name, rel in (
        ("albedo", "rgb/albedo_multiple.exr"),
        ("uv365", "passes/uv365.exr"),
        ("nir850", "passes/nir850.exr"),
    ):
        path = folder / f"scan_{name}.exr"
        ekit.write_image(path, ekit.noisy(ekit.read(baked / rel), rng))
        files[name] = path
    held = _estimate(
        folder / "held", files["albedo"], "--fix", "eumelanin_share=0.55", "--fix", "oxygen_saturation=0.725"
    )
    four = _estimate(
        folder / "four",
        files["albedo"],
        "--estimate",
        ",".join(maps),
        "--capture",
        f"uv365={files['uv365']}",
        "--capture",
        f"nir850={files['nir850']}",
    )

    def p95(est, axis, relative=True):
        got = ekit.read(est / "maps" / f"{axis}.exr")[..., 0]
        err = np.abs(got / maps[axis] - 1) if relative else np.abs(got - maps[axis])
        return np.percentile(err, 95)

    for axis in maps:
        rel = axis in ("melanin_fraction", "blood_fraction")
        print(
            axis,
            "held" if rel else "",
            round(p95(held, axis), 4) if rel else "",
            "four",
            round(p95(four, axis, rel), 4),
        )
    for axis in ("melanin_fraction", "blood_fraction"):
        assert p95(four, axis) <= 0.05
        assert p95(held, axis) > 2 * p95(four, axis)
    assert p95(four, "eumelanin_share", relative=False) <= 0.06
    assert p95(four, "oxygen_saturation", relative=False) <= 0.06
