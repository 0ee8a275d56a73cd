"""The skin stack: layer identities, their scattering laws and refractive indices. Units: nm, 1/mm.

Top to bottom: stratum corneum, viable epidermis, papillary dermis, reticular dermis, hypodermis, and
skeletal muscle. The five skin layers take their thicknesses from the parameters; the muscle layer is
:data:`matgen.constants.MUSCLE_THICKNESS_MM` thick and stands for the deep scattering tissue below the skin
(a clear medium there would swallow the 23-25 % of the incident light that reaches it at 700-850 nm). Below
it the index is matched (:data:`matgen.spectra.refractive.N_BELOW_MUSCLE`); above the stack is air.

Scattering of a layer depends on its identity only (law, anisotropy method, index), never on pigments:
tables reuse one scattering simulation for every pigment combination.

| layer | reduced scattering | g | n |
|---|---|---|---|
| stratum_corneum | Jacques 2013 Table 2, epidermis | van Gemert 1989 | 1.55 |
| epidermis | Jacques 2013 Table 2, epidermis | van Gemert 1989 | 1.40 |
| papillary_dermis | Jacques 2013 Table 2, dermis | van Gemert 1989 | 1.39 |
| reticular_dermis | Jacques 2013 Table 2, dermis | van Gemert 1989 | 1.40 |
| hypodermis | Bashkatov 2005, subcutaneous fat | van Gemert 1989 | 1.44 |
| muscle | Jacques 2013 Table 2, other soft tissues | van Gemert 1989 | 1.37 |

The stratum corneum takes the epidermis law for want of a separate published fit over 300-1000 nm; the van
Gemert fit was made for dermis and is used for every layer (both limits are stated in
docs/developers/tissue.md).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from matgen.spectra.bands import BandSet
from matgen.spectra.refractive import layer_index
from matgen.spectra.scattering import anisotropy, mu_s_from_reduced, mu_s_reduced


@dataclass(frozen=True)
class LayerSpec:
    """Identity of one layer: name, scattering law key, anisotropy method."""

    name: str
    scattering_law: str
    anisotropy_method: str = "vanGemert1989"


LAYERS: tuple[LayerSpec, ...] = (
    LayerSpec("stratum_corneum", "epidermis_Jacques2013"),
    LayerSpec("epidermis", "epidermis_Jacques2013"),
    LayerSpec("papillary_dermis", "dermis_Jacques2013"),
    LayerSpec("reticular_dermis", "dermis_Jacques2013"),
    LayerSpec("hypodermis", "subcutaneous_fat_Bashkatov2005"),
    LayerSpec("muscle", "soft_tissue_Jacques2013"),
)
#: The layers whose thickness comes from :class:`matgen.tissue.parameters.SkinParameters` (all but muscle).
SKIN_LAYER_COUNT = 5
LAYER_NAMES: tuple[str, ...] = tuple(layer.name for layer in LAYERS)


def layer_scattering(bands: BandSet) -> dict[str, np.ndarray]:
    """Scattering properties of every layer over ``bands``.

    Parameters
    ----------
    bands : BandSet
        Bands in nm (250-1100 nm).

    Returns
    -------
    dict
        ``mu_s_reduced``, ``mu_s`` (1/mm), ``g``, ``n`` (dimensionless), each of shape (L, B).
        Sources: Jacques2013 Eq. 2 and Table 2; Bashkatov2005; vanGemert1989; refractive-index sources in
        :mod:`matgen.spectra.refractive`.

    """
    musr = np.stack([mu_s_reduced(bands, layer.scattering_law) for layer in LAYERS])
    g = np.stack([anisotropy(bands, layer.anisotropy_method) for layer in LAYERS])
    n = np.stack([layer_index(layer.name, bands) for layer in LAYERS])
    return {"mu_s_reduced": musr, "mu_s": mu_s_from_reduced(musr, g), "g": g, "n": n}
