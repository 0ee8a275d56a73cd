"""Physical constants of the spectra and tissue stages live in matgen.constants, and agree with the outside
copies that carry them."""

import ast
import importlib.metadata as md
from pathlib import Path

import pytest

import matgen
from matgen import constants as C
from matgen.spectra import chromophores as ch
from matgen.spectra import refractive, scattering
from matgen.tissue import optics

#: Modules whose function bodies must hold no physical constant.
MODULES = (
    "spectra/chromophores.py",
    "spectra/scattering.py",
    "spectra/refractive.py",
    "spectra/mie.py",
    "tissue/optics.py",
    "tissue/packaging.py",
    "tissue/layers.py",
    "tissue/presets.py",
)
#: Pure numbers of the formulas themselves (halves in quadrature, 4 pi k / lambda, pi d^3 / 6, the Duysens
#: series, the Rayleigh exponent); anything else in a function body is a constant that belongs in
#: matgen.constants. Tolerances below 1e-5 are numerical, not physical.
ALLOWED = {0.0, 0.5, 1.0, 1.5, 2.0, 3.0, 4.0, 6.0}


def _body_floats(tree):
    for fn in ast.walk(tree):
        if isinstance(fn, (ast.FunctionDef, ast.Lambda)):
            nodes = fn.body if isinstance(fn, ast.FunctionDef) else [fn.body]
            for stmt in nodes:
                for n in ast.walk(stmt):
                    if isinstance(n, ast.Constant) and type(n.value) is float:
                        yield getattr(fn, "name", "<lambda>"), n.lineno, n.value


def test_no_physical_literal_in_function_bodies():
    root = Path(matgen.__file__).parent
    found = []
    for rel in MODULES:
        tree = ast.parse((root / rel).read_text())
        for name, line, value in _body_floats(tree):
            if value not in ALLOWED and abs(value) > 1e-5:
                found.append(f"{rel}:{line} {name}: {value!r}")
    hint = "literal constants in function bodies (move them to matgen/constants.py):\n"
    assert not found, hint + "\n".join(found)


def test_module_names_are_the_constants():
    """The module-level names other code may use are the same objects as the constants (one source)."""
    assert optics.PLASMA_FRACTION == C.BLOOD_PLASMA_VOLUME_FRACTION
    assert refractive.N_BELOW_MUSCLE == C.N_MUSCLE
    assert ch.EUMELANIN_JACQUES1998 == (C.EUMELANIN_JACQUES1998_PER_MM, C.EUMELANIN_JACQUES1998_EXPONENT)
    assert ch.PHEOMELANIN_DONNERJENSEN2006 == (
        C.PHEOMELANIN_DONNERJENSEN2006_PER_MM,
        C.PHEOMELANIN_DONNERJENSEN2006_EXPONENT,
    )
    assert scattering.POWER_LAWS["dermis_Jacques2013"].a_prime_per_mm == pytest.approx(
        C.JACQUES2013_DERMIS_A_PRIME_PER_CM / C.MM_PER_CM
    )
    assert refractive.LAYER_INDEX["stratum_corneum"][0] == C.N_STRATUM_CORNEUM


def _simpa_literature_value(cls_name: str, name: str) -> float:
    """Read a class attribute of simpa's literature_values.py without importing simpa (it is installed with
    --no-deps)."""
    try:
        files = md.files("simpa") or []
    except md.PackageNotFoundError:
        pytest.skip("reference package 'simpa' is not installed")
    path = next((f for f in files if str(f).endswith("utils/libraries/literature_values.py")), None)
    if path is None:
        pytest.skip("simpa has no utils/libraries/literature_values.py")
    tree = ast.parse(Path(path.locate()).read_text())
    for node in ast.walk(tree):
        if isinstance(node, ast.ClassDef) and node.name == cls_name:
            for stmt in node.body:
                if isinstance(stmt, ast.Assign) and any(
                    isinstance(t, ast.Name) and t.id == name for t in stmt.targets
                ):
                    return float(ast.literal_eval(stmt.value))
    pytest.skip(f"simpa's literature_values has no {cls_name}.{name}")


def test_plasma_fraction_matches_simpa():
    """simpa 1.0.0 utils/libraries/literature_values.py: OpticalTissueProperties.BLOOD_PLASMA_FRACTION = 0.55
    (haematocrit 0.45). matgen's value is from memory; this outside copy is what holds it."""
    assert C.BLOOD_PLASMA_VOLUME_FRACTION == pytest.approx(
        _simpa_literature_value("OpticalTissueProperties", "BLOOD_PLASMA_FRACTION"), abs=1e-12
    )
