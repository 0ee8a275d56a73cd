"""Fuzz targets over the inputs of ``matgen estimate``: EXR, PNG and TIFF colour albedos.

Registered in :data:`targets.TARGETS` when :mod:`targets` is imported. Seeds are small albedos written by
matgen's own EXR writer (ACEScg, tagged) and PNG writer (8-bit sRGB); each case runs the whole estimate
(plan, scan, solve, write) into ``<scratch>/out`` with the shipped default table.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from fuzzlib import Target
from targets import TARGETS

_REQ = ("matgen.estimate.run", "OpenImageIO")


def _albedo(size: int = 16) -> np.ndarray:
    """A smooth skin-like ACEScg albedo (invented values, test data only)."""
    y, x = np.mgrid[0:size, 0:size] / size
    return np.stack([0.45 + 0.1 * x, 0.3 + 0.05 * y, 0.22 + 0.03 * x * y], axis=2)


def _seeds(kind: str):
    def seeds(d: Path) -> list:
        p = d / f"albedo.{kind}"
        if kind == "png":
            from matgen.preview.images import working_to_display, write_png

            write_png(p, working_to_display(_albedo()))
        else:
            from matgen.export.exr import write_exr

            write_exr(
                p,
                _albedo(),
                ("R", "G", "B"),
                pixel_type="half",
                attributes={"oiio:ColorSpace": "lin_ap1_scene"},
            )
        return [p.read_bytes()]

    return seeds


def _run(kind: str):
    def run(data: bytes, scratch: Path):
        import warnings

        from matgen.errors import MatgenWarning
        from matgen.estimate.run import EstimateRequest, estimate, load_table_for, plan_estimate

        path = scratch / f"albedo.{kind}"
        path.write_bytes(data)
        table, source = load_table_for(None)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", MatgenWarning)
            plan = plan_estimate(EstimateRequest(albedo=path), table, source)
            return estimate(plan, scratch / "out", jobs=1)

    return run


for _kind in ("exr", "png"):
    TARGETS[f"estimate_albedo_{_kind}"] = Target(
        f"estimate_albedo_{_kind}",
        _seeds(_kind),
        _run(_kind),
        _REQ,
        30.0,
        f"matgen estimate on a mutated {_kind.upper()} colour albedo (file tag decides its colour space)",
    )
