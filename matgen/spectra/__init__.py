"""Spectra: chromophore absorption, scattering laws, refractive indices, band averaging.

Units: wavelength nm, coefficients 1/mm.
"""
