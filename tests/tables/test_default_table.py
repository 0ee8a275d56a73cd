"""The shipped default table: built from the shipped spec, complete, finite, and within its error target."""

import numpy as np
import pytest

from matgen.tables.spec import load_spec
from matgen.tables.store import default_table_path, load_default_table, lut_files


def test_default_table_matches_its_spec_and_error_target():
    table = load_default_table()  # also checks the .npz against the SHA-256 in default.json
    spec = load_spec(lut_files().joinpath("specs", "default.toml"))
    assert table.manifest["spec"] == spec.to_dict()  # built from the spec that ships beside it
    assert table.axis_names == spec.axis_names and table.grid_shape == spec.grid_shape
    assert len(table.bands) == 71
    for name, v in table.quantities.items():
        assert np.all(np.isfinite(v)), name
    a = table.quantities["albedo_multiple"].astype(np.float64)
    e = table.quantities["albedo_multiple_stderr"].astype(np.float64)
    assert np.all((a > 0) & (a < 1))
    # the spec's target: relative stderr of A <= 1 % at every grid point and band (float32 storage rounding
    # of A and its stderr moves the ratio by at most ~1e-7 relative)
    assert np.max(e / a) <= spec.target_relative_stderr * (1 + 1e-6)
    assert default_table_path().stat().st_size < 5e6  # small enough for the repository


def test_default_table_follows_pigment_trends():
    """Physical sanity of the shipped numbers: more melanin, less reflectance at every band below 700 nm
    (melanin absorbs strongly there; Jacques 1998), at every other grid coordinate."""
    table = load_default_table()
    a = table.quantities["albedo_multiple"].astype(np.float64)
    visible = table.bands.centre_nm < 700
    d = np.diff(a[..., visible], axis=0)
    assert np.all(d < 0)


@pytest.fixture(scope="module")
def default_plan(tmp_path_factory):
    from matgen.tables.build import plan_job

    spec_path = lut_files().joinpath("specs", "default.toml")
    return plan_job(spec_path, tmp_path_factory.mktemp("default-job") / "job").plan


@pytest.mark.parametrize("centre_nm", [550.0, 850.0])
def test_default_table_recomputes_from_its_plan(default_plan, centre_nm):
    """The shipped numbers are what today's code computes: one band's task of the shipped spec is run again
    (every grid point of that band, the spec's seed and photon rule) and its diffuse reflectance A must agree
    with the table within the table's own statistical error. The bound is 3 combined standard errors of two
    independent runs, 3 sqrt(2) sigma; the rerun uses the same seed, so with unchanged code it reproduces the
    table to float32 storage, and a change in the optics, the transport or the reweighting that moves A by
    more than its noise fails here. A rebuild is then due:
    matgen table build lut/specs/default.toml --out lut/default.npz (2-3 minutes on 2 cores)."""
    from matgen.tables.tasks import compute_task

    table = load_default_table()
    band = int(np.argmin(np.abs(table.bands.centre_nm - centre_nm)))
    (task,) = [t for t in default_plan.tasks if t.band == band]
    out = compute_task(default_plan, task)
    flat = np.ravel_multi_index(tuple(out["grid_index"].T), table.grid_shape)
    n_bands = len(table.bands)
    a_tab = table.quantities["albedo_multiple"].reshape(-1, n_bands)[flat, band].astype(np.float64)
    e_tab = table.quantities["albedo_multiple_stderr"].reshape(-1, n_bands)[flat, band].astype(np.float64)
    a, e = out["diffuse_reflectance"], out["diffuse_reflectance_stderr"]
    z = np.abs(a - a_tab) / np.hypot(e, e_tab)
    assert np.max(z) <= 3.0, f"{centre_nm} nm: worst z {np.max(z):.2f}: rebuild the default table"
    # the statistical error itself is reproduced (same photon rule): within 10 % relative
    assert np.allclose(e, e_tab, rtol=0.1)


def test_default_table_rebuild_is_due_only_for_code_changes():
    """The table records the hash of the result-determining code (syntax trees without docstrings, so a
    comment, docstring or reformat does not make a rebuild due) and of the vendored data. A mismatch means a
    result-determining edit since the build: rebuild with
    matgen table build lut/specs/default.toml --out lut/default.npz."""
    from matgen import __version__
    from matgen.tables.plan import data_hashes, source_hash

    prov = load_default_table().manifest["provenance"]
    assert prov["code_version"] == __version__
    assert prov["data_hashes"] == data_hashes()
    assert prov["source_hash"] == source_hash(), "rebuild lut/default.npz with the current code"


def test_source_hash_ignores_comments_docstrings_and_formatting(tmp_path):
    from matgen.tables.plan import code_digest

    a = tmp_path / "a.py"
    b = tmp_path / "b.py"
    c = tmp_path / "c.py"
    a.write_text('"""Module."""\n\ndef f(x):\n    """Twice x."""\n    return 2 * x  # double\n')
    b.write_text("def f( x ):\n    # a comment\n    return 2*x\n")
    c.write_text("def f(x):\n    return 3 * x\n")
    assert code_digest(a) == code_digest(b)
    assert code_digest(a) != code_digest(c)
