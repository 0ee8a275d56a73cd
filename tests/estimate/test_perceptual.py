"""CIELAB and CIEDE2000 kernels against colour-science; compiled kernels against their Python twins."""

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np

from matgen.estimate.perceptual import delta_e2000, lightness, rgb_to_lab
from matgen.estimate.solver import _space_matrix

ROOT = Path(__file__).resolve().parents[2]


def _pairs(seed=3, n=4000):
    rng = np.random.default_rng(seed)
    lab1 = rng.uniform([0, -90, -90], [100, 90, 90], (n, 3))
    lab2 = lab1 + rng.normal(0, 4, (n, 3))
    # the hue cases of Sharma, Wu & Dalal 2005 (notes on Eqs. 10 and 14): neutral colours, hue differences
    # across 0/360 degrees and mean hues on either side of 180 degrees
    special = np.array(
        [
            [50, 0, 0, 60, 0, 0],
            [50, 0, 0, 50, 10, 0],
            [50, 10, -1, 50, 10, 1],
            [50, -10, -1, 50, -10, 1],
            [50, 2, -30, 50, -2, 30],
            [60, 30, 1, 40, -30, -1],
            [50, 2.5, 0, 50, 0, -2.5],
        ],
        dtype=float,
    )
    return np.vstack([lab1, special[:, :3]]), np.vstack([lab2, special[:, 3:]])


def test_de2000_matches_colour_science():
    """colour-science 0.4.7 ``delta_E(method="CIE 2000")`` (its tests use Sharma, Wu & Dalal 2005's table)."""
    import colour

    a, b = _pairs()
    ours = delta_e2000(a, b)
    ref = colour.delta_E(a, b, method="CIE 2000")
    assert np.max(np.abs(ours - ref)) < 1e-9
    assert np.all(delta_e2000(a, a) == 0.0)


def test_lab_matches_colour_science_in_both_segments():
    """colour-science 0.4.7 ``XYZ_to_Lab``, ACEScg white; dark colours exercise CIELAB's linear part."""
    import colour

    rng = np.random.default_rng(5)
    rgb = rng.uniform(0, 1, (2000, 3))
    rgb[:500] *= 0.004  # Y below (6/29)^3
    cs = colour.RGB_COLOURSPACES["ACEScg"]
    ref = colour.XYZ_to_Lab(rgb @ cs.matrix_RGB_to_XYZ.T, cs.whitepoint)
    ours = rgb_to_lab(rgb, _space_matrix("ACEScg"))
    assert np.max(np.abs(ours - ref)) < 1e-9
    # white is L* = 100, a* = b* = 0 in every working space
    for space in ("ACEScg", "rec709", "rec2020"):
        assert np.allclose(rgb_to_lab(np.ones((1, 3)), _space_matrix(space)), [[100, 0, 0]], atol=1e-9)
    assert np.allclose(
        lightness(np.array([1.0, 0.18])), [100.0, colour.XYZ_to_Lab([0.18] * 3, [1 / 3, 1 / 3])[0]]
    )


TWIN_SCRIPT = r"""
import json, sys
import numpy as np
from matgen.estimate.perceptual import delta_e2000, rgb_to_lab, lightness
from matgen.estimate.solver import _space_matrix
rng = np.random.default_rng(11)
a = rng.uniform([0, -60, -60], [100, 60, 60], (300, 3)); b = a + rng.normal(0, 3, (300, 3))
rgb = rng.uniform(0, 1, (300, 3)) * np.where(np.arange(300)[:, None] < 50, 0.003, 1.0)
out = {"de": delta_e2000(a, b).tolist(), "lab": rgb_to_lab(rgb, _space_matrix("ACEScg")).tolist(),
       "l": lightness(rgb[:, 0]).tolist()}
json.dump(out, sys.stdout)
"""


def _run(script, jit: bool):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    if not jit:
        env["NUMBA_DISABLE_JIT"] = "1"
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, env=env, cwd=ROOT)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout)


def test_compiled_kernels_match_pure_python_twins():
    compiled = _run(TWIN_SCRIPT, jit=True)
    twin = _run(TWIN_SCRIPT, jit=False)
    for key in compiled:
        assert np.max(np.abs(np.array(compiled[key]) - np.array(twin[key]))) < 1e-10, key
