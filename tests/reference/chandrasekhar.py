"""Chandrasekhar's H-function for isotropic scattering and the exact half-space reflection function.

H(mu) = 1 / (1 - (a / 2) mu int_0^1 H(mu') / (mu + mu') dmu') (Chandrasekhar 1960, ch. V), solved by
fixed-point iteration on a Gauss-Legendre grid (Nystrom evaluation elsewhere). The diffusely reflected
radiance of a semi-infinite isotropic medium (n = 1) under a collimated beam of cosine mu0, per unit
incident irradiance, is rho(mu, mu0) = (a / (4 pi)) H(mu) H(mu0) / (mu + mu0) (sr^-1); its hemispherical
integral equals 1 - H(mu0) sqrt(1 - a) (Chandrasekhar 1960; van de Hulst 1980).
"""

from __future__ import annotations

import numpy as np


class HFunction:
    """H-function of isotropic scattering at single-scattering albedo ``a``."""

    def __init__(self, a: float, nodes: int = 400, tol: float = 1e-14):
        x, w = np.polynomial.legendre.leggauss(nodes)
        self.mu = 0.5 * (x + 1.0)
        self.w = 0.5 * w
        self.a = float(a)
        h = np.ones_like(self.mu)
        for _ in range(10_000):
            new = self._apply(self.mu, h)
            if np.max(np.abs(new - h)) < tol:
                h = new
                break
            h = new
        self.h = h

    def _apply(self, mu, h):
        mu = np.atleast_1d(np.asarray(mu, dtype=np.float64))
        s = (self.w[None, :] * h[None, :] / (mu[:, None] + self.mu[None, :])).sum(axis=1)
        return 1.0 / (1.0 - 0.5 * self.a * mu * s)

    def __call__(self, mu):
        """H at cosines ``mu`` in [0, 1]."""
        return self._apply(mu, self.h)

    def reflection_per_sr(self, mu, mu0: float = 1.0):
        """rho(mu, mu0) = a/(4 pi) H(mu) H(mu0) / (mu + mu0), in 1/sr (radiance per incident irradiance)."""
        mu = np.asarray(mu, dtype=np.float64)
        return self.a / (4 * np.pi) * self(mu) * self(mu0)[0] / (mu + mu0)

    def albedo(self, mu0: float = 1.0) -> float:
        """Hemispherical reflectance 2 pi int rho mu dmu."""
        return float(2 * np.pi * np.sum(self.w * self.reflection_per_sr(self.mu, mu0) * self.mu))
