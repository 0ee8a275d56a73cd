"""The estimate's JSON summary, gathered strip by strip. Units: axis units; residuals CIEDE2000 / CIE L*.

Pigment histograms use 32 bins over each estimated axis' table range (log-spaced on log axes). Residual
percentiles come from a histogram of 0.005 CIEDE2000 bins up to 20 (values above count in the last bin; the
maximum is exact), so they are exact to 0.005.
"""

from __future__ import annotations

import math

import numpy as np

from matgen import __version__

#: Bins of each pigment histogram.
PIGMENT_BINS = 32

#: Residual histogram: bin width and upper end (CIEDE2000).
RESIDUAL_BIN = 0.005
RESIDUAL_MAX = 20.0

#: Percentiles reported.
PERCENTILES = (50, 90, 95, 99)


def _percentile(counts: np.ndarray, edges: np.ndarray, q: float) -> float:
    total = counts.sum()
    if total == 0:
        return float("nan")
    k = int(np.searchsorted(np.cumsum(counts), math.ceil(q / 100.0 * total)))
    return float(edges[min(k + 1, edges.size - 1)])


class SummaryAccumulator:
    """Collects histograms, counts and extremes over the strips of every tile."""

    def __init__(self, model):
        self.model = model
        self.edges = []
        for ax in model.axes:
            lo, hi = float(ax.values[0]), float(ax.values[-1])
            e = (
                np.geomspace(lo, hi, PIGMENT_BINS + 1)
                if ax.spacing == "log"
                else np.linspace(lo, hi, PIGMENT_BINS + 1)
            )
            self.edges.append(e)
        self.counts = [np.zeros(PIGMENT_BINS, dtype=np.int64) for _ in model.axes]
        self.sums = np.zeros(len(model.axes))
        self.mins = np.full(len(model.axes), np.inf)
        self.maxs = np.full(len(model.axes), -np.inf)
        self.res_edges = np.linspace(0.0, RESIDUAL_MAX, int(round(RESIDUAL_MAX / RESIDUAL_BIN)) + 1)
        self.res_all = np.zeros(self.res_edges.size - 1, dtype=np.int64)
        self.res_in = np.zeros_like(self.res_all)
        self.res_max = 0.0
        self.cap_max = np.zeros(len(model.captures))
        self.cap_sum_sq = np.zeros(len(model.captures))
        self.texels = 0
        self.oog = 0
        self.per_tile = {}

    def add(self, strip) -> None:
        """Add one :class:`matgen.estimate.run.EstimateStrip`."""
        k = len(self.model.axes)
        v = strip.values.reshape(-1, k).astype(np.float64)
        for i, ax in enumerate(self.model.axes):
            # uniform bins in the axis coordinate (log on log axes): numpy's fast path, no sort
            c = np.clip(v[:, i], self.edges[i][0], self.edges[i][-1])
            c = np.log(c) if ax.spacing == "log" else c
            lo, hi = np.log(self.edges[i][[0, -1]]) if ax.spacing == "log" else self.edges[i][[0, -1]]
            self.counts[i] += np.histogram(c, PIGMENT_BINS, range=(lo, hi))[0]
        self.sums += v.sum(axis=0)
        self.mins = np.minimum(self.mins, v.min(axis=0))
        self.maxs = np.maximum(self.maxs, v.max(axis=0))
        de = strip.de2000.reshape(-1).astype(np.float64)
        oog = strip.out_of_gamut.reshape(-1)
        clipped = np.minimum(de, self.res_edges[-1] - RESIDUAL_BIN / 2)
        nb, rng = self.res_all.size, (0.0, RESIDUAL_MAX)  # uniform bins: numpy's fast path, no sort
        self.res_all += np.histogram(clipped, nb, range=rng)[0]
        self.res_in += np.histogram(clipped[~oog], nb, range=rng)[0]
        self.res_max = max(self.res_max, float(de.max()))
        if self.cap_max.size:
            dl = np.abs(strip.capture_dl.reshape(-1, self.cap_max.size))
            self.cap_max = np.maximum(self.cap_max, dl.max(axis=0))
            self.cap_sum_sq += (dl**2).sum(axis=0)
        n = de.size
        self.texels += n
        self.oog += int(oog.sum())
        t = self.per_tile.setdefault(str(strip.tile), [0, 0])
        t[0] += n
        t[1] += int(oog.sum())

    def _residuals(self, counts) -> dict:
        out = {f"p{q}": _percentile(counts, self.res_edges, q) for q in PERCENTILES}
        out["texels"] = int(counts.sum())
        return out

    def summary(self, plan, caution: str, checksums: dict, seconds: float) -> dict:
        """Return the JSON summary of a finished estimate."""
        pigments = {}
        for i, ax in enumerate(self.model.axes):
            pigments[ax.name] = {
                "unit": "fraction",
                "min": float(self.mins[i]),
                "max": float(self.maxs[i]),
                "mean": float(self.sums[i] / max(self.texels, 1)),
                "histogram": {"edges": self.edges[i].tolist(), "counts": self.counts[i].tolist()},
            }
        captures = {
            name: {
                "max_abs_dl": float(self.cap_max[c]),
                "rms_dl": float(np.sqrt(self.cap_sum_sq[c] / max(self.texels, 1))),
            }
            for c, name in enumerate(self.model.captures)
        }
        req = plan.request
        return {
            "format": "matgen-estimate-summary",
            "format_version": 1,
            "matgen_version": __version__,
            "caution": caution,
            "input": {
                "albedo": str(req.albedo),
                "colour_space": plan.space.describe(),
                "captures": {n: {"response": r, "image": str(p)} for n, (r, p) in req.captures.items()},
            },
            "table": {
                "path": "default" if plan.table_source is None else plan.table_source,
                "working_space": plan.table.working_space,
                "illuminant": plan.table.illuminant,
                "axes": [a.to_dict() for a in plan.table.axes],
            },
            "model": self.model.describe(),
            "texels": int(self.texels),
            "tiles": {k: {"texels": v[0], "out_of_gamut": v[1]} for k, v in self.per_tile.items()},
            "out_of_gamut": {"texels": int(self.oog), "share": self.oog / max(self.texels, 1)},
            "residual_de2000": {
                "all": self._residuals(self.res_all) | {"max": self.res_max},
                "in_gamut": self._residuals(self.res_in),
                "resolution": RESIDUAL_BIN,
            },
            "captures_lightness_difference": captures,
            "pigments": pigments,
            "files": checksums,
            "seconds": round(float(seconds), 3),
            "texels_per_second": round(self.texels / seconds, 1) if seconds > 0 else None,
        }
