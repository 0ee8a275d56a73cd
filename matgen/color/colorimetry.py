"""Band spectra to RGB through colour-science. Units: wavelength in nm; reflectances dimensionless.

The RGB of a band spectrum is ``channel_weights(bands, space, illuminant) @ reflectance``:

1. CMFs (CIE 1931 2 degree by default, ``colour.MSDS_CMFS``) and the illuminant's spectral power
   (``colour.SDS_ILLUMINANTS``) are aligned on 360-830 nm at 1 nm exactly as colour-science aligns them
   for ``colour.sd_to_XYZ`` (its default interpolation and constant extrapolation);
2. each band's weight is the integral over the band of illuminant x CMF (trapezoidal on the 1 nm grid
   plus the band edges); bands or parts of bands outside 360-830 nm carry zero weight;
3. the weights are divided by the band-set sum of illuminant x y-bar, so that a perfect reflector over the
   band set has Y = 1;
4. XYZ is adapted from the white of that perfect reflector to the working space's white with the CAT02
   von Kries transform (``colour.chromatic_adaptation``, method "Von Kries", transform "CAT02"), then
   converted with the space's XYZ-to-RGB matrix. A perfect reflector therefore maps to (1, 1, 1) in every
   working space and under every illuminant.

References: ``CIE2004`` (colorimetry), ``Moroney2002`` (CAT02), ``ACES2014`` (ACEScg), ``ITU2015`` (BT.709),
``colour2024`` (the package).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from matgen.errors import ParameterError

#: Default observer.
DEFAULT_OBSERVER = "CIE 1931 2 Degree Standard Observer"

#: Short names accepted for working spaces, mapped to colour-science's names.
SPACE_ALIASES = {
    "acescg": "ACEScg",
    "aces2065-1": "ACES2065-1",
    "rec709": "ITU-R BT.709",
    "lin_rec709": "ITU-R BT.709",
    "linear-rec709": "ITU-R BT.709",
    "srgb": "sRGB",
    "lin_srgb": "sRGB",
    "srgb-linear": "sRGB",
    "rec2020": "ITU-R BT.2020",
}

#: CMF range in nm (colour-science's CIE 1931 and 1964 tables).
CMF_RANGE_NM = (360.0, 830.0)


def _colour():
    import colour  # imported lazily: colour-science takes about a second to import

    return colour


def resolve_space(space: str):
    """Return the colour-science RGB colourspace for ``space`` (name or alias; always linear encoding).

    Raises :class:`ParameterError` naming the space and a few known names.
    """
    colour = _colour()
    name = SPACE_ALIASES.get(str(space).strip().lower(), space)
    try:
        return colour.RGB_COLOURSPACES[name]
    except KeyError:
        known = ", ".join(["ACEScg", "ITU-R BT.709", "sRGB", "ITU-R BT.2020"] + sorted(SPACE_ALIASES))
        raise ParameterError(
            f"working space {space!r} is unknown to colour-science; use e.g. {known}"
        ) from None


def resolve_illuminant(illuminant: str):
    """Return the colour-science spectral distribution of ``illuminant`` (e.g. "D65", "E", "A")."""
    colour = _colour()
    try:
        return colour.SDS_ILLUMINANTS[str(illuminant)]
    except KeyError:
        raise ParameterError(
            f"illuminant {illuminant!r} is unknown to colour-science; use e.g. D65, D50, E, A "
            f"(known: {', '.join(list(colour.SDS_ILLUMINANTS)[:12])}, ...)"
        ) from None


@lru_cache(maxsize=16)
def _aligned(illuminant: str, observer: str):
    colour = _colour()
    try:
        cmfs = colour.MSDS_CMFS[observer]
    except KeyError:
        raise ParameterError(f"observer {observer!r} is unknown to colour-science") from None
    cmfs = cmfs.copy().align(colour.SpectralShape(CMF_RANGE_NM[0], CMF_RANGE_NM[1], 1))
    sd = resolve_illuminant(illuminant).copy().align(cmfs.shape)
    wl = np.asarray(cmfs.wavelengths, dtype=np.float64)
    return wl, np.asarray(sd.values, dtype=np.float64), np.asarray(cmfs.values, dtype=np.float64)


def _band_integrals(wl, f, lower_nm, upper_nm):
    """Integral of the piecewise-linear samples f (M, K) over each band, zero outside [wl0, wl-1]."""
    out = np.zeros((lower_nm.size, f.shape[1]))
    for b, (lo, hi) in enumerate(zip(lower_nm, upper_nm, strict=True)):
        lo_c, hi_c = max(lo, wl[0]), min(hi, wl[-1])
        if hi_c <= lo_c:
            continue
        inner = (wl > lo_c) & (wl < hi_c)
        x = np.concatenate(([lo_c], wl[inner], [hi_c]))
        y = np.stack([np.interp(x, wl, f[:, k]) for k in range(f.shape[1])], axis=1)
        out[b] = np.trapezoid(y, x, axis=0)
    return out


def xyz_weights(bands, illuminant="D65", observer=DEFAULT_OBSERVER):
    """Weights (3, B) with XYZ = weights @ reflectance, normalised so a perfect reflector has Y = 1.

    Parameters
    ----------
    bands : BandSet
        The band set (nm).
    illuminant : str
        colour-science illuminant name.
    observer : str
        colour-science CMF name.

    Returns
    -------
    ndarray, shape (3, B)
        Dimensionless weights; bands outside 360-830 nm get 0.

    Raises
    ------
    ParameterError
        If no band overlaps 360-830 nm, or a name is unknown.

    References
    ----------
    ``CIE2004`` (tristimulus integration), ``colour2024``.

    """
    wl, s, cmf = _aligned(str(illuminant), str(observer))
    w = _band_integrals(wl, s[:, None] * cmf, np.asarray(bands.lower_nm), np.asarray(bands.upper_nm)).T
    y_white = w[1].sum()
    if not y_white > 0:
        raise ParameterError(
            f"no band of {bands.lower_nm[0]:g}-{bands.upper_nm[-1]:g} nm overlaps the colour-matching "
            f"functions ({CMF_RANGE_NM[0]:g}-{CMF_RANGE_NM[1]:g} nm); RGB needs visible bands"
        )
    return w / y_white


def channel_weights(bands, space="ACEScg", illuminant="D65", observer=DEFAULT_OBSERVER):
    """Weights (3, B) with linear RGB = weights @ reflectance; a perfect reflector maps to (1, 1, 1).

    Parameters
    ----------
    bands : BandSet
        The band set (nm).
    space : str
        Working space (colour-science name or alias: "ACEScg", "rec709", "srgb", ...). Linear values.
    illuminant : str
        colour-science illuminant name ("D65", "E", "A", ...).
    observer : str
        colour-science CMF name.

    Returns
    -------
    ndarray, shape (3, B)
        Dimensionless weights; each row sums to 1.

    References
    ----------
    ``CIE2004``; ``Moroney2002`` (CAT02 adaptation from the band-set white to the space's white);
    ``ACES2014``; ``ITU2015``; ``colour2024``.

    """
    colour = _colour()
    cs = resolve_space(space)
    w_xyz = xyz_weights(bands, illuminant, observer)
    white = w_xyz.sum(axis=1)  # XYZ of the perfect reflector, Y = 1
    space_white = colour.xy_to_XYZ(cs.whitepoint)
    adapt = colour.adaptation.matrix_chromatic_adaptation_VonKries(white, space_white, transform="CAT02")
    return cs.matrix_XYZ_to_RGB @ adapt @ w_xyz


def spectral_to_rgb(values, bands, space="ACEScg", illuminant="D65", observer=DEFAULT_OBSERVER):
    """Linear RGB of band spectra: ``values @ channel_weights(...).T``.

    Parameters
    ----------
    values : ndarray, shape (..., B)
        Band values (reflectance or any spectral quantity that is weighted like one).
    bands : BandSet
        The band set (nm).
    space, illuminant, observer : str
        As for :func:`channel_weights`.

    Returns
    -------
    ndarray, shape (..., 3)
        Linear RGB in the working space.

    References
    ----------
    ``CIE2004``; ``colour2024``.

    """
    v = np.asarray(values, dtype=np.float64)
    if v.shape[-1] != len(bands):
        raise ParameterError(
            f"spectral values have {v.shape[-1]} bands on the last axis; the band set has {len(bands)}"
        )
    return v @ channel_weights(bands, space, illuminant, observer).T
