"""Validation through the files: a baked material, read as a renderer reads it, against fresh skin transport.

``matgen validate --bake DIR``: the descriptor and every file it lists are checked (format version, SHA-256
of each texture, the table the bake was made with against the table at hand); texels are picked (lightest,
darkest and median by the skin's green-channel reflectance, then random ones, all off the table's nodes);
each texel's maps are read exactly as stored (OpenImageIO, one scanline); each renderer target's medium is
rebuilt through its ``from_inputs`` (the consumer's documented remap) and its deep-slab diffuse reflectance
is solved under a dielectric boundary of the exported index, by adding-doubling (iadpython,
``Prahl1993iad``; 16 quadrature points, optical thickness 10^4) or rendered by Mitsuba 3 (scalar_spectral,
one band per render, RGB targets per channel at a representative band). The reference is a fresh layered
Monte Carlo of the texel's own pigments (matgen's transport of the table's region and packaging). Spectral
targets are compared per band (relative error); RGB targets per channel (relative error, channel weights of
the table's working space and illuminant) and by CIEDE2000 (``CIE2004``, through colour-science).

Bounds are relative: |rendered / reference - 1| <= 3 combined relative standard errors (fresh transport,
the table's stored A error at the texel, the renderer's) plus the stated allowance. Units: nm, mm;
reflectances dimensionless.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from matgen.errors import DataError, DependencyError
from matgen.transport.results import Estimate

#: Combined standard errors in a bound.
SIGMA_BOUND = 3.0
#: Stated allowances (relative): the request's targets for the worst band and the worst channel.
ALLOWANCE_BAND = 0.025
ALLOWANCE_CHANNEL = 0.02
#: Largest CIEDE2000 colour difference per texel that passes (RGB targets).
ALLOWANCE_DE2000 = 1.0
#: Relative error of the adding-doubling solve itself (16 vs 32 quadrature points differ by <= 2e-4).
AD_RELATIVE_STDERR = 2e-4
#: Optical thickness of the adding-doubling deep slab (a half-space for every albedo below 1 - 1e-8).
AD_OPTICAL_THICKNESS = 1e4
#: Photons per band of the fresh skin transport.
PHOTONS = {"quick": 20_000, "full": 50_000}
#: Relative standard error a band's fresh transport is run to, and the photon ceiling per band.
TARGET_RELATIVE_STDERR = {"quick": 0.008, "full": 0.005}
MAX_PHOTONS = {"quick": 400_000, "full": 1_000_000}
#: Random texels beyond lightest / darkest / median.
RANDOM_TEXELS = {"quick": 0, "full": 3}
#: Bands of the spectral comparisons (stack bands kept: every k-th).
BAND_STRIDE = {"quick": 3, "full": 1}
#: Relative distance from every table node below which a texel counts as "on a node".
NODE_TOLERANCE = 1e-3


def _descriptor(folder: Path):
    from matgen.export.descriptor import inspect_descriptor

    path = folder / "material.json"
    if not path.is_file():
        raise DataError(f"{path}: no material descriptor in the bake folder")
    rep = inspect_descriptor(path)
    if rep.missing:
        raise DataError(f"{folder / rep.missing[0]}: texture listed by {path.name} is missing")
    if rep.modified:
        raise DataError(
            f"{folder / rep.modified[0]}: SHA-256 differs from {path.name} (modified after the bake)"
        )
    return rep.doc


def _check_table(doc: dict, table, table_source, folder: Path) -> None:
    from matgen.export.job import _table_identity

    want = doc["provenance"]["table_sha256"]
    name, have = _table_identity(table, table_source)
    if want != have:
        raise DataError(
            f"{folder / 'material.json'}: baked with table '{doc['provenance']['table']}' (SHA-256 "
            f"{want[:12]}...), not with the table at hand '{name}' ({have[:12]}...); validate with that table"
        )


def read_texel(path: Path, x: int, y: int, channels=None) -> np.ndarray:
    """Return the channels of texel (x, y) of an image exactly as stored (OpenImageIO, one scanline).

    ``channels`` (names) orders the result; OpenEXR stores channels sorted by name, so a spectral stack's
    file order is not its band order.
    """
    import OpenImageIO as oiio

    from matgen.bake.maps import oiio_error_text

    inp = oiio.ImageInput.open(str(path))
    if inp is None:
        raise DataError(f"{path}: cannot be read ({oiio_error_text()})")
    try:
        spec = inp.spec()
        if not (0 <= x < spec.width and 0 <= y < spec.height):
            raise DataError(f"{path}: texel ({x}, {y}) lies outside its {spec.width} x {spec.height} texels")
        row = inp.read_scanlines(0, 0, y, y + 1, 0, 0, spec.nchannels, oiio.FLOAT)
        names = list(spec.channelnames)
    finally:
        inp.close()
    values = np.asarray(row, dtype=np.float64).reshape(spec.width, spec.nchannels)[x]
    if channels is None:
        return values
    missing = [c for c in channels if c not in names]
    if missing:
        raise DataError(f"{path}: lacks channels {missing[:3]} that the descriptor lists")
    return values[[names.index(c) for c in channels]]


def _texture_path(folder: Path, pattern: str, tile) -> Path:
    return folder / (pattern.replace("<UDIM>", str(tile)) if tile is not None else pattern)


def target_inputs(folder: Path, entry: dict, tile, x: int, y: int, textures: dict) -> dict:
    """Return a target's inputs at one texel, read from its maps as stored, and its constants.

    ``textures`` maps a texture's relative path to its descriptor entry (for the channel order).
    """
    inputs = {}
    for key, spec in entry["inputs"].items():
        if "texture" in spec:
            path = _texture_path(folder, spec["texture"], tile)
            rel = path.relative_to(folder).as_posix()
            v = read_texel(path, x, y, textures[rel]["channels"])
            inputs[key] = float(v[0]) if spec.get("type") == "float" else v
        else:
            inputs[key] = spec["value"]
    if "albedo_convention" in entry:
        inputs["albedo_convention"] = entry["albedo_convention"]
    return inputs


@dataclass
class Texel:
    """A picked texel: label, UDIM tile (or None), position and the skin parameters it was baked from."""

    label: str
    tile: int | None
    x: int
    y: int
    params: dict


def _off_nodes(table, p: np.ndarray, varying) -> bool:
    """Whether ``p`` lies off the nodes of every axis that varies over the bake.

    Constant parameters are the config's choice and may sit on a node.
    """
    for i, ax in enumerate(table.axes):
        v = ax.values
        if not varying[i] or v.size < 2:
            continue
        if np.min(np.abs(v - p[i]) / np.maximum(np.abs(v), 1e-12)) < NODE_TOLERANCE:
            return False
    return True


def pick_texels(folder: Path, doc: dict, table, mode: str, seed: int = 0) -> list:
    """Pick the lightest, darkest, median (skin green-channel A) and random texels off the table's nodes.

    Off the nodes of every axis that varies over the bake.
    """
    entries = [t for t in doc["textures"] if t["key"] == "qa/parameters"]
    if not entries:
        raise DataError(
            f"{folder / 'material.json'}: the bake has no qa/parameters map (bake with qa = true)"
        )
    from matgen.export.exr import read_exr

    names = [a.name for a in table.axes]
    tiles = []
    for e in entries:
        pix, chans, _ = read_exr(folder / e["path"])
        if sorted(chans) != sorted(names):
            raise DataError(f"{folder / e['path']}: channels {list(chans)} are not the table's axes {names}")
        tiles.append(
            (e, pix.reshape(-1, len(names))[:, [list(chans).index(n) for n in names]].astype(np.float64))
        )
    every = np.concatenate([flat for _, flat in tiles])
    varying = np.ptp(every, axis=0) > 0
    points, where = [], []
    for e, flat in tiles:
        idx = np.flatnonzero([_off_nodes(table, p, varying) for p in flat])
        points.append(flat[idx])
        where += [(e["udim"], int(i % e["width"]), int(i // e["width"])) for i in idx]
    if not where:
        raise DataError(f"{folder}: every texel lies on a table node; nothing off the nodes to validate")
    pts = np.concatenate(points)
    green, _ = table.lookup(pts, ["rgb_albedo_multiple"])
    order = np.argsort(green["rgb_albedo_multiple"][:, 1], kind="stable")
    chosen = {"lightest": order[-1], "darkest": order[0], "median": order[order.size // 2]}
    rng = np.random.default_rng(seed)
    for k in range(min(RANDOM_TEXELS[mode], order.size)):
        chosen[f"random {k + 1}"] = int(rng.integers(order.size))
    out = []
    for label, i in chosen.items():
        tile, x, y = where[int(i)]
        out.append(Texel(label, tile, x, y, dict(zip(names, pts[int(i)].tolist(), strict=True))))
    return out


# -- the two sides ---------------------------------------------------------------------------------------


def skin_reference(
    table,
    params: dict,
    band_index,
    photons: int,
    seed: int = 0,
    target_relative_stderr: float = 0.0,
    max_photons: int = 0,
    refine=None,
) -> tuple:
    """Fresh layered transport of a texel's pigments in the given table bands: (A (K,), stderr (K,)).

    The skin is the table's region preset with the texel's axis values and the table's packaging
    (``matgen.tissue``), transported by ``matgen.transport.simulate`` with ``photons`` per band; a band
    whose relative standard error exceeds ``target_relative_stderr`` gets more photons (the same seed
    continued, ``first_photon``; ``matgen.transport.simulate.combine``), up to ``max_photons``. ``refine``
    (table band indices) limits that to the bands compared one by one; bands that only enter the RGB
    channels' weighted sums keep ``photons`` (a channel's error is that of a sum over some 48 bands).
    """
    try:
        from matgen.tissue.optics import skin_optics
        from matgen.tissue.presets import preset
        from matgen.transport.simulate import combine, simulate
        from matgen.transport.stack import Stack
    except ImportError as exc:
        raise DependencyError(f"the tissue model or transport engine is missing ({exc})") from exc
    spec = (table.manifest or {}).get("spec", {})
    skin = preset(spec.get("region", "cheek")).replace(**params)
    bands = table.bands.subset(np.asarray(band_index, dtype=np.int64))
    optics = skin_optics(skin, bands, packaging=spec.get("packaging", "on"))
    a, se = [], []
    for b in range(len(bands)):
        stack, s = Stack(**optics.band(b)), seed + int(band_index[b])
        runs = [simulate(stack, photons, seed=s)]
        r = runs[0]
        done = photons
        while (
            target_relative_stderr
            and (refine is None or int(band_index[b]) in refine)
            and done < max_photons
            and r.diffuse_reflectance.stderr > target_relative_stderr * r.diffuse_reflectance.value
        ):
            rel = r.diffuse_reflectance.stderr / max(r.diffuse_reflectance.value, 1e-12)
            more = min(
                max_photons - done, max(photons, int(done * ((rel / target_relative_stderr) ** 2 - 1)))
            )
            runs.append(simulate(stack, more, seed=s, first_photon=done))
            done += more
            r = combine(runs, stack)
        a.append(r.diffuse_reflectance.value)
        se.append(r.diffuse_reflectance.stderr)
    return np.array(a), np.array(se)


def deep_slab_adding_doubling(albedo: float, g: float, n: float) -> Estimate:
    """Diffuse reflectance of a half-space (optical thickness 10^4) under a smooth boundary of index n.

    iadpython 0.5.3 adding-doubling (``Prahl1993iad``), 16 quadrature points: ``UR1`` minus the normal
    Fresnel reflectance ((n - 1) / (n + 1))^2; its own error taken as 2e-4 relative.
    """
    try:
        import iadpython
    except ImportError as exc:
        raise DependencyError(
            'validation through the files needs iadpython: pip install "matgen[test]"'
        ) from exc
    sample = iadpython.Sample(
        a=float(albedo), b=AD_OPTICAL_THICKNESS, g=float(g), n=float(n), n_above=1.0, n_below=1.0, quad_pts=16
    )
    value = float(sample.rt()[0]) - ((n - 1.0) / (n + 1.0)) ** 2
    return Estimate(value, AD_RELATIVE_STDERR * value)


def deep_slab_mitsuba(
    albedo: float, mfp_mm: float, g: float, n: float, lower_nm: float, upper_nm: float, paths: int, seed: int
) -> Estimate:
    """Diffuse reflectance of a deep slab rendered by Mitsuba 3 (``matgen.preview.tracer``), no specular."""
    from matgen.preview import tracer
    from matgen.preview.media import deep_depth_mfp
    from matgen.transport.stack import Stack

    depth = deep_depth_mfp(albedo, g) * mfp_mm
    st = 1.0 / mfp_mm
    stack = Stack(
        thickness_mm=[depth],
        mu_a=[st * (1 - albedo)],
        mu_s=[st * albedo],
        g=[g],
        n=[n],
        n_above=1.0,
        n_below=1.0,
    )
    est = tracer.render_stack_reflectance(stack, lower_nm, upper_nm, paths=paths, seed=seed)
    return Estimate(est.value - ((n - 1.0) / (n + 1.0)) ** 2, est.stderr)


@dataclass
class TargetCheck:
    """One target at one texel: per channel or band, rendered vs reference, with the verdict."""

    target: str
    texel: str
    labels: list
    rendered: np.ndarray
    rendered_se: np.ndarray
    reference: np.ndarray
    reference_se: np.ndarray
    allowance: float
    de2000: float | None = None
    transport_se: np.ndarray | None = None  # the fresh transport's part of reference_se

    @property
    def relative_error(self) -> np.ndarray:
        """Rendered / reference - 1 per channel or band."""
        return self.rendered / self.reference - 1.0

    @property
    def relative_bound(self) -> np.ndarray:
        """3 combined relative standard errors plus the allowance."""
        rel = np.hypot(self.rendered_se / self.rendered, self.reference_se / self.reference)
        return SIGMA_BOUND * rel + self.allowance

    @property
    def passed(self) -> bool:
        """Every channel or band inside its bound (and dE2000 inside its allowance for RGB)."""
        ok = bool(np.all(np.abs(self.relative_error) <= self.relative_bound))
        return ok and (self.de2000 is None or self.de2000 <= ALLOWANCE_DE2000)

    def to_dict(self) -> dict:
        """JSON form."""
        return {
            "target": self.target,
            "texel": self.texel,
            "labels": list(self.labels),
            "rendered": self.rendered.tolist(),
            "rendered_stderr": self.rendered_se.tolist(),
            "reference": self.reference.tolist(),
            "reference_stderr": self.reference_se.tolist(),
            "relative_error": self.relative_error.tolist(),
            "relative_bound": self.relative_bound.tolist(),
            "transport_stderr": None if self.transport_se is None else self.transport_se.tolist(),
            "allowance": self.allowance,
            "de2000": self.de2000,
            "passed": self.passed,
        }


@dataclass
class BakeValidation:
    """Result of :func:`validate_bake`."""

    folder: str
    renderer: str
    mode: str
    texels: list = field(default_factory=list)
    checks: list = field(default_factory=list)
    seconds: float = 0.0

    @property
    def passed(self) -> bool:
        """Every target at every texel passed."""
        return bool(self.checks) and all(c.passed for c in self.checks)

    def summary(self) -> dict:
        """Per target: median and worst |relative error|, worst dE2000, pass count."""
        out = {}
        for name in dict.fromkeys(c.target for c in self.checks):
            cs = [c for c in self.checks if c.target == name]
            err = np.abs(np.concatenate([c.relative_error for c in cs]))
            de = [c.de2000 for c in cs if c.de2000 is not None]
            out[name] = {
                "median_abs_relative_error": float(np.median(err)),
                "worst_abs_relative_error": float(np.max(err)),
                "worst_de2000": float(max(de)) if de else None,
                "passed": sum(c.passed for c in cs),
                "checks": len(cs),
            }
        return out

    def format(self) -> str:
        """Return the lines a person reads."""
        lines = [
            f"validation through the files: {self.folder} ({self.mode}, renderer {self.renderer}, "
            f"{self.seconds:.1f} s)"
        ]
        for t in self.texels:
            lines.append(
                f"  texel {t.label}: tile {t.tile} ({t.x}, {t.y}) "
                + ", ".join(f"{k}={v:.4g}" for k, v in t.params.items())
            )
        for c in self.checks:
            err = c.relative_error
            worst = int(np.argmax(np.abs(err)))
            de = f", dE2000 {c.de2000:.2f}" if c.de2000 is not None else ""
            lines.append(
                f"  {'PASS' if c.passed else 'FAIL'} {c.target:17s} {c.texel:9s} median |rel| "
                f"{np.median(np.abs(err)):.2%}, worst {err[worst]:+.2%} at {c.labels[worst]} "
                f"(bound {c.relative_bound[worst]:.2%}){de}"
            )
        for name, s in self.summary().items():
            de = f", worst dE2000 {s['worst_de2000']:.2f}" if s["worst_de2000"] is not None else ""
            lines.append(
                f"  {name}: median |rel| {s['median_abs_relative_error']:.2%}, worst "
                f"{s['worst_abs_relative_error']:.2%}{de}; {s['passed']}/{s['checks']} texels pass"
            )
        return "\n".join(lines)

    def to_dict(self) -> dict:
        """JSON form."""
        return {
            "folder": self.folder,
            "renderer": self.renderer,
            "mode": self.mode,
            "seconds": self.seconds,
            "passed": self.passed,
            "texels": [t.__dict__ for t in self.texels],
            "checks": [c.to_dict() for c in self.checks],
            "summary": self.summary(),
        }


def _lab(rgb, working_space, illuminant):
    import colour

    from matgen.color.colorimetry import resolve_space

    cs = resolve_space(working_space)
    xyz = colour.RGB_to_XYZ(np.asarray(rgb, dtype=np.float64), cs, illuminant=cs.whitepoint)
    return colour.XYZ_to_Lab(xyz, cs.whitepoint)


def de2000(rgb_a, rgb_b, working_space: str, illuminant: str) -> float:
    """CIEDE2000 between two working-space reflectance triples (``CIE2004``; colour-science)."""
    import colour

    return float(
        colour.delta_E(
            _lab(rgb_a, working_space, illuminant), _lab(rgb_b, working_space, illuminant), method="CIE 2000"
        )
    )


#: Mitsuba paths per deep-slab render, and the stride over the stack's bands of its spectral comparisons
#: (each render takes seconds; the adding-doubling solve milliseconds).
MITSUBA_PATHS = 65_536
MITSUBA_BAND_STRIDE = 6
#: Band of the RGB targets' renders (each channel's medium is grey, so one band stands for it), nm.
RGB_RENDER_BAND_NM = (545.0, 555.0)
RENDERERS = ("adding-doubling", "mitsuba")


def _render(renderer, alpha, mfp_mm, g, n, band, seed):
    if renderer == "mitsuba":
        return deep_slab_mitsuba(alpha, mfp_mm, g, n, band[0], band[1], MITSUBA_PATHS, seed)
    return deep_slab_adding_doubling(alpha, g, n)


def _check_target(name, entry, folder, texel, mpsu, table, ctx, renderer, seed) -> TargetCheck:
    from matgen.targets import get_target

    target = get_target(name)
    medium = target.from_inputs(
        target_inputs(folder, entry, texel.tile, texel.x, texel.y, ctx["textures"]),
        metres_per_scene_unit=mpsu,
    )
    a_ref, se_ref, union, table_se = ctx["a"], ctx["se"], ctx["union"], ctx["table_se"]
    if target.channels == "bands":
        ks = ctx["stack_positions"]
        bands = [union.index(ctx["stack_index"][k]) for k in ks]
        est = [
            _render(
                renderer,
                medium.albedo_single[k],
                medium.mean_free_path_mm[k],
                medium.anisotropy[k],
                medium.ior,
                (table.bands.lower_nm[ctx["stack_index"][k]], table.bands.upper_nm[ctx["stack_index"][k]]),
                seed + k,
            )
            for k in ks
        ]
        ref = a_ref[bands]
        mc_se = se_ref[bands]
        ref_se = np.hypot(mc_se, table_se[np.asarray(ctx["stack_index"])[ks]])
        labels = [f"{table.bands.centre_nm[ctx['stack_index'][k]]:g} nm" for k in ks]
        de, allowance = None, ALLOWANCE_BAND
    else:
        w = ctx["w"][:, union]
        est = [
            _render(
                renderer,
                medium.albedo_single[c],
                medium.mean_free_path_mm[c],
                medium.anisotropy[c],
                medium.ior,
                RGB_RENDER_BAND_NM,
                seed + c,
            )
            for c in range(3)
        ]
        ref = w @ a_ref
        mc_se = np.sqrt((w**2) @ se_ref**2)
        ref_se = np.hypot(mc_se, np.sqrt((ctx["w"] ** 2) @ table_se**2))
        labels = ["R", "G", "B"]
        rendered = np.array([e.value for e in est])
        de, allowance = de2000(rendered, ref, table.working_space, table.illuminant), ALLOWANCE_CHANNEL
    return TargetCheck(
        name,
        texel.label,
        labels,
        np.array([e.value for e in est]),
        np.array([e.stderr for e in est]),
        ref,
        ref_se,
        allowance,
        de,
        mc_se,
    )


def validate_bake(
    folder,
    *,
    table=None,
    table_source=None,
    quick: bool = True,
    renderer: str = "adding-doubling",
    seed: int = 0,
    progress=None,
) -> BakeValidation:
    """Validate a bake folder through its files (module docstring).

    Parameters
    ----------
    folder : str or Path
        The bake's output folder (holding ``material.json``).
    table, table_source : optional
        The table at hand (default: the shipped default table) and its file.
    quick : bool
        Lightest, darkest and median texels, every third stack band, 10 000 photons per band; otherwise
        three random texels more, every band, 50 000 photons per band (quick: 10 000), the bands compared one
        by one run on to 0.5 % (quick: 0.8 %) relative standard error.
    renderer : {"adding-doubling", "mitsuba"}
        The deep-slab solver of the rebuilt media.
    seed : int
        Seed of the texel choice and of the transport.
    progress : callable, optional
        Called with one line of text per texel.

    Raises
    ------
    DataError, ConfigError
        Naming the file: no descriptor, missing or modified texture, other format version, other table.

    """
    from matgen.fit.channels import rgb_weights
    from matgen.targets import get_target

    if renderer not in RENDERERS:
        raise DataError(f"renderer {renderer!r}; use one of {', '.join(RENDERERS)}")
    t0 = time.perf_counter()
    folder = Path(folder)
    mode = "quick" if quick else "full"
    doc = _descriptor(folder)
    if table is None:
        from matgen.tables.store import default_table_path, load_default_table

        table, table_source = load_default_table(), default_table_path()
    _check_table(doc, table, table_source, folder)
    texels = pick_texels(folder, doc, table, mode, seed)
    stack_index = [table.bands.index_of(c) for c in doc["bands"]["spectral_stacks"]["centre_nm"]]
    w = rgb_weights(table.bands, table.working_space, table.illuminant)
    channels = {get_target(n).channels for n in doc["targets"]}
    stride = (
        BAND_STRIDE[mode] if renderer == "adding-doubling" else max(BAND_STRIDE[mode], MITSUBA_BAND_STRIDE)
    )
    positions = list(range(0, len(stack_index), stride))
    union = set()
    if "rgb" in channels:
        union |= set(np.flatnonzero(np.any(w != 0, axis=0)).tolist())
    if "bands" in channels:
        union |= {stack_index[k] for k in positions}
    union = sorted(union)
    result = BakeValidation(str(folder), renderer, mode, texels)
    for i, texel in enumerate(texels):
        a, se = skin_reference(
            table,
            texel.params,
            union,
            PHOTONS[mode],
            seed=seed + 1000 * i,
            target_relative_stderr=TARGET_RELATIVE_STDERR[mode],
            max_photons=MAX_PHOTONS[mode],
            refine={stack_index[k] for k in positions},
        )
        point = np.array([[texel.params[ax.name] for ax in table.axes]])
        table_se = table.lookup(point, ["albedo_multiple_stderr"])[0]["albedo_multiple_stderr"][0]
        ctx = {
            "a": a,
            "se": se,
            "union": union,
            "table_se": np.asarray(table_se, dtype=np.float64),
            "w": w,
            "stack_index": stack_index,
            "stack_positions": positions,
            "textures": {t["path"]: t for t in doc["textures"]},
        }
        for name, entry in doc["targets"].items():
            result.checks.append(
                _check_target(
                    name,
                    entry,
                    folder,
                    texel,
                    doc["units"]["metres_per_scene_unit"],
                    table,
                    ctx,
                    renderer,
                    seed,
                )
            )
        if progress is not None:
            progress(f"texel {texel.label} done ({time.perf_counter() - t0:.0f} s)")
    result.seconds = time.perf_counter() - t0
    return result
