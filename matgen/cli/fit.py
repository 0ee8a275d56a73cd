"""``matgen fit RESULT.json``: fitted profile parameters, effective medium and every target's inputs.

Input: the JSON that ``matgen simulate STACK.json --profile --json`` writes: one transport result
(:meth:`TransportResult.to_dict`, one band, optionally with ``wavelength_nm``), or ``{"bands": [one result
per band, each with wavelength_nm]}`` (bands of 10 nm around each wavelength, narrower where neighbours are
closer). Also accepted: ``{"bands": {centre_nm, lower_nm, upper_nm}, "results": [...]}`` with explicit band
edges. A ``"stack"`` entry (``Stack.to_dict``, written by ``matgen simulate --json`` beside every result)
supplies the effective medium's defaults: the boundary index is the first layer's n, and g is the mean layer g
over the scattering events (each layer weighted by mu_s times the path length its absorbed fraction implies,
:func:`matgen.fit.layered.effective_anisotropy`). Without a stack give ``--ior`` and ``--anisotropy``
(defaults 1.0, index matched, and 0, isotropic).
"""

from __future__ import annotations

import json
import sys
import warnings
from pathlib import Path

import numpy as np

from matgen import limits
from matgen.cli import add_command
from matgen.errors import ClampWarning, ConfigError, FitError
from matgen.spectra.bands import BandSet
from matgen.transport.results import TransportResult


def register(sub):
    """Add the ``fit`` subcommand to the subparsers ``sub``."""
    p = add_command(
        sub,
        "fit",
        "Fit renderer parameters (profile fits, effective medium, targets) to a transport result",
        "matgen simulate stack.json --profile --json > result.json\nmatgen fit result.json --json > fit.json",
        description=(
            "Read a transport result (one band, or one per band) and print per band the multiple-scattering "
            "albedo, the fitted normalised-diffusion, Gaussian-sum and dipole parameters with their fit "
            "residuals, the single-scattering albedo and mean free path of the effective homogeneous medium, "
            "and each renderer target's inputs (openpbr and standard_surface need visible bands for RGB)."
        ),
    )
    p.add_argument("result", help="transport result JSON (from matgen simulate --profile --json)")
    p.add_argument(
        "--json", action="store_true", help="write JSON to standard output instead of a text table"
    )
    p.add_argument(
        "--anisotropy",
        type=float,
        default=None,
        help="Henyey-Greenstein g of the effective medium (default: the stack's scattering-weighted mean "
        "layer g per band when the result carries its stack, else 0)",
    )
    p.add_argument(
        "--ior",
        type=float,
        default=None,
        help="refractive index of the effective medium (default: the stack's first layer, else 1.0)",
    )
    p.add_argument(
        "--inversion",
        default=None,
        help="albedo inversion: boundary_table, OpenPBR2024 or ChiangKutzBurley2016 "
        "(default: boundary_table when the table is installed)",
    )
    p.add_argument(
        "--metres-per-scene-unit",
        type=float,
        default=0.01,
        help="scene scale of the target inputs (0.01 = centimetre scene)",
    )
    p.add_argument("--working-space", default="ACEScg", help="RGB working space for the RGB targets")
    p.add_argument("--illuminant", default="D65", help="illuminant for the RGB targets")
    p.add_argument(
        "--passes",
        nargs="*",
        default=None,
        metavar="NAME_OR_CSV",
        help="single-channel camera + filter passes to report (built-in uv365, nir850, nir940, or CSV files "
        "wavelength_nm,weight; default: every built-in pass the bands reach)",
    )
    p.set_defaults(func=run)


def _read(path: Path):
    try:
        text = limits.read_text_limited(path, "transport result")
    except OSError as exc:
        raise ConfigError(f"cannot read {path}: {exc}") from exc
    try:
        doc = limits.loads_json_checked(text, f"transport result {path.name}")
    except json.JSONDecodeError as exc:
        raise ConfigError(f"{path.name} is not JSON ({exc.msg}, line {exc.lineno})") from exc
    except RecursionError:  # nesting deeper than the parser's stack
        raise ConfigError(f"{path.name}: JSON nested too deeply to be a transport result") from None
    if not isinstance(doc, dict):
        raise ConfigError(f"{path.name}: expected a JSON object")
    try:
        if isinstance(doc.get("bands"), list):
            # matgen simulate --json with wavelength_nm in STACK.json: {"bands": [result per band]}
            results = [TransportResult.from_dict(r) for r in doc["bands"]]
            waves = [r.get("wavelength_nm") for r in doc["bands"]]
            bands = None
            if all(w is not None for w in waves):
                bands = BandSet.parse(",".join(repr(float(w)) for w in waves))
        elif "results" in doc:
            results = [TransportResult.from_dict(r) for r in doc["results"]]
            bands = BandSet.from_dict(doc["bands"]) if "bands" in doc else None
        else:
            results = [TransportResult.from_dict(doc)]
            bands = None
            wl = doc.get("wavelength_nm")
            if wl is not None:
                bands = BandSet([wl], [wl - 5.0], [wl + 5.0])
    except (KeyError, TypeError, ValueError) as exc:
        raise ConfigError(f"{path.name}: not a transport result ({exc})") from exc
    if bands is not None and len(bands) != len(results):
        raise ConfigError(f"{path.name}: {len(bands)} bands but {len(results)} results")
    for i, r in enumerate(results):
        if np.asarray(r.ring_edges_mm).size == 0:
            raise FitError(
                f"{path.name}: result {i} has no radial profile; run matgen simulate with --profile"
            )
    edges = np.asarray(results[0].ring_edges_mm)
    for i, r in enumerate(results[1:], start=1):
        if not np.array_equal(np.asarray(r.ring_edges_mm), edges):
            raise ConfigError(f"{path.name}: result {i} uses other ring edges than result 0")
    if isinstance(doc.get("bands"), list):
        stacks = [r.get("stack") if isinstance(r, dict) else None for r in doc["bands"]]
    else:
        stacks = [doc.get("stack")]
    if not all(isinstance(st, dict) for st in stacks):
        stacks = None
    return results, bands, stacks


def _stack_defaults(path: Path, results, stacks) -> tuple:
    """(ior, g per band) of the effective medium from the stacks the results carry (see the module doc)."""
    from matgen.errors import StackError
    from matgen.fit.layered import effective_anisotropy, layer_path_lengths_mm

    gs = []
    try:
        for b, (r, st) in enumerate(zip(results, stacks, strict=True)):
            layers = st["layers"]
            cols = {
                k: np.array([float(layer[k]) for layer in layers])
                for k in ("mu_a", "mu_s", "g", "thickness_mm")
            }
            absorbed = np.asarray(r.absorbed, dtype=np.float64)
            if absorbed.shape != cols["mu_a"].shape:
                raise StackError(
                    f"{path.name}: result {b} has {absorbed.size} absorbed fractions for {len(layers)} layers"
                )
            path_mm = layer_path_lengths_mm(cols["mu_a"], absorbed, cols["thickness_mm"])
            gs.append(float(effective_anisotropy(cols["g"], cols["mu_s"], path_mm)))
        ior = float(stacks[0]["layers"][0]["n"])
    except (KeyError, TypeError, ValueError, IndexError) as exc:
        raise ConfigError(f"{path.name}: the 'stack' entry is not a matgen stack ({exc})") from exc
    if not (np.all(np.isfinite(gs)) and np.isfinite(ior) and ior >= 1.0):
        raise ConfigError(
            f"{path.name}: the 'stack' entry gives g {gs} and n {ior}; need finite g and n >= 1"
        )
    return ior, np.array(gs)


def _pass_values(bands, a, a_err, passes) -> dict:
    """Pass values (weights @ A, with standard error) for named or CSV passes; {} without labelled bands."""
    from matgen.color import BUILTIN_PASSES, pass_weights
    from matgen.errors import DataError

    out = {}
    for name in BUILTIN_PASSES if passes is None else passes:
        try:
            w = pass_weights(name, bands)
        except DataError:
            if passes is None:  # a built-in pass the bands do not reach is left out of the default list
                continue
            raise
        out[str(name)] = {
            "value": float(w @ a),
            "stderr": float(np.sqrt((w * w) @ (a_err * a_err))),
        }
    return out


def fit_document(
    results,
    bands,
    *,
    anisotropy,
    ior,
    inversion,
    metres_per_scene_unit,
    working_space,
    illuminant,
    passes=None,
):
    """All fits for a list of per-band results: a JSON-ready dict (also the Python API of ``matgen fit``).

    ``anisotropy`` is one g or one per band; ``passes`` lists pass names or CSV paths (None: every built-in
    pass the bands reach; passes need labelled bands).
    """
    from matgen.color.colorimetry import resolve_illuminant, resolve_space
    from matgen.fit.fitting import fit_dipole_Jensen2001, fit_gaussians_dEon2007
    from matgen.fit.inversion import albedo_single_OpenPBR2024
    from matgen.fit.summary import resolve_inversion, summarize
    from matgen.targets import TARGETS
    from matgen.targets.solve import TexelInverter, summary_media

    resolve_space(working_space)  # an unknown name is an error even when no band is visible
    resolve_illuminant(illuminant)
    method = resolve_inversion(inversion)
    nb = len(results)
    if bands is None:
        bands = BandSet(np.arange(nb) + 1.0, np.arange(nb) + 0.5, np.arange(nb) + 1.5)
        labelled = False
    else:
        labelled = True
    edges = np.asarray(results[0].ring_edges_mm)
    a = np.array([[r.diffuse_reflectance.value for r in results]])
    a_err = np.array([[r.diffuse_reflectance.stderr for r in results]])
    y = np.array([[np.asarray(r.radial_reflectance_per_mm2) for r in results]])
    s = np.array([[np.asarray(r.radial_stderr_per_mm2) for r in results]])
    g = np.broadcast_to(np.asarray(anisotropy, dtype=np.float64), (nb,)).copy()
    rgb_ok = labelled and bool(np.any((bands.upper_nm > 360.0) & (bands.lower_nm < 830.0)))
    space = working_space if rgb_ok else "ACEScg"
    if rgb_ok:
        q = summarize(
            bands, edges, a, a_err, y, s, g, ior, working_space=space, illuminant=illuminant, inversion=method
        )
    else:
        # no visible band: spectral quantities only (RGB needs colour-matching weight)
        from matgen.fit.diffusion import fit_burley2015
        from matgen.fit.inversion import effective_medium

        fit = fit_burley2015(edges, y[0], s[0], a[0])
        med = effective_medium(a[0], fit["shape_distance_mm"], g, ior, method=method)
        q = {
            "albedo_multiple": a,
            "albedo_multiple_stderr": a_err,
            "shape_distance_mm": fit["shape_distance_mm"][None],
            "fit_residual": fit["fit_residual"][None],
            "albedo_single": np.asarray(med["albedo_single"])[None],
            "mean_free_path_mm": np.asarray(med["mean_free_path_mm"])[None],
            "anisotropy": g[None],
            "ior": np.array([[ior]]),
        }
    gauss = fit_gaussians_dEon2007(edges, y[0], s[0], a[0])
    dip = fit_dipole_Jensen2001(edges, y[0], s[0], a[0], n_relative=max(ior, 1.0))
    per_band = []
    for b in range(nb):
        entry = {
            "albedo_multiple": float(q["albedo_multiple"][0, b]),
            "albedo_multiple_stderr": float(q["albedo_multiple_stderr"][0, b]),
            "shape_distance_mm": float(q["shape_distance_mm"][0, b]),
            "fit_residual": float(q["fit_residual"][0, b]),
            "albedo_single": float(q["albedo_single"][0, b]),
            "mean_free_path_mm": float(q["mean_free_path_mm"][0, b]),
            "anisotropy": float(q["anisotropy"][0, b]),
            "gaussians": {
                "weights": gauss["weights"][b].tolist(),
                "variances_mm2": gauss["variances_mm2"].tolist(),
                "fit_residual": float(gauss["fit_residual"][b]),
            },
            "dipole": {
                "mu_a_per_mm": float(dip["mu_a_per_mm"][b]),
                "mu_s_reduced_per_mm": float(dip["mu_s_reduced_per_mm"][b]),
                "fit_residual": float(dip["fit_residual"][b]),
            },
        }
        if labelled:
            entry["wavelength_nm"] = float(bands.centre_nm[b])
        if method != "OpenPBR2024":
            closed = albedo_single_OpenPBR2024(entry["albedo_multiple"], entry["anisotropy"])
            entry["albedo_single_OpenPBR2024"] = float(closed)
            entry["albedo_single_difference"] = entry["albedo_single"] - float(closed)
        per_band.append(entry)
    clamps = []
    targets = {}
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ClampWarning)
        # each band inverted with the g written for it (kept inside the inversion's range), as a bake does
        inverter = TexelInverter(ior, method)
        spectral = summary_media(q, 0, "bands", inverter).medium(0)
        for name in ("spectral_medium", "reflectance_mfp"):
            opts = {"inversion": method} if name == "reflectance_mfp" else {}
            targets[name] = TARGETS[name].to_inputs(
                spectral, metres_per_scene_unit=metres_per_scene_unit, **opts
            )
            targets[name]["fit_residual"] = q["fit_residual"][0].tolist()
        if rgb_ok:
            from matgen.fit.channels import channel_anisotropy, rgb_weights

            rgb_g = channel_anisotropy(rgb_weights(bands, space, illuminant), a, g)[0]
            # one scalar g for OpenPBR and standard_surface: every channel inverted with it, as a bake does
            rgb = summary_media(q, 0, "rgb", inverter, scalar_g=True, rgb_anisotropy=rgb_g).medium(0)
            for name in ("openpbr", "standard_surface"):
                targets[name] = TARGETS[name].to_inputs(rgb, metres_per_scene_unit=metres_per_scene_unit)
            targets["openpbr"]["fit_residual"] = q["rgb_fit_residual"][0].tolist()
            targets["standard_surface"]["fit_residual"] = q["rgb_fit_residual"][0].tolist()
    clamps = [str(w.message) for w in caught if issubclass(w.category, ClampWarning)]
    doc = {
        "inversion": method,
        "ior": float(ior),
        "metres_per_scene_unit": float(metres_per_scene_unit),
        "bands": per_band,
        "targets": targets,
        "clamp_warnings": clamps,
    }
    if labelled:
        doc["passes"] = _pass_values(bands, a[0], a_err[0], passes)
    elif passes:
        raise FitError("passes need bands with wavelengths (a result with wavelength_nm)")
    if rgb_ok:
        doc["rgb"] = {
            "working_space": space,
            "illuminant": illuminant,
            **{
                k: q[k][0].tolist()
                for k in (
                    "rgb_albedo_multiple",
                    "rgb_shape_distance_mm",
                    "rgb_albedo_single",
                    "rgb_mean_free_path_mm",
                    "rgb_fit_residual",
                )
            },
        }
    return doc


def run(args) -> int:
    """Run ``matgen fit`` with the parsed ``args``; return the exit status."""
    path = Path(args.result)
    results, bands, stacks = _read(path)
    stack_ior, stack_g = (1.0, 0.0) if stacks is None else _stack_defaults(path, results, stacks)
    ior = stack_ior if args.ior is None else args.ior
    anisotropy = stack_g if args.anisotropy is None else args.anisotropy
    doc = fit_document(
        results,
        bands,
        anisotropy=anisotropy,
        ior=ior,
        inversion=args.inversion,
        metres_per_scene_unit=args.metres_per_scene_unit,
        working_space=args.working_space,
        illuminant=args.illuminant,
        passes=args.passes,
    )
    if args.json:
        json.dump(doc, sys.stdout, indent=2)
        sys.stdout.write("\n")
        return 0
    out = sys.stdout
    out.write(
        f"inversion: {doc['inversion']}   ior: {doc['ior']:g}   "
        f"scene: {doc['metres_per_scene_unit']:g} m/unit\n"
    )
    out.write(
        f"{'band':>8} {'A':>8} {'+-':>8} {'d_mm':>9} {'resid':>7} {'alpha':>8} {'mfp_mm':>9} "
        f"{'dip_mua':>8} {'dip_mus':>8}\n"
    )
    for i, e in enumerate(doc["bands"]):
        label = f"{e['wavelength_nm']:.0f}nm" if "wavelength_nm" in e else str(i)
        out.write(
            f"{label:>8} {e['albedo_multiple']:8.5f} {e['albedo_multiple_stderr']:8.5f} "
            f"{e['shape_distance_mm']:9.5f} {e['fit_residual']:7.4f} {e['albedo_single']:8.5f} "
            f"{e['mean_free_path_mm']:9.5f} {e['dipole']['mu_a_per_mm']:8.4f} "
            f"{e['dipole']['mu_s_reduced_per_mm']:8.4f}\n"
        )
    for name, inputs in doc["targets"].items():
        out.write(f"target {name}:\n")
        for k, v in inputs.items():
            if isinstance(v, list) and len(v) > 6:
                v = f"[{len(v)} values: {v[0]:.6g} ... {v[-1]:.6g}]"
            out.write(f"  {k}: {v}\n")
    for name, v in doc.get("passes", {}).items():
        out.write(f"pass {name}: {v['value']:.5f} +- {v['stderr']:.5f}\n")
    for msg in doc["clamp_warnings"]:
        out.write(f"warning: {msg}\n")
    return 0
