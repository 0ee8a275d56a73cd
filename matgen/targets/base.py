"""What every renderer target declares: its maps, its per-texel conversion, its documents' entries.

A target is one renderer convention in one place. It states the maps it writes (:class:`MapSpec`: file
key, the consumer input it feeds, channels, unit, colour-managed or data), turns a strip of effective media
(:class:`~matgen.targets.medium.TexelMedia`) into those maps' texels in one vectorised step
(:meth:`Target.texel_inputs`), names its MaterialX node and input types, builds its descriptor entry, and
rebuilds a medium from its inputs by the consumer's documented remap (:meth:`Target.from_inputs`), which is
what validation and the round-trip tests go through. Units: lengths in scene units on the consumer side
(``metres_per_scene_unit`` metres each), mm on matgen's side.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from matgen.errors import ParameterError
from matgen.targets.medium import EffectiveMedium, TexelMedia, check_scale

#: Colour conventions of ``subsurface_color`` (see :mod:`matgen.targets.openpbr`).
ALBEDO_CONVENTIONS = ("spec_remap", "observed")
#: Phase-function options: Henyey-Greenstein with the skin's g, or the isotropic equivalent (g = 0).
ANISOTROPY_OPTIONS = ("hg", "isotropic")


@dataclass(frozen=True)
class TargetOptions:
    """Choices a config makes for its targets.

    Attributes
    ----------
    albedo_convention : str
        ``"spec_remap"`` or ``"observed"`` (RGB targets' ``subsurface_color``).
    anisotropy : str
        ``"hg"`` (the skin's g) or ``"isotropic"`` (g = 0, similarity-scaled mean free path).

    """

    albedo_convention: str = "spec_remap"
    anisotropy: str = "hg"

    def __post_init__(self):
        if self.albedo_convention not in ALBEDO_CONVENTIONS:
            raise ParameterError(
                f"albedo_convention must be one of {', '.join(ALBEDO_CONVENTIONS)}, not "
                f"{self.albedo_convention!r}"
            )
        if self.anisotropy not in ANISOTROPY_OPTIONS:
            raise ParameterError(
                f"anisotropy must be one of {', '.join(ANISOTROPY_OPTIONS)}, not {self.anisotropy!r}"
            )


@dataclass(frozen=True)
class MapSpec:
    """One map a target writes.

    Attributes
    ----------
    name : str
        The map's quantity, unique within the target; the file is ``<target>/<name>.exr``.
    input : str or None
        The consumer input it feeds (None: a map for people to look at, wired to nothing).
    layout : str
        ``"rgb"`` (R, G, B), ``"y"`` (one channel) or ``"bands"`` (one channel per band).
    unit : str
        ``"1"`` or ``"scene_unit"``.
    colour : bool
        True for a colour in the working space (colour-managed); False for data read unchanged.
    mtlx_type : str or None
        MaterialX type of the input it feeds.
    description : str
        One line for the descriptor.

    """

    name: str
    input: str | None
    layout: str
    unit: str
    colour: bool
    mtlx_type: str | None
    description: str


class Target:
    """Base class of a renderer convention.

    Subclasses set ``name``, ``consumer``, ``channels`` (``"rgb"`` or ``"bands"``), ``scalar_g`` (the
    consumer reads one g for all channels), ``shading_model`` and ``node`` (MaterialX node category, or
    None), and implement :meth:`maps`, :meth:`texel_inputs` and :meth:`from_inputs`.
    """

    name = ""
    consumer = ""
    channels = "rgb"
    scalar_g = False
    shading_model = ""
    node = None
    constants: dict = {}

    def maps(self, options: TargetOptions) -> list:
        """Return the maps this target writes under ``options`` (list of :class:`MapSpec`)."""
        raise NotImplementedError

    def texel_inputs(self, media: TexelMedia, metres_per_scene_unit: float, options: TargetOptions) -> dict:
        """Map name -> texels (N, C) float64 of every map, from a strip of effective media."""
        raise NotImplementedError

    def constant_inputs(self, ior: float, options: TargetOptions) -> dict:
        """Consumer inputs that are one value for the whole material: name -> ``{"value", "type"}``."""
        return {}

    def conventions(self, options: TargetOptions) -> dict:
        """Descriptor lines that say how the consumer turns the maps into a medium."""
        return {}

    def from_inputs(self, inputs: dict, *, metres_per_scene_unit: float) -> EffectiveMedium:
        """Return the medium the consumer builds from ``inputs`` by its documented remap."""
        raise NotImplementedError

    def to_inputs(self, medium: EffectiveMedium, *, metres_per_scene_unit: float, **options) -> dict:
        """Consumer inputs for one medium: the texel conversion applied to a single texel.

        The medium must already carry the g this consumer reads (one scalar for RGB shading models).
        """
        check_scale(metres_per_scene_unit)
        opts = TargetOptions(**options)
        if self.channels == "rgb" and medium.albedo_single.size != 3:
            raise ParameterError(
                f"{self.consumer} takes 3 RGB channels; the medium has {medium.albedo_single.size}"
            )
        if self.scalar_g and np.ptp(medium.anisotropy) > 1e-12:
            raise ParameterError(
                f"{self.consumer} reads one scalar anisotropy; the medium's channels have "
                f"{np.round(medium.anisotropy, 4).tolist()} (invert every channel at one g)"
            )
        texels = self.texel_inputs(TexelMedia.of(medium), metres_per_scene_unit, opts)
        out = {}
        for spec in self.maps(opts):
            if spec.input is None:
                continue
            v = np.asarray(texels[spec.name], dtype=np.float64)[0]
            out[spec.input] = float(v[0]) if spec.layout == "y" else v.tolist()
        out.update({k: v["value"] for k, v in self.constant_inputs(medium.ior, opts).items()})
        out.update(self.conventions(opts).get("inputs_extra", {}))
        return out
