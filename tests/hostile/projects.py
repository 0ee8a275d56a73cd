"""Small bake projects (a table file, pigment maps, a material config) for the hostile, crash and soak checks.

The table made here is TEST DATA: its quantities are smooth invented functions of the axes and the band
centres, not physics. These checks only need a real table file and real maps to feed the bake.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

SPECTRAL = (
    "albedo_multiple",
    "albedo_multiple_stderr",
    "shape_distance_mm",
    "albedo_single",
    "mean_free_path_mm",
    "anisotropy",
    "fit_residual",
)


def make_table(band_spec: str = "400:700:50"):
    """A 2-axis (melanin, blood) table of invented smooth quantities over ``band_spec`` (test data only)."""
    from matgen.spectra.bands import BandSet
    from matgen.tables.store import Axis, Table

    bands = BandSet.parse(band_spec)
    axes = [
        Axis("melanin_fraction", np.array([0.005, 0.03, 0.1, 0.45]), "log"),
        Axis("blood_fraction", np.array([0.002, 0.01, 0.1]), "log"),
    ]
    mesh = np.meshgrid(*[a.values for a in axes], indexing="ij")
    m, b = (x[..., None] for x in mesh)
    wl = bands.centre_nm / 1000.0
    a = 0.6 * np.exp(-m * 0.1 / wl**3) * np.exp(-b * 4.0 / wl) + 0.02
    q = {
        "albedo_multiple": a,
        "albedo_multiple_stderr": 0.001 + 0.0 * a,
        "shape_distance_mm": 0.2 + 1.5 * wl * a,
        "albedo_single": 1.0 - 0.1 * (1.0 - a) ** 2,
        "mean_free_path_mm": 0.05 + 2.0 * wl**2 * a,
        "anisotropy": 0.8 + 0.05 * wl + 0.0 * a,
        "fit_residual": 0.01 + 0.01 * m + 0.0 * a,
    }
    idx = [len(bands) - 1, len(bands) // 2, 0]
    for name in (
        "albedo_multiple",
        "shape_distance_mm",
        "albedo_single",
        "mean_free_path_mm",
        "fit_residual",
    ):
        q[f"rgb_{name}"] = q[name][..., idx]
    q["ior"] = 1.4 + 0.0 * m
    q = {
        k: np.asarray(np.broadcast_to(v, m.shape[:-1] + (v.shape[-1],)), dtype=np.float32)
        for k, v in q.items()
    }
    return Table(
        axes, bands, q, manifest={"name": "hostile-test-table", "note": "test data: invented functions"}
    )


def write_map(path, values, pixel_type=None) -> None:
    """Write a (h, w) or (h, w, c) float array as an image (format from the suffix) with OpenImageIO."""
    import OpenImageIO as oiio

    values = np.asarray(values, dtype=np.float32)
    if values.ndim == 2:
        values = values[:, :, None]
    spec = oiio.ImageSpec(values.shape[1], values.shape[0], values.shape[2], pixel_type or oiio.FLOAT)
    out = oiio.ImageOutput.create(str(path))
    if out is None or not out.open(str(path), spec):
        raise RuntimeError(f"cannot write test map {path}: {oiio.geterror()}")
    out.write_image(values)
    out.close()


def pigment_maps(h: int, w: int, seed: int = 0):
    """Two smooth [0, 1] maps (melanin, blood) with a little seeded noise."""
    rng = np.random.default_rng(seed)
    y, x = np.mgrid[0:h, 0:w] / max(h, w)
    mel = np.clip(0.5 + 0.4 * np.sin(6 * x) * np.cos(4 * y) + 0.05 * rng.standard_normal((h, w)), 0, 1)
    blood = np.clip(0.3 + 0.6 * x * y + 0.05 * rng.standard_normal((h, w)), 0, 1)
    return mel, blood


CONFIG = """format_version = 1
name = "hostile"

[table]
path = "table.npz"

[scene]
metres_per_scene_unit = 0.01

[parameters.melanin_fraction]
map = "maps/melanin{udim}.exr"
encoding = "linear"
range = [0.005, 0.45]

[parameters.blood_fraction]
map = "maps/blood{udim}.png"
encoding = "linear"
range = [0.002, 0.1]

[outputs]
spectral = ["albedo_multiple", "mean_free_path_mm"]
spectral_bands = "400:700:50"
rgb = ["albedo_multiple", "mean_free_path_mm"]
passes = []
materialx = false
"""


def make_project(root, h: int = 16, w: int = 16, tiles=None, seed: int = 0) -> Path:
    """A config folder with table file and maps (one texture, or a UDIM set ``tiles``); returns the config."""
    import OpenImageIO as oiio

    root = Path(root)
    (root / "maps").mkdir(parents=True, exist_ok=True)
    if not (root / "table.npz").exists():
        make_table().save(root / "table.npz")
    for i, t in enumerate(tiles or [None]):
        mel, blood = pigment_maps(h, w, seed + i)
        suffix = "" if t is None else f".{t}"
        write_map(root / "maps" / f"melanin{suffix}.exr", mel)
        write_map(root / "maps" / f"blood{suffix}.png", blood, oiio.UINT16)
    cfg = root / "material.toml"
    cfg.write_text(CONFIG.format(udim="" if not tiles else ".<UDIM>"))
    return cfg
