"""``matgen estimate ALBEDO``: a colour albedo to pigment maps, a bakeable material config and a summary."""

from __future__ import annotations

import json
import sys
import warnings
from pathlib import Path

from matgen.cli import add_command
from matgen.errors import MatgenWarning, ParameterError
from matgen.estimate.run import CAUTION, EstimateRequest, estimate, load_table_for, plan_estimate
from matgen.estimate.solver import DEFAULT_GAMUT_TOLERANCE, DEFAULT_ITERATIONS


def register(sub):
    """Add ``matgen estimate`` to the subcommands."""
    p = add_command(
        sub,
        "estimate",
        "Estimate pigment maps (melanin, blood) from a colour albedo texture",
        "matgen estimate scan/albedo.<UDIM>.exr --colour-space acescg --out face_est\n"
        "matgen bake face_est/material.toml --out face_bake",
        description=(
            "Read a colour albedo (EXR, TIFF, PNG; a single file or a <UDIM> set) in a declared colour "
            "space and find, per texel, the point of the skin table whose multiple-scattering albedo under "
            "the table's illuminant matches it. Three colour channels fix two axes: melanin and blood "
            "fraction are estimated by default, eumelanin share and oxygen saturation held (--fix), or "
            "estimated with a prior (--estimate, --prior); single-band captures (--capture) add one "
            "constraint each. Writes float EXR pigment maps, a residual map (CIEDE2000), an out-of-gamut "
            "mask, a material config 'matgen bake' accepts as it is, and estimate.json. Exit status 2 on "
            "bad input, with nothing written. " + CAUTION
        ),
    )
    p.add_argument("albedo", help="colour albedo image (EXR/TIFF/PNG); '<UDIM>' in the name for a set")
    p.add_argument("--out", default="matgen_estimate", help="output folder")
    p.add_argument(
        "--colour-space",
        default=None,
        help="colour space of the albedo (overrides the file's tag): acescg, lin_rec709, srgb, lin_rec2020, "
        "lin_p3d65, or a colour-science RGB colourspace name",
    )
    p.add_argument(
        "--transfer",
        choices=("auto", "linear", "encoded"),
        default="auto",
        help="values linear or encoded with the space's transfer function (auto: encoded only for srgb)",
    )
    p.add_argument("--table", default=None, help="table file (default: the shipped default table)")
    p.add_argument(
        "--estimate",
        default=None,
        help="comma-separated table axes to estimate (default melanin_fraction,blood_fraction)",
    )
    p.add_argument(
        "--fix",
        action="append",
        default=[],
        metavar="AXIS=VALUE",
        help="hold an axis that is not estimated at a value (default eumelanin_share=0.7, "
        "oxygen_saturation=0.75)",
    )
    p.add_argument(
        "--prior",
        action="append",
        default=[],
        metavar="AXIS=MEAN:SIGMA",
        help="Gaussian prior (axis units) on an estimated axis: one sigma costs as much as 1 Delta E*ab",
    )
    p.add_argument(
        "--capture",
        action="append",
        default=[],
        metavar="RESPONSE=IMAGE",
        help="a single-band capture: a built-in response (uv365, nir850, nir940) or a response CSV "
        "(wavelength_nm,weight), and its linear one-channel image registered to the albedo",
    )
    p.add_argument(
        "--gamut-tolerance",
        type=float,
        default=DEFAULT_GAMUT_TOLERANCE,
        help="CIEDE2000 above which a texel is flagged out of gamut",
    )
    p.add_argument("--iterations", type=int, default=DEFAULT_ITERATIONS, help="largest Gauss-Newton steps")
    p.add_argument("--name", default="estimated_skin", help="material name in the written config")
    p.add_argument("--jobs", type=int, default=None, help="solver threads (default: all cores)")
    p.add_argument("--memory-mb", type=int, default=256, help="memory budget of the texels in flight, MiB")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.add_argument("--json", action="store_true", help="print the summary as JSON on standard output")
    p.set_defaults(func=run)


def _pairs(items, what: str, parse):
    out = {}
    for item in items:
        if "=" not in item:
            raise ParameterError(f"{what} '{item}' must look like NAME=VALUE")
        key, value = item.split("=", 1)
        out[key.strip()] = parse(key.strip(), value.strip())
    return out


def _number(key, text):
    try:
        return float(text)
    except ValueError:
        raise ParameterError(f"value of '{key}' is '{text}'; expected a number") from None


def _prior(key, text):
    parts = text.split(":")
    if len(parts) != 2:
        raise ParameterError(f"prior of '{key}' is '{text}'; expected MEAN:SIGMA")
    return (_number(key, parts[0]), _number(key, parts[1]))


def _capture(key, text):
    response = key
    name = Path(key).stem if key.lower().endswith(".csv") else key
    return name, (response, Path(text))


def request_from_args(args) -> EstimateRequest:
    """Turn parsed options into an :class:`EstimateRequest`."""
    caps = dict(_pairs(args.capture, "--capture", _capture).values())
    return EstimateRequest(
        albedo=Path(args.albedo),
        colour_space=args.colour_space,
        transfer=args.transfer,
        estimate=tuple(a.strip() for a in args.estimate.split(",") if a.strip()) if args.estimate else None,
        held=_pairs(args.fix, "--fix", _number),
        priors=_pairs(args.prior, "--prior", _prior),
        captures=caps,
        gamut_tolerance=args.gamut_tolerance,
        iterations=args.iterations,
        name=args.name,
    )


def run(args) -> int:
    """Run ``matgen estimate``; returns the exit status."""
    req = request_from_args(args)
    table, source = load_table_for(args.table)
    if args.jobs:
        from matgen.bake.lookup import set_threads

        set_threads(args.jobs)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", MatgenWarning)
        plan = plan_estimate(req, table, source)
        bar, progress = None, None
        if not args.quiet:
            from tqdm import tqdm

            bar = tqdm(total=plan.texels, unit=" texels", unit_scale=True, desc="estimate", file=sys.stderr)

            def progress(done, total):
                bar.update(done - bar.n)

        try:
            result = estimate(
                plan, args.out, progress=progress, memory_budget_bytes=int(args.memory_mb) << 20
            )
        finally:
            if bar is not None:
                bar.close()
    for msg in dict.fromkeys(str(w.message) for w in caught):
        print(f"matgen estimate: warning: {msg}", file=sys.stderr)
    s = result.summary
    if args.json:
        print(json.dumps(s, indent=1))
        return 0
    res = s["residual_de2000"]
    print(f"estimated {result.texels} texels in {result.seconds:.1f} s into {result.out_dir}")
    print(f"  estimated: {', '.join(s['model']['estimated'])}; held: {s['model']['held']}")
    print(
        f"  residual CIEDE2000 in gamut: median {res['in_gamut']['p50']:.3f}, "
        f"p95 {res['in_gamut']['p95']:.3f}; "
        f"out of gamut: {100 * s['out_of_gamut']['share']:.2f} % of texels"
    )
    print(f"  bake it with: matgen bake {Path(args.out) / 'material.toml'} --out <folder>")
    print(f"  {CAUTION}")
    return 0
