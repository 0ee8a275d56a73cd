"""Shared test data for the bake and export tests.

The table built here is TEST DATA: its quantities are simple smooth functions of the axes and the band
centres, not physics. The bake tests only need a real :class:`matgen.tables.store.Table` whose lookup they
can compare baked texels against.
"""

import numpy as np
import OpenImageIO as oiio
import pytest

from matgen.spectra.bands import BandSet
from matgen.tables.store import Axis, Table


def make_test_table(bands=None) -> Table:
    """A 4-axis table whose quantities are smooth invented functions (test data only)."""
    bands = bands or BandSet.regular(300.0, 1000.0, 10.0)
    axes = [
        Axis("melanin_fraction", np.array([0.005, 0.02, 0.08, 0.2, 0.45]), "log"),
        Axis("eumelanin_share", np.array([0.0, 0.5, 1.0]), "linear"),
        Axis("blood_fraction", np.array([0.002, 0.01, 0.04, 0.1]), "log"),
        Axis("oxygen_saturation", np.array([0.5, 0.75, 1.0]), "linear"),
    ]
    mesh = np.meshgrid(*[a.values for a in axes], indexing="ij")
    m, e, b, s = (x[..., None] for x in mesh)
    wl = bands.centre_nm / 1000.0
    a_mult = 0.6 * np.exp(-m * (2.0 + e) / wl**3 * 0.05) * np.exp(-b * (1.5 - 0.5 * s) * 4.0 / wl) + 0.02
    q = {
        "albedo_multiple": a_mult,
        "albedo_multiple_stderr": 0.001 * np.ones_like(a_mult),
        "shape_distance_mm": 0.2 + 1.5 * wl * a_mult,
        "albedo_single": 1.0 - 0.1 * (1.0 - a_mult) ** 2,
        "mean_free_path_mm": 0.05 + 2.0 * wl**2 * a_mult,
        # g varies with band and pigment, so that albedo weighting and its blending can be told apart
        "anisotropy": 0.75 + 0.0 * a_mult + 0.05 * wl + 0.2 * m,
        "fit_residual": 0.01 + 0.01 * m * np.ones_like(wl),
    }
    rgb_idx = [bands.index_of(x) for x in (610.0, 550.0, 460.0)]
    for name in (
        "albedo_multiple",
        "shape_distance_mm",
        "albedo_single",
        "mean_free_path_mm",
        "fit_residual",
    ):
        q[f"rgb_{name}"] = q[name][..., rgb_idx]
    q["ior"] = 1.4 + 0.0 * m
    q = {
        k: np.asarray(np.broadcast_to(v, m.shape[:-1] + (v.shape[-1],)), dtype=np.float32)
        for k, v in q.items()
    }
    return Table(
        axes=axes,
        bands=bands,
        quantities=q,
        working_space="ACEScg",
        illuminant="D65",
        manifest={"name": "bake-test-table", "note": "test data: smooth invented functions"},
    )


def write_map(path, values, pixel_type=oiio.FLOAT, channels=None):
    """Write a (h, w) or (h, w, c) float array as an image file (format from the suffix)."""
    values = np.asarray(values, dtype=np.float32)
    if values.ndim == 2:
        values = values[:, :, None]
    spec = oiio.ImageSpec(values.shape[1], values.shape[0], values.shape[2], pixel_type)
    if channels:
        spec.channelnames = channels
    out = oiio.ImageOutput.create(str(path))
    assert out is not None and out.open(str(path), spec), oiio.geterror()
    assert out.write_image(values)
    out.close()


def smooth_maps(h, w, seed=0):
    """Three smooth [0, 1] maps (melanin, blood, eumelanin) with a little seeded noise."""
    rng = np.random.default_rng(seed)
    y, x = np.mgrid[0:h, 0:w] / max(h, w)
    mel = np.clip(0.5 + 0.4 * np.sin(6 * x) * np.cos(4 * y) + 0.05 * rng.standard_normal((h, w)), 0, 1)
    blood = np.clip(0.3 + 0.6 * x * y + 0.05 * rng.standard_normal((h, w)), 0, 1)
    eu = np.clip(0.7 - 0.4 * y, 0, 1)
    return mel, blood, eu


CONFIG_TEXT = """
format_version = 1
name = "test_face"

[table]
path = "table.npz"

[scene]
metres_per_scene_unit = 0.01

[parameters.melanin_fraction]
map = "maps/melanin{udim}.exr"
encoding = "linear"
range = [0.005, 0.45]

[parameters.eumelanin_share]
map = "maps/eumelanin{udim}.exr"
encoding = "fraction"

[parameters.blood_fraction]
map = "maps/blood{udim}.png"
encoding = "linear"
range = [0.002, 0.1]

[parameters.oxygen_saturation]
value = 0.75

[outputs]
spectral = ["albedo_multiple", "mean_free_path_mm"]
spectral_bands = "400:700:50"
rgb = ["albedo_multiple", "mean_free_path_mm"]
passes = []
{extra}
"""


def make_project(root, h=32, w=32, tiles=None, extra="", pixel_type="float", seed=0):
    """A config folder with a table file and maps (single texture, or UDIM ``tiles``); returns the config."""
    (root / "maps").mkdir(parents=True, exist_ok=True)
    make_test_table().save(root / "table.npz")
    for i, t in enumerate(tiles or [None]):
        mel, blood, eu = smooth_maps(h, w, seed + i)
        suffix = "" if t is None else f".{t}"
        write_map(root / "maps" / f"melanin{suffix}.exr", mel)
        write_map(root / "maps" / f"eumelanin{suffix}.exr", eu)
        write_map(root / "maps" / f"blood{suffix}.png", blood, oiio.UINT16)
    exr = f'\n[outputs.exr]\npixel_type = "{pixel_type}"\n'
    text = CONFIG_TEXT.format(udim="" if not tiles else ".<UDIM>", extra=extra + exr)
    cfg = root / "material.toml"
    cfg.write_text(text)
    return cfg


@pytest.fixture(scope="session")
def test_table():
    return make_test_table()


class _Kit:
    """The helpers above, handed to tests as the ``kit`` fixture (tests import in importlib mode)."""

    make_test_table = staticmethod(make_test_table)
    write_map = staticmethod(write_map)
    smooth_maps = staticmethod(smooth_maps)
    make_project = staticmethod(make_project)


@pytest.fixture(scope="session")
def kit():
    return _Kit
