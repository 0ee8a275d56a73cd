"""Layered adding-doubling on iadpython 0.5.3 primitives (a slow, literal reference for transport tests).

iadpython's ``Sample.rt()`` handles one homogeneous slab between air boundaries. Here each layer's
reflection and transmission matrices come from ``iadpython.combine.simple_single_layer_matrices`` (same
quadrature for every layer, so all layers share one refractive index ``n``), layers are joined top to bottom
with the asymmetric adding equations ``iadpython.combine.add_layers`` (Prahl, van Gemert & Welch 1993,
``Prahl1993iad``), and the air/slab boundaries are added with ``add_slide_above`` / ``add_slide_below``.
Returns total reflectance (specular included) and total transmittance for collimated normal incidence.
"""

from __future__ import annotations

import copy

import iadpython
import iadpython.combine as combine
import iadpython.start as start


def slab_rt(a, b, g, n=1.0, quad_pts=16):
    """(UR1, UT1) of one slab by ``iadpython.Sample(...).rt()`` with n_above = n_below = 1 (air)."""
    ur1, ut1, _uru, _utu = iadpython.Sample(
        a=a, b=b, g=g, n=n, n_above=1.0, n_below=1.0, quad_pts=quad_pts
    ).rt()
    return float(ur1), float(ut1)


def layered_rt(layers, n=1.0, quad_pts=16):
    """(UR1, UT1) of a stack of layers [(albedo, optical thickness, g), ...] of common index ``n`` in air."""
    base = iadpython.Sample(
        a=layers[0][0], b=layers[0][1], g=layers[0][2], n=n, n_above=1.0, n_below=1.0, quad_pts=quad_pts
    )
    base.update_quadrature()
    R02 = R20 = T02 = T20 = None
    for a, b, g in layers:
        s = copy.deepcopy(base)
        s.a, s.b, s.g = a, b, g
        r, t = combine.simple_single_layer_matrices(s)
        if R02 is None:
            R02, R20, T02, T20 = r, r, t, t
        else:
            R02, R20, T02, T20 = combine.add_layers(base, R02, R20, T02, T20, r, r, t, t)
    if n == 1.0:
        return tuple(float(v) for v in base.UX1_and_UXU(R02, T02)[:2])
    R01, R10, T01, T10 = start.boundary_layer(base, top=True)
    R23, R32, T23, T32 = start.boundary_layer(base, top=False)
    Ra, Rb, Ta, Tb = combine.add_slide_above(base, R01, R10, T01, T10, R02, R20, T02, T20)
    R03, _R30, T03, _T30 = combine.add_slide_below(base, Ra, Rb, Ta, Tb, R23, R32, T23, T32)
    return tuple(float(v) for v in base.UX1_and_UXU(R03, T03)[:2])
