"""``matgen fit RESULT.json``: fitted profile parameters, effective medium and every target's inputs.

Input: the JSON that ``matgen simulate STACK.json --profile --json`` writes: one transport result
(:meth:`TransportResult.to_dict`, one band, optionally with ``wavelength_nm``), or ``{"bands": [one result
per band, each with wavelength_nm]}`` (bands of 10 nm around each wavelength, narrower where neighbours are
closer). Also accepted: ``{"bands": {centre_nm, lower_nm, upper_nm}, "results": [...]}`` with explicit band
edges. A ``"stack"`` entry (``Stack.to_dict``), if present, supplies the default boundary index (its first
layer's n); otherwise give ``--ior`` (default 1.0, index matched).
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
        "--anisotropy", type=float, default=0.0, help="Henyey-Greenstein g of the effective medium"
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
    p.set_defaults(func=run)


def _read(path: Path):
    try:
        text = limits.read_text_limited(path, "transport result")
    except OSError as exc:
        raise ConfigError(f"cannot read {path}: {exc}") from exc
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise ConfigError(f"{path.name} is not JSON ({exc.msg}, line {exc.lineno})") from exc
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
    stack = doc.get("stack")
    return results, bands, stack


def fit_document(
    results, bands, *, anisotropy, ior, inversion, metres_per_scene_unit, working_space, illuminant
):
    """All fits for a list of per-band results: a JSON-ready dict (also the Python API of ``matgen fit``)."""
    from matgen.fit.fitting import fit_dipole_Jensen2001, fit_gaussians_dEon2007
    from matgen.fit.inversion import albedo_single_OpenPBR2024
    from matgen.fit.summary import resolve_inversion, summarize
    from matgen.fit.targets import TARGETS, EffectiveMedium

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
    g = np.full(nb, float(anisotropy))
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
        spectral = EffectiveMedium(
            q["albedo_single"][0],
            q["mean_free_path_mm"][0],
            q["anisotropy"][0],
            ior,
            albedo_multiple=q["albedo_multiple"][0],
        )
        for name in ("spectral_medium", "reflectance_mfp"):
            opts = {"inversion": method} if name == "reflectance_mfp" else {}
            targets[name] = TARGETS[name].to_inputs(
                spectral, metres_per_scene_unit=metres_per_scene_unit, **opts
            )
        if rgb_ok:
            rgb = EffectiveMedium(
                q["rgb_albedo_single"][0],
                q["rgb_mean_free_path_mm"][0],
                float(anisotropy),
                ior,
                albedo_multiple=q["rgb_albedo_multiple"][0],
            )
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
    path = Path(args.result)
    results, bands, stack = _read(path)
    ior = args.ior
    if ior is None:
        ior = 1.0
        if isinstance(stack, dict) and stack.get("layers"):
            ior = float(stack["layers"][0].get("n", 1.0))
    doc = fit_document(
        results,
        bands,
        anisotropy=args.anisotropy,
        ior=ior,
        inversion=args.inversion,
        metres_per_scene_unit=args.metres_per_scene_unit,
        working_space=args.working_space,
        illuminant=args.illuminant,
    )
    if args.json:
        json.dump(doc, sys.stdout, indent=2)
        sys.stdout.write("\n")
        return 0
    out = sys.stdout
    out.write(
        f"inversion: {doc['inversion']}   ior: {doc['ior']:g}   scene: {doc['metres_per_scene_unit']:g} m/unit\n"
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
    for msg in doc["clamp_warnings"]:
        out.write(f"warning: {msg}\n")
    return 0
