"""Physical and numerical constants used by matgen, each with value, unit and source.

Units: nanometres, millimetres, 1/mm unless a name says otherwise. No literal physical constant belongs
inside a function body: add it here with its source.
"""

from __future__ import annotations

import math

#: ln(10): converts decadic extinction to natural-log absorption. Dimensionless. (mathematical constant)
LN10 = math.log(10.0)

#: Molar mass of haemoglobin (tetramer) in g/mol. Prahl 1999, "Optical absorption of hemoglobin" (omlc.org).
HEMOGLOBIN_MOLAR_MASS_G_PER_MOL = 64500.0

#: Haemoglobin concentration of whole blood in g/L. Jacques 2013 (Phys. Med. Biol. 58 R37), Sec. 3.1.
WHOLE_BLOOD_HEMOGLOBIN_G_PER_L = 150.0

#: Millimetres per centimetre.
MM_PER_CM = 10.0

#: Nanometres per millimetre.
NM_PER_MM = 1.0e6

#: Refractive index of air at visible wavelengths, to 4 decimals. (common practice: 1.0 used as vacuum)
N_AIR = 1.0

#: Default bands of matgen: centres 300..1000 nm in 10 nm steps, each band 10 nm wide. (DESIGN.md)
DEFAULT_BAND_START_NM = 300.0
DEFAULT_BAND_STOP_NM = 1000.0
DEFAULT_BAND_STEP_NM = 10.0

#: Ceiling on photons of one transport run; guards against accidental or hostile requests.
#: Fixed-point tallies (2^32 per unit weight in int64) stay exact below 2^31 photons.
MAX_PHOTONS = 2_000_000_000
