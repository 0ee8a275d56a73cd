"""The numba kernel of the normalised-diffusion fit against its pure-Python (NumPy) twin."""

import numpy as np
import pytest

from matgen.fit.diffusion import fit_burley2015
from matgen.fit.models import burley2015_rings

EDGES = np.concatenate(([0.0], np.logspace(-3.0, 2.0, 51)))


@pytest.mark.parametrize("conserve", [True, False])
def test_numba_matches_numpy_twin(conserve):
    rng = np.random.default_rng(21)
    n = 64
    a = rng.uniform(0.05, 0.9, n)
    d = np.exp(rng.uniform(np.log(0.01), np.log(10.0), n))
    y0 = burley2015_rings(EDGES, a, d)
    s = 0.02 * y0 + 1e-6 * y0.max(axis=1, keepdims=True) * (y0 > 0)
    y = np.abs(y0 + s * rng.standard_normal(y0.shape))  # noisy: the minimum is not exact
    fast = fit_burley2015(EDGES, y, s, a, conserve_albedo=conserve, backend="numba")
    twin = fit_burley2015(EDGES, y, s, a, conserve_albedo=conserve, backend="numpy")
    for k in ("shape_distance_mm", "albedo_multiple", "fit_residual", "chi2_reduced"):
        np.testing.assert_allclose(fast[k], twin[k], rtol=1e-8, err_msg=k)
    np.testing.assert_array_equal(fast["at_search_edge"], twin["at_search_edge"])
