"""Tissue: skin parameters, the five-layer stack, pigment packaging and per-layer optics.

Units: wavelength nm, thickness mm, coefficients 1/mm, fractions in [0, 1], concentrations umol/L.
Entry points: :func:`matgen.tissue.optics.skin_optics`, :func:`matgen.tissue.optics.absorption_batch`,
:class:`matgen.tissue.parameters.SkinParameters`, :func:`matgen.tissue.presets.preset`.
"""
