"""The invented demo scenario "Low Tide Lantern": procedural pigment maps of a fictional ferry pilot's face.

Everything here is invented for the demo: a small studio finishing a short film needs the digital double of
its ferry pilot (a made-up character, no real person) with freckled, wind-reddened cheeks that hold up in a
daylight deck shot (ACEScg), under a 365 nm inspection lamp (freckles stand out) and on an 850 nm harbour
security camera (skin goes soft and even). The maps are generated from a seed, so the demo needs no data:

* melanin: a fair base with slow variation, seeded freckles clustered over the cheeks and the nose bridge,
  and a pale scar on the left cheek with less melanin;
* blood: a pale base, a wind-reddened blush over both cheeks streaked by seeded noise, less blood in the scar.

Map values are encodings in [0, 1] that the scenario's material config (:data:`MATERIAL_CONFIG_TOML`)
decodes linearly into volume fractions. The numbers are artistic choices for the demo, chosen inside the
physiological ranges of :mod:`matgen.tissue.parameters`; they are not measurements. Texture coordinates: x to
the right, y down (image rows), both in [0, 1) over one UDIM tile (1001).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy.ndimage import gaussian_filter

from matgen.color.tags import exr_data_attributes
from matgen.export.exr import write_exr
from matgen.fsutil import atomic_path, atomic_write_text

#: Seed of the shipped scenario.
DEFAULT_SEED = 20261201

#: Linear encodings of the maps (volume fractions), as in :data:`MATERIAL_CONFIG_TOML`.
MELANIN_RANGE = (0.005, 0.25)
BLOOD_RANGE = (0.002, 0.10)

#: Invented look of the pilot (volume fractions, dimensionless); artistic choices for the demo.
BASE_MELANIN = 0.022
FRECKLE_MELANIN = 0.11
SCAR_MELANIN_FACTOR = 0.3
BASE_BLOOD = 0.010
BLUSH_BLOOD = 0.038
SCAR_BLOOD_FACTOR = 0.6

#: Cheek centres and blush radius (texture coordinates), scar end points and half width.
CHEEKS = ((0.30, 0.60), (0.70, 0.60))
BLUSH_SIGMA = 0.10
NOSE = (0.50, 0.50)
SCAR = ((0.20, 0.66), (0.33, 0.76))
SCAR_HALF_WIDTH = 0.009

MATERIAL_CONFIG_TOML = """\
# Material config of the invented demo scenario "Low Tide Lantern": the ferry pilot's face.
# Map values in [0, 1] decode linearly into volume fractions; constants hold the other table axes.
format_version = 1
name = "ferry_pilot_face"

[table]
path = "default"            # the shipped default table

[scene]
metres_per_scene_unit = 0.01    # the studio's scenes are in centimetres
working_space = "ACEScg"
illuminant = "D65"

[parameters.melanin_fraction]   # epidermal melanin volume fraction
map = "maps/melanin.exr"
encoding = "linear"
range = [0.005, 0.25]

[parameters.blood_fraction]     # dermal blood volume fraction
map = "maps/blood.exr"
encoding = "linear"
range = [0.002, 0.10]

[parameters.eumelanin_share]    # eumelanin / total melanin
value = 0.55

[parameters.oxygen_saturation]
value = 0.8

[input]
out_of_range = "clamp"
resample = "error"

[outputs]
spectral = ["albedo_multiple", "albedo_single", "mean_free_path_mm", "shape_distance_mm", "fit_residual"]
spectral_bands = "400:700:10"   # 31 visible bands
rgb = ["albedo_multiple", "mean_free_path_mm", "shape_distance_mm"]
targets = ["openpbr", "spectral_medium"]
passes = ["uv365", "nir850"]    # inspection lamp and security camera
qa = true
materialx = true

[outputs.exr]
pixel_type = "half"
compression = "zip"
"""


@dataclass(frozen=True)
class MarkedTexel:
    """A texel the demo's spectra preview marks: a name and its (x, y) texel position."""

    name: str
    x: int
    y: int


def _encode(fraction: np.ndarray, rng: tuple) -> np.ndarray:
    lo, hi = rng
    return np.clip((fraction - lo) / (hi - lo), 0.0, 1.0).astype(np.float32)


def _smooth_noise(rng: np.random.Generator, size: int, sigma_texels: float) -> np.ndarray:
    """Gaussian-filtered white noise, rescaled to zero mean and unit standard deviation."""
    n = gaussian_filter(rng.standard_normal((size, size)), sigma_texels, mode="wrap")
    return (n - n.mean()) / (n.std() + 1e-12)


def _segment_distance(x, y, a, b):
    ax, ay = a
    bx, by = b
    dx, dy = bx - ax, by - ay
    t = np.clip(((x - ax) * dx + (y - ay) * dy) / (dx * dx + dy * dy), 0.0, 1.0)
    return np.hypot(x - (ax + t * dx), y - (ay + t * dy))


def generate_maps(size: int = 512, seed: int = DEFAULT_SEED) -> dict:
    """Generate the scenario's pigment maps (invented), deterministic for a given size and seed.

    Parameters
    ----------
    size : int
        Side of the square maps in texels (>= 16).
    seed : int
        Seed of the noise and the freckle positions.

    Returns
    -------
    dict
        ``melanin`` and ``blood``: float32 (size, size) encodings in [0, 1]; ``melanin_fraction`` and
        ``blood_fraction``: the decoded volume fractions (float64); ``marked``: tuple of :class:`MarkedTexel`
        (a freckle, a freckle-free texel of the blush, the scar).

    """
    if size < 16:
        raise ValueError(f"scenario map size is {size} texels; use at least 16")
    rng = np.random.default_rng(seed)
    c = (np.arange(size) + 0.5) / size
    x, y = np.meshgrid(c, c)
    # melanin: fair base with slow variation
    mel = BASE_MELANIN * (1.0 + 0.12 * _smooth_noise(rng, size, size / 16))
    # freckles: centres drawn from a density over cheeks and nose bridge, splatted at three sizes
    density = sum(np.exp(-((x - cx) ** 2 + (y - cy) ** 2) / (2 * 0.12**2)) for cx, cy in CHEEKS)
    density = density + 0.8 * np.exp(
        -((x - NOSE[0]) ** 2 / (2 * 0.06**2) + (y - NOSE[1]) ** 2 / (2 * 0.05**2))
    )
    p = (density / density.sum()).ravel()
    n_freckles = int(0.0016 * size * size) + 40
    freckles = np.zeros((size, size))
    picks = rng.choice(size * size, size=n_freckles, p=p)
    strength = rng.uniform(0.4, 1.0, n_freckles)
    radius_class = rng.integers(0, 3, n_freckles)
    for k, sigma in enumerate((0.0025, 0.004, 0.006)):
        impulses = np.zeros(size * size)
        sel = radius_class == k
        np.add.at(impulses, picks[sel], strength[sel])
        s = sigma * size
        freckles += gaussian_filter(impulses.reshape(size, size), s, mode="constant") * (2 * np.pi * s * s)
    freckles = np.clip(freckles, 0.0, 1.0)
    mel = mel + FRECKLE_MELANIN * freckles
    # blood: pale base, blush over the cheeks, streaked by wind-like anisotropic noise
    streak = gaussian_filter(rng.standard_normal((size, size)), (size / 90, size / 18), mode="wrap")
    streak = (streak - streak.mean()) / (streak.std() + 1e-12)
    blush = sum(np.exp(-((x - cx) ** 2 + (y - cy) ** 2) / (2 * BLUSH_SIGMA**2)) for cx, cy in CHEEKS)
    blood = BASE_BLOOD * (1.0 + 0.1 * _smooth_noise(rng, size, size / 24))
    blood = blood + BLUSH_BLOOD * np.clip(blush, 0, 1) * (1.0 + 0.25 * streak)
    # scar: a pale line on the left cheek, soft edged
    d = _segment_distance(x, y, *SCAR)
    scar = np.clip(1.0 - (d - SCAR_HALF_WIDTH) / (0.5 * SCAR_HALF_WIDTH), 0.0, 1.0)
    mel = mel * (1.0 - (1.0 - SCAR_MELANIN_FACTOR) * scar)
    blood = blood * (1.0 - (1.0 - SCAR_BLOOD_FACTOR) * scar)
    # marked texels: strongest freckle near the right cheek, a freckle-free blush texel, the scar's midpoint
    near_cheek = freckles * (np.hypot(x - CHEEKS[1][0], y - CHEEKS[1][1]) < 0.12)
    fy, fx = np.unravel_index(int(np.argmax(near_cheek)), near_cheek.shape)
    sx = int(0.5 * (SCAR[0][0] + SCAR[1][0]) * size)
    sy = int(0.5 * (SCAR[0][1] + SCAR[1][1]) * size)
    left = np.exp(-((x - CHEEKS[0][0]) ** 2 + (y - CHEEKS[0][1]) ** 2) / (2 * BLUSH_SIGMA**2))
    by, bx = np.unravel_index(
        int(np.argmax(left * (1.0 + 0.25 * streak) - 4.0 * freckles - scar)), left.shape
    )
    marked = (
        MarkedTexel("freckle", int(fx), int(fy)),
        MarkedTexel("blush", int(bx), int(by)),
        MarkedTexel("scar", sx, sy),
    )
    return {
        "melanin": _encode(mel, MELANIN_RANGE),
        "blood": _encode(blood, BLOOD_RANGE),
        "melanin_fraction": mel,
        "blood_fraction": blood,
        "marked": marked,
    }


def write_scenario(folder, size: int = 512, seed: int = DEFAULT_SEED) -> tuple:
    """Write the scenario's maps (``maps/melanin.exr``, ``maps/blood.exr``, float) and ``material.toml``.

    Parameters
    ----------
    folder : str or Path
        Folder to write into (created if needed).
    size : int
        Map side in texels.
    seed : int
        Noise seed.

    Returns
    -------
    tuple
        (path of ``material.toml``, the dict of :func:`generate_maps`).

    """
    folder = Path(folder)
    maps = generate_maps(size, seed)
    (folder / "maps").mkdir(parents=True, exist_ok=True)
    # pigment maps are non-colour data: tagged so (OpenColorIO "Raw") for any tool that colour-manages them
    attrs = {"matgen:scenario": f"Low Tide Lantern (invented), seed {seed}", **exr_data_attributes()}
    for name in ("melanin", "blood"):
        with atomic_path(folder / "maps" / f"{name}.exr") as tmp:
            write_exr(tmp, maps[name], ("Y",), pixel_type="float", attributes=attrs)
    config = folder / "material.toml"
    atomic_write_text(config, MATERIAL_CONFIG_TOML)
    return config, maps


#: Capture-like noise of the scenario's "scanned" albedo (invented for the demo, not a measured camera):
#: per channel and texel, Gaussian with a relative sigma of 0.2 % plus an absolute sigma of 0.0002.
SCAN_NOISE_RELATIVE = 0.002
SCAN_NOISE_ABSOLUTE = 0.0002


def scanned_albedo(albedo: np.ndarray, seed: int = DEFAULT_SEED) -> np.ndarray:
    """Make the scenario's invented "scanned" albedo: a baked albedo (H, W, 3) with capture-like noise.

    Stands in for a cross-polarised capture of the invented pilot: the baked albedo of the scenario's
    pigment maps, each channel and texel multiplied by (1 + 0.2 % noise) plus 0.0002 absolute noise
    (:data:`SCAN_NOISE_RELATIVE`, :data:`SCAN_NOISE_ABSOLUTE`), clipped to [0, 1]. Dimensionless.
    """
    rng = np.random.default_rng(seed + 1)
    a = np.asarray(albedo, dtype=np.float64)
    noisy = a * (1.0 + SCAN_NOISE_RELATIVE * rng.standard_normal(a.shape))
    noisy += SCAN_NOISE_ABSOLUTE * rng.standard_normal(a.shape)
    return np.clip(noisy, 0.0, 1.0).astype(np.float32)
