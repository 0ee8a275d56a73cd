"""Camera passes from separate lamp, filter and sensor curves. Units: wavelength in nm; curve values relative.

A pass is the response-weighted multiple-scattering albedo ``sum_b w_b A_b`` of a camera that sees the skin
lit by a lamp through a filter. Its band weights are

    w_b = integral over band b of  E(lambda) T(lambda) S(lambda) d lambda,   normalised to sum 1,

with E the lamp's spectral power, T the filter's transmission and S the sensor's spectral response; any of the
three may be left out (a missing curve counts as 1 everywhere). Each curve is piecewise linear between its
samples and zero outside them; the product is integrated on a grid holding every sample, every band edge and
0.25 nm steps, by the trapezoidal rule. Only the shape of each curve matters (the weights are normalised), so
percent and fraction, or W and mW, give the same pass.

What a pass map is, and is not:

- It is the reflectance such a camera would record from an infinitely wide, uniformly lit patch of the
  texel's skin (multiple scattering only; no specular reflection), a number in [0, 1]. Use it in a renderer as
  the albedo of a diffuse or subsurface material rendered in that pass (one grey channel), or as a per-texel
  weight for comparing plates; the band's medium (``spectral/*`` stacks at the pass band) is what a spectral
  renderer wants for scattering in that pass.
- **Fluorescence is not modelled**: light absorbed at one wavelength and re-emitted at another (skin
  autofluorescence of collagen, NADH and porphyrins under 365 nm lamps) is not in the pass. A UV
  inspection photograph through a filter that passes the visible also records such emission; matgen's pass
  does not.

CSV files are read tolerantly (:func:`parse_curve`): comma, semicolon, tab or whitespace delimiters (found by
counting them), a decimal comma with semicolons or tabs, header names from :data:`WAVELENGTH_ALIASES` and
:data:`VALUE_ALIASES` with a unit in brackets (``Wavelength [nm]``, ``lambda (um)``, ``Transmission (%)``),
``#`` or ``//`` comment lines, and rows in descending order. Wavelengths in um or micron are converted to
nm; values in percent are divided by 100 (recorded in the curve's ``units``). Negative values are refused.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from matgen import limits
from matgen.errors import DataError

#: The roles a curve can play in a pass, in the order they multiply.
ROLES = ("lamp", "filter", "sensor")

#: Header names (lower case, unit removed) accepted for the wavelength column.
WAVELENGTH_ALIASES = ("wavelength_nm", "wavelength", "wavelengths", "lambda", "wl", "nm", "wave", "λ")

#: Header names accepted for the value column (the first column that is not the wavelength otherwise).
VALUE_ALIASES = (
    "weight",
    "value",
    "response",
    "relative response",
    "spectral response",
    "sensitivity",
    "qe",
    "quantum efficiency",
    "transmission",
    "transmittance",
    "t",
    "irradiance",
    "spectral irradiance",
    "power",
    "relative power",
    "spectral power",
    "intensity",
    "relative intensity",
    "emission",
    "counts",
)

#: Wavelength units recognised in a header, and their factor to nm.
WAVELENGTH_UNITS = {
    "nm": 1.0,
    "nanometer": 1.0,
    "nanometre": 1.0,
    "um": 1000.0,
    "µm": 1000.0,
    "micron": 1000.0,
    "microns": 1000.0,
    "micrometer": 1000.0,
    "micrometre": 1000.0,
}

#: Step of the integration grid, nm.
GRID_STEP_NM = 0.25


@dataclass(frozen=True)
class Curve:
    """One measured or published curve, as read.

    Attributes
    ----------
    role : str
        ``lamp``, ``filter``, ``sensor`` or ``response`` (an already multiplied pass response).
    source : str
        The file as named in the config (relative path) or ``built-in '<name>'``.
    sha256 : str
        SHA-256 of the file's bytes (of the packaged text for built-ins).
    wavelength_nm : ndarray
        Ascending sample wavelengths, nm.
    values : ndarray
        Values >= 0 at those wavelengths, as fractions where the file gave percent.
    units : dict
        ``{"wavelength": "nm" | "um (converted to nm)", "value": "relative" | "percent (divided by 100)"}``.

    """

    role: str
    source: str
    sha256: str
    wavelength_nm: np.ndarray
    values: np.ndarray
    units: dict

    def record(self) -> dict:
        """Descriptor entry: role, path, SHA-256, units and range."""
        return {
            "role": self.role,
            "path": self.source,
            "sha256": self.sha256,
            "units": dict(self.units),
            "wavelength_range_nm": [float(self.wavelength_nm[0]), float(self.wavelength_nm[-1])],
        }

    def __call__(self, wl_nm):
        """Value at ``wl_nm`` (piecewise linear, zero outside the samples)."""
        return np.interp(wl_nm, self.wavelength_nm, self.values, left=0.0, right=0.0)


def _delimiter(lines: list) -> str | None:
    """Return the delimiter every one of the first lines has equally often; None for whitespace."""
    sample = lines[: min(len(lines), 20)]
    for d in (";", "\t", ",", "|"):
        counts = [ln.count(d) for ln in sample]
        if counts and min(counts) >= 1 and len(set(counts)) == 1:
            return d
    return None


def _split(line: str, delim) -> list:
    cells = line.split(delim) if delim else line.split()
    return [c.strip().strip('"').strip("'").strip() for c in cells]


def _number(cell: str, decimal_comma: bool) -> float:
    if decimal_comma:
        cell = cell.replace(",", ".")
    return float(cell)


def _numeric(cells: list, decimal_comma: bool) -> bool:
    try:
        [_number(c, decimal_comma) for c in cells]
    except ValueError:
        return False
    return True


def _name_and_unit(cell: str) -> tuple:
    """Header cell -> (name in lower case without unit, unit or '')."""
    text = cell.strip().lower()
    m = re.match(r"^(.*?)[\s_]*[\[(]\s*([^\])]*)\s*[\])]\s*$", text)
    if m:
        return m.group(1).strip(), m.group(2).strip()
    for unit in ("_nm", "_um"):
        if text.endswith(unit) and text != "wavelength_nm":
            return text[: -len(unit)], unit[1:]
    return text, ""


def _columns(header: list, source: str) -> tuple:
    """Return the indices of the wavelength and value columns and the two header units."""
    parsed = [_name_and_unit(c) for c in header]
    wl_idx = next((i for i, (n, _) in enumerate(parsed) if n in WAVELENGTH_ALIASES), None)
    if wl_idx is None:
        raise DataError(
            f"curve {source}: no wavelength column in header {header!r}; name it one of "
            f"{', '.join(WAVELENGTH_ALIASES[:5])} (unit in brackets, e.g. 'wavelength [nm]')"
        )
    others = [i for i in range(len(parsed)) if i != wl_idx]
    val_idx = next((i for i in others if parsed[i][0] in VALUE_ALIASES), others[0] if others else None)
    if val_idx is None:
        raise DataError(f"curve {source}: header {header!r} has no value column beside the wavelength")
    return wl_idx, val_idx, parsed[wl_idx][1], parsed[val_idx][1]


def _units(wl_unit: str, val_unit: str, source: str) -> tuple:
    wl_key = wl_unit.replace("μ", "µ")
    if wl_key and wl_key not in WAVELENGTH_UNITS:
        raise DataError(
            f"curve {source}: wavelength unit '{wl_unit}' is not one of {', '.join(sorted(WAVELENGTH_UNITS))}"
        )
    factor = WAVELENGTH_UNITS.get(wl_key, 1.0)
    percent = val_unit in ("%", "percent", "pct")
    units = {
        "wavelength": "nm" if factor == 1.0 else f"{wl_unit} (converted to nm)",
        "value": "percent (divided by 100)" if percent else (val_unit or "relative"),
    }
    return factor, (0.01 if percent else 1.0), units


def parse_curve(text: str, source: str, role: str = "response") -> tuple:
    """Parse curve text tolerantly; return ``(wavelength_nm, values, units)``.

    Parameters
    ----------
    text : str
        CSV-like text: a header line, then one sample per line (see the module docstring).
    source : str
        File name for messages.
    role : str
        What the curve is, for messages.

    Returns
    -------
    tuple
        Ascending wavelengths (nm), values (>= 0) and the units dict of :class:`Curve`.

    Raises
    ------
    DataError
        Naming the file and line at fault (no header, not numbers, negative or non-finite values, fewer than
        2 samples, wavelengths not monotonic, all zero).

    """
    raw = text.lstrip("\ufeff").splitlines()
    numbered = [
        (i + 1, ln) for i, ln in enumerate(raw) if ln.strip() and not ln.lstrip().startswith(("#", "//"))
    ]
    if len(numbered) < 2:
        raise DataError(f"{role} curve {source}: needs a header line and at least 2 samples")
    delim = _delimiter([ln for _, ln in numbered])
    decimal_comma = delim in (";", "\t", None)
    header = _split(numbered[0][1], delim)
    if _numeric(header, decimal_comma):
        raise DataError(
            f"{role} curve {source}, line {numbered[0][0]}: no header; the first line must name the "
            f"columns, e.g. 'wavelength [nm],{'transmission' if role == 'filter' else 'value'}'"
        )
    wl_i, val_i, wl_unit, val_unit = _columns(header, source)
    factor, scale, units = _units(wl_unit, val_unit, source)
    wl, val = [], []
    for line_no, line in numbered[1:]:
        cells = _split(line, delim)
        try:
            x, y = _number(cells[wl_i], decimal_comma), _number(cells[val_i], decimal_comma)
        except (ValueError, IndexError):
            raise DataError(
                f"{role} curve {source}, line {line_no}: {line.strip()!r} is not two numbers"
            ) from None
        if not (np.isfinite(x) and np.isfinite(y)) or x <= 0:
            raise DataError(
                f"{role} curve {source}, line {line_no}: need a wavelength > 0 and a finite value"
            )
        if y < 0:
            raise DataError(
                f"{role} curve {source}, line {line_no}: value {y:g} is negative; curve values must be >= 0"
            )
        wl.append(x * factor)
        val.append(y * scale)
    wl, val = np.asarray(wl), np.asarray(val)
    if wl.size < 2:
        raise DataError(f"{role} curve {source}: needs at least 2 samples")
    if np.all(np.diff(wl) < 0):
        wl, val = wl[::-1], val[::-1]
    if np.any(np.diff(wl) <= 0):
        i = int(np.argmax(np.diff(wl) <= 0))
        raise DataError(
            f"{role} curve {source}: wavelengths must be strictly ascending or descending "
            f"(sample {i + 2}: {wl[i + 1]:g} nm after {wl[i]:g} nm)"
        )
    if not np.any(val > 0):
        raise DataError(f"{role} curve {source}: every value is 0")
    return wl, val, units


def read_curve(path, role: str, name: str | None = None) -> Curve:
    """Read a curve file; ``name`` is how it is recorded (the path as written in the config)."""
    from matgen.provenance import sha256_file

    path = Path(path)
    label = name or path.name
    if not path.is_file():
        raise DataError(f"{role} curve {label} does not exist ({path})")
    try:
        text = limits.read_text_limited(path, f"{role} curve")
    except OSError as exc:
        raise DataError(f"cannot read {role} curve {label}: {exc}") from exc
    wl, val, units = parse_curve(text, label, role)
    return Curve(role, label, sha256_file(path), wl, val, units)


def builtin_curve(name: str) -> Curve:
    """Return a built-in pass response (``BUILTIN_PASSES``) as a ``response`` curve."""
    import hashlib
    from importlib import resources

    from matgen.color.passes import BUILTIN_PASSES

    if name not in BUILTIN_PASSES:
        raise DataError(f"no built-in pass named {name!r}; known: {', '.join(BUILTIN_PASSES)}")
    data = resources.files("matgen.color").joinpath("data", f"{name}.csv").read_bytes()
    wl, val, units = parse_curve(data.decode(), f"built-in '{name}'")
    return Curve("response", f"built-in '{name}'", hashlib.sha256(data).hexdigest(), wl, val, units)


def _grid(curves, lower, upper) -> np.ndarray:
    lo = max([lower[0]] + [c.wavelength_nm[0] for c in curves])
    hi = min([upper[-1]] + [c.wavelength_nm[-1] for c in curves])
    if not hi > lo:
        return np.zeros(0)
    pts = [np.arange(lo, hi, GRID_STEP_NM), [hi], lower, upper] + [c.wavelength_nm for c in curves]
    g = np.unique(np.concatenate([np.asarray(p, dtype=np.float64) for p in pts]))
    return g[(g >= lo) & (g <= hi)]


def combined_weights(curves, bands) -> np.ndarray:
    """Normalised band weights (B,) of the product of ``curves`` (see the module docstring).

    Parameters
    ----------
    curves : sequence of Curve
        One to three curves (lamp, filter, sensor in any subset), or one ``response`` curve.
    bands : BandSet
        The band set (nm).

    Returns
    -------
    ndarray, shape (B,)
        Weights >= 0 summing to 1.

    Raises
    ------
    DataError
        If the curves' product is zero over every band (naming each curve's range and the bands').

    """
    curves = list(curves)
    if not curves:
        raise DataError("a pass needs at least one of lamp, filter, sensor")
    lower, upper = np.asarray(bands.lower_nm, dtype=np.float64), np.asarray(bands.upper_nm, dtype=np.float64)
    g = _grid(curves, lower, upper)
    out = np.zeros(lower.size)
    if g.size:
        prod = np.ones_like(g)
        for c in curves:
            prod *= c(g)
        for b, (lo, hi) in enumerate(zip(lower, upper, strict=True)):
            m = (g >= lo) & (g <= hi)
            if m.sum() >= 2:
                out[b] = np.trapezoid(prod[m], g[m])
    total = out.sum()
    if not total > 0:
        ranges = "; ".join(
            f"{c.role} {c.source} {c.wavelength_nm[0]:g}-{c.wavelength_nm[-1]:g} nm" for c in curves
        )
        raise DataError(
            f"the pass curves ({ranges}) have no nonzero product over the band set "
            f"({lower[0]:g}-{upper[-1]:g} nm); check that they overlap each other and the table's bands"
        )
    return out / total


def pass_entry_name(entry) -> str:
    """Name of a config pass entry: a built-in name, a curve file's stem as written, or a table's ``name``.

    The one rule for pass names (each pass is one file, ``passes/<name>.exr``); the name is taken from the
    entry as written, never from the target of a symbolic link.
    """
    from matgen.color.passes import BUILTIN_PASSES

    if isinstance(entry, dict):
        return str(entry.get("name", ""))
    return entry if entry in BUILTIN_PASSES else Path(entry).stem


def resolve_pass_entry(entry, base_dir, bands, *, allow_outside: bool = False) -> tuple:
    """Turn a config pass entry into ``(name, weights (B,), curve records)``.

    ``entry`` is a built-in name, a CSV path (one multiplied response curve, read tolerantly), or a table
    ``{name = "...", lamp = "...", filter = "...", sensor = "..."}`` with any of the three curves; paths are
    relative to ``base_dir``.
    """
    from matgen.color.passes import BUILTIN_PASSES
    from matgen.fsutil import resolve_inside

    if isinstance(entry, str):
        if entry in BUILTIN_PASSES:
            curves = [builtin_curve(entry)]
        else:
            path = resolve_inside(base_dir, entry, "pass response file", allow_outside=allow_outside)
            if not path.is_file() and "/" not in entry and "." not in entry:  # a misspelt built-in name
                import difflib

                near = difflib.get_close_matches(entry, BUILTIN_PASSES, n=1, cutoff=0.6)
                hint = f"; did you mean '{near[0]}'?" if near else ""
                raise DataError(
                    f"pass '{entry}' is neither a built-in pass ({', '.join(BUILTIN_PASSES)}) nor a curve "
                    f"file in {base_dir}{hint}"
                )
            curves = [read_curve(path, "response", entry)]
        return pass_entry_name(entry), combined_weights(curves, bands), [c.record() for c in curves]
    name = pass_entry_name(entry)
    curves = []
    for role in ROLES:
        if role in entry:
            path = resolve_inside(
                base_dir, entry[role], f"{role} curve of pass '{name}'", allow_outside=allow_outside
            )
            curves.append(read_curve(path, role, entry[role]))
    if not curves:
        raise DataError(f"pass '{name}' names none of {', '.join(ROLES)}; give at least one curve")
    return name, combined_weights(curves, bands), [c.record() for c in curves]


def check_recorded_curves(records, base_dir) -> list:
    """Compare recorded curves with the files now on disk; return one message per changed or missing file.

    Parameters
    ----------
    records : sequence of dict
        ``Curve.record()`` entries (from a descriptor's ``passes.<name>.curves``).
    base_dir : Path
        Folder the recorded paths are relative to (the material config's folder).

    """
    from matgen.provenance import sha256_file

    problems = []
    for rec in records:
        if rec["path"].startswith("built-in "):
            continue
        path = Path(base_dir) / rec["path"]
        if not path.is_file():
            problems.append(f"{rec['role']} curve {rec['path']} is missing (looked in {base_dir})")
        elif sha256_file(path) != rec["sha256"]:
            problems.append(
                f"{rec['role']} curve {rec['path']} changed after the bake "
                f"(SHA-256 {sha256_file(path)[:12]}... "
                f"recorded {rec['sha256'][:12]}...); bake again to use it"
            )
    return problems
