"""matgen.color: colour-science bridge (CMFs, illuminants, working spaces) and single-channel pass responses.

Units: wavelength in nm; values dimensionless. See :mod:`matgen.color.colorimetry` for the RGB convention
(CAT02 adaptation from the band-set white to the working-space white) and :mod:`matgen.color.passes` for
UV / IR passes.
"""

from matgen.color.colorimetry import (
    channel_weights,
    resolve_illuminant,
    resolve_space,
    spectral_to_rgb,
    xyz_weights,
)
from matgen.color.passes import BUILTIN_PASSES, load_response, pass_weights

__all__ = [
    "BUILTIN_PASSES",
    "channel_weights",
    "load_response",
    "pass_weights",
    "resolve_illuminant",
    "resolve_space",
    "spectral_to_rgb",
    "xyz_weights",
]
