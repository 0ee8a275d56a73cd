"""Scattering laws of skin layers: reduced scattering power laws and anisotropy. Units: nm in, 1/mm out.

Reduced scattering follows Jacques 2013, Eq. 2 (Jacques2013):

    mu_s'(lambda) = a' * ( f_Ray (lambda / 500 nm)^-4 + (1 - f_Ray) (lambda / 500 nm)^-b_Mie ),

with a' = mu_s'(500 nm). The anisotropy g(lambda) of van Gemert et al. 1989 (vanGemert1989),
g = 0.62 + 0.29e-3 lambda [nm], converts it to the scattering coefficient mu_s = mu_s' / (1 - g).
All values here depend on the wavelength and the layer only, never on pigments (tables reuse one scattering
simulation for every pigment combination). Band values are band averages (Gauss-Legendre quadrature).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from matgen import constants as C
from matgen.constants import MM_PER_CM
from matgen.errors import ParameterError
from matgen.spectra.bands import BandSet
from matgen.spectra.chromophores import band_average_function

#: Wavelength range (nm) over which matgen applies the power laws and g(lambda). The published fits cover
#: roughly 400-1100 nm; UV bands down to 250 nm extend the same smooth law (documented in
#: docs/developers/tissue.md as an extrapolation).
SCATTERING_RANGE_NM = (250.0, 1700.0)
#: Range (nm) where matgen applies the van Gemert g(lambda) fit: at 1100 nm it reaches g = 0.939, beyond it
#: would approach 1.
VANGEMERT_RANGE_NM = (250.0, 1100.0)
#: Reference wavelength of the Jacques 2013 law, nm.
REFERENCE_WAVELENGTH_NM = C.JACQUES2013_REFERENCE_WAVELENGTH_NM


@dataclass(frozen=True)
class PowerLaw:
    """Parameters of the Jacques 2013 Eq. 2 reduced-scattering law.

    Attributes
    ----------
    a_prime_per_mm : float
        mu_s' at 500 nm in 1/mm.
    f_rayleigh : float
        Rayleigh share of mu_s' at 500 nm, in [0, 1].
    b_mie : float
        Mie scattering power (dimensionless).
    source : str
        BIBLIOGRAPHY key and table.

    """

    a_prime_per_mm: float
    f_rayleigh: float
    b_mie: float
    source: str


#: Published parameter sets (values in matgen.constants with their status). Jacques 2013 Table 2 rows as used
#: here (from memory; the table could not be re-read): skin 46.0 1/cm, 0.409, 0.562; dermis 43.6 1/cm, 0.41,
#: 0.562; epidermis 66.7 1/cm, 0.29, 0.689. simpa's literature_values quotes other epidermis / dermis
#: parameters from Jacques 2013 Table 1 (Salomatina et al. 2006: f_Ray 0.29, b_Mie 2.8; f_Ray 0.1,
#: b_Mie 3.5); see docs/developers/tissue.md. Soft tissue (used for muscle): 18.9 1/cm, b = 1.286 as a pure
#: power law (from memory). Subcutaneous fat: Bashkatov et al. 2005 fit
#: mu_s' = 1050.6 lambda^-0.68 1/cm (from memory), written as a pure Mie law (f_Ray = 0) with
#: a' = 1050.6 * 500^-0.68 1/cm.
_DERMIS_1998_RAYLEIGH_PER_CM = C.DERMIS_JACQUES1998_RAYLEIGH_PER_CM * REFERENCE_WAVELENGTH_NM**-4
_DERMIS_1998_A_PRIME_PER_CM = (
    _DERMIS_1998_RAYLEIGH_PER_CM
    + C.DERMIS_JACQUES1998_MIE_PER_CM * REFERENCE_WAVELENGTH_NM**C.DERMIS_JACQUES1998_MIE_EXPONENT
)
POWER_LAWS: dict[str, PowerLaw] = {
    "skin_Jacques2013": PowerLaw(
        C.JACQUES2013_SKIN_A_PRIME_PER_CM / MM_PER_CM,
        C.JACQUES2013_SKIN_F_RAY,
        C.JACQUES2013_SKIN_B_MIE,
        "Jacques2013 Table 2 (skin)",
    ),
    "dermis_Jacques2013": PowerLaw(
        C.JACQUES2013_DERMIS_A_PRIME_PER_CM / MM_PER_CM,
        C.JACQUES2013_DERMIS_F_RAY,
        C.JACQUES2013_DERMIS_B_MIE,
        "Jacques2013 Table 2 (dermis)",
    ),
    "epidermis_Jacques2013": PowerLaw(
        C.JACQUES2013_EPIDERMIS_A_PRIME_PER_CM / MM_PER_CM,
        C.JACQUES2013_EPIDERMIS_F_RAY,
        C.JACQUES2013_EPIDERMIS_B_MIE,
        "Jacques2013 Table 2 (epidermis)",
    ),
    # Jacques 1998: 2e12 lambda^-4 + 2e5 lambda^-1.5 1/cm written in the Eq. 2 form: a' is its value at 500 nm
    # and f_Ray the Rayleigh term's share there. A published alternative for the dermis, not the default.
    "dermis_Jacques1998": PowerLaw(
        _DERMIS_1998_A_PRIME_PER_CM / MM_PER_CM,
        _DERMIS_1998_RAYLEIGH_PER_CM / _DERMIS_1998_A_PRIME_PER_CM,
        -C.DERMIS_JACQUES1998_MIE_EXPONENT,
        "Jacques1998 (dermis)",
    ),
    "soft_tissue_Jacques2013": PowerLaw(
        C.SOFT_TISSUE_JACQUES2013_A_PRIME_PER_CM / MM_PER_CM,
        0.0,
        C.SOFT_TISSUE_JACQUES2013_B,
        "Jacques2013 Table 2 (other soft tissues; used for skeletal muscle)",
    ),
    "subcutaneous_fat_Bashkatov2005": PowerLaw(
        C.FAT_BASHKATOV2005_PER_CM * REFERENCE_WAVELENGTH_NM**C.FAT_BASHKATOV2005_EXPONENT / MM_PER_CM,
        0.0,
        -C.FAT_BASHKATOV2005_EXPONENT,
        "Bashkatov2005 (subcutaneous adipose tissue)",
    ),
}


def mu_s_reduced_Jacques2013(wavelength_nm, a_prime_per_mm: float, f_rayleigh: float, b_mie: float):
    """Reduced scattering coefficient, Jacques 2013 Eq. 2 (Jacques2013).

    Parameters
    ----------
    wavelength_nm : float or ndarray
        Wavelength in nm.
    a_prime_per_mm : float
        mu_s' at 500 nm in 1/mm.
    f_rayleigh : float
        Rayleigh fraction at 500 nm, in [0, 1].
    b_mie : float
        Mie power.

    Returns
    -------
    float or ndarray
        mu_s' in 1/mm.

    """
    x = np.asarray(wavelength_nm, dtype=np.float64) / REFERENCE_WAVELENGTH_NM
    return a_prime_per_mm * (f_rayleigh * x**-4.0 + (1.0 - f_rayleigh) * x ** (-b_mie))


def mu_s_reduced(bands: BandSet, law: str | PowerLaw) -> np.ndarray:
    """Band-averaged reduced scattering of a named (or given) power law.

    Parameters
    ----------
    bands : BandSet
        Bands in nm, within 250-1700 nm.
    law : str or PowerLaw
        A key of :data:`POWER_LAWS` or a :class:`PowerLaw`.

    Returns
    -------
    ndarray, shape (B,)
        mu_s' in 1/mm (Jacques2013 Eq. 2).

    """
    if isinstance(law, str):
        try:
            law = POWER_LAWS[law]
        except KeyError as exc:
            raise ParameterError(f"unknown scattering law {law!r}; valid: {', '.join(POWER_LAWS)}") from exc
    p = law
    return band_average_function(
        lambda wl: mu_s_reduced_Jacques2013(wl, p.a_prime_per_mm, p.f_rayleigh, p.b_mie),
        bands,
        f"reduced scattering ({p.source})",
        SCATTERING_RANGE_NM,
    )


_G_METHODS = ("vanGemert1989", "constant")


def anisotropy_vanGemert1989(wavelength_nm):
    """Anisotropy of dermis, g = 0.62 + 0.29e-3 lambda [nm] (vanGemert1989).

    Parameters
    ----------
    wavelength_nm : float or ndarray
        Wavelength in nm.

    Returns
    -------
    float or ndarray
        Henyey-Greenstein g (dimensionless).

    """
    wl = np.asarray(wavelength_nm, dtype=np.float64)
    return C.G_VANGEMERT1989_INTERCEPT + C.G_VANGEMERT1989_SLOPE_PER_NM * wl


def anisotropy(bands: BandSet, method: str = "vanGemert1989", value: float = 0.8) -> np.ndarray:
    """Band-averaged anisotropy g.

    Parameters
    ----------
    bands : BandSet
        Bands in nm (250-1100 nm for ``vanGemert1989``: at 1100 nm the fit reaches g = 0.939; beyond it would
        approach 1, so the range stops there).
    method : {"vanGemert1989", "constant"}
        ``vanGemert1989``: g = 0.62 + 0.29e-3 lambda (vanGemert1989); ``constant``: ``value`` everywhere.
    value : float
        g for ``constant``, in (-1, 1).

    Returns
    -------
    ndarray, shape (B,)
        g (dimensionless).

    """
    if method not in _G_METHODS:
        raise ParameterError(f"unknown anisotropy method {method!r}; valid methods: {', '.join(_G_METHODS)}")
    if method == "constant":
        if not (np.isfinite(value) and -1.0 < value < 1.0):
            raise ParameterError(f"constant anisotropy {value!r} must lie in (-1, 1)")
        return np.full(len(bands), float(value))
    return band_average_function(
        anisotropy_vanGemert1989, bands, "anisotropy (van Gemert 1989)", VANGEMERT_RANGE_NM
    )


def mu_s_from_reduced(mu_s_reduced_per_mm, g):
    """Scattering coefficient mu_s = mu_s' / (1 - g) in 1/mm (similarity relation; Jacques2013)."""
    return np.asarray(mu_s_reduced_per_mm) / (1.0 - np.asarray(g))
