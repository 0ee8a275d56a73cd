"""Inputs the fuzz harness found that once broke the contract (kept as regression tests).

Each test names the exact input. Fixed bugs pass; open bugs are xfail(strict=True) so they turn the suite red
the day they are fixed without the test being updated.
"""

import numpy as np
import pytest

from matgen.errors import BandError, MatgenError, PathError


def test_band_spec_with_overflowing_count_is_band_error():
    """'300:1e308:1e-308' asked for an infinite band count: OverflowError from int(inf) before the guard."""
    from matgen.spectra.bands import BandSet

    with pytest.raises(BandError):
        BandSet.parse("300:1e308:1e-308")
    with pytest.raises(BandError):
        BandSet.regular(0.0, 1e308, 1e-308)


@pytest.mark.parametrize(
    "table",
    [
        {"centre_nm": ["a"], "lower_nm": [1], "upper_nm": [2]},
        {"centre_nm": [[1], [2, 3]], "lower_nm": [1], "upper_nm": [2]},
    ],
)
def test_band_table_with_non_numeric_entries_is_band_error(table):
    """A JSON band table with strings or ragged lists raised a bare ValueError from numpy."""
    from matgen.spectra.bands import BandSet

    with pytest.raises(BandError, match="band"):
        BandSet.from_dict(table)


def test_band_table_keeps_the_specific_message():
    """The guard above must not swallow BandSet's own precise messages (unsorted bands, etc.)."""
    from matgen.spectra.bands import BandSet

    with pytest.raises(BandError, match="not sorted"):
        BandSet.from_dict({"centre_nm": [500, 400], "lower_nm": [495, 395], "upper_nm": [505, 405]})


def test_path_with_nul_byte_is_path_error(tmp_path):
    """'\\x00aps/melanin.exr' (a texture path with a NUL byte) raised ValueError from os.path.realpath."""
    from matgen.fsutil import resolve_inside

    with pytest.raises(PathError, match="NUL"):
        resolve_inside(tmp_path, "\x00aps/melanin.exr", "texture path")


def test_stack_names_not_a_sequence_is_stack_error():
    """Stack(names=5) (a layer-name field from a hostile STACK.json) raised TypeError."""
    from matgen.transport.stack import Stack

    with pytest.raises(MatgenError):
        Stack([1.0], [1.4], [0.1], [1.0], [0.5], names=5)


# ---------------------------------------------------------------------------------------------------------
# Table.load (matgen/tables/store.py): findings, exact inputs below (fixed in the table store)


def _saved_table(tmp_path):
    from targets import _small_table

    return _small_table().save(tmp_path / "t.npz")


def _rewrite_member(path, member, payload=None, raw_compressed=None):
    """Rewrite one member of a zip; ``raw_compressed`` overwrites its deflated bytes in place."""
    import zipfile

    if raw_compressed is not None:
        with zipfile.ZipFile(path) as zf:
            info = zf.getinfo(member)
        data = bytearray(path.read_bytes())
        name_len = int.from_bytes(data[info.header_offset + 26 : info.header_offset + 28], "little")
        extra_len = int.from_bytes(data[info.header_offset + 28 : info.header_offset + 30], "little")
        start = info.header_offset + 30 + name_len + extra_len
        data[start : start + len(raw_compressed)] = raw_compressed
        path.write_bytes(bytes(data))
        return
    with zipfile.ZipFile(path) as zf:
        members = {n: zf.read(n) for n in zf.namelist()}
    members[member] = payload
    with zipfile.ZipFile(path, "w") as zf:
        for n, p in members.items():
            zf.writestr(n, p)


def _header_member(obj_bytes):
    import io

    buf = io.BytesIO()
    np.lib.format.write_array(buf, np.frombuffer(obj_bytes, dtype=np.uint8), allow_pickle=False)
    return buf.getvalue()


def test_table_with_corrupt_deflate_stream_is_table_error(tmp_path):
    """Member 'header.json.npy' with its deflated bytes overwritten by b'\\xff' * 8 raised zlib.error."""
    from matgen.errors import TableError
    from matgen.tables.store import Table

    p = _saved_table(tmp_path)
    p.with_suffix(".json").unlink()
    _rewrite_member(p, "header.json.npy", raw_compressed=b"\xff" * 8)
    with pytest.raises(TableError):
        Table.load(p)


def test_table_header_without_working_space_is_table_error(tmp_path):
    """A header JSON lacking the key 'working_space' raised KeyError."""
    import json

    from matgen.errors import TableError
    from matgen.tables.store import Table

    p = _saved_table(tmp_path)
    p.with_suffix(".json").unlink()
    header = _small_header(tmp_path)
    del header["working_space"]
    _rewrite_member(p, "header.json.npy", _header_member(json.dumps(header).encode()))
    with pytest.raises(TableError):
        Table.load(p)


def test_table_header_not_an_object_is_table_error(tmp_path):
    """A header JSON '[]' raised AttributeError."""
    from matgen.errors import TableError
    from matgen.tables.store import Table

    p = _saved_table(tmp_path)
    p.with_suffix(".json").unlink()
    _rewrite_member(p, "header.json.npy", _header_member(b"[]"))
    with pytest.raises(TableError):
        Table.load(p)


def test_table_manifest_not_an_object_is_table_error(tmp_path):
    """A manifest t.json holding '-1' beside a valid t.npz raised AttributeError."""
    from matgen.errors import TableError
    from matgen.tables.store import Table

    p = _saved_table(tmp_path)
    p.with_suffix(".json").write_text("-1")
    with pytest.raises(TableError):
        Table.load(p)


def test_table_member_with_unparsable_shape_is_table_error(tmp_path):
    """A member 'q_albedo_multiple.npy' whose header declares shape '(2*' raised tokenize.TokenError."""
    from targets import _npy_member

    from matgen.errors import TableError
    from matgen.tables.store import Table

    p = _saved_table(tmp_path)
    p.with_suffix(".json").unlink()
    _rewrite_member(p, "q_albedo_multiple.npy", _npy_member(b"(2*"))
    with pytest.raises(TableError):
        Table.load(p)


def test_table_member_with_huge_declared_shape_is_refused_before_allocation(tmp_path):
    """A member declaring shape (100000, 100000, 100000) with 16 bytes of data: LimitError, no allocation."""
    import tracemalloc

    from targets import _npy_member

    from matgen.errors import TableError
    from matgen.tables.store import Table

    p = _saved_table(tmp_path)
    p.with_suffix(".json").unlink()
    _rewrite_member(p, "q_albedo_multiple.npy", _npy_member(b"(100000, 100000, 100000)"))
    tracemalloc.start()
    try:
        # the declared shape must be the one the header implies (checked before any array data is read)
        with pytest.raises(TableError, match=r"declares shape \(100000, 100000, 100000\)"):
            Table.load(p)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 50e6, f"{peak / 1e6:.0f} MB allocated while refusing a hostile header"


def _small_header(tmp_path):
    from targets import _small_table

    return _small_table().header()


def test_table_with_unknown_compression_method_is_table_error(tmp_path):
    """The central-directory compression method of the first member set to 99: NotImplementedError escaped."""
    from matgen.errors import TableError
    from matgen.tables.store import Table

    p = _saved_table(tmp_path)
    p.with_suffix(".json").unlink()
    data = bytearray(p.read_bytes())
    at = data.index(b"PK\x01\x02")
    data[at + 10 : at + 12] = (99).to_bytes(2, "little")
    p.write_bytes(bytes(data))
    with pytest.raises(TableError):
        Table.load(p)


# ---------------------------------------------------------------------------------------------------------
# pigment maps (matgen/bake/maps.py)


def test_exr_with_non_utf8_attribute_type_is_image_error(tmp_path):
    """An EXR whose 'channels' attribute type 'chlist' reads b'ch\\xc9ist' raised UnicodeDecodeError."""
    pytest.importorskip("OpenImageIO")
    import warnings

    from projects import make_project

    from matgen.bake.config import load_config
    from matgen.errors import ImageError
    from matgen.export.job import bake

    cfg = make_project(tmp_path)
    m = tmp_path / "maps" / "melanin.exr"
    data = m.read_bytes()
    assert data.count(b"chlist") == 1
    m.write_bytes(data.replace(b"chlist", b"ch\xc9ist"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(ImageError, match="melanin"):
            bake(load_config(cfg), tmp_path / "out", jobs=1)


# ---------------------------------------------------------------------------------------------------------
# photon records (matgen/transport/records.py)


def _records_file(tmp_path):
    from matgen.transport.simulate import simulate
    from matgen.transport.stack import Stack

    stack = Stack([0.1, 1.0], [1.4, 1.4], [0.5, 0.05], [30.0, 20.0], [0.8, 0.85])
    _, rec = simulate(stack, 300, seed=3, threads=1, records=True)
    p = tmp_path / "rec.npz"
    rec.save(p)
    return p


def test_records_file_with_bad_crc_is_data_error(tmp_path):
    """A records .npz with one stored byte of 'weight.npy' flipped (bad CRC) raised zipfile.BadZipFile."""
    import zipfile

    from matgen.errors import DataError
    from matgen.transport.records import PhotonRecords

    p = _records_file(tmp_path)
    with zipfile.ZipFile(p) as zf:
        info = zf.getinfo("weight.npy")
    data = bytearray(p.read_bytes())
    name_len = int.from_bytes(data[info.header_offset + 26 : info.header_offset + 28], "little")
    extra_len = int.from_bytes(data[info.header_offset + 28 : info.header_offset + 30], "little")
    at = info.header_offset + 30 + name_len + extra_len + info.file_size - 1  # last payload byte (stored)
    data[at] ^= 0xFF
    p.write_bytes(bytes(data))
    with pytest.raises(DataError, match="rec.npz"):
        PhotonRecords.load(p)


def test_records_file_declaring_huge_arrays_is_refused_before_allocation(tmp_path):
    """A records .npz whose 'weight.npy' declares shape (10**11,) with 16 bytes of data raised MemoryError."""
    import zipfile

    from targets import _npy_member

    from matgen.errors import MatgenError
    from matgen.transport.records import PhotonRecords

    p = _records_file(tmp_path)
    with zipfile.ZipFile(p) as zf:
        members = {n: zf.read(n) for n in zf.namelist()}
    members["weight.npy"] = _npy_member(b"(100000000000,)")
    with zipfile.ZipFile(p, "w") as zf:
        for n, b in members.items():
            zf.writestr(n, b)
    with pytest.raises(MatgenError):
        PhotonRecords.load(p)


def test_records_save_failing_midway_leaves_no_partial_file(tmp_path, monkeypatch):
    """np.savez failing after writing some bytes (a full disk, a kill) must not leave a partial rec.npz."""

    from matgen.transport.simulate import simulate
    from matgen.transport.stack import Stack

    stack = Stack([0.1, 1.0], [1.4, 1.4], [0.5, 0.05], [30.0, 20.0], [0.8, 0.85])
    _, rec = simulate(stack, 300, seed=3, threads=1, records=True)

    def failing_savez(fh, **arrays):
        fh.write(b"PK\x03\x04partial")
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(np, "savez", failing_savez)
    with pytest.raises(OSError):
        rec.save(tmp_path / "rec.npz")
    assert not (tmp_path / "rec.npz").exists()


def test_table_member_with_huge_negative_dimension_is_table_error(tmp_path):
    """A member declaring shape (-99999999999999999999999999998999999999991, 3): OverflowError in numpy."""
    from targets import _npy_member

    from matgen.errors import TableError
    from matgen.tables.store import Table

    p = _saved_table(tmp_path)
    p.with_suffix(".json").unlink()
    _rewrite_member(
        p, "q_albedo_multiple.npy", _npy_member(b"(-99999999999999999999999999998999999999991, 3)")
    )
    with pytest.raises(TableError):
        Table.load(p)


def test_fit_result_file_not_utf8_is_one_error(tmp_path, capsys):
    """`matgen fit result.json` of a file holding b'{"photons\\xa2: 3000}' raised UnicodeDecodeError."""
    from matgen.cli import main

    p = tmp_path / "result.json"
    p.write_bytes(b'{"photons\xa2: 3000}')
    assert main(["fit", str(p)]) == 2
    assert "result.json" in capsys.readouterr().err


# ---------------------------------------------------------------------------------------------------------
# the bookkeeping of findings: what the fuzz tests tolerate must be an open finding with a strict xfail test


def test_known_open_failures_are_open_findings_with_strict_xfail_tests():
    """targets.KNOWN_OPEN may only list targets with an open finding (stale entries hid regressions of the
    fixed photon-records and map findings); every open finding has a strict xfail test, every fixed one a
    plain test that exists."""
    import importlib

    from findings import FINDINGS
    from targets import KNOWN_OPEN

    open_targets = {f["target"] for f in FINDINGS if f["status"] == "open"}
    stale = sorted(set(KNOWN_OPEN) - open_targets)
    assert not stale, f"KNOWN_OPEN tolerates failures of targets without an open finding: {stale}"
    for f in FINDINGS:
        assert f["status"] in ("open", "fixed"), f
        module, name = f["test"].split("::")
        fn = getattr(importlib.import_module(module.removesuffix(".py")), name, None)
        assert fn is not None, f"the regression test {f['test']} of {f['input']!r} does not exist"
        xfails = [m for m in getattr(fn, "pytestmark", []) if m.name == "xfail"]
        if f["status"] == "open":
            assert xfails and xfails[0].kwargs.get("strict") is True, f"{f['test']}: open, not a strict xfail"
        else:
            assert not xfails, f"{f['test']} is marked xfail although its finding is fixed"


# ---------------------------------------------------------------------------------------------------------
# fixed: text nested deeper than the parser's recursion limit (JSON and TOML readers of other stages)

_DEEP_JSON = "[" * 100000
_DEEP_TOML = "a = " + "[" * 100000


def test_descriptor_nested_too_deep_is_one_error(tmp_path):
    """`matgen inspect material.json` with material.json holding '[' * 100000."""
    from matgen.export.descriptor import inspect_descriptor

    p = tmp_path / "material.json"
    p.write_text(_DEEP_JSON)
    with pytest.raises(MatgenError):
        inspect_descriptor(p)


def test_fit_result_nested_too_deep_is_one_error(tmp_path):
    """`matgen fit result.json` with result.json holding '[' * 100000."""
    from matgen.cli import main

    p = tmp_path / "result.json"
    p.write_text(_DEEP_JSON)
    assert main(["fit", str(p)]) == 2


def test_stack_json_nested_too_deep_is_one_error(tmp_path):
    """`matgen simulate stack.json` with stack.json holding '[' * 100000."""
    from matgen.cli import main

    p = tmp_path / "stack.json"
    p.write_text(_DEEP_JSON)
    assert main(["simulate", str(p)]) == 2


def test_job_file_nested_too_deep_is_table_error(tmp_path):
    """A table job folder whose job.json holds '[' * 100000."""
    from matgen.errors import TableError
    from matgen.tables.plan import JobFolder

    (tmp_path / "job" / "tasks").mkdir(parents=True)
    (tmp_path / "job" / "job.json").write_text(_DEEP_JSON)
    with pytest.raises(TableError):
        JobFolder.open(tmp_path / "job")


def test_material_config_nested_too_deep_is_config_error(tmp_path):
    """A material config TOML holding 'a = ' + '[' * 100000."""
    pytest.importorskip("OpenImageIO")
    from matgen.bake.config import load_config

    p = tmp_path / "material.toml"
    p.write_text(_DEEP_TOML)
    with pytest.raises(MatgenError):
        load_config(p)


def test_table_spec_nested_too_deep_is_config_error(tmp_path):
    """A table spec TOML holding 'a = ' + '[' * 100000."""
    from matgen.tables.spec import load_spec

    p = tmp_path / "spec.toml"
    p.write_text(_DEEP_TOML)
    with pytest.raises(MatgenError):
        load_spec(p)


def test_response_csv_with_carriage_return_in_a_field_is_data_error(tmp_path):
    """A pass-response CSV with a lone carriage return inside a field (found by libFuzzer through
    tools/hostile_report; the exact crash input, then a minimal one)."""
    from matgen.color import pass_weights
    from matgen.errors import DataError
    from matgen.spectra.bands import BandSet

    found = (
        b"wav%wave\x00\x00\x00\x00th_nm,weight\n840.0,0.00000000\n84!.0,\r0.00000000\n842.0,0,0.00000\n"
        b"32200.0,00"
    )
    for i, data in enumerate((found, b"wavelength_nm,weight\n840.0,0.5\n841.0,\r0.5\n")):
        p = tmp_path / f"curve{i}.csv"
        p.write_bytes(data)
        with pytest.raises(DataError, match=f"curve{i}.csv"):
            pass_weights(str(p), BandSet.regular(300.0, 1000.0, 10.0))
