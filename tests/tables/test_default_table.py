"""The shipped default table: built from the shipped spec, complete, finite, and within its error target."""


import numpy as np

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


def test_default_table_was_built_by_this_code():
    """The shipped table's provenance names the code that built it: the hash of every result-determining
    source and data file must be today's, or the table no longer says truthfully where its numbers come from.
    After a change to such a file, rebuild it: matgen table build lut/specs/default.toml --out lut/default.npz
    (about 2.5 minutes on 2 cores)."""
    from matgen import __version__
    from matgen.tables.plan import data_hashes, source_hash

    prov = load_default_table().manifest["provenance"]
    assert prov["code_version"] == __version__
    assert prov["data_hashes"] == data_hashes()
    assert prov["source_hash"] == source_hash(), "rebuild lut/default.npz with the current code"
