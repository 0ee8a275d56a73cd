"""Transport results: every tally with its standard error.

Units: mm, mm^-2, sr^-1, fractions of launched weight.

Ring ``k`` of the radial profile spans ``[ring_edges_mm[k], ring_edges_mm[k+1])``; the first ring starts at 0.
``radial_reflectance_per_mm2[k]`` is the diffuse reflectance escaping through ring k divided by the ring's
area (mm^-2), so ``sum(radial * ring_area_mm2)`` equals the diffuse reflectance caught inside the last edge.
The exit-angle distribution of diffusely reflected light is binned in exit cosine ``mu = cos(theta)``
(edges ``exit_cos_edges``, ascending in [0, 1]), as reflectance per unit projected solid angle
(sr^-1): dR / (mu dOmega), so that a Lambertian surface gives a flat line at R / pi.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class Estimate:
    """A Monte Carlo estimate with its standard error (same unit as the value)."""

    value: float
    stderr: float

    def to_dict(self) -> dict:
        """JSON form ``{"value": v, "stderr": e}``."""
        return {"value": float(self.value), "stderr": float(self.stderr)}


def ring_areas_mm2(ring_edges_mm: np.ndarray) -> np.ndarray:
    """Areas of the annuli between consecutive edges, in mm^2."""
    e = np.asarray(ring_edges_mm, dtype=np.float64)
    return np.pi * (e[1:] ** 2 - e[:-1] ** 2)


def ring_centres_mm(ring_edges_mm: np.ndarray) -> np.ndarray:
    """Area-weighted mean radius of each ring (mm): 2/3 (r1^3 - r0^3)/(r1^2 - r0^2)."""
    e = np.asarray(ring_edges_mm, dtype=np.float64)
    r0, r1 = e[:-1], e[1:]
    return (2.0 / 3.0) * (r1**3 - r0**3) / (r1**2 - r0**2)


@dataclass(frozen=True)
class TransportResult:
    """Tallies of one transport run (one band, one absorption set).

    Attributes
    ----------
    photons : int
        Photon packets launched.
    specular_reflectance, diffuse_reflectance, transmittance : Estimate
        Fractions of launched weight. Specular is the Fresnel reflection at entry.
    absorbed : ndarray, shape (L,)  and absorbed_stderr : ndarray, shape (L,)
        Fraction of launched weight absorbed in each layer.
    ring_edges_mm : ndarray, shape (K+1,)
        Edges of the radial rings in mm (first 0, then log-spaced).
    radial_reflectance_per_mm2, radial_stderr_per_mm2 : ndarray, shape (K,)
        Diffuse reflectance per unit area in each ring (mm^-2), and its standard error.
    exit_cos_edges : ndarray, shape (M+1,)
        Edges of the exit-cosine bins.
    exit_angle_per_sr, exit_angle_stderr_per_sr : ndarray, shape (M,)
        Diffuse reflectance per unit projected solid angle in each bin (sr^-1), and its standard error.
    mean_penetration_depth_mm : Estimate
        Weight-averaged maximum depth reached by diffusely reflected photons (mm).
    photons_per_second : float
        Throughput of the run that produced this result (0 where not measured).
    extra : dict
        Anything else (e.g. a wavelength, settings) to carry along.

    """

    photons: int
    specular_reflectance: Estimate
    diffuse_reflectance: Estimate
    transmittance: Estimate
    absorbed: np.ndarray
    absorbed_stderr: np.ndarray
    ring_edges_mm: np.ndarray
    radial_reflectance_per_mm2: np.ndarray
    radial_stderr_per_mm2: np.ndarray
    exit_cos_edges: np.ndarray
    exit_angle_per_sr: np.ndarray
    exit_angle_stderr_per_sr: np.ndarray
    mean_penetration_depth_mm: Estimate
    photons_per_second: float = 0.0
    extra: dict = field(default_factory=dict)

    @property
    def total_reflectance(self) -> Estimate:
        """Specular + diffuse reflectance (the quantity adding-doubling calls total reflectance)."""
        return Estimate(
            self.specular_reflectance.value + self.diffuse_reflectance.value, self.diffuse_reflectance.stderr
        )

    def to_dict(self, profile: bool = True) -> dict:
        """JSON form (field names as in the ``matgen simulate --json`` output)."""
        out = {
            "photons": int(self.photons),
            "specular_reflectance": self.specular_reflectance.to_dict(),
            "diffuse_reflectance": self.diffuse_reflectance.to_dict(),
            "transmittance": self.transmittance.to_dict(),
            "absorbed": [
                {"value": float(v), "stderr": float(e)}
                for v, e in zip(self.absorbed, self.absorbed_stderr, strict=False)
            ],
            "mean_penetration_depth_mm": self.mean_penetration_depth_mm.to_dict(),
            "photons_per_second": float(self.photons_per_second),
        }
        if profile:
            out["profile"] = {
                "ring_edges_mm": np.asarray(self.ring_edges_mm).tolist(),
                "radial_reflectance_per_mm2": np.asarray(self.radial_reflectance_per_mm2).tolist(),
                "radial_stderr_per_mm2": np.asarray(self.radial_stderr_per_mm2).tolist(),
            }
            out["exit_angle"] = {
                "exit_cos_edges": np.asarray(self.exit_cos_edges).tolist(),
                "reflectance_per_sr": np.asarray(self.exit_angle_per_sr).tolist(),
                "stderr_per_sr": np.asarray(self.exit_angle_stderr_per_sr).tolist(),
            }
        # extra values join the JSON form; arrays (e.g. the fixed-point tally vector) become lists
        out.update(
            {
                k: (v.tolist() if isinstance(v, np.ndarray) else v)
                for k, v in self.extra.items()
                if k not in out
            }
        )
        return out

    @classmethod
    def from_dict(cls, d: dict) -> TransportResult:
        """Inverse of :meth:`to_dict` (profile fields may be absent: they become empty arrays)."""
        prof = d.get("profile", {})
        ang = d.get("exit_angle", {})
        absorbed = d.get("absorbed", [])
        known = {
            "photons",
            "specular_reflectance",
            "diffuse_reflectance",
            "transmittance",
            "absorbed",
            "mean_penetration_depth_mm",
            "photons_per_second",
            "profile",
            "exit_angle",
        }
        return cls(
            photons=int(d["photons"]),
            specular_reflectance=Estimate(**d["specular_reflectance"]),
            diffuse_reflectance=Estimate(**d["diffuse_reflectance"]),
            transmittance=Estimate(**d["transmittance"]),
            absorbed=np.array([a["value"] for a in absorbed], dtype=np.float64),
            absorbed_stderr=np.array([a["stderr"] for a in absorbed], dtype=np.float64),
            ring_edges_mm=np.asarray(prof.get("ring_edges_mm", []), dtype=np.float64),
            radial_reflectance_per_mm2=np.asarray(
                prof.get("radial_reflectance_per_mm2", []), dtype=np.float64
            ),
            radial_stderr_per_mm2=np.asarray(prof.get("radial_stderr_per_mm2", []), dtype=np.float64),
            exit_cos_edges=np.asarray(ang.get("exit_cos_edges", []), dtype=np.float64),
            exit_angle_per_sr=np.asarray(ang.get("reflectance_per_sr", []), dtype=np.float64),
            exit_angle_stderr_per_sr=np.asarray(ang.get("stderr_per_sr", []), dtype=np.float64),
            mean_penetration_depth_mm=Estimate(
                **d.get("mean_penetration_depth_mm", {"value": 0.0, "stderr": 0.0})
            ),
            photons_per_second=float(d.get("photons_per_second", 0.0)),
            extra={k: v for k, v in d.items() if k not in known},
        )
