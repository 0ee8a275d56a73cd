"""CIELAB and CIEDE2000 per texel, compiled. Units: XYZ and RGB relative (white Y = 1); L*, a*, b*: CIE.

CIELAB follows CIE 15:2004 (``CIE2004``) with the reference white given as XYZ (Y = 1):
``f(t) = t^(1/3)`` above ``(6/29)^3``, else ``t / (3 (6/29)^2) + 4/29``; ``L* = 116 f(Y/Yn) - 16``,
``a* = 500 (f(X/Xn) - f(Y/Yn))``, ``b* = 200 (f(Y/Yn) - f(Z/Zn))``. A single-band capture is compared as a
lightness ``L* = 116 f(p) - 16`` of its response-weighted albedo ``p`` (white = 1).

The colour difference is CIEDE2000 (CIE 142-2001) in the form of Sharma, Wu & Dalal (2005, ``Sharma2005``,
Eqs. 1-22), with kL = kC = kH = 1; the hue angles follow their notes (mean hue and hue difference cases).
Tests compare both with colour-science's ``XYZ_to_Lab`` and ``delta_E(method="CIE 2000")``.

Every kernel here is a numba function whose pure-Python twin is the same source run with
``NUMBA_DISABLE_JIT=1`` (``tests/estimate/test_perceptual.py`` runs both and compares them).
"""

from __future__ import annotations

import math

import numba
import numpy as np

#: CIELAB's linear-segment threshold (6/29)^3 and slope 1 / (3 (6/29)^2) (CIE 15:2004, ``CIE2004``).
LAB_EPSILON = (6.0 / 29.0) ** 3
LAB_SLOPE = 1.0 / (3.0 * (6.0 / 29.0) ** 2)
LAB_OFFSET = 4.0 / 29.0


@numba.njit(cache=True)
def lab_f(t):
    """CIELAB's compressive function f(t) and its derivative df/dt (``CIE2004``)."""
    if t > LAB_EPSILON:
        c = t ** (1.0 / 3.0)
        return c, 1.0 / (3.0 * c * c)
    return t * LAB_SLOPE + LAB_OFFSET, LAB_SLOPE


@numba.njit(cache=True)
def xyz_to_lab_texel(x, y, z):
    """L*, a*, b* of white-normalised X/Xn, Y/Yn, Z/Zn (``CIE2004``)."""
    fx = lab_f(x)[0]
    fy = lab_f(y)[0]
    fz = lab_f(z)[0]
    return 116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)


@numba.njit(cache=True, parallel=True)
def rgb_to_lab_kernel(rgb, m_norm, out):
    """CIELAB of linear RGB rows: XYZ/white = ``m_norm @ rgb`` (``m_norm`` already divided by the white).

    Parameters
    ----------
    rgb : ndarray of float, shape (N, 3)
        Linear RGB in the working space.
    m_norm : ndarray of float64, shape (3, 3)
        RGB -> white-normalised XYZ matrix.
    out : ndarray of float64, shape (N, 3)
        Receives L*, a*, b*.

    """
    for i in numba.prange(rgb.shape[0]):
        r, g, b = rgb[i, 0], rgb[i, 1], rgb[i, 2]
        x = m_norm[0, 0] * r + m_norm[0, 1] * g + m_norm[0, 2] * b
        y = m_norm[1, 0] * r + m_norm[1, 1] * g + m_norm[1, 2] * b
        z = m_norm[2, 0] * r + m_norm[2, 1] * g + m_norm[2, 2] * b
        out[i, 0], out[i, 1], out[i, 2] = xyz_to_lab_texel(x, y, z)


@numba.njit(cache=True, parallel=True)
def lightness_kernel(p, out):
    """CIE lightness ``116 f(p) - 16`` of white-normalised values ``p`` (N,) into ``out`` (N,)."""
    for i in numba.prange(p.shape[0]):
        out[i] = 116.0 * lab_f(p[i])[0] - 16.0


@numba.njit(cache=True)
def _hue_deg(b, a):
    if a == 0.0 and b == 0.0:
        return 0.0
    h = math.degrees(math.atan2(b, a))
    return h + 360.0 if h < 0.0 else h


@numba.njit(cache=True)
def de2000_texel(l1, a1, b1, l2, a2, b2):
    """CIEDE2000 difference of two CIELAB colours (Sharma, Wu & Dalal 2005 Eqs. 1-22, ``Sharma2005``)."""
    c1 = math.sqrt(a1 * a1 + b1 * b1)
    c2 = math.sqrt(a2 * a2 + b2 * b2)
    cm7 = ((c1 + c2) / 2.0) ** 7
    g = 0.5 * (1.0 - math.sqrt(cm7 / (cm7 + 25.0**7)))
    a1p, a2p = (1.0 + g) * a1, (1.0 + g) * a2
    c1p = math.sqrt(a1p * a1p + b1 * b1)
    c2p = math.sqrt(a2p * a2p + b2 * b2)
    h1p, h2p = _hue_deg(b1, a1p), _hue_deg(b2, a2p)
    dlp = l2 - l1
    dcp = c2p - c1p
    cc = c1p * c2p
    if cc == 0.0:
        dhp = 0.0
    elif abs(h2p - h1p) <= 180.0:
        dhp = h2p - h1p
    elif h2p - h1p > 180.0:
        dhp = h2p - h1p - 360.0
    else:
        dhp = h2p - h1p + 360.0
    dHp = 2.0 * math.sqrt(cc) * math.sin(math.radians(dhp) / 2.0)
    lmp = (l1 + l2) / 2.0
    cmp_ = (c1p + c2p) / 2.0
    if cc == 0.0:
        hmp = h1p + h2p
    elif abs(h1p - h2p) <= 180.0:
        hmp = (h1p + h2p) / 2.0
    elif h1p + h2p < 360.0:
        hmp = (h1p + h2p + 360.0) / 2.0
    else:
        hmp = (h1p + h2p - 360.0) / 2.0
    t = (
        1.0
        - 0.17 * math.cos(math.radians(hmp - 30.0))
        + 0.24 * math.cos(math.radians(2.0 * hmp))
        + 0.32 * math.cos(math.radians(3.0 * hmp + 6.0))
        - 0.20 * math.cos(math.radians(4.0 * hmp - 63.0))
    )
    dtheta = 30.0 * math.exp(-(((hmp - 275.0) / 25.0) ** 2))
    cmp7 = cmp_**7
    rc = 2.0 * math.sqrt(cmp7 / (cmp7 + 25.0**7))
    l50 = (lmp - 50.0) ** 2
    sl = 1.0 + 0.015 * l50 / math.sqrt(20.0 + l50)
    sc = 1.0 + 0.045 * cmp_
    sh = 1.0 + 0.015 * cmp_ * t
    rt = -math.sin(math.radians(2.0 * dtheta)) * rc
    tl, tc, th = dlp / sl, dcp / sc, dHp / sh
    return math.sqrt(max(tl * tl + tc * tc + th * th + rt * tc * th, 0.0))


@numba.njit(cache=True, parallel=True)
def de2000_kernel(lab1, lab2, out):
    """CIEDE2000 of rows of two CIELAB arrays (N, 3) into ``out`` (N,) (``Sharma2005``)."""
    for i in numba.prange(lab1.shape[0]):
        out[i] = de2000_texel(lab1[i, 0], lab1[i, 1], lab1[i, 2], lab2[i, 0], lab2[i, 1], lab2[i, 2])


def rgb_to_lab(rgb, m_norm) -> np.ndarray:
    """CIELAB (N, 3) of linear RGB (N, 3) through the white-normalised RGB -> XYZ matrix ``m_norm``."""
    rgb = np.ascontiguousarray(np.asarray(rgb, dtype=np.float64).reshape(-1, 3))
    out = np.empty_like(rgb)
    rgb_to_lab_kernel(rgb, np.ascontiguousarray(m_norm, dtype=np.float64), out)
    return out


def lightness(p) -> np.ndarray:
    """CIE lightness L* (N,) of white-normalised values ``p`` (N,) (``CIE2004``)."""
    p = np.ascontiguousarray(np.asarray(p, dtype=np.float64).reshape(-1))
    out = np.empty_like(p)
    lightness_kernel(p, out)
    return out


def delta_e2000(lab1, lab2) -> np.ndarray:
    """CIEDE2000 (N,) between two CIELAB arrays (N, 3) (``Sharma2005``)."""
    a = np.ascontiguousarray(np.asarray(lab1, dtype=np.float64).reshape(-1, 3))
    b = np.ascontiguousarray(np.asarray(lab2, dtype=np.float64).reshape(-1, 3))
    out = np.empty(a.shape[0])
    de2000_kernel(a, b, out)
    return out
