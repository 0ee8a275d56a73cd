"""InversionTable mechanics on a synthetic table built from van de Hulst's formula (no transport needed)."""

import numpy as np
import pytest

from matgen.errors import DataError, FitError, ParameterError
from matgen.fit.inversion import InversionTable, albedo_multiple_vanDeHulst1980, albedo_single_OpenPBR2024

U = np.concatenate(([0.0], np.linspace(0.01, 1.0, 60)))
ALPHA = 1.0 - U[::-1] ** 2
G = np.array([0.0, 0.5, 0.9])
N = np.array([1.0, 1.5])


def _table():
    top = 1.0 - ((N - 1.0) / (N + 1.0)) ** 2  # what a boundary of index n lets out at alpha = 1
    a = albedo_multiple_vanDeHulst1980(ALPHA[:, None, None], G[None, :, None]) * top[None, None, :]
    a = a + 1e-9 * np.arange(ALPHA.size)[:, None, None]  # strictly increasing even at the ends
    s = 2.0 - ALPHA[:, None, None] + 0 * a
    return InversionTable(ALPHA, G, N, a, np.zeros_like(a), s, np.zeros_like(a), {"source": "synthetic"})


def test_invert_matches_closed_form_and_round_trips(tmp_path):
    tab = _table()
    a = np.array([0.1, 0.4, 0.7])
    for g in (0.0, 0.5, 0.9):  # on g nodes, n = 1 node: linear interpolation in sqrt(1 - alpha), 60 nodes
        alpha, scale = tab.invert(a, g, 1.0)
        np.testing.assert_allclose(alpha, albedo_single_OpenPBR2024(a, g), atol=2e-4)
        np.testing.assert_allclose(scale, 2.0 - alpha, atol=2e-4)
    for g, n in ((0.25, 1.2), (0.7, 1.4)):  # off nodes: inversion and forward lookup are consistent
        alpha, _ = tab.invert(a, g, n)
        np.testing.assert_allclose(tab.albedo_multiple_of(alpha, g, n), a, atol=1e-9)
    tab.save(tmp_path / "t.npz", tmp_path / "t.json")
    back = InversionTable.load(tmp_path / "t.npz", tmp_path / "t.json")
    assert back.provenance["source"] == "synthetic"
    np.testing.assert_array_equal(back.albedo_multiple, tab.albedo_multiple)


def test_out_of_range_and_bad_tables():
    tab = _table()
    with pytest.raises(ParameterError, match="anisotropy g"):
        tab.invert(np.array([0.3]), 0.95, 1.2)
    with pytest.raises(ParameterError, match="refractive index"):
        tab.invert(np.array([0.3]), 0.5, 1.7)
    with pytest.raises(FitError, match="not reachable"):
        tab.invert(np.array([0.97]), 0.5, 1.5)  # 1 - R_specular(1.5) = 0.96
    a = tab.albedo_multiple.copy()
    a[5, 0, 0] = a[4, 0, 0]
    with pytest.raises(DataError, match="increasing"):
        InversionTable(ALPHA, G, N, a, a * 0, tab.shape_scaling, a * 0)


def test_clamp_mode_warns_and_uses_edge():
    from matgen.errors import ClampWarning

    tab = _table()
    tab.out_of_range = "clamp"
    with pytest.warns(ClampWarning, match="inversion table"):
        alpha, _ = tab.invert(np.array([0.3]), 0.95, 1.2)
    np.testing.assert_allclose(alpha, tab.invert(np.array([0.3]), 0.9, 1.2)[0])
