"""Refractive indices of skin layers and of the media around the stack. Dimensionless; wavelengths in nm.

matgen uses one non-dispersive index per layer: the published dispersion of skin layers over 400-1000 nm is a
few thousandths (Ding et al. 2006, from memory), below the spread between studies. Every value is from memory
of the named source and marked so; re-check them against the papers when they can be read.
"""

from __future__ import annotations

import numpy as np

from matgen import constants as C
from matgen.errors import ParameterError
from matgen.spectra.bands import BandSet

#: layer name -> (index, source). All from memory; values in matgen.constants.
LAYER_INDEX: dict[str, tuple[float, str]] = {
    # Tearney et al. 1995 measured about 1.51 in vivo by OCT; the keratin-rich layer is usually modelled at
    # 1.5-1.55 (Lister2012 review). matgen takes 1.55. (from memory)
    "stratum_corneum": (C.N_STRATUM_CORNEUM, "Tearney1995; Lister2012 (from memory)"),
    # viable epidermis about 1.40 (Lister2012 review; Ding2006 reports 1.40-1.43 over 400-1000 nm;
    # from memory)
    "epidermis": (C.N_EPIDERMIS, "Lister2012; Ding2006 (from memory)"),
    # dermis 1.39-1.41 (Ding2006; Bolin1989; from memory)
    "papillary_dermis": (C.N_PAPILLARY_DERMIS, "Ding2006; Bolin1989 (from memory)"),
    "reticular_dermis": (C.N_RETICULAR_DERMIS, "Ding2006; Bolin1989 (from memory)"),
    # adipose tissue about 1.44-1.46 (Bolin1989, from memory)
    "hypodermis": (C.N_HYPODERMIS, "Bolin1989 (from memory)"),
    # skeletal muscle about 1.37-1.38 (Bolin1989, from memory)
    "muscle": (C.N_MUSCLE, "Bolin1989 (from memory)"),
}

#: Index of the medium below the stack's last layer (muscle): the same muscle index, so the bottom of the
#: stack is index matched and light leaving it (0.1-0.2 % of the incident power) is lost without a Fresnel
#: reflection (Bolin1989, from memory).
N_BELOW_MUSCLE = C.N_MUSCLE
N_BELOW_SOURCE = "Bolin1989 (muscle, from memory)"


def layer_index(layer: str, bands: BandSet) -> np.ndarray:
    """Refractive index of a skin layer for each band (constant over wavelength).

    Parameters
    ----------
    layer : str
        One of :data:`LAYER_INDEX`.
    bands : BandSet
        Bands in nm.

    Returns
    -------
    ndarray, shape (B,)
        Real refractive index (dimensionless). Sources per layer in :data:`LAYER_INDEX`.

    """
    try:
        n, _ = LAYER_INDEX[layer]
    except KeyError as exc:
        raise ParameterError(
            f"no refractive index for layer {layer!r}; known: {', '.join(LAYER_INDEX)}"
        ) from exc
    return np.full(len(bands), n)
