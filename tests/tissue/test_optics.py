"""The layered skin optics model: layout, transport hand-off, composition, pigment independence of
scattering."""

import dataclasses

import numpy as np
import pytest

from matgen.errors import BandError, ParameterError
from matgen.spectra import chromophores as ch
from matgen.spectra.bands import BandSet, default_bands
from matgen.tissue.layers import LAYER_NAMES
from matgen.tissue.optics import PLASMA_FRACTION, absorption_batch, skin_optics
from matgen.tissue.parameters import FIELD_SPECS, PIGMENT_FIELDS, SkinParameters
from matgen.tissue.presets import preset
from matgen.transport.stack import Stack

BANDS = default_bands()


def test_layout_and_stack_handoff():
    o = skin_optics(preset("cheek"), BANDS)
    L, B = len(LAYER_NAMES), len(BANDS)
    assert (
        o.layer_names
        == LAYER_NAMES
        == ("stratum_corneum", "epidermis", "papillary_dermis", "reticular_dermis", "hypodermis", "muscle")
    )
    # the five skin layers take the parameters' thicknesses; the deep muscle layer closes the stack, index
    # matched below it so that nothing is reflected back from a clear sink
    assert tuple(o.thickness_mm[:5]) == preset("cheek").thicknesses_mm()
    assert o.thickness_mm[5] == 20.0 and o.n_below == o.n[5, 0] == 1.37
    for arr in (o.n, o.mu_a, o.mu_s, o.g):
        assert arr.shape == (L, B) and np.all(np.isfinite(arr))
    assert o.thickness_mm.shape == (L,) and o.n_above == 1.0 and o.n_below > 1.0
    assert np.all(o.mu_a > 0) and np.all(o.mu_s > 0)
    for b in range(B):
        s = Stack(**o.band(b))
        assert s.n_layers == L and np.isfinite(s.total_thickness_mm)
    with pytest.raises(BandError):
        o.band(B)


def test_to_dict_layout():
    o = skin_optics(SkinParameters(), BandSet.parse("450,550,650"))
    d = o.to_dict()
    assert d["wavelength_nm"] == [450.0, 550.0, 650.0]
    assert d["packaging"] == "on"
    assert [layer["name"] for layer in d["layers"]] == list(LAYER_NAMES)
    for layer in d["layers"]:
        assert set(layer) >= {"name", "thickness_mm", "mu_a", "mu_s", "g", "n"}
        assert all(len(layer[k]) == 3 for k in ("mu_a", "mu_s", "g", "n"))


@pytest.mark.parametrize("field", PIGMENT_FIELDS)
def test_scattering_does_not_depend_on_pigments(field):
    """Agreed interface: mu_s, g, n and thickness depend on layer identity and thickness fields only."""
    base = SkinParameters(
        dermis_water_fraction=0.5, epidermis_water_fraction=0.5, hypodermis_lipid_fraction=0.6
    )
    spec = FIELD_SPECS[field]
    other = base.replace(**{field: spec.low + 0.37 * (spec.high - spec.low) * 0.5})
    a, b = skin_optics(base, BANDS), skin_optics(other, BANDS)
    for name in ("mu_s", "g", "n", "thickness_mm"):
        assert np.array_equal(getattr(a, name), getattr(b, name)), f"{name} changed with {field}"


def test_batch_equals_one_by_one():
    sets = [preset(n) for n in ("cheek", "palm")] + [
        SkinParameters(melanin_fraction=0.3, eumelanin_share=0.2)
    ]
    batch = absorption_batch(sets, BANDS, packaging="on")
    assert batch.shape == (3, 6, len(BANDS))
    assert np.array_equal(batch[0, 5], batch[2, 5])  # muscle: one fixed composition
    for k, p in enumerate(sets):
        assert np.array_equal(batch[k], skin_optics(p, BANDS).mu_a)
    with pytest.raises(ParameterError):
        absorption_batch([], BANDS)


def test_composition_without_packaging_matches_literal_sum():
    """With packaging off, each layer's mu_a is the plain volume-weighted chromophore sum (module docstring,
    after Jacques 2013's generic tissue equation), recomputed here from the chromophore functions."""
    p = SkinParameters(
        melanin_fraction=0.1,
        eumelanin_share=0.6,
        blood_fraction=0.05,
        oxygen_saturation=0.6,
        carotene_umol_per_l=2.0,
        bilirubin_umol_per_l=50.0,
        dermis_lipid_fraction=0.05,
    )
    bands = BandSet.regular(400, 900, 50)
    got = skin_optics(p, bands, packaging="off").mu_a
    water, lipid, base = ch.mu_a_water(bands), ch.mu_a_lipid(bands), ch.mu_a_baseline(bands)
    mel = 0.6 * ch.mu_a_eumelanin(bands) + 0.4 * ch.mu_a_pheomelanin(bands)
    car = ch.mu_a_from_molar(ch.extinction_carotene(bands), 2.0)
    blood = ch.mu_a_blood(bands, 0.6) + PLASMA_FRACTION * ch.mu_a_from_molar(
        ch.extinction_bilirubin(bands), 50.0
    )
    sc = 0.2 * water + car + 0.8 * base
    epi = 0.1 * mel + 0.6 * water + car + 0.3 * base
    derm = 0.05 * blood + 0.65 * water + 0.05 * lipid + 0.25 * base
    hyp = 0.01 * blood + 0.15 * water + 0.8 * lipid + 0.04 * base
    # muscle: 4 % blood-equivalent haem at 70 % saturation, 75 % water, 5 % lipid (matgen.constants MUSCLE_*)
    mus = 0.04 * ch.mu_a_blood(bands, 0.7) + 0.75 * water + 0.05 * lipid + 0.16 * base
    assert np.allclose(got, np.stack([sc, epi, derm, derm, hyp, mus]), rtol=1e-12)


def test_packaging_lowers_absorption_where_pigment_is_strong():
    p = SkinParameters(melanin_fraction=0.3, blood_fraction=0.1)
    on = skin_optics(p, BANDS, "on").mu_a
    off = skin_optics(p, BANDS, "off").mu_a
    only_mel = skin_optics(p, BANDS, "melanin").mu_a
    assert np.all(on <= off + 1e-15)
    i = BANDS.index_of(415.0)
    # Soret band of haemoglobin near 415 nm (Prahl 1999 table) in papillary vessels
    assert on[2, i] < 0.9 * off[2, i]
    assert np.array_equal(only_mel[2], off[2]) and np.array_equal(only_mel[1], on[1])
    assert skin_optics(p, BANDS, "blood").packaging == "blood"


def test_pigment_trends():
    """More melanin darkens the epidermis; deoxygenated blood absorbs more at 760 nm (the Hb band there,
    read from Prahl 1999's table), less at 900 nm."""
    bands = BandSet.parse("420,760,900")
    lo = skin_optics(SkinParameters(melanin_fraction=0.02), bands).mu_a
    hi = skin_optics(SkinParameters(melanin_fraction=0.2), bands).mu_a
    assert np.all(hi[1] > lo[1]) and np.array_equal(hi[2:], lo[2:])
    assert np.array_equal(hi[5], lo[5])
    ox = skin_optics(SkinParameters(oxygen_saturation=1.0, blood_fraction=0.05), bands).mu_a
    de = skin_optics(SkinParameters(oxygen_saturation=0.0, blood_fraction=0.05), bands).mu_a
    assert de[3, 1] > ox[3, 1] and de[3, 2] < ox[3, 2]


def test_bands_outside_data_are_refused():
    with pytest.raises(BandError, match="covers"):
        skin_optics(SkinParameters(), BandSet.parse("1200"))
    with pytest.raises(ParameterError):
        skin_optics(SkinParameters(), BANDS, packaging="maybe")
    with pytest.raises(ParameterError):
        skin_optics({"melanin_fraction": 0.1}, BANDS)


def test_frozen_outputs():
    o = skin_optics(SkinParameters(), BANDS)
    with pytest.raises(ValueError):
        o.mu_a[0, 0] = 1.0
    with pytest.raises(dataclasses.FrozenInstanceError):
        o.packaging = "off"
