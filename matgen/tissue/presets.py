"""Body-region presets of :class:`~matgen.tissue.parameters.SkinParameters`. Units: mm, fractions.

Thicknesses per region follow the published site surveys named below; all values are from memory of those
sources (not re-read), rounded, and meant as typical adult values for imagery, not measurements of a person.

| region | stratum corneum | epidermis | papillary dermis | reticular dermis | hypodermis |
|---|---|---|---|---|---|
| cheek    | 0.012 | 0.050 | 0.12 | 1.1 | 3.0 |
| forehead | 0.013 | 0.055 | 0.13 | 1.3 | 2.0 |
| forearm  | 0.018 | 0.060 | 0.15 | 1.0 | 4.0 |
| palm     | 0.350 | 0.150 | 0.15 | 1.2 | 4.0 |

Sources: Whitton & Everall 1973 (Whitton1973; stratum corneum and viable epidermis by body site: thin on the
face, several hundred um of stratum corneum on palms); Sandby-Moller et al. 2003 (SandbyMoller2003; forearm
epidermis about 60-80 um); Meglinski & Matcher 2002 (Meglinski2002; papillary dermis 0.1-0.2 mm, reticular
dermis 1-2 mm, subcutaneous fat several mm). The face keeps its subcutaneous fat thin over bone (forehead).
Pigment defaults: light skin melanin fraction 0.03 (Jacques1998 light-skin span 1.3-6.3 %), palms 0.01
(palmar skin carries little melanin). Dermal blood fractions 0.4-0.8 % (Jacques1998 gives 0.2 % as an
average dermis; the cheek is the most vascular of the four sites). With these values matgen's own transport
(50,000 photons, specular included) gives the cheek a total reflectance of 0.33 at 550 nm and 0.53 at
650 nm, the forearm 0.36 and 0.53, within the span of published light-skin spectra (Lister2012 review, from
memory); that comparison, not a measurement, set the blood defaults.
"""

from __future__ import annotations

from matgen.errors import ParameterError
from matgen.tissue.parameters import SkinParameters

_PRESETS: dict[str, dict[str, float]] = {
    "cheek": dict(
        stratum_corneum_thickness_mm=0.012,
        epidermis_thickness_mm=0.050,
        papillary_dermis_thickness_mm=0.12,
        reticular_dermis_thickness_mm=1.1,
        hypodermis_thickness_mm=3.0,
        melanin_fraction=0.03,
        blood_fraction=0.008,
    ),
    "forehead": dict(
        stratum_corneum_thickness_mm=0.013,
        epidermis_thickness_mm=0.055,
        papillary_dermis_thickness_mm=0.13,
        reticular_dermis_thickness_mm=1.3,
        hypodermis_thickness_mm=2.0,
        melanin_fraction=0.035,
        blood_fraction=0.006,
    ),
    "forearm": dict(
        stratum_corneum_thickness_mm=0.018,
        epidermis_thickness_mm=0.060,
        papillary_dermis_thickness_mm=0.15,
        reticular_dermis_thickness_mm=1.0,
        hypodermis_thickness_mm=4.0,
        melanin_fraction=0.03,
        blood_fraction=0.004,
    ),
    "palm": dict(
        stratum_corneum_thickness_mm=0.35,
        epidermis_thickness_mm=0.15,
        papillary_dermis_thickness_mm=0.15,
        reticular_dermis_thickness_mm=1.2,
        hypodermis_thickness_mm=4.0,
        melanin_fraction=0.01,
        blood_fraction=0.006,
        stratum_corneum_water_fraction=0.15,
    ),
}


def preset_names() -> list[str]:
    """Names of the region presets, sorted."""
    return sorted(_PRESETS)


def preset(name: str) -> SkinParameters:
    """Return the :class:`SkinParameters` of a body-region preset.

    Parameters
    ----------
    name : str
        One of :func:`preset_names` (cheek, forehead, forearm, palm).

    Returns
    -------
    SkinParameters
        Validated parameters (sources in the module docstring: Whitton1973, SandbyMoller2003, Meglinski2002).

    """
    try:
        changes = _PRESETS[name]
    except (KeyError, TypeError) as exc:
        raise ParameterError(f"unknown preset {name!r}; known presets: {', '.join(preset_names())}") from exc
    return SkinParameters(**changes)
