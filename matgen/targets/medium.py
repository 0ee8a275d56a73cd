"""The effective homogeneous medium a renderer rebuilds, per channel (RGB) or band, and scene-unit helpers.

Units: mean free path in mm, coefficients in 1/mm on matgen's side; scene units only through an explicit
``metres_per_scene_unit`` (0.01 for a centimetre scene).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from matgen.errors import ClampWarning, FitError, ParameterError


@dataclass(frozen=True)
class EffectiveMedium:
    """A homogeneous half-space per channel (RGB channels or bands).

    Attributes
    ----------
    albedo_single : ndarray, shape (C,)
        Single-scattering albedo.
    mean_free_path_mm : ndarray, shape (C,)
        Mean free path 1 / mu_t in mm.
    anisotropy : ndarray, shape (C,)
        Henyey-Greenstein g.
    ior : float
        Refractive index of the medium (air outside).
    albedo_multiple : ndarray, shape (C,), optional
        The layered result's A the medium was fitted to (needed by the ``"observed"`` colour convention).

    """

    albedo_single: np.ndarray
    mean_free_path_mm: np.ndarray
    anisotropy: np.ndarray
    ior: float = 1.0
    albedo_multiple: np.ndarray | None = None

    def __post_init__(self):
        a = np.atleast_1d(np.asarray(self.albedo_single, dtype=np.float64))
        mfp = np.atleast_1d(np.asarray(self.mean_free_path_mm, dtype=np.float64))
        g = np.broadcast_to(np.asarray(self.anisotropy, dtype=np.float64), a.shape).copy()
        if mfp.shape != a.shape:
            raise ParameterError(f"mean_free_path_mm has shape {mfp.shape}; albedo_single has {a.shape}")
        if np.any(~np.isfinite(a) | (a < 0) | (a > 1)):
            raise ParameterError("albedo_single must lie in [0, 1] in every channel")
        if np.any(~np.isfinite(mfp) | (mfp <= 0)):
            raise ParameterError("mean_free_path_mm must be finite and > 0 mm in every channel")
        if np.any(~np.isfinite(g) | (g <= -1) | (g >= 1)):
            raise ParameterError("anisotropy must lie in (-1, 1) in every channel")
        if not np.isfinite(self.ior) or self.ior < 1:
            raise ParameterError(f"ior = {self.ior!r}; must be >= 1")
        object.__setattr__(self, "albedo_single", a)
        object.__setattr__(self, "mean_free_path_mm", mfp)
        object.__setattr__(self, "anisotropy", g)
        object.__setattr__(self, "ior", float(self.ior))
        if self.albedo_multiple is not None:
            object.__setattr__(
                self, "albedo_multiple", np.atleast_1d(np.asarray(self.albedo_multiple, dtype=np.float64))
            )

    @property
    def mu_t_per_mm(self) -> np.ndarray:
        """Extinction coefficient in 1/mm."""
        return 1.0 / self.mean_free_path_mm


@dataclass
class TexelMedia:
    """Effective media of N texels, C channels or bands each (float64 arrays (N, C)).

    ``albedo_single`` is carried with ``one_minus_albedo`` (1 - alpha formed without cancellation) so that
    targets can store whichever their consumer rebuilds from. ``anisotropy`` is the g each channel was
    inverted with, which is the g written for it; ``ior`` (N, 1) the boundary index; ``albedo_multiple``
    the layered skin's A that the medium reproduces under that boundary.
    """

    albedo_single: np.ndarray
    one_minus_albedo: np.ndarray
    mean_free_path_mm: np.ndarray
    anisotropy: np.ndarray
    ior: np.ndarray
    albedo_multiple: np.ndarray

    def medium(self, k: int = 0) -> EffectiveMedium:
        """Return the :class:`EffectiveMedium` of texel ``k``."""
        return EffectiveMedium(
            self.albedo_single[k],
            self.mean_free_path_mm[k],
            self.anisotropy[k],
            float(self.ior[k, 0]),
            albedo_multiple=self.albedo_multiple[k],
        )

    @classmethod
    def of(cls, medium: EffectiveMedium) -> TexelMedia:
        """One texel holding ``medium`` (for the per-medium ``to_inputs``)."""
        a = medium.albedo_single[None, :]
        am = (
            medium.albedo_multiple[None, :] if medium.albedo_multiple is not None else np.full_like(a, np.nan)
        )
        return cls(
            a,
            1.0 - a,
            medium.mean_free_path_mm[None, :],
            medium.anisotropy[None, :],
            np.full((1, 1), medium.ior),
            am,
        )


def check_scale(metres_per_scene_unit) -> float:
    """Return ``metres_per_scene_unit`` as a float; :class:`ParameterError` unless finite and > 0."""
    try:
        m = float(metres_per_scene_unit)
    except (TypeError, ValueError):
        raise ParameterError(
            f"metres_per_scene_unit must be a number, not {metres_per_scene_unit!r}"
        ) from None
    if not np.isfinite(m) or m <= 0:
        raise ParameterError(f"metres_per_scene_unit = {m!r}; must be > 0 (0.01 for a centimetre scene)")
    return m


def clamp(values, lo, hi, consumer, field):
    """Clip to [lo, hi] as the consumer documents it does, with a :class:`ClampWarning` naming it."""
    v = np.asarray(values, dtype=np.float64)
    c = np.clip(v, lo, hi)
    if np.any(c != v):
        warnings.warn(
            f"{consumer}: {field} {np.round(v, 6).reshape(-1)[:8].tolist()} clamped to [{lo}, {hi}] as "
            f"{consumer} accepts",
            ClampWarning,
            stacklevel=3,
        )
    return c


def require(inputs, keys, target) -> None:
    """:class:`FitError` naming the inputs ``target`` lacks."""
    missing = [k for k in keys if k not in inputs]
    if missing:
        raise FitError(f"{target} inputs lack {missing}")
