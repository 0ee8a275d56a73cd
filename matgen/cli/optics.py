"""``matgen optics``: per-layer optical coefficients of the skin model for a preset and/or given parameters.

Units: wavelength nm, thickness mm, mu_a / mu_s / mu_s' in 1/mm. Every :class:`SkinParameters` field is an
option (``--blood-fraction 0.02``). Output goes to standard output as a table, JSON or CSV;
``--plot FILE.png``
also draws mu_a and mu_s' per layer over wavelength. Bad input is one message and exit status 2, and then
nothing is written.
"""

from __future__ import annotations

import argparse
import csv
import io
import json
import math
import os
import sys

from matgen.cautions import print_caution
from matgen.cli import add_command
from matgen.errors import ParameterError, PathError
from matgen.fsutil import atomic_write_bytes
from matgen.spectra.bands import BandSet
from matgen.tissue.optics import SkinOptics, skin_optics
from matgen.tissue.packaging import PACKAGING_MODES
from matgen.tissue.parameters import FIELD_SPECS, SkinParameters
from matgen.tissue.presets import preset, preset_names

EXAMPLE = "matgen optics --preset cheek --blood-fraction 0.04 --wavelengths 400:700:10 --plot cheek.png"


def _option(field: str) -> str:
    return "--" + field.replace("_", "-")


def _number(text: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None


def register(sub):
    """Add the ``optics`` subcommand to ``sub`` (the subparsers of ``matgen``)."""
    p = add_command(
        sub,
        "optics",
        "Print per-layer mu_a, mu_s, g, n and thickness of the skin model over wavelength bands",
        EXAMPLE,
        description=(
            "Optical coefficients of the skin model (stratum corneum, epidermis, papillary and reticular "
            "dermis, hypodermis, and the muscle below them) for a body-region preset, with any parameter "
            "overridden. "
            "Units: nm, "
            "mm, 1/mm. Sources of every spectrum and law: docs/developers/tissue.md."
        ),
    )
    p.add_argument("--preset", metavar="NAME", help=f"body-region preset: {', '.join(preset_names())}")
    p.add_argument(
        "--wavelengths",
        metavar="SPEC",
        default="300:1000:10",
        help="bands: start:stop:step[:width] in nm, or a comma list of centres (10 nm wide)",
    )
    p.add_argument(
        "--packaging",
        choices=PACKAGING_MODES,
        default="on",
        help="pigment packaging corrections (melanosomes: Duysens; vessels: van Veen)",
    )
    p.add_argument("--format", choices=("table", "json", "csv"), default="table", help="output format")
    p.add_argument("--plot", metavar="FILE.png", help="also draw mu_a and mu_s' per layer into this PNG")
    g = p.add_argument_group("skin parameters (override the preset; defaults: the preset, else matgen's)")
    for name, spec in FIELD_SPECS.items():
        g.add_argument(
            _option(name),
            dest=name,
            type=_number,
            metavar="X",
            default=None,
            help=f"{spec.help} [{spec.low:g}-{spec.high:g} {spec.unit}]",
        )
    p.set_defaults(func=run)


def parameters_from_args(args) -> SkinParameters:
    """Build the SkinParameters that the options describe (preset first, then each given field)."""
    base = preset(args.preset) if args.preset is not None else SkinParameters()
    changes = {name: getattr(args, name) for name in FIELD_SPECS if getattr(args, name, None) is not None}
    return base.replace(**changes) if changes else base


def format_table(optics: SkinOptics) -> str:
    """Human-readable table: layer summary, then one row per band of mu_a and mu_s' per layer."""
    p = optics.params
    out = io.StringIO()
    out.write(
        f"matgen skin optics: packaging={optics.packaging}, n_above={optics.n_above:g}, "
        f"n_below={optics.n_below:g}\n"
    )
    out.write(
        f"melanin_fraction={p.melanin_fraction:g} eumelanin_share={p.eumelanin_share:g} "
        f"blood_fraction={p.blood_fraction:g} oxygen_saturation={p.oxygen_saturation:g}\n"
    )
    short = ("SC", "EPI", "PAP", "RET", "HYP", "MUS")
    out.write("layers:\n")
    for i, name in enumerate(optics.layer_names):
        out.write(
            f"  {short[i]:<4}{name:<18} thickness {optics.thickness_mm[i]:8.4f} mm   n {optics.n[i, 0]:.3f}\n"
        )
    musr = optics.mu_s_reduced
    head = (
        "  wl_nm |"
        + "".join(("mu_a " + s).rjust(10) for s in short)
        + " |"
        + "".join(("mu_s' " + s).rjust(10) for s in short)
        + " |       g"
    )
    out.write("coefficients in 1/mm (mu_s' = mu_s (1 - g)); g of every layer:\n")
    out.write(head + "\n")
    for b, wl in enumerate(optics.bands.centre_nm):
        row = f"{wl:7.1f} |" + "".join(f"{optics.mu_a[i, b]:10.4g}" for i in range(len(short)))
        row += " |" + "".join(f"{musr[i, b]:10.4g}" for i in range(len(short)))
        row += f" | {optics.g[0, b]:7.4f}"
        out.write(row + "\n")
    return out.getvalue()


def format_csv(optics: SkinOptics) -> str:
    """Long CSV: one row per layer and band."""
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    w.writerow(
        [
            "layer",
            "wavelength_nm",
            "lower_nm",
            "upper_nm",
            "thickness_mm",
            "mu_a_per_mm",
            "mu_s_per_mm",
            "mu_s_reduced_per_mm",
            "g",
            "n",
            "packaging",
        ]
    )
    musr = optics.mu_s_reduced
    bands = optics.bands
    for i, name in enumerate(optics.layer_names):
        for b in range(len(bands)):
            w.writerow(
                [
                    name,
                    f"{bands.centre_nm[b]:g}",
                    f"{bands.lower_nm[b]:g}",
                    f"{bands.upper_nm[b]:g}",
                    f"{optics.thickness_mm[i]:.6g}",
                    f"{optics.mu_a[i, b]:.8g}",
                    f"{optics.mu_s[i, b]:.8g}",
                    f"{musr[i, b]:.8g}",
                    f"{optics.g[i, b]:.8g}",
                    f"{optics.n[i, b]:.8g}",
                    optics.packaging,
                ]
            )
    return out.getvalue()


def render_plot(optics: SkinOptics) -> bytes:
    """PNG bytes of mu_a and mu_s' per layer over wavelength (log coefficient axes), drawn with Agg."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(10, 4.2), dpi=110)
    FigureCanvasAgg(fig)
    ax_a, ax_s = fig.subplots(1, 2)
    wl = optics.bands.centre_nm
    musr = optics.mu_s_reduced
    styles = (
        "--",
        "-",
        "-",
        "-.",
        ":",
    )  # stratum corneum and epidermis share a scattering law: tell them apart
    for i, name in enumerate(optics.layer_names):
        ls = styles[i % len(styles)]
        ax_a.plot(wl, optics.mu_a[i], ls, label=name.replace("_", " "))
        ax_s.plot(wl, musr[i], ls, label=name.replace("_", " "))
    ax_a.set_yscale("log")
    ax_s.set_yscale("log")
    ax_a.set_title(f"absorption mu_a (packaging {optics.packaging})")
    ax_s.set_title("reduced scattering mu_s'")
    for ax in (ax_a, ax_s):
        ax.set_xlabel("wavelength (nm)")
        ax.set_ylabel("1/mm")
        ax.grid(True, which="both", alpha=0.3)
    ax_a.legend(fontsize=8)
    fig.suptitle("matgen skin optics (imagery only)", fontsize=10)
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()


def _check_plot_path(path: str) -> str:
    if not path.lower().endswith(".png"):
        raise PathError(f"--plot {path!r}: the plot file name must end in .png")
    parent = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(parent):
        raise PathError(f"--plot {path!r}: folder {parent!r} does not exist")
    if os.path.isdir(path):
        raise PathError(f"--plot {path!r} is a folder; give a file name ending in .png")
    return path


def _write_atomic(path: str, data: bytes):
    try:
        atomic_write_bytes(path, data)
    except (OSError, PathError) as exc:
        raise PathError(f"--plot {path!r}: cannot write ({getattr(exc, 'strerror', None) or exc})") from exc


def run(args) -> int:
    """Run ``matgen optics``: compute everything first, then write the plot and the output."""
    params = parameters_from_args(args)
    bands = BandSet.parse(args.wavelengths)  # an empty spec is an error, never a silent default
    optics = skin_optics(params, bands, packaging=args.packaging)
    for arr, what in ((optics.mu_a, "mu_a"), (optics.mu_s, "mu_s")):
        if not all(math.isfinite(v) for v in arr.ravel()):
            raise ParameterError(f"{what} came out non-finite for these parameters; please report this")
    if args.format == "json":
        text = json.dumps(optics.to_dict(), indent=1) + "\n"
    elif args.format == "csv":
        text = format_csv(optics)
    else:
        text = format_table(optics)
    png = None
    if args.plot:
        _check_plot_path(args.plot)
        png = render_plot(optics)
    if png is not None:
        _write_atomic(args.plot, png)
    sys.stdout.write(text)
    print_caution()
    return 0
