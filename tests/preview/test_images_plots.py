"""Preview images exist, have the expected size and are not blank; the view transform and the built-in
patch approximation hold to their definitions."""

import numpy as np
import pytest

from matgen.errors import ParameterError
from matgen.preview import images, plots, render
from matgen.spectra.bands import BandSet


def _check(path, width, height):
    info = images.image_check(path)
    assert (info["width"], info["height"]) == (width, height)
    assert not info["blank"], info
    return info


def test_view_transform_white_and_grey():
    """ACEScg white maps to display white (Bradford adaptation ACES white -> D65); 18 % grey encodes as
    1.055 * 0.18^(1/2.4) - 0.055 = 0.46135 (IEC 61966-2-1 sRGB encoding)."""
    out = images.working_to_display(np.array([[1.0, 1.0, 1.0], [0.18, 0.18, 0.18]]), "ACEScg")
    assert out[0] == pytest.approx([1.0, 1.0, 1.0], abs=2e-3)
    assert out[1] == pytest.approx([1.055 * 0.18 ** (1 / 2.4) - 0.055] * 3, abs=2e-3)


def test_view_transform_is_not_the_identity_and_clips():
    """A saturated ACEScg green lies outside sRGB: the view changes it (so raw values were not shown) and
    keeps it inside the display range."""
    raw = np.array([0.0, 0.8, 0.0])
    out = images.working_to_display(raw, "ACEScg")
    assert np.all((out >= 0) & (out <= 1))
    assert out[0] == 0.0 and out[2] == 0.0 or abs(out[1] - 0.8) > 0.05
    with pytest.raises(ParameterError, match="working space"):
        images.working_to_display(raw, "no-such-space")


def test_reflectance_spectra_plot(tmp_path):
    bands = BandSet.regular(300, 1000, 10)
    x = bands.centre_nm
    path = plots.plot_reflectance_spectra(
        tmp_path / "s.png", bands, {"a": 0.5 * x / 1000, "b": 0.1 + 0 * x}, {"a": 0.01 + 0 * x}
    )
    _check(path, 900, 500)
    with pytest.raises(ParameterError, match="bands"):
        plots.plot_reflectance_spectra(tmp_path / "t.png", bands, {"a": x[:5]})


def test_radial_profile_plot_from_transport(tmp_path):
    """Profiles of matgen's own transport (a homogeneous slab, 20k photons) with the fitted model."""
    from matgen.fit.diffusion import fit_burley2015_result
    from matgen.fit.models import burley2015_rings
    from matgen.transport.simulate import simulate
    from matgen.transport.stack import Stack

    res = simulate(Stack([2.0], [1.4], [0.05], [10.0], [0.8]), 20000, seed=1)
    fit = fit_burley2015_result(res)
    d = float(np.asarray(fit["shape_distance_mm"]).reshape(-1)[0])
    model = burley2015_rings(res.ring_edges_mm, res.diffuse_reflectance.value, d)
    path = plots.plot_radial_profiles(
        tmp_path / "p.png",
        res.ring_edges_mm,
        {"550 nm": res.radial_reflectance_per_mm2},
        {"550 nm": res.radial_stderr_per_mm2},
        {"550 nm": ("fit", model)},
    )
    _check(path, 900, 550)


def test_table_slice_heat_map(tmp_path, test_table):
    path = plots.plot_table_slice(
        tmp_path / "h.png",
        test_table,
        "albedo_multiple",
        "melanin_fraction",
        "blood_fraction",
        band_nm=550.0,
        samples=32,
    )
    _check(path, 700, 560)
    with pytest.raises(ParameterError, match="axis"):
        plots.plot_table_slice(tmp_path / "x.png", test_table, "albedo_multiple", "nope", "blood_fraction")


def test_contact_sheet_of_a_bake(tmp_path, baked_material):
    """The sheet holds the sRGB view of the ACEScg albedo, the UV and IR passes, radius maps and QA maps."""
    from matgen.export.descriptor import load_descriptor
    from matgen.preview.report import material_panels

    doc = load_descriptor(baked_material)
    panels = material_panels(baked_material, doc)
    titles = [p["title"] for p in panels]
    assert any("sRGB view" in t for t in titles)
    assert any("uv365" in t for t in titles) and any("nir850" in t for t in titles)
    assert any("mean free path" in t for t in titles) and any(p.get("unit") == "mm" for p in panels)
    path = plots.plot_contact_sheet(tmp_path / "c.png", panels, columns=3, panel_px=300)
    rows = (len(panels) + 2) // 3
    _check(path, 900, rows * 340)


def _medium(bands, a=0.5, d=0.5):
    b = len(bands)
    return render.PatchMedium(
        bands,
        np.full(b, a),
        np.full(b, d),
        np.full(b, 0.9),
        np.full(b, 0.3),
        np.full(b, 0.8),
        1.4,
        "grey test medium",
    )


def test_builtin_patch_conserves_energy():
    """The convolution conserves energy: exitant sum / incident sum = A when the profile fits in the field
    (the normalised-diffusion profile integrates to A, Christensen & Burley 2015; the kernel is normalised to
    its exact cumulative fraction, the FFT convolution and crop must not lose or add light). d = 0.05 and
    0.4 mm, field 12 mm, light 0.5 mm high: light scattered out of the field stays below 2 %."""
    bands = BandSet.parse("550")
    n = 129
    c = (np.arange(n) - (n - 1) / 2.0) * 12.0 / n
    light = render.light_irradiance(np.hypot(c[None, :], c[:, None]), 0.5)
    for d in (0.05, 0.4):
        imgs = render.builtin_band_images(
            _medium(bands, a=0.42, d=d), field_mm=12.0, pixels=n, light_height_mm=0.5
        )
        assert imgs[0].sum() / light.sum() == pytest.approx(0.42, rel=0.02)
        # and the light spreads: the lit centre loses to its surroundings as d grows
        assert imgs[0][n // 2, n // 2] < 0.42 * light[n // 2, n // 2]


def test_builtin_patch_preview(tmp_path):
    bands = BandSet.regular(300, 1000, 20, 10)
    path, used = render.patch_preview(tmp_path / "patch.png", _medium(bands), method="builtin", pixels=64)
    assert used == "builtin"
    _check(path, 840, 320)


def test_patch_preview_leaves_out_uncovered_passes(tmp_path):
    bands = BandSet.parse("450,550,650")
    path, used = render.patch_preview(tmp_path / "patch.png", _medium(bands), method="builtin", pixels=32)
    _check(path, 280, 320)  # only the visible panel


def test_tracer_patch_preview(tmp_path):
    """The path-tracer preview renders (Mitsuba 3, small film and few samples) and is not blank."""
    pytest.importorskip("mitsuba")
    bands = BandSet.regular(300, 1000, 20, 10)
    path, used = render.patch_preview(
        tmp_path / "patch.png", _medium(bands, d=0.3), method="tracer", pixels=32, spp=4
    )
    assert used == "tracer"
    _check(path, 840, 320)
