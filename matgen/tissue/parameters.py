"""Skin parameters: pigmentation, composition and layer thicknesses, validated. Units: fractions, umol/L, mm.

:class:`SkinParameters` is a frozen dataclass; every field has an allowed range (:data:`FIELD_SPECS`) with the
published source of its physiological span. Volume fractions are shares of a layer's volume; the fractions
that
share one layer must not sum above 1. Errors are :class:`~matgen.errors.ParameterError` naming the field, the
value and the allowed range.

Ranges marked "from memory" are recalled from the named source and not re-read; they are generous on purpose
(a renderer may want a deeper blush than any survey saw), never narrower than the published span.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

from matgen.errors import ParameterError


@dataclass(frozen=True)
class FieldSpec:
    """Allowed range, unit and source of one :class:`SkinParameters` field."""

    low: float
    high: float
    unit: str
    help: str
    source: str


#: field name -> spec. Order is the CLI's option order.
FIELD_SPECS: dict[str, FieldSpec] = {
    "melanin_fraction": FieldSpec(
        0.0,
        0.5,
        "volume fraction",
        "melanosome volume fraction of the viable epidermis",
        "Jacques1998: 1.3-6.3 % light, 11-16 % medium, 18-43 % dark skin (from memory; the 43 % upper end "
        "re-read as quoted from Jacques2013 by Blaney2024)",
    ),
    "eumelanin_share": FieldSpec(
        0.0,
        1.0,
        "fraction",
        "eumelanin share of total melanin (rest pheomelanin)",
        "DonnerJensen2006 (from memory); a share is bounded by definition",
    ),
    "blood_fraction": FieldSpec(
        0.0,
        0.2,
        "volume fraction",
        "blood volume fraction of papillary and reticular dermis",
        "Jacques1998 (average dermis 0.2 %, re-read); Meglinski2002 (a few % in vascular plexus layers, "
        "from memory); up to 20 % for flushed or vascular skin",
    ),
    "oxygen_saturation": FieldSpec(
        0.0,
        1.0,
        "fraction",
        "haemoglobin oxygen saturation of dermal blood",
        "bounded by definition; dermal averages 0.4-0.9 (Jacques2013, from memory)",
    ),
    "stratum_corneum_water_fraction": FieldSpec(
        0.0,
        0.6,
        "volume fraction",
        "water volume fraction of the stratum corneum",
        "Meglinski2002 (about 5-35 %, from memory)",
    ),
    "epidermis_water_fraction": FieldSpec(
        0.0,
        0.9,
        "volume fraction",
        "water volume fraction of the viable epidermis",
        "Meglinski2002 (about 60 %, from memory)",
    ),
    "dermis_water_fraction": FieldSpec(
        0.0,
        0.9,
        "volume fraction",
        "water volume fraction of papillary and reticular dermis",
        "Meglinski2002; Jacques2013 (about 60-70 %, from memory)",
    ),
    "hypodermis_water_fraction": FieldSpec(
        0.0,
        0.9,
        "volume fraction",
        "water volume fraction of the hypodermis",
        "vanVeen2005; Meglinski2002 (about 10-30 % in adipose tissue, from memory)",
    ),
    "dermis_lipid_fraction": FieldSpec(
        0.0,
        0.5,
        "volume fraction",
        "lipid volume fraction of papillary and reticular dermis",
        "Jacques2013 generic-tissue model (a few %, from memory)",
    ),
    "hypodermis_lipid_fraction": FieldSpec(
        0.0,
        1.0,
        "volume fraction",
        "lipid volume fraction of the hypodermis",
        "vanVeen2005 (adipose tissue 60-90 % lipid, from memory)",
    ),
    "hypodermis_blood_fraction": FieldSpec(
        0.0,
        0.2,
        "volume fraction",
        "blood volume fraction of the hypodermis",
        "Meglinski2002 (about 5 %, from memory)",
    ),
    "carotene_umol_per_l": FieldSpec(
        0.0,
        50.0,
        "umol/L",
        "beta-carotene concentration in stratum corneum and epidermis",
        "from memory: skin carotenoids of the order of 0.1-5 umol/L, more with carotenaemia",
    ),
    "bilirubin_umol_per_l": FieldSpec(
        0.0,
        600.0,
        "umol/L",
        "bilirubin concentration of blood plasma",
        "from memory: normal serum 5-20 umol/L, jaundice up to several hundred umol/L",
    ),
    "stratum_corneum_thickness_mm": FieldSpec(
        0.005,
        1.0,
        "mm",
        "stratum corneum thickness",
        "Whitton1973; SandbyMoller2003 (10-20 um on face and forearm, several 100 um on palms; from memory)",
    ),
    "epidermis_thickness_mm": FieldSpec(
        0.02,
        0.6,
        "mm",
        "viable epidermis thickness",
        "Whitton1973; SandbyMoller2003 (about 40-100 um, up to 400 um on palms; from memory)",
    ),
    "papillary_dermis_thickness_mm": FieldSpec(
        0.02, 0.5, "mm", "papillary dermis thickness", "Meglinski2002 (about 100-200 um, from memory)"
    ),
    "reticular_dermis_thickness_mm": FieldSpec(
        0.2, 4.0, "mm", "reticular dermis thickness", "Meglinski2002 (about 1-2 mm, from memory)"
    ),
    "hypodermis_thickness_mm": FieldSpec(
        0.2,
        30.0,
        "mm",
        "hypodermis (subcutaneous fat) thickness in the model's finite stack",
        "Meglinski2002 (1-6 mm and more, from memory)",
    ),
    "thickness_scale": FieldSpec(
        0.1, 10.0, "factor", "multiplies every layer thickness", "matgen convention"
    ),
    "melanosome_diameter_mm": FieldSpec(
        1.0e-4,
        5.0e-3,
        "mm",
        "equivalent sphere diameter of melanosomes (packaging)",
        "from memory: melanosomes about 0.3-1 um; clusters up to a few um",
    ),
    "papillary_vessel_radius_mm": FieldSpec(
        1.0e-3,
        0.1,
        "mm",
        "mean vessel radius in the papillary dermis (packaging)",
        "vanVeen2002; Svaasand1995 (capillaries 3-5 um radius, from memory)",
    ),
    "reticular_vessel_radius_mm": FieldSpec(
        1.0e-3,
        0.5,
        "mm",
        "mean vessel radius in the reticular dermis (packaging)",
        "vanVeen2002; Svaasand1995 (venules 10-50 um radius, from memory)",
    ),
}

#: Fields that set absorption only (never scattering, refractive index or geometry).
PIGMENT_FIELDS = (
    "melanin_fraction",
    "eumelanin_share",
    "blood_fraction",
    "oxygen_saturation",
    "stratum_corneum_water_fraction",
    "epidermis_water_fraction",
    "dermis_water_fraction",
    "hypodermis_water_fraction",
    "dermis_lipid_fraction",
    "hypodermis_lipid_fraction",
    "hypodermis_blood_fraction",
    "carotene_umol_per_l",
    "bilirubin_umol_per_l",
    "melanosome_diameter_mm",
    "papillary_vessel_radius_mm",
    "reticular_vessel_radius_mm",
)
THICKNESS_FIELDS = (
    "stratum_corneum_thickness_mm",
    "epidermis_thickness_mm",
    "papillary_dermis_thickness_mm",
    "reticular_dermis_thickness_mm",
    "hypodermis_thickness_mm",
    "thickness_scale",
)

#: Volume fractions sharing each layer; their sum must stay <= 1.
LAYER_FRACTIONS = {
    "stratum_corneum": ("stratum_corneum_water_fraction",),
    "epidermis": ("melanin_fraction", "epidermis_water_fraction"),
    "papillary_dermis": ("blood_fraction", "dermis_water_fraction", "dermis_lipid_fraction"),
    "reticular_dermis": ("blood_fraction", "dermis_water_fraction", "dermis_lipid_fraction"),
    "hypodermis": ("hypodermis_blood_fraction", "hypodermis_water_fraction", "hypodermis_lipid_fraction"),
}


@dataclass(frozen=True)
class SkinParameters:
    """Pigmentation, composition and geometry of a five-layer skin model.

    Every field is a float; :data:`FIELD_SPECS` gives its unit, allowed range and source. Defaults describe a
    lightly pigmented forearm-like skin (see :mod:`matgen.tissue.presets` for region presets).

    Attributes
    ----------
    melanin_fraction : float
        Melanosome volume fraction of the viable epidermis (0-0.5).
    eumelanin_share : float
        Eumelanin / total melanin (0-1).
    blood_fraction : float
        Blood volume fraction of the papillary and reticular dermis (0-0.2).
    oxygen_saturation : float
        Oxygen saturation of dermal blood (0-1).
    stratum_corneum_water_fraction, epidermis_water_fraction, dermis_water_fraction, hypodermis_water_fraction
        Water volume fractions per layer.
    dermis_lipid_fraction, hypodermis_lipid_fraction : float
        Lipid volume fractions.
    hypodermis_blood_fraction : float
        Blood volume fraction of the hypodermis.
    carotene_umol_per_l : float
        beta-carotene in stratum corneum and epidermis, umol/L.
    bilirubin_umol_per_l : float
        Bilirubin in blood plasma, umol/L.
    stratum_corneum_thickness_mm ... hypodermis_thickness_mm : float
        Layer thicknesses in mm (before ``thickness_scale``).
    thickness_scale : float
        Multiplies every layer thickness (default 1).
    melanosome_diameter_mm, papillary_vessel_radius_mm, reticular_vessel_radius_mm : float
        Absorber geometry for pigment packaging, mm.

    """

    melanin_fraction: float = 0.03
    eumelanin_share: float = 0.7
    blood_fraction: float = 0.005
    oxygen_saturation: float = 0.75
    stratum_corneum_water_fraction: float = 0.2
    epidermis_water_fraction: float = 0.6
    dermis_water_fraction: float = 0.65
    hypodermis_water_fraction: float = 0.15
    dermis_lipid_fraction: float = 0.0
    hypodermis_lipid_fraction: float = 0.8
    hypodermis_blood_fraction: float = 0.01
    carotene_umol_per_l: float = 0.5
    bilirubin_umol_per_l: float = 10.0
    stratum_corneum_thickness_mm: float = 0.018
    epidermis_thickness_mm: float = 0.06
    papillary_dermis_thickness_mm: float = 0.15
    reticular_dermis_thickness_mm: float = 1.0
    hypodermis_thickness_mm: float = 3.0
    thickness_scale: float = 1.0
    melanosome_diameter_mm: float = 0.0006
    papillary_vessel_radius_mm: float = 0.004
    reticular_vessel_radius_mm: float = 0.015

    def __post_init__(self):
        for name, spec in FIELD_SPECS.items():
            raw = getattr(self, name)
            if isinstance(raw, (bool, str, bytes)):
                raise ParameterError(f"{name} is {raw!r}; must be a number ({spec.unit})")
            try:
                value = float(raw)
            except (TypeError, ValueError) as exc:
                raise ParameterError(f"{name} is {raw!r}; must be a number ({spec.unit})") from exc
            if not math.isfinite(value):
                raise ParameterError(
                    f"{name} is {value!r}; must be finite, in [{spec.low:g}, {spec.high:g}] {spec.unit}"
                )
            if not (spec.low <= value <= spec.high):
                raise ParameterError(
                    f"{name} = {value:g} is outside its allowed range "
                    f"[{spec.low:g}, {spec.high:g}] {spec.unit} "
                    f"({spec.help}; source: {spec.source})"
                )
            object.__setattr__(self, name, value)
        for layer, names in LAYER_FRACTIONS.items():
            total = sum(getattr(self, n) for n in names)
            if total > 1.0 + 1e-12:
                parts = " + ".join(f"{n} {getattr(self, n):g}" for n in names)
                raise ParameterError(
                    f"volume fractions of layer '{layer}' sum to {total:g} ({parts}); the sum must be <= 1"
                )

    def replace(self, **changes) -> SkinParameters:
        """Return a new, validated copy with ``changes`` applied (unknown names are an error)."""
        unknown = sorted(set(changes) - set(FIELD_SPECS))
        if unknown:
            raise ParameterError(
                f"unknown SkinParameters field(s) {unknown}; known: {', '.join(FIELD_SPECS)}"
            )
        return dataclasses.replace(self, **changes)

    def to_dict(self) -> dict[str, float]:
        """Field name -> value (JSON-ready)."""
        return {name: getattr(self, name) for name in FIELD_SPECS}

    @classmethod
    def from_dict(cls, data: dict) -> SkinParameters:
        """Inverse of :meth:`to_dict`; unknown keys are an error naming them."""
        unknown = sorted(set(data) - set(FIELD_SPECS))
        if unknown:
            raise ParameterError(
                f"unknown SkinParameters field(s) {unknown}; known: {', '.join(FIELD_SPECS)}"
            )
        return cls(**data)

    def thicknesses_mm(self) -> tuple[float, float, float, float, float]:
        """Scaled layer thicknesses in mm, top to bottom (stratum corneum ... hypodermis)."""
        s = self.thickness_scale
        return (
            self.stratum_corneum_thickness_mm * s,
            self.epidermis_thickness_mm * s,
            self.papillary_dermis_thickness_mm * s,
            self.reticular_dermis_thickness_mm * s,
            self.hypodermis_thickness_mm * s,
        )


assert tuple(f.name for f in dataclasses.fields(SkinParameters)) == tuple(FIELD_SPECS), "field order drift"
