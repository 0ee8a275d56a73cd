"""Renderer targets: one home per renderer convention.

Each target (:mod:`~matgen.targets.openpbr`, :mod:`~matgen.targets.standard_surface`,
:mod:`~matgen.targets.spectral`) owns the maps it writes, the vectorised per-texel conversion from
effective media, its MaterialX node and input types, its descriptor entry and ``from_inputs``, the
consumer's documented remap back to a medium. The bake (:mod:`matgen.bake.run`), the descriptor and the
MaterialX writer ask the target; :mod:`matgen.targets.solve` makes the per-texel media (A and d
interpolated over the pigment axes, then each texel inverted with exactly the g and n written for it).
Units: mm on matgen's side, scene units (``metres_per_scene_unit``) on the consumer's.
"""

from __future__ import annotations

from matgen.errors import ParameterError
from matgen.targets.base import ALBEDO_CONVENTIONS, ANISOTROPY_OPTIONS, MapSpec, Target, TargetOptions
from matgen.targets.medium import EffectiveMedium, TexelMedia
from matgen.targets.openpbr import OpenPBRTarget
from matgen.targets.spectral import ReflectanceMfpTarget, SpectralMediumTarget
from matgen.targets.standard_surface import StandardSurfaceTarget

#: Registry of targets by name.
TARGETS = {
    t.name: t
    for t in (OpenPBRTarget(), StandardSurfaceTarget(), SpectralMediumTarget(), ReflectanceMfpTarget())
}


def get_target(name: str) -> Target:
    """Return the target called ``name``; :class:`ParameterError` listing the known names otherwise."""
    try:
        return TARGETS[name]
    except KeyError:
        raise ParameterError(f"unknown target {name!r}; use one of {', '.join(TARGETS)}") from None


__all__ = [
    "ALBEDO_CONVENTIONS",
    "ANISOTROPY_OPTIONS",
    "TARGETS",
    "EffectiveMedium",
    "MapSpec",
    "Target",
    "TargetOptions",
    "TexelMedia",
    "get_target",
]
