"""The layer stack handed to the transport engine: plain per-layer arrays. Units: mm, 1/mm.

The stack is finite: layer 0 is the top (light enters from the ambient medium above, index ``n_above``);
below the last layer lies an ambient medium of index ``n_below``. A layer with ``mu_s = 0`` is clear
(a glass slide, a clear coat).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from matgen.errors import StackError

_FIELDS = ("thickness_mm", "n", "mu_a", "mu_s", "g")


@dataclass(frozen=True)
class Stack:
    """A finite stack of plane-parallel layers for one wavelength band.

    Attributes
    ----------
    thickness_mm : ndarray, shape (L,)
        Layer thicknesses in mm, each > 0 and finite.
    n : ndarray, shape (L,)
        Refractive indices, each >= 1.
    mu_a : ndarray, shape (L,)
        Absorption coefficients in 1/mm, each >= 0.
    mu_s : ndarray, shape (L,)
        Scattering coefficients in 1/mm, each >= 0 (0 = clear layer).
    g : ndarray, shape (L,)
        Henyey-Greenstein anisotropy, each in (-1, 1).
    n_above, n_below : float
        Refractive indices of the ambient media above and below the stack, each >= 1.
    names : tuple of str
        Layer names for messages (defaults to "layer 0", ...).

    """

    thickness_mm: np.ndarray
    n: np.ndarray
    mu_a: np.ndarray
    mu_s: np.ndarray
    g: np.ndarray
    n_above: float = 1.0
    n_below: float = 1.0
    names: tuple = field(default=())

    def __post_init__(self):
        arrays = {}
        for name in _FIELDS:
            try:
                arr = np.atleast_1d(np.asarray(getattr(self, name), dtype=np.float64)).copy()
            except (TypeError, ValueError) as exc:
                raise StackError(f"stack field '{name}' is not numeric ({exc})") from exc
            arrays[name] = arr
        n_layers = arrays["thickness_mm"].size
        if n_layers == 0:
            raise StackError("the stack has no layers; give at least one layer")
        if self.names and (isinstance(self.names, (str, bytes)) or not hasattr(self.names, "__iter__")):
            raise StackError(f"layer names must be a list of {n_layers} strings, not {self.names!r}")
        names = (
            tuple(str(v) for v in self.names) if self.names else tuple(f"layer {i}" for i in range(n_layers))
        )
        if len(names) != n_layers:
            raise StackError(f"{len(names)} layer names given for {n_layers} layers")
        object.__setattr__(self, "names", names)
        for name, arr in arrays.items():
            if arr.ndim != 1 or arr.size != n_layers:
                raise StackError(f"stack field '{name}' has {arr.size} values for {n_layers} layers")
            for i, v in enumerate(arr):
                where = f"layer {i} ('{names[i]}') field '{name}'"
                if not math.isfinite(v):
                    raise StackError(f"{where} is {v!r}; must be finite")
                if name == "thickness_mm" and v <= 0:
                    raise StackError(f"{where} is {v} mm; thickness must be > 0 mm")
                if name == "n" and v < 1.0:
                    raise StackError(f"{where} is {v}; refractive index must be >= 1")
                if name in ("mu_a", "mu_s") and v < 0:
                    raise StackError(f"{where} is {v} 1/mm; coefficients must be >= 0")
                if name == "g" and not (-1.0 < v < 1.0):
                    raise StackError(f"{where} is {v}; Henyey-Greenstein g must lie in (-1, 1)")
            arr.setflags(write=False)
            object.__setattr__(self, name, arr)
        for name in ("n_above", "n_below"):
            v = getattr(self, name)
            try:
                v = float(v)
            except (TypeError, ValueError) as exc:
                raise StackError(f"stack field '{name}' is not a number: {v!r}") from exc
            if not math.isfinite(v) or v < 1.0:
                raise StackError(
                    f"stack field '{name}' is {v}; ambient refractive index must be finite and >= 1"
                )
            object.__setattr__(self, name, v)

    @property
    def n_layers(self) -> int:
        """Number of layers."""
        return int(self.thickness_mm.size)

    @property
    def total_thickness_mm(self) -> float:
        """Total thickness of the stack in mm."""
        return float(self.thickness_mm.sum())

    def with_mu_a(self, mu_a) -> Stack:
        """Return the same stack with another absorption vector (1/mm)."""
        return Stack(
            self.thickness_mm, self.n, mu_a, self.mu_s, self.g, self.n_above, self.n_below, self.names
        )

    def to_dict(self) -> dict:
        """JSON form matching the ``matgen simulate`` STACK.json layout (one band)."""
        return {
            "n_above": self.n_above,
            "n_below": self.n_below,
            "layers": [
                {
                    "name": self.names[i],
                    "thickness_mm": float(self.thickness_mm[i]),
                    "n": float(self.n[i]),
                    "mu_a": float(self.mu_a[i]),
                    "mu_s": float(self.mu_s[i]),
                    "g": float(self.g[i]),
                }
                for i in range(self.n_layers)
            ],
        }
