"""Layered skin optics: per layer and band mu_a, mu_s, g, n and thickness. Units: nm, mm, 1/mm.

Absorption of each layer is a volume-weighted sum of its chromophores (Jacques2013, generic tissue equation;
Jacques1998 for the epidermis / dermis split):

    stratum corneum   f_w mu_water + mu_carotene + (1 - f_w) mu_baseline
    epidermis         f_mel P_mel mu_melanosome + f_w mu_water + mu_carotene + (1 - f_mel - f_w) mu_baseline
    dermis (2 layers) f_bl P_bl mu_blood + f_w mu_water + f_lip mu_lipid
                      + (1 - f_bl - f_w - f_lip) mu_baseline
    hypodermis        f_bl P_bl mu_blood + f_w mu_water + f_lip mu_lipid + (rest) mu_baseline
    muscle            F_bl mu_blood(S_m) + F_w mu_water + F_lip mu_lipid + (rest) mu_baseline

with the muscle's fixed composition F and saturation S_m of :mod:`matgen.constants` (``MUSCLE_*``; no
packaging, no bilirubin), the same for every parameter set;

and where mu_melanosome mixes eumelanin and pheomelanin by the eumelanin share, mu_blood holds oxy- and
deoxyhaemoglobin at the oxygen saturation plus plasma bilirubin, P_mel and P_bl are the packaging factors of
:mod:`matgen.tissue.packaging` (1 when packaging is off), and the baseline (Jacques1998, bloodless skin)
stands for the protein background of the volume not given to an explicit chromophore.

Scattering (mu_s, g, n) and thickness come from :mod:`matgen.tissue.layers` and the thickness fields only.
"""

from __future__ import annotations

import functools
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from matgen import constants as C
from matgen.constants import BLOOD_PLASMA_VOLUME_FRACTION, LN10, MM_PER_CM, MOL_PER_UMOL, N_AIR
from matgen.errors import BandError, ParameterError
from matgen.spectra import chromophores as ch
from matgen.spectra.bands import BandSet
from matgen.spectra.refractive import N_BELOW_MUSCLE
from matgen.tissue.layers import LAYER_NAMES, layer_scattering
from matgen.tissue.packaging import applies, check_packaging, duysens_sphere_factor, vessel_factor
from matgen.tissue.parameters import SkinParameters

#: Plasma share of whole-blood volume, 1 - haematocrit (haematocrit 0.45); see
#: :data:`matgen.constants.BLOOD_PLASMA_VOLUME_FRACTION`.
PLASMA_FRACTION = BLOOD_PLASMA_VOLUME_FRACTION


def _band_key(bands: BandSet):
    if not isinstance(bands, BandSet):
        raise BandError(f"bands must be a BandSet, not {type(bands).__name__}")
    return (tuple(bands.centre_nm.tolist()), tuple(bands.lower_nm.tolist()), tuple(bands.upper_nm.tolist()))


@functools.lru_cache(maxsize=32)
def _spectra(key) -> dict[str, np.ndarray]:
    bands = BandSet(np.array(key[0]), np.array(key[1]), np.array(key[2]))
    ext = ch.hemoglobin_extinction(bands)
    to_mua = LN10 * ch.WHOLE_BLOOD_HEMOGLOBIN_G_PER_L / ch.HEMOGLOBIN_MOLAR_MASS_G_PER_MOL / MM_PER_CM
    out = {
        "hbo2": ext[:, 0] * to_mua,
        "hb": ext[:, 1] * to_mua,
        "eumelanin": ch.mu_a_eumelanin(bands),
        "pheomelanin": ch.mu_a_pheomelanin(bands),
        "water": ch.mu_a_water(bands),
        "lipid": ch.mu_a_lipid(bands),
        "baseline": ch.mu_a_baseline(bands),
        "carotene_ext": ch.extinction_carotene(bands),
        "bilirubin_ext": ch.extinction_bilirubin(bands),
    }
    out.update({f"scatter_{k}": v for k, v in layer_scattering(bands).items()})
    for arr in out.values():
        arr.setflags(write=False)
    return out


def chromophore_spectra(bands: BandSet) -> dict[str, np.ndarray]:
    """Return the band-averaged base spectra the model combines (cached per band set; read-only).

    Keys: ``hbo2``, ``hb`` (whole blood at 150 g/L, 1/mm), ``eumelanin``, ``pheomelanin`` (melanosome
    interior,
    1/mm), ``water``, ``lipid``, ``baseline`` (1/mm), ``carotene_ext``, ``bilirubin_ext`` (cm^-1/M), and
    ``scatter_mu_s_reduced``, ``scatter_mu_s``, ``scatter_g``, ``scatter_n`` of shape (L, B).
    """
    return _spectra(_band_key(bands))


def absorption_batch(
    param_sets: Sequence[SkinParameters], bands: BandSet, packaging: str = "on"
) -> np.ndarray:
    """Absorption coefficients of every layer for many parameter sets at once.

    Parameters
    ----------
    param_sets : sequence of SkinParameters
        K parameter sets (K >= 1).
    bands : BandSet
        Bands in nm (within 250-1050 nm for haemoglobin, 250-1100 nm for the analytic laws).
    packaging : {"on", "off", "melanin", "blood"}
        Which packaging corrections apply (:mod:`matgen.tissue.packaging`).

    Returns
    -------
    ndarray, shape (K, L, B)
        mu_a in 1/mm, layers in :data:`matgen.tissue.layers.LAYER_NAMES` order. Sources: see module docstring.

    """
    check_packaging(packaging)
    param_sets = list(param_sets)
    if not param_sets:
        raise ParameterError("absorption_batch needs at least one SkinParameters")
    for i, p in enumerate(param_sets):
        if not isinstance(p, SkinParameters):
            raise ParameterError(f"param_sets[{i}] is a {type(p).__name__}, not SkinParameters")
    sp = chromophore_spectra(bands)

    def col(name):
        return np.array([getattr(p, name) for p in param_sets], dtype=np.float64)[:, None]

    f_mel, share = col("melanin_fraction"), col("eumelanin_share")
    melanosome = share * sp["eumelanin"] + (1.0 - share) * sp["pheomelanin"]
    if applies(packaging, "melanin"):
        melanosome = melanosome * duysens_sphere_factor(melanosome, col("melanosome_diameter_mm"))

    sat = col("oxygen_saturation")
    bilirubin = LN10 * sp["bilirubin_ext"] * col("bilirubin_umol_per_l") * MOL_PER_UMOL / MM_PER_CM
    blood = sat * sp["hbo2"] + (1.0 - sat) * sp["hb"] + PLASMA_FRACTION * bilirubin
    if applies(packaging, "blood"):
        blood_pap = blood * vessel_factor(blood, col("papillary_vessel_radius_mm"))
        blood_ret = blood * vessel_factor(blood, col("reticular_vessel_radius_mm"))
    else:
        blood_pap = blood_ret = blood

    carotene = LN10 * sp["carotene_ext"] * col("carotene_umol_per_l") * MOL_PER_UMOL / MM_PER_CM
    water, lipid, base = sp["water"], sp["lipid"], sp["baseline"]

    fw = col("stratum_corneum_water_fraction")
    sc = fw * water + carotene + (1.0 - fw) * base
    fw = col("epidermis_water_fraction")
    epi = f_mel * melanosome + fw * water + carotene + (1.0 - f_mel - fw) * base
    fb, fw, fl = col("blood_fraction"), col("dermis_water_fraction"), col("dermis_lipid_fraction")
    rest = 1.0 - fb - fw - fl
    pap = fb * blood_pap + fw * water + fl * lipid + rest * base
    ret = fb * blood_ret + fw * water + fl * lipid + rest * base
    fb, fw, fl = (
        col("hypodermis_blood_fraction"),
        col("hypodermis_water_fraction"),
        col("hypodermis_lipid_fraction"),
    )
    hyp = fb * blood_ret + fw * water + fl * lipid + (1.0 - fb - fw - fl) * base
    mus = np.broadcast_to(_muscle_absorption(sp), hyp.shape)
    return np.stack([sc, epi, pap, ret, hyp, mus], axis=1)


def _muscle_absorption(sp):
    """mu_a of the muscle layer (1/mm, shape (B,)): fixed composition, see matgen.constants MUSCLE_*."""
    s = C.MUSCLE_OXYGEN_SATURATION
    fb, fw, fl = C.MUSCLE_BLOOD_FRACTION, C.MUSCLE_WATER_FRACTION, C.MUSCLE_LIPID_FRACTION
    blood = s * sp["hbo2"] + (1.0 - s) * sp["hb"]
    return fb * blood + fw * sp["water"] + fl * sp["lipid"] + (1.0 - fb - fw - fl) * sp["baseline"]


@dataclass(frozen=True)
class SkinOptics:
    """Per-layer, per-band optical coefficients of a skin model: what the transport stage needs, nothing more.

    Attributes
    ----------
    layer_names : tuple of str, length L
    thickness_mm : ndarray, shape (L,)
        Layer thicknesses, mm.
    n, mu_a, mu_s, g : ndarray, shape (L, B)
        Refractive index, absorption and scattering coefficients (1/mm), Henyey-Greenstein anisotropy.
    bands : BandSet
    n_above, n_below : float
        Indices of the media above (air) and below the stack (index matched to the muscle layer).
    packaging : str
        Packaging mode used for mu_a.
    params : SkinParameters

    """

    layer_names: tuple
    thickness_mm: np.ndarray
    n: np.ndarray
    mu_a: np.ndarray
    mu_s: np.ndarray
    g: np.ndarray
    bands: BandSet
    n_above: float
    n_below: float
    packaging: str
    params: SkinParameters

    @property
    def mu_s_reduced(self) -> np.ndarray:
        """Reduced scattering mu_s (1 - g), 1/mm, shape (L, B)."""
        return self.mu_s * (1.0 - self.g)

    def band(self, b: int) -> dict:
        """Keyword arguments of :class:`matgen.transport.stack.Stack` for band index ``b``."""
        nb = len(self.bands)
        if not isinstance(b, (int, np.integer)) or not (-nb <= b < nb):
            raise BandError(f"band index {b!r} is outside 0..{nb - 1}")
        return {
            "thickness_mm": self.thickness_mm.copy(),
            "n": self.n[:, b].copy(),
            "mu_a": self.mu_a[:, b].copy(),
            "mu_s": self.mu_s[:, b].copy(),
            "g": self.g[:, b].copy(),
            "n_above": self.n_above,
            "n_below": self.n_below,
            "names": tuple(self.layer_names),
        }

    def to_dict(self) -> dict:
        """JSON layout of ``matgen optics --format json``: band centres and, per layer, coefficient lists."""
        return {
            "wavelength_nm": self.bands.centre_nm.tolist(),
            "bands": self.bands.to_dict(),
            "units": {
                "wavelength": "nm",
                "thickness": "mm",
                "mu_a": "1/mm",
                "mu_s": "1/mm",
                "g": "1",
                "n": "1",
            },
            "n_above": self.n_above,
            "n_below": self.n_below,
            "packaging": self.packaging,
            "parameters": self.params.to_dict(),
            "layers": [
                {
                    "name": name,
                    "thickness_mm": float(self.thickness_mm[i]),
                    "mu_a": self.mu_a[i].tolist(),
                    "mu_s": self.mu_s[i].tolist(),
                    "g": self.g[i].tolist(),
                    "n": self.n[i].tolist(),
                }
                for i, name in enumerate(self.layer_names)
            ],
        }


def skin_optics(params: SkinParameters, bands: BandSet, packaging: str = "on") -> SkinOptics:
    """Optical coefficients of the skin model: five skin layers and the muscle below them.

    Parameters
    ----------
    params : SkinParameters
        Pigmentation, composition and geometry.
    bands : BandSet
        Bands in nm (250-1050 nm).
    packaging : {"on", "off", "melanin", "blood"}
        Pigment packaging corrections (Duysens1956; vanVeen2002).

    Returns
    -------
    SkinOptics
        mu_a, mu_s (1/mm), g, n per layer and band; thickness (mm). Sources in the module docstring.

    """
    if not isinstance(params, SkinParameters):
        raise ParameterError(f"params must be SkinParameters, not {type(params).__name__}")
    mu_a = absorption_batch([params], bands, packaging)[0]
    sp = chromophore_spectra(bands)
    arrays = {
        "thickness_mm": np.array((*params.thicknesses_mm(), C.MUSCLE_THICKNESS_MM)),
        "n": np.array(sp["scatter_n"]),
        "mu_a": mu_a,
        "mu_s": np.array(sp["scatter_mu_s"]),
        "g": np.array(sp["scatter_g"]),
    }
    for arr in arrays.values():
        arr.setflags(write=False)
    return SkinOptics(
        layer_names=LAYER_NAMES,
        bands=bands,
        n_above=N_AIR,
        n_below=N_BELOW_MUSCLE,
        packaging=packaging,
        params=params,
        **arrays,
    )
