"""Preview of an albedo estimate: albedo in, re-baked albedo, CIEDE2000 map, pigment maps, gamut mask.

Colour panels are the working-space albedo through :func:`matgen.preview.images.working_to_display` (sRGB
view); data panels carry a colour bar with their unit (pigments in their axis unit, residual in CIEDE2000).
Units: as the estimate's outputs (volume fractions, shares; CIEDE2000).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from matgen.estimate.run import CAUTION
from matgen.preview.images import working_to_display
from matgen.preview.plots import _plt, _save

#: Unit label of each estimable axis in the previews.
AXIS_UNITS = {
    "melanin_fraction": "volume fraction",
    "blood_fraction": "volume fraction",
    "eumelanin_share": "share of melanin",
    "oxygen_saturation": "fraction",
}


def estimate_sheet(
    out_png,
    albedo_in: np.ndarray,
    albedo_rebaked: np.ndarray,
    pigments: dict,
    de2000: np.ndarray,
    out_of_gamut: np.ndarray,
    working_space: str = "ACEScg",
    title: str = "albedo estimate",
) -> Path:
    """Write the side-by-side preview PNG of one texture (or UDIM tile) of an estimate.

    Parameters
    ----------
    out_png : str or Path
        PNG file to write.
    albedo_in, albedo_rebaked : ndarray (H, W, 3)
        Linear working-space albedo given to the estimate, and the bake of its material config.
    pigments : dict
        Axis name -> (H, W) estimated values (axis unit).
    de2000 : ndarray (H, W)
        CIEDE2000 between the two albedos (or the estimate's residual map).
    out_of_gamut : ndarray (H, W)
        1 where the estimate flagged the texel out of gamut.
    working_space : str
        colour-science name of the albedos' working space.
    title : str
        Figure title.

    Returns
    -------
    Path

    """
    plt = _plt()
    panels = 3 + len(pigments) + 1
    cols = 3
    rows = (panels + cols - 1) // cols
    fig, axes = plt.subplots(rows, cols, figsize=(4.2 * cols, 3.9 * rows + 0.6), squeeze=False)
    flat = list(axes.ravel())
    for ax, img, label in (
        (flat[0], albedo_in, "albedo in (sRGB view)"),
        (flat[1], albedo_rebaked, "re-baked from the estimate (sRGB view)"),
    ):
        ax.imshow(working_to_display(img, working_space), interpolation="nearest")
        ax.set_title(label, fontsize=9)
    im = flat[2].imshow(de2000, cmap="magma", vmin=0.0, vmax=max(1.0, float(np.nanpercentile(de2000, 99))))
    flat[2].set_title(f"CIEDE2000 in vs re-baked (median {np.nanmedian(de2000):.2f})", fontsize=9)
    fig.colorbar(im, ax=flat[2], fraction=0.046, pad=0.04, label="CIEDE2000")
    for ax, (name, values) in zip(flat[3:], pigments.items(), strict=False):
        im = ax.imshow(values, cmap="viridis")
        ax.set_title(f"estimated {name}", fontsize=9)
        fig.colorbar(im, ax=ax, fraction=0.046, pad=0.04, label=AXIS_UNITS.get(name, ""))
    ax = flat[3 + len(pigments)]
    im = ax.imshow(out_of_gamut, cmap="gray", vmin=0, vmax=1)
    ax.set_title(f"out of gamut ({100 * float(np.mean(out_of_gamut)):.2f} % of texels)", fontsize=9)
    fig.colorbar(im, ax=ax, fraction=0.046, pad=0.04, label="1 = no table colour within tolerance")
    for ax in flat:
        ax.set_xticks([])
        ax.set_yticks([])
    for ax in flat[panels:]:
        ax.axis("off")
    fig.suptitle(title, fontsize=11)
    fig.text(0.5, 0.01, CAUTION, ha="center", fontsize=7, wrap=True)
    fig.tight_layout(rect=(0, 0.04, 1, 0.96))
    return _save(fig, out_png)
