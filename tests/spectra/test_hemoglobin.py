"""Haemoglobin: vendored Prahl table against the installed mne copy, published facts, blood conversion,
extension."""

import numpy as np
import pytest

from matgen.errors import BandError
from matgen.spectra import chromophores as ch
from matgen.spectra.bands import BandSet


def _narrow(centres, half=0.01):
    c = np.asarray(centres, float)
    return BandSet(c, c - half, c + half)


def test_vendored_table_matches_mne(ref):
    """mne 1.x, mne/data/extinction_coef.mat (Prahl's compilation): relative difference < 0.5 % at every
    point."""
    wl, hbo2, hb = ref.mne_extinction()
    v_wl, v_ext = ch.hemoglobin_table()
    assert np.array_equal(v_wl, wl)
    assert np.max(np.abs(v_ext[:, 0] / hbo2 - 1)) < 0.005
    assert np.max(np.abs(v_ext[:, 1] / hb - 1)) < 0.005


def test_band_average_at_table_points_matches_mne(ref):
    """Narrow bands (0.02 nm) centred on mne's 2 nm points reproduce mne's values within 0.5 %
    (250.01-999.99 nm)."""
    wl, hbo2, hb = ref.mne_extinction()
    keep = (wl > 250) & (wl < 1000)
    ext = ch.hemoglobin_extinction(_narrow(wl[keep]))
    assert np.max(np.abs(ext[:, 0] / hbo2[keep] - 1)) < 0.005
    assert np.max(np.abs(ext[:, 1] / hb[keep] - 1)) < 0.005


def _peak(wl, v, lo, hi):
    sel = (wl >= lo) & (wl <= hi)
    return wl[sel][np.argmax(v[sel])]


def test_peaks_and_isosbestic_point():
    """Facts of Prahl's table (read from the table as mne carries it, mne/data/extinction_coef.mat):
    HbO2 peaks 414, 542, 576 nm; Hb 432, 556 nm (+-2 nm); HbO2/Hb crossing near 797 nm (796.8 nm, +-3 nm)."""
    wl, ext = ch.hemoglobin_table()
    hbo2, hb = ext[:, 0], ext[:, 1]
    assert abs(_peak(wl, hbo2, 390, 450) - 414) <= 2
    assert abs(_peak(wl, hbo2, 530, 560) - 542) <= 2
    assert abs(_peak(wl, hbo2, 565, 600) - 576) <= 2
    assert abs(_peak(wl, hb, 410, 460) - 432) <= 2
    assert abs(_peak(wl, hb, 540, 580) - 556) <= 2
    sel = (wl >= 700) & (wl <= 900)
    d = hbo2[sel] - hb[sel]
    i = np.nonzero(np.diff(np.sign(d)))[0]
    assert i.size == 1
    x0, x1, d0, d1 = wl[sel][i[0]], wl[sel][i[0] + 1], d[i[0]], d[i[0] + 1]
    crossing = x0 - d0 * (x1 - x0) / (d1 - d0)
    assert abs(crossing - 797) <= 3


def test_whole_blood_conversion(ref):
    """mu_a [1/cm] = ln(10) e 150 / 64500 (Prahl 1999, 64,500 g/mol haemoglobin, 150 g/L); matgen returns
    1/mm, so one tenth.
    (rel 1e-4: a 0.02 nm band around a table vertex averages the kink of the piecewise-linear spectrum.)"""
    wl, hbo2, hb = ref.mne_extinction()
    i = int(np.nonzero(wl == 550)[0][0])
    band = _narrow([550.0])
    for s in (0.0, 0.3, 1.0):
        expected_per_cm = np.log(10) * (s * hbo2[i] + (1 - s) * hb[i]) * 150 / 64500
        assert ch.mu_a_blood(band, s)[0] == pytest.approx(expected_per_cm / 10, rel=1e-4)


def test_whole_blood_vs_simpa(ref):
    """simpa 1.0 Oxyhemoglobin.npz / Deoxyhemoglobin.npz hold whole blood at 150 g/L in 1/cm, 450-1000 nm:
    matgen agrees within 1 % (same Prahl data; simpa's are rounded to 3 significant digits)."""
    for name, s in (("Oxyhemoglobin", 1.0), ("Deoxyhemoglobin", 0.0)):
        w, v = ref.simpa_spectrum(name)
        keep = (w > 450) & (w < 1000)
        ours = ch.mu_a_blood(_narrow(w[keep]), s) * 10.0
        assert np.max(np.abs(ours / v[keep] - 1)) < 0.01


def test_extension_beyond_1000nm_is_continuous_and_bounded():
    """The documented log-linear continuation reaches 1050 nm and no further; at the seam it is continuous."""
    wl, ext = ch.hemoglobin_table()
    at_end = ch.hemoglobin_extinction(_narrow([999.99]))
    past = ch.hemoglobin_extinction(_narrow([1000.02]))
    assert np.allclose(past, at_end, rtol=2e-3)
    ch.hemoglobin_extinction(BandSet.regular(300, 1000, 10))  # the default bands reach 1005 nm
    with pytest.raises(BandError, match=r"haemoglobin.*250-1050 nm"):
        ch.hemoglobin_extinction(BandSet([1050.0], [1045.0], [1055.0]))
    with pytest.raises(BandError, match="250-1050"):
        ch.hemoglobin_extinction(BandSet([248.0], [244.0], [252.0]))
