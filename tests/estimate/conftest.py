"""Shared helpers of the estimate tests: synthetic ground truth baked through matgen's own bake.

Ground truth is pigment maps drawn from seeded random numbers (no person, no scan): they are written as
float EXR maps, baked by ``matgen.export.job.bake`` with the shipped default table, and the baked
``rgb/albedo_multiple.exr`` (ACEScg, D65) and pass maps are the "captured" albedo and single-band captures.
Expectations are computed through the table API (``Table.lookup``), never read from today's table.

Capture-like noise (a model chosen for these tests, not a measured camera): per channel and texel,
Gaussian with a relative sigma of 0.2 % plus an absolute sigma of 0.0002, seeded; then stored as float.
"""

import numpy as np
import OpenImageIO as oiio
import pytest
import tomli_w

from matgen.bake.config import config_from_dict
from matgen.export.exr import read_exr
from matgen.export.job import bake
from matgen.tables.store import load_default_table

NOISE_RELATIVE = 0.002
NOISE_ABSOLUTE = 0.0002


@pytest.fixture(scope="session")
def table():
    return load_default_table()


def write_image(path, values, pixel_type=oiio.FLOAT, colorspace=None):
    """Write (h, w) or (h, w, c) floats to an image file (format from the suffix), optionally tagged."""
    values = np.asarray(values, dtype=np.float32)
    if values.ndim == 2:
        values = values[:, :, None]
    spec = oiio.ImageSpec(values.shape[1], values.shape[0], values.shape[2], pixel_type)
    if colorspace:
        spec.attribute("oiio:ColorSpace", colorspace)
    out = oiio.ImageOutput.create(str(path))
    assert out is not None and out.open(str(path), spec), oiio.geterror()
    assert out.write_image(values)
    out.close()


def noisy(values, rng):
    """Capture-like noise (module docstring) added to an array of albedo values."""
    v = np.asarray(values, dtype=np.float64)
    return v * (1.0 + NOISE_RELATIVE * rng.standard_normal(v.shape)) + NOISE_ABSOLUTE * rng.standard_normal(
        v.shape
    )


def bake_truth(folder, maps: dict, held: dict, passes=("uv365", "nir850"), pixel_type="float"):
    """Bake ground-truth pigment maps (axis -> (h, w) values) and constants; returns the bake folder."""
    folder.mkdir(parents=True, exist_ok=True)
    params = {}
    for name, arr in maps.items():
        write_image(folder / f"{name}.exr", arr)
        params[name] = {"map": f"{name}.exr", "encoding": "fraction"}
    for name, v in held.items():
        params[name] = {"value": float(v)}
    data = {
        "format_version": 1,
        "name": "truth",
        "parameters": params,
        "outputs": {
            "spectral": [],
            "rgb": ["albedo_multiple"],
            "targets": [],
            "passes": list(passes),
            "qa": False,
            "materialx": False,
            "exr": {"pixel_type": pixel_type},
        },
    }
    (folder / "truth.toml").write_text(tomli_w.dumps(data))
    config = config_from_dict(data, folder)
    out = folder / "bake"
    bake(config, out, jobs=2)
    return out


def read(path):
    """Pixels (h, w, c) float32 of an EXR file."""
    return read_exr(path)[0]


def log_uniform(rng, lo, hi, shape):
    return np.exp(rng.uniform(np.log(lo), np.log(hi), shape))


class _Kit:
    """The helpers above, handed to tests as the ``ekit`` fixture (tests import in importlib mode)."""

    write_image = staticmethod(write_image)
    noisy = staticmethod(noisy)
    bake_truth = staticmethod(bake_truth)
    read = staticmethod(read)
    log_uniform = staticmethod(log_uniform)
    NOISE_RELATIVE = NOISE_RELATIVE
    NOISE_ABSOLUTE = NOISE_ABSOLUTE


@pytest.fixture(scope="session")
def ekit():
    return _Kit
