"""Inputs that once broke the contract in result files matgen reads back (kept as regression tests).

Table task records and task outputs (read by a merge), photon-records metadata and arrays, and the validation
results and figures of ``matgen report``. Each test names the exact input; see findings.py.
"""

import re

import numpy as np
import pytest


def _records_file(tmp_path):
    """A valid photon records file (300 photons, 2 layers) made by a simulation."""
    from targets import _records_seeds

    p = tmp_path / "rec.npz"
    p.write_bytes(_records_seeds(tmp_path)[0])
    return p


# ---------------------------------------------------------------------------------------------------------
# table task records and task outputs (matgen/tables/tasks.py, build.py)


def _job_copy(tmp_path):
    """A copy of the finished tiny job of targets.py (built once per process) and its table file's bytes."""
    import shutil

    from targets_jobs import _built_job

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
    ids=["grid_index_99", "missing_array", "short_array", "nan_value", "complex_g", "other_rings"],
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
    ids=["no_launch_weight", "list", "mu_a_ref_number", "specular_text", "depth_scale_0", "nested_deep"],
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

    from targets_results import validation_doc

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
    ids=[
        "list",
        "skipped_list",
        "comparisons_number",
        "comparison_without_name",
        "seconds_text",
        "not_utf8",
        "nested_deep",
        "bound_1e308",
        "value_text",
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

    from targets_results import validation_doc

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
