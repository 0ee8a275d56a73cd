"""Cautions that travel with matgen's outputs: one home for their wording.

matgen makes pictures. The wording here is printed by the commands whose numbers people might be tempted
to read as measurements (``demo``, ``optics``, ``report``), carried in every material descriptor, and shown
beside the UV and near-infrared passes.
"""

from __future__ import annotations

import sys

#: One line: what matgen's numbers are not for, and whom to defer to.
IMAGERY_ONLY = (
    "caution: matgen's outputs are for imagery only; they are no basis for clinical, diagnostic, dosimetric "
    "or UV-exposure decisions, which belong to licensed practice under local regulations and codes."
)

#: Beside the UV and near-infrared passes: shooting reference under real sources.
REAL_SOURCES = (
    "Shooting reference under real UV-A or near-infrared lamps: protect eyes and skin (UV-A and "
    "near-infrared light is hard or impossible to see, so glare gives no warning), keep within the lamp "
    "maker's stated exposure, distance and duty limits, and follow local occupational-safety rules."
)

#: What the passes show, in neutral physical terms (common practice; the melanin law is Jacques 1998's
#: lambda^-3.33 fall-off, the haemoglobin bands Prahl 1999's table).
PASS_PHYSICS = (
    "Pass maps show band-integrated reflectance of the modelled skin weighted by a lamp, filter and sensor: "
    "pigment contrast rises toward the UV, where melanin absorbs several times more strongly than in the "
    "visible, and falls in the near infrared, where melanin and haemoglobin absorb little and scattering "
    "evens the skin out. Fluorescence is not modelled."
)


def print_caution(stream=None) -> None:
    """Write :data:`IMAGERY_ONLY` as one line to ``stream`` (standard error by default).

    Standard error keeps machine-readable standard output (``--format json``, ``--json``) parseable.
    """
    print(IMAGERY_ONLY, file=stream or sys.stderr)
