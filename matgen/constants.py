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

#: Default bands of matgen: centres 300..1000 nm in 10 nm steps, each band 10 nm wide.
DEFAULT_BAND_START_NM = 300.0
DEFAULT_BAND_STOP_NM = 1000.0
DEFAULT_BAND_STEP_NM = 10.0

#: Ceiling on photons of one transport run; guards against accidental or hostile requests.
#: Fixed-point tallies (2^32 per unit weight in int64) stay exact below 2^31 photons.
MAX_PHOTONS = 2_000_000_000

# ----------------------------------------------------------------------------------------------------
# Skin optics: published law coefficients and tissue constants (used by matgen.spectra and matgen.tissue).
# "re-read" means the value was read again in the named source; "from memory" means it was not.
# ----------------------------------------------------------------------------------------------------

#: Micromoles per mole: converts concentrations in umol/L to mol/L. (unit definition)
MOL_PER_UMOL = 1.0e-6

#: Plasma share of whole-blood volume, 1 - haematocrit with haematocrit 0.45, dimensionless. Typical adult
#: value (from memory); simpa's ``OpticalTissueProperties.BLOOD_PLASMA_FRACTION`` is the same 0.55 (tested).
BLOOD_PLASMA_VOLUME_FRACTION = 0.55

#: Eumelanin melanosome interior, Jacques 1998: mu_a = 6.6e11 lambda[nm]^-3.33 1/cm = 6.6e10 lambda^-3.33 1/mm
#: (Jacques1998, from memory; simpa's Melanin.npz tabulates the same law over 450-1000 nm, tested).
EUMELANIN_JACQUES1998_PER_MM = 6.6e10
EUMELANIN_JACQUES1998_EXPONENT = -3.33

#: Eumelanin melanosome interior, Jacques 2013 Eq. 8: mu_a = 519 (lambda / 500 nm)^-3.5 1/cm, i.e. 51.9 1/mm
#: at 500 nm (Jacques2013). The paper itself was not re-read; the value was re-read as quoted from its Eq. 8
#: by the tissue absorption tool of Blaney et al. 2024 (gbphd.com).
EUMELANIN_JACQUES2013_AT_500NM_PER_MM = 51.9
EUMELANIN_JACQUES2013_EXPONENT = -3.5

#: Pheomelanin, Donner & Jensen 2006: mu_a = 2.9e14 lambda[nm]^-4.75 1/mm (DonnerJensen2006, from memory).
PHEOMELANIN_DONNERJENSEN2006_PER_MM = 2.9e14
PHEOMELANIN_DONNERJENSEN2006_EXPONENT = -4.75

#: Bloodless skin baseline, Jacques 1998 Sec. 1.1: mu_a = 0.244 + 85.3 exp(-(lambda - 154 nm) / 66.2 nm) 1/cm,
#: bloodless rat skin, 350-1100 nm (Jacques1998, re-read from the omlc.org skin optics summary).
BASELINE_JACQUES1998_FLOOR_PER_CM = 0.244
BASELINE_JACQUES1998_AMPLITUDE_PER_CM = 85.3
BASELINE_JACQUES1998_OFFSET_NM = 154.0
BASELINE_JACQUES1998_DECAY_NM = 66.2

#: Neonatal skin baseline of Saidi, quoted by Jacques 1998 Sec. 1.1: 7.84e8 lambda[nm]^-3.255 1/cm,
#: 450-750 nm (Saidi1992; re-read from the omlc.org skin optics summary).
BASELINE_SAIDI1992_PER_CM = 7.84e8
BASELINE_SAIDI1992_EXPONENT = -3.255

#: Reference wavelength of the Jacques 2013 Eq. 2 reduced-scattering law and of its Eq. 8 melanin law, nm.
JACQUES2013_REFERENCE_WAVELENGTH_NM = 500.0

#: Jacques 2013 Table 2 reduced-scattering parameter sets as used by matgen: a' (1/cm, at 500 nm), f_Ray,
#: b_Mie. The table could not be re-read: from memory.
JACQUES2013_SKIN_A_PRIME_PER_CM = 46.0
JACQUES2013_SKIN_F_RAY = 0.409
JACQUES2013_SKIN_B_MIE = 0.562
JACQUES2013_DERMIS_A_PRIME_PER_CM = 43.6
JACQUES2013_DERMIS_F_RAY = 0.41
JACQUES2013_DERMIS_B_MIE = 0.562
JACQUES2013_EPIDERMIS_A_PRIME_PER_CM = 66.7
JACQUES2013_EPIDERMIS_F_RAY = 0.29
JACQUES2013_EPIDERMIS_B_MIE = 0.689

#: Generic soft tissue, Jacques 2013 Table 2 ("other soft tissues", the average of the review's muscle, liver
#: and similar entries): mu_s' = 18.9 (lambda / 500 nm)^-1.286 1/cm (Jacques2013; from memory, the table could
#: not be re-read). Used for skeletal muscle below the hypodermis, as a pure power law (f_Ray = 0).
SOFT_TISSUE_JACQUES2013_A_PRIME_PER_CM = 18.9
SOFT_TISSUE_JACQUES2013_B = 1.286

#: Skeletal muscle below the hypodermis (matgen's deep layer), volume fractions (all from memory): water about
#: 0.75 of lean muscle (WoodardWhite1986); lipid a few % (0.05 taken); haem
#: pigment: blood 1-3 % of muscle volume plus myoglobin, whose absorption spectrum resembles haemoglobin's,
#: taken together as 4 % whole-blood-equivalent haemoglobin at 70 % oxygen saturation (a model choice). The
#: rest is the bloodless baseline. At 800 nm this gives mu_a = 0.023 1/mm, within the 0.1-0.3 1/cm that
#: near-infrared spectroscopy of muscle reports (from memory).
MUSCLE_WATER_FRACTION = 0.75
MUSCLE_LIPID_FRACTION = 0.05
MUSCLE_BLOOD_FRACTION = 0.04
MUSCLE_OXYGEN_SATURATION = 0.7

#: Thickness of the muscle layer that closes the stack, mm (a model choice standing for a semi-infinite
#: medium: light that reaches 20 mm of muscle below the hypodermis and still leaves its bottom is 0.1-0.2 %
#: of the incident power at 700-1000 nm, measured with matgen's transport on the cheek preset).
MUSCLE_THICKNESS_MM = 20.0

#: Subcutaneous adipose tissue, Bashkatov et al. 2005: mu_s' = 1050.6 lambda[nm]^-0.68 1/cm, 400-2000 nm
#: (Bashkatov2005, from memory).
FAT_BASHKATOV2005_PER_CM = 1050.6
FAT_BASHKATOV2005_EXPONENT = -0.68

#: Anisotropy of dermis, van Gemert et al. 1989: g = 0.62 + 0.29e-3 lambda[nm] (vanGemert1989, from memory).
G_VANGEMERT1989_INTERCEPT = 0.62
G_VANGEMERT1989_SLOPE_PER_NM = 0.29e-3

#: Refractive indices of the skin layers, dimensionless, non-dispersive (all from memory of the named
#: sources): stratum corneum (Tearney1995 measured about 1.51 in vivo by OCT; modelled at 1.5-1.55,
#: Lister2012), viable epidermis (Lister2012; Ding2006), papillary and reticular dermis (Ding2006;
#: Bolin1989), adipose tissue (Bolin1989), and skeletal muscle, the stack's deepest layer (Bolin1989).
N_STRATUM_CORNEUM = 1.55
N_EPIDERMIS = 1.40
N_PAPILLARY_DERMIS = 1.39
N_RETICULAR_DERMIS = 1.40
N_HYPODERMIS = 1.44
N_MUSCLE = 1.37

#: beta-carotene in hexane, peak decadic molar extinction near 450 nm, cm^-1/M (PhotochemCAD1998, from
#: memory).
CAROTENE_PEAK_PER_CM_PER_MOLAR = 1.395e5
#: bilirubin in chloroform, peak decadic molar extinction at about 451-453 nm, cm^-1/M (PhotochemCAD1998;
#: re-read from a quotation of that entry).
BILIRUBIN_PEAK_PER_CM_PER_MOLAR = 5.5e4

#: Millimetres per metre. (unit definition)
MM_PER_M = 1000.0

#: Nanometres per centimetre: wavenumber in cm^-1 = NM_PER_CM / wavelength in nm. (unit definition)
NM_PER_CM = 1.0e7

#: Dermis reduced scattering of the Jacques 1998 skin optics summary: mu_s' = 2e12 lambda[nm]^-4 (Rayleigh,
#: small collagen structure) + 2e5 lambda[nm]^-1.5 (Mie, collagen fibres) 1/cm (Jacques1998; from memory,
#: confirmed to 0.1 % at 450-950 nm by the dermis reference table that simpa 1.0.0 tests against, which cites
#: omlc.org/news/jan98/skinoptics.html).
DERMIS_JACQUES1998_RAYLEIGH_PER_CM = 2.0e12
DERMIS_JACQUES1998_MIE_PER_CM = 2.0e5
DERMIS_JACQUES1998_MIE_EXPONENT = -1.5
