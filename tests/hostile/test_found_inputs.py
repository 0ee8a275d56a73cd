"""Inputs the fuzz harness found that once broke the contract (kept as regression tests).

Each test names the exact input. Fixed bugs pass; open bugs are xfail(strict=True) so they turn the suite red
the day they are fixed without the test being updated.
"""

import re

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

    import numpy as np

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

    from matgen.errors import LimitError
    from matgen.tables.store import Table

    p = _saved_table(tmp_path)
    p.with_suffix(".json").unlink()
    _rewrite_member(p, "q_albedo_multiple.npy", _npy_member(b"(100000, 100000, 100000)"))
    tracemalloc.start()
    try:
        with pytest.raises(LimitError, match="MATGEN_MAX_TABLE_ENTRIES"):
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
    import numpy as np

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
# table task records and task outputs (matgen/tables/tasks.py, build.py)


def _job_copy(tmp_path):
    """A copy of the finished tiny job of targets.py (built once per process) and its table file's bytes."""
    import shutil

    from targets import _built_job

    from matgen.tables.plan import JobFolder

    built = _built_job()
    shutil.copytree(built.parent, tmp_path / "build")
    return JobFolder.open(tmp_path / "build" / "t.job"), (built.parent / "t.npz").read_bytes()


@pytest.mark.parametrize(
    "field,value",
    [("wall_s", None), ("wall_s", "1.5"), ("bytes", "123"), ("sha256", 5), ("index", True), ("photons", 0)],
)
def test_task_record_with_bad_field_is_corrupt_and_recomputed(tmp_path, field, value):
    """A finished task's record with '"wall_s": null' passed the resume check, then float(None) raised
    TypeError in the build statistics after the merge. A record not as written is corrupt: the merge names it,
    a rebuild recomputes the task and gives the same table bit for bit."""
    import json
    import warnings

    from matgen.errors import TableError
    from matgen.tables.build import build_table, merge_job
    from matgen.tables.tasks import task_state

    job, table_bytes = _job_copy(tmp_path)
    record = json.loads(job.record_path(0).read_text())
    record[field] = value
    job.record_path(0).write_text(json.dumps(record))
    st = task_state(job, 0)
    assert st.state == "corrupt" and f"'{field}'" in st.reason, st
    with pytest.raises(TableError, match=f"corrupt tasks 0 .*'{field}'"):
        merge_job(job, tmp_path / "merged.npz")
    assert not (tmp_path / "merged.npz").exists()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        build_table(
            tmp_path / "build" / "spec.toml",
            tmp_path / "build" / "t.npz",
            jobdir=job.path,
            executor="serial",
            progress=False,
        )
    assert task_state(job, 0).state == "done"
    assert (tmp_path / "build" / "t.npz").read_bytes() == table_bytes


def _rewrite_task_output(job, index, change):
    """Apply ``change(arrays)`` to a task output and make its record's checksum match again."""
    import json

    from matgen.npzio import read_npz_checked
    from matgen.provenance import sha256_file
    from matgen.tables.store import _write_npz_deterministic

    out = job.output_path(index)
    arrays = read_npz_checked(out, "task output")
    change(arrays)
    _write_npz_deterministic(out, arrays)
    record = json.loads(job.record_path(index).read_text())
    record["sha256"], record["bytes"] = sha256_file(out), out.stat().st_size
    job.record_path(index).write_text(json.dumps(record))


def _set_row0(name, value):
    def change(arrays):
        arrays[name] = arrays[name].copy()
        arrays[name][0] = value

    return change


@pytest.mark.parametrize(
    "change,field",
    [
        (_set_row0("grid_index", 99), "grid_index"),
        (lambda a: a.pop("diffuse_reflectance"), "diffuse_reflectance"),
        (lambda a: a.update(diffuse_reflectance=a["diffuse_reflectance"][1:]), "diffuse_reflectance"),
        (_set_row0("diffuse_reflectance", float("nan")), "diffuse_reflectance"),
        (lambda a: a.update(g=a["g"].astype(np.complex128)), "'g'"),
        (lambda a: a.update(ring_edges_mm=a["ring_edges_mm"] * 2), "ring_edges_mm"),
    ],
)
def test_task_output_not_matching_its_plan_is_table_error(tmp_path, change, field):
    """A task output whose 'grid_index' holds 99 in row 0 (its record's checksum made to match) raised
    ValueError (invalid entry in coordinates array) from the merge; a missing array raised KeyError."""
    from matgen.errors import TableError
    from matgen.tables.build import merge_job

    job, _ = _job_copy(tmp_path)
    _rewrite_task_output(job, 0, change)
    with pytest.raises(TableError, match=field):
        merge_job(job, tmp_path / "merged.npz")
    assert not (tmp_path / "merged.npz").exists()


# ---------------------------------------------------------------------------------------------------------
# photon records metadata (matgen/transport/records.py)


def _records_with_meta(tmp_path, edit):
    import io
    import json
    import zipfile

    import numpy as np

    p = _records_file(tmp_path)
    with zipfile.ZipFile(p) as zf:
        members = {n: zf.read(n) for n in zf.namelist()}
    meta = json.loads(str(np.lib.format.read_array(io.BytesIO(members["meta.npy"]))))
    text = edit(meta)
    buf = io.BytesIO()
    np.lib.format.write_array(buf, np.array(text), allow_pickle=False)
    members["meta.npy"] = buf.getvalue()
    with zipfile.ZipFile(p, "w") as zf:
        for n, b in members.items():
            zf.writestr(n, b)
    return p


def _meta_without(key):
    import json

    return lambda m: json.dumps({k: v for k, v in m.items() if k != key})


def _meta_with(key, value):
    import json

    return lambda m: json.dumps({**m, key: value})


@pytest.mark.parametrize(
    "edit,match",
    [
        (_meta_without("launch_weight"), "launch_weight"),
        (lambda m: "[]", "not an object"),
        (_meta_with("mu_a_ref", 5), "mu_a_ref"),
        (_meta_with("specular_reflectance", "x"), "specular_reflectance"),
        (_meta_with("depth_scale_mm", 0), "depth_scale_mm"),
        (lambda m: "[" * 100000, "cannot be read"),
    ],
)
def test_records_metadata_not_as_written_is_data_error(tmp_path, edit, match):
    """Records metadata without 'launch_weight' raised KeyError in the reweighting; '[]' AttributeError;
    'mu_a_ref': 5 TypeError; a JSON text nested 100000 deep RecursionError."""
    import numpy as np

    from matgen.errors import DataError
    from matgen.transport.records import PhotonRecords
    from matgen.transport.reweight import reweight

    p = _records_with_meta(tmp_path, edit)
    with pytest.raises(DataError, match=match):
        reweight(PhotonRecords.load(p), np.array([[0.5, 0.05]]), threads=1)


# ---------------------------------------------------------------------------------------------------------
# matgen report: validation file and figures (matgen/preview/report.py, validation_json.py, cli/report.py)


@pytest.fixture(scope="module")
def baked_descriptor(tmp_path_factory):
    pytest.importorskip("OpenImageIO")
    import warnings

    from projects import make_project

    from matgen.bake.config import load_config
    from matgen.export.job import bake

    root = tmp_path_factory.mktemp("report")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return bake(load_config(make_project(root)), root / "out", jobs=1).descriptor


def _report_cli(descriptor, tmp_path, *extra):
    import contextlib
    import io

    from matgen.cli import main

    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        rc = main(["report", str(descriptor), "--out", str(tmp_path / "report.html"), *map(str, extra)])
    return rc, err.getvalue()


def _validation_with_row(**row):
    import json

    from targets import validation_doc

    doc = validation_doc()
    doc["comparisons"][0]["rows"][0].update(row)
    return json.dumps(doc).encode()


@pytest.mark.parametrize(
    "content,match",
    [
        (b"[1]", "JSON object"),
        (b'{"skipped": []}', "'skipped'"),
        (b'{"comparisons": 3}', "'comparisons'"),
        (b'{"comparisons": [{"rows": 5}]}', r"'comparisons\[0\]\.name'"),
        (b'{"passed": true, "seconds": "x"}', "'seconds'"),
        (b"\xff\xfe", "not UTF-8"),
        (b"[" * 100000, "not valid JSON"),
        (_validation_with_row(bound=1e308), "bound"),
        (_validation_with_row(tested={"value": "0.4", "stderr": 0.001}), "tested.value"),
    ],
)
def test_report_with_malformed_validation_file_is_one_error(baked_descriptor, tmp_path, content, match):
    """`matgen report D --validation v.json` with v.json '[1]' raised AttributeError, '{"skipped": []}'
    AttributeError, '{"comparisons": 3}' TypeError, a bound of 1e308 numpy's LinAlgError in the plot."""
    v = tmp_path / "v.json"
    v.write_bytes(content)
    rc, err = _report_cli(baked_descriptor, tmp_path, "--validation", v)
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert rc == 2 and len(lines) == 1, err
    assert "v.json" in lines[0]
    assert re.search(match, lines[0]), lines[0]
    assert not (tmp_path / "report.html").exists()


def test_report_validation_file_above_the_text_ceiling_is_limit_error(baked_descriptor, tmp_path):
    import json

    from targets import validation_doc

    from matgen import limits

    v = tmp_path / "v.json"
    v.write_text(json.dumps(validation_doc()) + " " * (2 << 20))
    with limits.override(text_bytes=1 << 20):
        rc, err = _report_cli(baked_descriptor, tmp_path, "--validation", v)
    assert rc == 2 and "v.json" in err and "MATGEN_MAX_TEXT_BYTES" in err, err
    rc, err = _report_cli(baked_descriptor, tmp_path, "--validation", v)
    assert rc == 0, err  # the same file within the default ceiling is a valid validation result
    assert "example table" in (tmp_path / "report.html").read_text()


@pytest.mark.parametrize("kind", ["missing", "not_png", "folder"])
def test_report_with_missing_or_non_png_figure_is_one_error(baked_descriptor, tmp_path, kind):
    """`matgen report D --figure missing.png` raised FileNotFoundError (a traceback)."""
    fig = tmp_path / "fig.png"
    if kind == "not_png":
        fig.write_text("not an image")
    elif kind == "folder":
        fig.mkdir()
    rc, err = _report_cli(baked_descriptor, tmp_path, "--figure", fig)
    assert rc == 2 and "fig.png" in err and len(err.strip().splitlines()) == 1, err
    assert not (tmp_path / "report.html").exists()


# ---------------------------------------------------------------------------------------------------------
# open: text nested deeper than the parser's recursion limit (JSON and TOML readers of other stages)

_DEEP_JSON = "[" * 100000
_DEEP_TOML = "a = " + "[" * 100000
_DEEP = "open: the reader catches ValueError but not the RecursionError of a file nested 100000 deep"


@pytest.mark.xfail(strict=True, raises=RecursionError, reason=_DEEP)
def test_descriptor_nested_too_deep_is_one_error(tmp_path):
    """`matgen inspect material.json` with material.json holding '[' * 100000."""
    from matgen.export.descriptor import inspect_descriptor

    p = tmp_path / "material.json"
    p.write_text(_DEEP_JSON)
    with pytest.raises(MatgenError):
        inspect_descriptor(p)


@pytest.mark.xfail(strict=True, raises=RecursionError, reason=_DEEP)
def test_fit_result_nested_too_deep_is_one_error(tmp_path):
    """`matgen fit result.json` with result.json holding '[' * 100000."""
    from matgen.cli import main

    p = tmp_path / "result.json"
    p.write_text(_DEEP_JSON)
    assert main(["fit", str(p)]) == 2


@pytest.mark.xfail(strict=True, raises=RecursionError, reason=_DEEP)
def test_stack_json_nested_too_deep_is_one_error(tmp_path):
    """`matgen simulate stack.json` with stack.json holding '[' * 100000."""
    from matgen.cli import main

    p = tmp_path / "stack.json"
    p.write_text(_DEEP_JSON)
    assert main(["simulate", str(p)]) == 2


@pytest.mark.xfail(strict=True, raises=RecursionError, reason=_DEEP)
def test_job_file_nested_too_deep_is_table_error(tmp_path):
    """A table job folder whose job.json holds '[' * 100000."""
    from matgen.errors import TableError
    from matgen.tables.plan import JobFolder

    (tmp_path / "job" / "tasks").mkdir(parents=True)
    (tmp_path / "job" / "job.json").write_text(_DEEP_JSON)
    with pytest.raises(TableError):
        JobFolder.open(tmp_path / "job")


@pytest.mark.xfail(strict=True, raises=RecursionError, reason=_DEEP)
def test_material_config_nested_too_deep_is_config_error(tmp_path):
    """A material config TOML holding 'a = ' + '[' * 100000."""
    pytest.importorskip("OpenImageIO")
    from matgen.bake.config import load_config

    p = tmp_path / "material.toml"
    p.write_text(_DEEP_TOML)
    with pytest.raises(MatgenError):
        load_config(p)


@pytest.mark.xfail(strict=True, raises=RecursionError, reason=_DEEP)
def test_table_spec_nested_too_deep_is_config_error(tmp_path):
    """A table spec TOML holding 'a = ' + '[' * 100000."""
    from matgen.tables.spec import load_spec

    p = tmp_path / "spec.toml"
    p.write_text(_DEEP_TOML)
    with pytest.raises(MatgenError):
        load_spec(p)


@pytest.mark.parametrize(
    "name,array,match",
    [
        (
            "exit_radius_mm",
            lambda a: np.where(np.arange(a.size) == 5, np.nan, a).astype(np.float32),
            "photon 5",
        ),
        ("side", lambda a: np.full_like(a, 7), "'side'"),
        ("exit_cos", lambda a: a + np.float32(2), "exit_cos"),
        ("path_mm", lambda a: a.astype(np.float64), "dtype"),
    ],
)
def test_records_arrays_not_as_written_are_data_error(tmp_path, name, array, match):
    """Records arrays a simulation never writes (NaN radius, side 7, exit cosine above 1, float64 paths)."""
    import io
    import zipfile

    from matgen.errors import DataError
    from matgen.transport.records import PhotonRecords

    p = _records_file(tmp_path)
    with zipfile.ZipFile(p) as zf:
        members = {n: zf.read(n) for n in zf.namelist()}
    buf = io.BytesIO()
    old = np.lib.format.read_array(io.BytesIO(members[f"{name}.npy"]))
    np.lib.format.write_array(buf, np.ascontiguousarray(array(old)), allow_pickle=False)
    members[f"{name}.npy"] = buf.getvalue()
    with zipfile.ZipFile(p, "w") as zf:
        for n, b in members.items():
            zf.writestr(n, b)
    with pytest.raises(DataError, match=match):
        PhotonRecords.load(p)
