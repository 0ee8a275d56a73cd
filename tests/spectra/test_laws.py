"""Melanin, baseline, scattering and anisotropy laws against the published formulas and simpa's tables."""

import numpy as np
import pytest

from matgen.errors import BandError, ParameterError
from matgen.spectra import chromophores as ch
from matgen.spectra import scattering as sc
from matgen.spectra.bands import BandSet


def _narrow(centres, half=0.01):
    c = np.asarray(centres, float)
    return BandSet(c, c - half, c + half)


def test_eumelanin_is_jacques_law_and_band_integral():
    """Jacques 1998 melanosome law mu_a = 6.6e11 lambda^-3.33 1/cm (formula from memory;
    simpa's Melanin.npz agrees within 0.5 %). Over a wide band matgen returns the exact
    integral a (hi^(b+1) - lo^(b+1)) / ((b+1)(hi-lo)), not the centre sample."""
    centres = np.array([300.0, 500.0, 900.0])
    narrow = ch.mu_a_eumelanin(_narrow(centres))
    assert np.allclose(narrow, 6.6e11 * centres**-3.33 / 10, rtol=1e-8)
    lo, hi = 300.0, 400.0
    b = -3.33
    exact = 6.6e10 * (hi ** (b + 1) - lo ** (b + 1)) / ((b + 1) * (hi - lo))
    got = ch.mu_a_eumelanin(BandSet([350.0], [lo], [hi]))[0]
    assert got == pytest.approx(exact, rel=1e-10)
    assert abs(got / (6.6e10 * 350.0**b) - 1) > 0.01  # the centre sample would be measurably different


def test_eumelanin_matches_simpa(ref):
    """simpa 1.0 Melanin.npz (1/cm, 450-1000 nm) tabulates the same Jacques law: agreement within 0.5 %
    (simpa's values are rounded to 3 significant digits)."""
    w, v = ref.simpa_spectrum("Melanin")
    sel = (w > 450) & (w < 1000)
    ours = ch.mu_a_eumelanin(_narrow(w[sel])) * 10
    assert np.max(np.abs(ours / v[sel] - 1)) < 0.005


def test_pheomelanin_and_mixture():
    """Donner & Jensen 2006 pheomelanin 2.9e14 lambda^-4.75 1/mm (from memory); mixture linear in the
    share."""
    band = _narrow([500.0])
    ph = ch.mu_a_pheomelanin(band)[0]
    assert ph == pytest.approx(2.9e14 * 500.0**-4.75, rel=1e-8)
    eu = ch.mu_a_eumelanin(band)[0]
    mix = ch.mu_a_melanin(band, np.array([0.0, 0.25, 1.0]))[:, 0]
    assert np.allclose(mix, [ph, 0.25 * eu + 0.75 * ph, eu])


def test_eumelanin_2013_variant_and_unknown_method():
    """Jacques 2013 Eq. 8 variant 519 (lambda/500)^-3.5 1/cm, i.e. 51.9 1/mm at 500 nm (as quoted from Eq. 8
    by Blaney et al. 2024's tissue absorption tool; the paper itself not re-read); an unknown method names
    the valid ones."""
    assert ch.mu_a_eumelanin(_narrow([500.0]), method="Jacques2013")[0] == pytest.approx(51.9, rel=1e-8)
    with pytest.raises(ParameterError, match="Jacques1998, Jacques2013"):
        ch.mu_a_eumelanin(_narrow([500.0]), method="Smith2020")


def test_baseline_matches_formula_and_simpa(ref):
    """Jacques 1998 Sec. 1.1 (re-read on omlc.org/news/jan98/skinoptics.html): 0.244 + 85.3
    exp(-(lambda - 154)/66.2) 1/cm; simpa 1.0 Skin_Baseline.npz carries the same expression (450-1000 nm),
    agreement within 1e-4."""
    w, v = ref.simpa_spectrum("Skin_Baseline")
    sel = (w > 450) & (w < 1000)
    ours = ch.mu_a_baseline(_narrow(w[sel])) * 10
    formula = 0.244 + 85.3 * np.exp(-(w[sel] - 154) / 66.2)
    assert np.max(np.abs(ours / formula - 1)) < 1e-6
    assert np.max(np.abs(ours / v[sel] - 1)) < 1e-4


def test_saidi_baseline_range():
    """Saidi's neonatal fit 7.84e8 lambda^-3.255 1/cm holds on 450-750 nm only (Jacques 1998 Sec. 1.1,
    re-read): error beyond."""
    assert ch.mu_a_baseline(_narrow([600.0]), "Saidi1992")[0] == pytest.approx(
        7.84e8 * 600**-3.255 / 10, rel=1e-8
    )
    with pytest.raises(BandError, match="450-750"):
        ch.mu_a_baseline(_narrow([800.0]), "Saidi1992")


def test_analytic_laws_refuse_bands_outside_range():
    """Power laws are not extrapolated below 250 nm or above 1100 nm: the error names the law and range."""
    with pytest.raises(BandError, match=r"eumelanin.*250-1100"):
        ch.mu_a_eumelanin(BandSet([240.0], [235.0], [245.0]))


def test_jacques2013_eq2():
    """Jacques 2013 Eq. 2: mu_s'(500 nm) = a'; pure Rayleigh scales as lambda^-4, pure Mie as lambda^-b."""
    assert sc.mu_s_reduced_Jacques2013(500.0, 4.0, 0.3, 1.2) == pytest.approx(4.0)
    assert sc.mu_s_reduced_Jacques2013(1000.0, 4.0, 1.0, 1.2) == pytest.approx(4.0 / 16)
    assert sc.mu_s_reduced_Jacques2013(1000.0, 4.0, 0.0, 1.2) == pytest.approx(4.0 * 2**-1.2)


def test_dermis_reduced_scattering_in_published_range():
    """Dermis mu_s'(500 nm) lies in the span of the skin, dermis and epidermis rows of Jacques 2013 Table 2
    (about 20-70 1/cm; from memory) -> 2-7 1/mm."""
    v = sc.mu_s_reduced(_narrow([500.0]), "dermis_Jacques2013")[0]
    assert 2.0 <= v <= 7.0


def test_anisotropy_van_gemert():
    """van Gemert et al. 1989 (from memory): g = 0.62 + 0.29e-3 lambda [nm]; 0.765 at 500 nm, 0.91 at
    1000 nm."""
    g = sc.anisotropy(_narrow([500.0, 1000.0]))
    assert np.allclose(g, [0.765, 0.91], atol=1e-9)
    assert np.allclose(sc.anisotropy(_narrow([500.0]), "constant", 0.9), 0.9)
    with pytest.raises(ParameterError):
        sc.anisotropy(_narrow([500.0]), "constant", 1.0)
    with pytest.raises(BandError, match="1100"):
        sc.anisotropy(BandSet([1200.0], [1195.0], [1205.0]))


def test_mu_s_from_reduced():
    assert sc.mu_s_from_reduced(2.0, 0.8) == pytest.approx(10.0)


def test_carotene_and_bilirubin_models_meet_their_stated_parameters():
    """The approximate band models reproduce the parameters they were built from: beta-carotene peak 1.395e5
    cm^-1/M within 448-452 nm; bilirubin 5.5e4 cm^-1/M at 451-455 nm (PhotochemCAD values; carotene's from
    memory); both fall below 1e-3 of their peak beyond 600 nm, as these yellow pigments do."""
    bands = BandSet.regular(300, 900, 1, 1)
    car = ch.extinction_carotene(bands)
    bil = ch.extinction_bilirubin(bands)
    assert 448 <= bands.centre_nm[np.argmax(car)] <= 452
    assert car.max() == pytest.approx(1.395e5, rel=0.01)
    assert 451 <= bands.centre_nm[np.argmax(bil)] <= 455
    assert bil.max() == pytest.approx(5.5e4, rel=0.01)
    red = bands.centre_nm > 600
    assert car[red].max() < 1e-3 * car.max() and bil[red].max() < 1e-3 * bil.max()


def test_dermis_jacques1998_matches_simpa_reference_table(ref):
    """Jacques 1998 skin optics summary, dermis mu_s' = 2e12 lambda^-4 + 2e5 lambda^-1.5 1/cm (formula from
    memory). Outside copy: the dermis reference table of simpa 1.0.0's tests
    (simpa_tests/test_utils/tissue_composition_tests.py, get_dermis_reference_dictionary, citing
    omlc.org/news/jan98/skinoptics.html), mu_s at g = 0.715 for 450-950 nm, printed to 4 significant digits:
    mu_s (1 - g) must agree within 0.2 % (4-digit rounding of mu_s is at most 0.05 %; the rest is margin for
    rounding of their own inputs)."""
    table = ref.simpa_reference_table("get_dermis_reference_dictionary")
    wl = np.array(sorted(w for w in table if "mu_s_per_cm" in table[w] and "g" in table[w]))
    assert wl.size >= 6
    theirs = np.array([table[w]["mu_s_per_cm"] * (1.0 - table[w]["g"]) for w in wl])
    ours = sc.mu_s_reduced(_narrow(wl), "dermis_Jacques1998") * 10.0
    assert np.max(np.abs(ours / theirs - 1.0)) < 2e-3
    formula = 2e12 * wl**-4 + 2e5 * wl**-1.5
    np.testing.assert_allclose(ours, formula, rtol=1e-6)
