"""Unit helpers. matgen works in nm (wavelength), mm (length) and 1/mm (coefficients) inside.

Renderer scene units appear only in :mod:`matgen.export` and :mod:`matgen.targets`, through
``metres_per_scene_unit``.
"""

from __future__ import annotations

MM_PER_M = 1000.0


def per_cm_to_per_mm(value):
    """Convert a coefficient from 1/cm to 1/mm.

    Parameters
    ----------
    value : float or ndarray
        Coefficient in 1/cm.

    Returns
    -------
    float or ndarray
        Coefficient in 1/mm.

    """
    return value / 10.0


def mm_to_scene_units(length_mm, metres_per_scene_unit):
    """Convert a length in mm to scene units.

    Parameters
    ----------
    length_mm : float or ndarray
        Length in millimetres.
    metres_per_scene_unit : float
        Metres per scene unit (0.01 for a centimetre scene, 1.0 for a metre scene).

    Returns
    -------
    float or ndarray
        Length in scene units.

    """
    return length_mm / (metres_per_scene_unit * MM_PER_M)


def scene_units_to_mm(length_scene, metres_per_scene_unit):
    """Convert a length in scene units to mm (inverse of :func:`mm_to_scene_units`)."""
    return length_scene * metres_per_scene_unit * MM_PER_M
