"""``matgen simulate STACK.json``: run the layered Monte Carlo on a stack file and print its tallies.

STACK.json (units: mm, 1/mm)::

    {"n_above": 1.0, "n_below": 1.0,
     "layers": [{"thickness_mm": 0.1, "n": 1.4, "mu_a": 0.5, "mu_s": 30.0, "g": 0.8,
                 "name": "epidermis"}, ...]}

The output of ``matgen optics --format json`` is such a file as it is (its ``bands``, ``units``,
``packaging`` and ``parameters`` keys are accepted; stated units must be matgen's). With
``"wavelength_nm": [w1, w2, ...]`` at the top level, ``n``, ``mu_a``, ``mu_s`` and ``g`` of each layer
may be lists with one value per wavelength (a single number applies to every band); one run per band.
"""

from __future__ import annotations

import json
import logging
import math
import sys

from matgen import limits
from matgen.cli import add_command
from matgen.errors import ConfigError, StackError
from matgen.fsutil import strict_json
from matgen.limits import read_text_limited

_log = logging.getLogger("matgen.simulate")

_TOP_KEYS = {"n_above", "n_below", "layers", "wavelength_nm"}
#: Keys that ``matgen optics --format json`` adds for the reader; accepted and not used (units are checked).
_INFO_KEYS = {"bands", "units", "packaging", "parameters"}
#: The units a stack file must be in where it states them (``units`` of ``matgen optics --format json``).
_UNITS = {"wavelength": "nm", "thickness": "mm", "mu_a": "1/mm", "mu_s": "1/mm", "g": "1", "n": "1"}
_LAYER_KEYS = {"thickness_mm", "n", "mu_a", "mu_s", "g", "name"}
_PER_BAND = ("n", "mu_a", "mu_s", "g")


def register(sub):
    """Add the ``simulate`` subcommand to the subparsers ``sub``."""
    p = add_command(
        sub,
        "simulate",
        "Run the layered Monte Carlo on a stack file (JSON, mm and 1/mm) and print reflectance, "
        "transmittance and absorption with standard errors",
        "matgen simulate stack.json --photons 100000 --seed 1 --json --profile",
    )
    p.add_argument(
        "stack", metavar="STACK.json", help="layer stack file (see matgen.cli.simulate for the layout)"
    )
    p.add_argument("--photons", type=int, default=100_000, help="photon packets per band")
    p.add_argument("--seed", type=int, default=0, help="run seed (same seed, same tallies on any machine)")
    p.add_argument("--threads", type=int, default=None, help="threads (default: all cores)")
    p.add_argument(
        "--incidence-deg",
        type=float,
        default=0.0,
        help="angle of the collimated beam to the surface normal, degrees in [0, 90)",
    )
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")
    p.add_argument("--no-progress", action="store_true", help="no progress bar on long runs")
    p.add_argument(
        "--profile",
        action="store_true",
        help="include the radial profile (mm^-2) and exit-angle distribution (sr^-1) in the JSON",
    )
    p.set_defaults(func=run)


def load_stacks(path):
    """Read STACK.json into a list of (wavelength_nm or None, Stack).

    Errors name the file, band, layer and field.
    """
    from matgen.transport.stack import Stack

    text = read_text_limited(path, "stack file")
    try:
        # NaN and infinities pass to the per-field checks below, which name the band, layer and field
        doc = limits.loads_json_checked(text, f"stack file '{path}'", allow_nonfinite=True)
    except json.JSONDecodeError as exc:
        raise ConfigError(f"stack file '{path}' is not valid JSON: {exc}") from None
    except RecursionError:  # nesting deeper than the parser's stack
        raise ConfigError(f"stack file '{path}': JSON nested too deeply to be a stack") from None
    if not isinstance(doc, dict):
        raise ConfigError(f"stack file '{path}' must hold a JSON object with a 'layers' list")
    unknown = set(doc) - _TOP_KEYS - _INFO_KEYS
    if unknown:
        raise ConfigError(
            f"stack file '{path}': unknown keys {sorted(unknown)}; allowed {sorted(_TOP_KEYS | _INFO_KEYS)}"
        )
    units = doc.get("units", {})
    wrong = {}
    if isinstance(units, dict):
        wrong = {k: v for k, v in units.items() if k in _UNITS and v != _UNITS[k]}
    if wrong or not isinstance(units, dict):
        raise ConfigError(f"stack file '{path}': units {wrong or units!r} differ from matgen's {_UNITS}")
    layers = doc.get("layers")
    if not isinstance(layers, list) or not layers:
        raise StackError(f"stack file '{path}': 'layers' must be a non-empty list of layer objects")
    waves = doc.get("wavelength_nm")
    if waves is not None:
        if (
            not isinstance(waves, list)
            or not waves
            or not all(
                isinstance(w, (int, float)) and not isinstance(w, bool) and math.isfinite(w) and w > 0
                for w in waves
            )
        ):
            raise ConfigError(
                f"stack file '{path}': 'wavelength_nm' must be a non-empty list of positive numbers"
            )
    n_bands = 1 if waves is None else len(waves)
    columns = {k: [] for k in ("thickness_mm", *_PER_BAND)}
    names = []
    for i, layer in enumerate(layers):
        if not isinstance(layer, dict):
            raise StackError(f"stack file '{path}': layer {i} is not a JSON object")
        unknown = set(layer) - _LAYER_KEYS
        if unknown:
            raise ConfigError(
                f"stack file '{path}': layer {i} has unknown keys {sorted(unknown)}; "
                f"allowed {sorted(_LAYER_KEYS)}"
            )
        for key in ("thickness_mm", *_PER_BAND):
            if key not in layer:
                raise StackError(f"stack file '{path}': layer {i} lacks '{key}'")
            v = layer[key]
            if isinstance(v, list):
                if key == "thickness_mm" or waves is None or len(v) != n_bands:
                    want = "a number" if key == "thickness_mm" or waves is None else f"{n_bands} values"
                    raise StackError(f"stack file '{path}': layer {i} field '{key}' must be {want}")
                vals = v
            else:
                vals = [v] * n_bands
            for val in vals:
                if isinstance(val, bool) or not isinstance(val, (int, float)):
                    raise StackError(
                        f"stack file '{path}': layer {i} field '{key}' holds {val!r}, not a number"
                    )
            columns[key].append(vals)
        names.append(str(layer.get("name", f"layer {i}")))
    out = []
    for b in range(n_bands):
        where = f"stack file '{path}'" + ("" if waves is None else f", band {b} ({waves[b]} nm)")
        try:
            stack = Stack(
                [c[b] for c in columns["thickness_mm"]],
                [c[b] for c in columns["n"]],
                [c[b] for c in columns["mu_a"]],
                [c[b] for c in columns["mu_s"]],
                [c[b] for c in columns["g"]],
                doc.get("n_above", 1.0),
                doc.get("n_below", 1.0),
                tuple(names),
            )
        except StackError as exc:
            raise StackError(f"{where}: {exc}") from None
        out.append((None if waves is None else float(waves[b]), stack))
    return out


def run(args) -> int:
    """Run ``matgen simulate`` with the parsed ``args``; return the exit status."""
    from matgen.errors import ParameterError

    if not (0.0 <= args.incidence_deg < 90.0) or not math.isfinite(args.incidence_deg):
        raise ParameterError(f"--incidence-deg is {args.incidence_deg}; allowed range [0, 90)")
    cos_i = math.cos(math.radians(args.incidence_deg))
    stacks = load_stacks(args.stack)
    results = []
    for wave, stack in stacks:
        r = _simulate_with_progress(stack, args, cos_i, wave)
        d = r.to_dict(profile=args.profile)
        d.pop("tally_fixed_point", None)
        d["layers"] = list(stack.names)
        d["stack"] = stack.to_dict()  # matgen fit takes the effective medium's default g and n from it
        if wave is not None:
            d = {"wavelength_nm": wave, **d}
        results.append(d)
    if args.json:
        doc = results[0] if stacks[0][0] is None else {"bands": results}
        print(strict_json(doc, "the simulation result", indent=2, default=_jsonable))
        return 0
    for d in results:
        head = f"{d['wavelength_nm']:g} nm: " if "wavelength_nm" in d else ""
        print(f"{head}{d['photons']} photons, {d['photons_per_second']:.0f} photons/s")
        for key in ("specular_reflectance", "diffuse_reflectance", "transmittance"):
            print(f"  {key:<22s} {d[key]['value']:.6f} +- {d[key]['stderr']:.6f}")
        for name, a in zip(d["layers"], d["absorbed"], strict=True):
            print(f"  absorbed in {name:<10s} {a['value']:.6f} +- {a['stderr']:.6f}")
        m = d["mean_penetration_depth_mm"]
        print(f"  mean penetration depth {m['value']:.4f} +- {m['stderr']:.4f} mm")
    return 0


#: Photons of the pilot chunk that times a run before its progress bar is shown.
PILOT_PHOTONS = 256
#: Chunks a long run is split into (each one a consecutive photon range; combine() adds them up exactly).
PROGRESS_CHUNKS = 50
#: A run whose pilot predicts more than this many seconds gets a progress bar with an ETA.
PROGRESS_AFTER_S = 2.0


def _simulate_with_progress(stack, args, cos_i, wave):
    """Run one band; a long run goes in consecutive photon chunks with a progress bar and an ETA.

    Photon i's stream depends only on (seed, i) and tallies are integers, so the chunks combined
    (:func:`matgen.transport.simulate.combine`) equal one run of all the photons bit for bit.
    """
    import time

    from matgen import limits as lim
    from matgen.transport.simulate import combine, simulate

    n = lim.check_photons(args.photons)
    pilot = min(n, PILOT_PHOTONS)
    kw = {"threads": args.threads, "incidence_cos": cos_i}
    t0 = time.perf_counter()
    first = simulate(stack, pilot, args.seed, **kw)
    if pilot == n:
        return first
    per_photon = (time.perf_counter() - t0) / pilot
    eta = per_photon * (n - pilot)
    what = f"{wave:g} nm" if wave is not None else "simulate"
    if eta <= PROGRESS_AFTER_S:
        rest = simulate(stack, n - pilot, args.seed, first_photon=pilot, **kw)
        return _timed(combine([first, rest], stack), n, t0)
    from tqdm import tqdm

    _log.info("%s: %d photons, about %.0f s (ETA from the first %d photons)", what, n, eta, pilot)
    parts, done = [first], pilot
    step = max(1, -(-(n - pilot) // PROGRESS_CHUNKS))
    with tqdm(
        total=n,
        initial=pilot,
        unit=" photons",
        unit_scale=True,
        desc=what,
        file=sys.stderr,
        disable=args.no_progress or args.json and not sys.stderr.isatty(),
        bar_format="{desc}: {percentage:3.0f}%|{bar}| {n_fmt}/{total_fmt} [{elapsed}, ETA {remaining}]",
    ) as bar:
        while done < n:
            k = min(step, n - done)
            parts.append(simulate(stack, k, args.seed, first_photon=done, **kw))
            done += k
            bar.update(k)
    return _timed(combine(parts, stack), n, t0)


def _timed(result, n: int, t0: float):
    """Give a combined result the photon rate of the whole run (combine() leaves it unknown)."""
    import dataclasses
    import time

    elapsed = time.perf_counter() - t0
    return dataclasses.replace(result, photons_per_second=n / elapsed if elapsed > 0 else 0.0)


def _jsonable(obj):
    try:
        return obj.tolist()
    except AttributeError:
        return str(obj)
