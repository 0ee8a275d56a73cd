"""Regression tests of the farm hardening, one per finding, in-process and fast.

Findings: non-finite config numbers and colliding pass names refused where read; locks written whole with a
heartbeat and a lease taken over from any host; the journalled commit and its recovery; table archives with
unknown members; strict JSON on every write and every JSON input; exit statuses 75 / 143 / 74 / 0 for a
closed pipe; the JSON log format; demo and spec ceilings before any allocation.
"""

from __future__ import annotations

import json
import os
import signal
import sys
import time
import zipfile
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent / "hostile"))

from projects import make_project, make_table  # noqa: E402

from matgen import limits  # noqa: E402
from matgen.bake.config import config_from_dict, load_config  # noqa: E402
from matgen.cli import main  # noqa: E402
from matgen.errors import ConfigError, DataError, LockError, PathError, TableError  # noqa: E402
from matgen.fsutil import FolderLock, StaleLockWarning, lock_is_stale, read_lock_owner, strict_json  # noqa: E402


def _cfg(**scene):
    return {
        "format_version": 1,
        "scene": scene,
        "parameters": {"melanin_fraction": {"map": "m.exr", "encoding": "linear", "range": [0.01, 0.3]}},
    }


@pytest.mark.parametrize("value", [float("nan"), float("inf"), -float("inf"), 1e300, 1e-300, 0.0])
def test_metres_per_scene_unit_must_be_finite_and_in_range(tmp_path, value):
    with pytest.raises(ConfigError, match="metres_per_scene_unit"):
        config_from_dict(_cfg(metres_per_scene_unit=value), tmp_path)


@pytest.mark.parametrize(
    "rng", [[float("nan"), 0.3], [0.0, float("inf")], [0.0, 1e300], [0.0, 1e-300], [1e-300, 2e-300]]
)
def test_encoding_range_must_be_finite_and_wide_enough(tmp_path, rng):
    doc = _cfg()
    doc["parameters"]["melanin_fraction"]["range"] = rng
    with pytest.raises(ConfigError, match="melanin_fraction"):
        config_from_dict(doc, tmp_path)


def test_huge_integers_in_a_config_are_refused(tmp_path):
    doc = _cfg()
    doc["parameters"]["melanin_fraction"]["channel"] = 10**400
    with pytest.raises(ConfigError, match=r"channel.*1329-bit"):
        config_from_dict(doc, tmp_path)


@pytest.mark.parametrize("passes", [["a/p.csv", "b/p.csv"], ["uv365", "r/uv365.csv"], ["a/p.csv", "a/P.csv"]])
def test_colliding_pass_names_are_refused(tmp_path, passes):
    doc = _cfg()
    doc["outputs"] = {"passes": passes}
    with pytest.raises(ConfigError, match="both make pass"):
        config_from_dict(doc, tmp_path)


def test_a_config_that_writes_nothing_is_refused(tmp_path):
    doc = _cfg()
    doc["outputs"] = {"spectral": [], "rgb": [], "targets": [], "passes": [], "qa": False}
    with pytest.raises(ConfigError, match="every output list is empty"):
        config_from_dict(doc, tmp_path)


def test_strict_json_refuses_nan_and_the_json_reader_refuses_overflow():
    with pytest.raises(DataError, match="non-finite"):
        strict_json({"a": float("nan")}, "doc")
    with pytest.raises(ConfigError, match="not finite"):
        limits.loads_json_checked('{"a": NaN}', "doc")
    with pytest.raises(ConfigError, match="not finite"):
        limits.loads_json_checked('{"a": 1e400}', "doc")
    with pytest.raises(ConfigError, match="401 digits"):
        limits.loads_json_checked('{"a": 1' + "0" * 400 + "}", "doc")
    assert limits.loads_json_checked('{"a": NaN}', "doc", allow_nonfinite=True)["a"] != 0


def test_lock_is_never_left_empty_when_its_write_fails(tmp_path, monkeypatch):
    import matgen.fsutil as fs

    def full(fd, data):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(
        fs.os, "fsync", lambda fd: (_ for _ in ()).throw(OSError(28, "No space left on device"))
    )
    with pytest.raises(PathError, match="No space left"):
        FolderLock(tmp_path).acquire()
    assert [p.name for p in tmp_path.iterdir()] == []  # neither the lock nor its temporary file


def test_lock_records_host_pid_and_a_refreshed_heartbeat(tmp_path):
    lock = FolderLock(tmp_path, lease_s=0.4)
    with lock:
        first = read_lock_owner(lock.path)
        assert first["pid"] == os.getpid() and first["host"] and first["since"] == first["heartbeat"]
        time.sleep(0.5)
        later = read_lock_owner(lock.path)
        assert later["heartbeat"] > first["heartbeat"] and later["since"] == first["since"]
        assert not lock_is_stale(later, lock.path, 0.4)
    assert not lock.path.exists()


def test_a_lock_of_another_host_is_taken_over_after_its_lease_only(tmp_path):
    path = tmp_path / ".matgen.lock"
    now = time.time()
    path.write_text(json.dumps({"host": "node-b", "pid": 77, "since": now, "heartbeat": now}))
    with pytest.raises(LockError, match="node-b"):
        FolderLock(tmp_path, lease_s=60).acquire()
    old = now - 120
    path.write_text(json.dumps({"host": "node-b", "pid": 77, "since": old, "heartbeat": old}))
    with pytest.warns(StaleLockWarning, match="node-b"):
        with FolderLock(tmp_path, lease_s=60):
            assert read_lock_owner(path)["pid"] == os.getpid()


def test_an_empty_lock_counts_by_its_age(tmp_path):
    path = tmp_path / ".matgen.lock"
    path.write_text("")
    with pytest.raises(LockError):
        FolderLock(tmp_path, lease_s=60).acquire()
    os.utime(path, (time.time() - 120, time.time() - 120))
    with pytest.warns(StaleLockWarning):
        FolderLock(tmp_path, lease_s=60).acquire()


def test_lease_environment_variable_is_checked(monkeypatch):
    monkeypatch.setenv("MATGEN_LOCK_LEASE_S", "nan")
    with pytest.raises(ConfigError, match="MATGEN_LOCK_LEASE_S"):
        FolderLock(".")


@pytest.fixture()
def project(tmp_path):
    return make_project(tmp_path / "p", 8, 8)


def _quiet(*argv):
    return main([*map(str, argv)])


def test_commit_cut_short_is_finished_by_the_next_bake(project, tmp_path, monkeypatch):
    import matgen.export.publish as pub

    out = tmp_path / "out"
    assert _quiet("bake", project, "--out", out, "--quiet") == 0
    want = {p.name: p.read_bytes() for p in out.rglob("*.exr")}
    cfg = load_config(project)
    calls = {"n": 0}
    real = os.replace

    def die_after_three(a, b):
        calls["n"] += 1
        if calls["n"] == 3:
            raise KeyboardInterrupt  # stands for the process dying between two renames
        return real(a, b)

    from matgen.export.job import bake

    monkeypatch.setattr(pub.os, "replace", die_after_three)
    with pytest.raises(KeyboardInterrupt):
        bake(cfg, out, jobs=1)
    monkeypatch.setattr(pub.os, "replace", real)
    assert not (out / "material.json").exists()  # the old descriptor went before any texture moved
    assert list(out.glob(".matgen-commit.*.json")) and list(out.glob(".matgen-staging-*"))
    bake(cfg, out, jobs=1)
    assert not list(out.glob(".matgen-*"))
    assert {p.name: p.read_bytes() for p in out.rglob("*.exr")} == want
    doc = json.loads((out / "material.json").read_text())
    assert all(
        __import__("hashlib").sha256((out / t["path"]).read_bytes()).hexdigest() == t["sha256"]
        for t in doc["textures"]
    )


def test_a_folder_where_a_file_goes_is_refused_before_anything_moves(project, tmp_path, capsys):
    out = tmp_path / "out"
    (out / "material.json").mkdir(parents=True)
    assert _quiet("bake", project, "--out", out, "--quiet") == 2
    assert "is a folder" in capsys.readouterr().err
    assert sorted(p.name for p in out.iterdir()) == ["material.json"]


def test_an_input_inside_the_outputs_is_never_replaced(tmp_path, capsys):
    cfg = make_project(tmp_path / "p", 8, 8)
    (tmp_path / "p" / "out" / "spectral").mkdir(parents=True)
    inside = tmp_path / "p" / "out" / "spectral" / "albedo_multiple.exr"
    inside.write_bytes((tmp_path / "p" / "maps" / "melanin.exr").read_bytes())
    cfg.write_text(cfg.read_text().replace("maps/melanin.exr", "out/spectral/albedo_multiple.exr"))
    before = inside.read_bytes()
    assert _quiet("bake", cfg, "--out", tmp_path / "p" / "out", "--quiet") == 2
    assert "would replace input" in capsys.readouterr().err and inside.read_bytes() == before


def test_provenance_hashes_the_table_bytes_that_were_read(project, tmp_path):
    from matgen.tables.store import Table

    t = Table.load(tmp_path / "p" / "table.npz")
    assert (
        t.source_sha256
        == __import__("hashlib").sha256((tmp_path / "p" / "table.npz").read_bytes()).hexdigest()
    )


def test_table_archive_with_an_unknown_member_is_refused(tmp_path):
    path = tmp_path / "t.npz"
    make_table().save(path)
    with zipfile.ZipFile(path, "a") as zf:
        with zf.open("q_extra.npy", "w") as fh:
            np.lib.format.write_array(fh, np.zeros((1000, 1000)))
    path.with_suffix(".json").unlink()
    from matgen.tables.store import Table

    with pytest.raises(TableError, match=r"unexpected \['q_extra.npy'\]"):
        Table.load(path)


def test_table_save_removes_the_old_manifest_first(tmp_path, monkeypatch):
    import matgen.tables.store as store

    path = tmp_path / "t.npz"
    make_table().save(path)

    def killed(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr(store, "_write_npz_deterministic", killed)
    with pytest.raises(KeyboardInterrupt):
        make_table("400:700:100").save(path)
    assert path.exists() and not path.with_suffix(".json").exists()  # never the old manifest with new data


def test_spec_ceilings_apply_before_allocating(tmp_path):
    from matgen.tables.spec import load_spec
    from matgen.tables.store import lut_files

    text = lut_files().joinpath("specs", "tiny.toml").read_text()
    for old, new, words in (
        ("count = 5", "count = 1000000000", "axis_points"),
        ("photons_per_band = 4000", "photons_per_band = 1000000000", "records"),
        ('working_space = "ACEScg"', 'working_space = "foo"', "working_space"),
        ('illuminant = "D65"', 'illuminant = "foo"', "illuminant"),
    ):
        p = tmp_path / "s.toml"
        p.write_text(text.replace(old, new))
        with pytest.raises(Exception, match=words) as exc:
            load_spec(p)
        assert isinstance(exc.value, (ConfigError, limits.LimitError)), exc.value


def test_demo_size_and_out_checked_first(tmp_path, capsys):
    assert _quiet("demo", "--size", "8", "--out", tmp_path / "d") == 2
    assert _quiet("demo", "--size", "100000", "--out", tmp_path / "d") == 2
    (tmp_path / "f").write_text("x")
    assert _quiet("demo", "--out", tmp_path / "f") == 2
    assert not (tmp_path / "d").exists()


def test_map_paths_that_are_folders_or_fifos_are_named(project, tmp_path, capsys):
    m = tmp_path / "p" / "maps" / "melanin.exr"
    m.unlink()
    os.mkfifo(m)
    assert _quiet("bake", project, "--out", tmp_path / "o", "--quiet") == 2
    assert "named pipe (FIFO)" in capsys.readouterr().err
    m.unlink()
    m.mkdir()
    assert _quiet("bake", project, "--out", tmp_path / "o", "--quiet") == 2
    assert "is a folder" in capsys.readouterr().err


def test_closed_stdout_is_not_an_error(monkeypatch, capsys):
    import matgen.cli.table as tbl

    def reader_gone(args):
        print("x" * 10)
        raise BrokenPipeError(32, "Broken pipe")  # what print() raises once `| head` has exited

    monkeypatch.setattr(tbl, "_info", reader_gone)
    assert main(["table", "info", "lut/default.npz"]) == 0
    assert capsys.readouterr().err == ""


def test_sigterm_takes_the_interrupt_path_and_exits_143(monkeypatch, capsys):
    import matgen.cli.table as tbl

    def sleeper(args):
        os.kill(os.getpid(), signal.SIGTERM)
        time.sleep(5)
        return 0

    monkeypatch.setattr(tbl, "_status", sleeper)
    old = signal.getsignal(signal.SIGTERM)
    try:
        assert main(["table", "status", "x"]) == 143
    finally:
        signal.signal(signal.SIGTERM, old)
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "terminated (SIGTERM)" in err


def test_json_log_format_and_levels(project, tmp_path, capsys):
    out = tmp_path / "stale"
    out.mkdir()
    (out / ".matgen-bake.lock").write_text(json.dumps({"host": os.uname().nodename, "pid": 2**31 - 2}))
    assert main(["--log-format", "json", "bake", str(project), "--out", str(out), "--quiet", "--json"]) == 0
    cap = capsys.readouterr()
    records = [json.loads(line) for line in cap.err.splitlines() if line.strip()]
    assert records and all({"time", "level", "logger", "message"} <= set(r) for r in records)
    assert any(r["level"] == "warning" and "StaleLockWarning" in r["message"] for r in records)
    result = json.loads(cap.out)
    assert result["status"] == "done" and result["files"][-1] == "material.json"
    assert main(["bake", str(project), "--out", str(tmp_path / "q"), "--quiet", "--log-level", "error"]) == 0
    assert "WARNING" not in capsys.readouterr().err


def test_rebaking_a_tile_differently_withdraws_the_set_descriptor(tmp_path):
    import hashlib

    cfg = make_project(tmp_path / "p", 8, 8, tiles=[1001, 1002])
    out = tmp_path / "out"
    assert _quiet("bake", cfg, "--out", out, "--quiet") == 0
    assert (out / "material.json").exists()
    other = cfg.with_name("other.toml")
    other.write_text(cfg.read_text().replace("range = [0.005, 0.45]", "range = [0.01, 0.3]"))
    assert _quiet("bake", other, "--out", out, "--quiet", "--tile", "1001") == 0
    # the set's descriptor no longer describes tile 1001's textures: it is withdrawn, not left stale
    assert not (out / "material.json").exists()
    doc = json.loads((out / "material.1001.json").read_text())
    for t in doc["textures"]:
        assert hashlib.sha256((out / t["path"]).read_bytes()).hexdigest() == t["sha256"]
    # the same tile baked again with the same config changes nothing and withdraws nothing
    assert _quiet("bake", cfg, "--out", out, "--quiet") == 0
    assert _quiet("bake", cfg, "--out", out, "--quiet", "--tile", "1002") == 0
    assert (out / "material.json").exists()
