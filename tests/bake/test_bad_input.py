"""Bad input: each gives one clear message (file, tile, texel), exit status 2, and no output left."""

import json
import os
import signal
import socket
import subprocess
import sys
import time

import numpy as np
import pytest

from matgen.bake.config import load_config
from matgen.cli import main
from matgen.errors import ImageError
from matgen.export import exr as exr_module
from matgen.export.job import bake
from matgen.fsutil import StaleLockWarning


def _visible_files(folder):
    if not folder.exists():
        return []
    return sorted(
        str(p.relative_to(folder))
        for p in folder.rglob("*")
        if p.is_file() and not any(part.startswith(".") for part in p.relative_to(folder).parts)
    )


def _all_entries(folder):
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*")) if folder.exists() else []


def _fails(capsys, argv, status=2):
    rc = main(argv)
    err = capsys.readouterr().err
    assert rc == status, err
    return err


def test_nan_and_inf_texels_named_with_count_and_first_texel(tmp_path, kit, capsys):
    cfg = kit.make_project(tmp_path / "p", 16, 20)
    mel, _, _ = kit.smooth_maps(16, 20)
    mel[3, 5] = np.nan
    mel[9, 2] = np.inf
    kit.write_map(tmp_path / "p" / "maps" / "melanin.exr", mel)
    out = tmp_path / "out"
    err = _fails(capsys, ["bake", str(cfg), "--out", str(out), "--quiet"])
    assert "melanin.exr" in err and "2 texel(s)" in err and "(x=5, y=3)" in err
    assert _all_entries(out) == []


def test_out_of_encoding_range_clamped_and_reported_or_refused(tmp_path, kit, capsys):
    cfg = kit.make_project(tmp_path / "p", 8, 8)
    _, blood, eu = kit.smooth_maps(8, 8)
    eu[2, 6] = 1.5
    eu[4, 1] = -0.25
    kit.write_map(tmp_path / "p" / "maps" / "eumelanin.exr", eu)
    out = tmp_path / "out"
    assert main(["bake", str(cfg), "--out", str(out), "--quiet"]) == 0
    err = capsys.readouterr().err
    assert "2 texel(s) lie outside the encoding range" in err and "(x=6, y=2)" in err
    qa, chans, _ = exr_module.read_exr(out / "qa" / "qa.exr")
    flag = qa[..., chans.index("encoding_clamped")]
    assert flag[2, 6] == 1 and flag[4, 1] == 1 and flag.sum() == 2
    assert json.loads((out / "material.json").read_text())["statistics"]["encoding_clamped_texels"] == 2
    cfg.write_text(cfg.read_text() + '\n[input]\nout_of_range = "error"\n')
    out2 = tmp_path / "out2"
    err = _fails(capsys, ["bake", str(cfg), "--out", str(out2), "--quiet"])
    assert "eumelanin.exr" in err and "(x=6, y=2)" in err and "out_of_range" in err
    assert _all_entries(out2) == []


def test_missing_udim_tile_named(tmp_path, kit, capsys):
    cfg = kit.make_project(tmp_path / "p", 8, 8, tiles=[1001, 1002, 1003])
    (tmp_path / "p" / "maps" / "blood.1002.png").unlink()
    err = _fails(capsys, ["bake", str(cfg), "--out", str(tmp_path / "out"), "--quiet"])
    assert "UDIM tile 1002" in err and "blood.1002.png" in err and "blood_fraction" in err
    assert _all_entries(tmp_path / "out") == []


def test_unreadable_map_named(tmp_path, kit, capsys):
    cfg = kit.make_project(tmp_path / "p", 8, 8)
    (tmp_path / "p" / "maps" / "melanin.exr").write_bytes(b"this is not an image at all" * 10)
    err = _fails(capsys, ["bake", str(cfg), "--out", str(tmp_path / "out"), "--quiet"])
    assert "melanin.exr" in err and "cannot be read" in err
    assert _all_entries(tmp_path / "out") == []


def test_truncated_exr_named(tmp_path, kit, capsys):
    cfg = kit.make_project(tmp_path / "p", 8, 8)
    rng = np.random.default_rng(1)
    path = tmp_path / "p" / "maps" / "eumelanin.exr"
    kit.write_map(path, rng.uniform(0, 1, (256, 256)))
    kit.write_map(tmp_path / "p" / "maps" / "melanin.exr", rng.uniform(0, 1, (256, 256)))
    kit.write_map(tmp_path / "p" / "maps" / "blood.png", rng.uniform(0, 1, (256, 256)))
    data = path.read_bytes()
    path.write_bytes(data[: len(data) // 2])
    err = _fails(capsys, ["bake", str(cfg), "--out", str(tmp_path / "out"), "--quiet"])
    assert "eumelanin.exr" in err and ("truncated" in err or "cannot be read" in err)
    assert _all_entries(tmp_path / "out") == []


def test_wrong_channel_count_named(tmp_path, kit, capsys):
    cfg = kit.make_project(tmp_path / "p", 8, 8)
    cfg.write_text(cfg.read_text().replace('encoding = "fraction"', 'encoding = "fraction"\nchannel = 2'))
    err = _fails(capsys, ["bake", str(cfg), "--out", str(tmp_path / "out"), "--quiet"])
    assert "eumelanin.exr" in err and "1 channel(s)" in err and "channel 2" in err


def test_config_path_escaping_folder_needs_explicit_option(tmp_path, kit, capsys):
    cfg = kit.make_project(tmp_path / "p", 8, 8)
    (tmp_path / "shared").mkdir()
    os.replace(tmp_path / "p" / "maps" / "blood.png", tmp_path / "shared" / "blood.png")
    cfg.write_text(cfg.read_text().replace("maps/blood.png", "../shared/blood.png"))
    err = _fails(capsys, ["bake", str(cfg), "--out", str(tmp_path / "out"), "--quiet"])
    assert "../shared/blood.png" in err and "outside" in err
    assert main(["bake", str(cfg), "--out", str(tmp_path / "out"), "--quiet", "--allow-outside"]) == 0


def test_output_folder_not_writable(tmp_path, kit, capsys):
    cfg = kit.make_project(tmp_path / "p", 8, 8)
    blocker = tmp_path / "file.txt"
    blocker.write_text("x")
    err = _fails(capsys, ["bake", str(cfg), "--out", str(blocker), "--quiet"])
    assert "file.txt" in err and "not a folder" in err
    err = _fails(capsys, ["bake", str(cfg), "--out", str(blocker / "sub"), "--quiet"])
    assert "cannot create output folder" in err


def test_second_bake_into_locked_folder_refuses_naming_lock(tmp_path, kit, capsys):
    cfg = kit.make_project(tmp_path / "p", 8, 8)
    out = tmp_path / "out"
    out.mkdir()
    holder = subprocess.Popen(
        [
            sys.executable,
            "-c",
            "import sys, time\nfrom matgen.fsutil import FolderLock\n"
            f"l = FolderLock({str(out)!r}, name='.matgen-bake.lock'); l.acquire()\n"
            "print('held', flush=True); time.sleep(60)",
        ],
        stdout=subprocess.PIPE,
        text=True,
    )
    try:
        assert holder.stdout.readline().strip() == "held"
        err = _fails(capsys, ["bake", str(cfg), "--out", str(out), "--quiet"], status=75)  # busy: retry later
        assert ".matgen-bake.lock" in err and f"process {holder.pid}" in err
        assert _visible_files(out) == []
    finally:
        holder.kill()
        holder.wait()


def test_failure_part_way_leaves_no_output(tmp_path, kit, monkeypatch):
    cfg = kit.make_project(tmp_path / "p", 32, 8)
    calls = {"n": 0}
    original = exr_module.StreamingExr.write_rows

    def failing(self, y0, rows):
        calls["n"] += 1
        if calls["n"] > 12:
            raise ImageError("simulated write failure")
        return original(self, y0, rows)

    monkeypatch.setattr(exr_module.StreamingExr, "write_rows", failing)
    with pytest.raises(ImageError, match="simulated"):
        bake(load_config(cfg), tmp_path / "out", rows=4)
    assert calls["n"] > 12
    assert _all_entries(tmp_path / "out") == []


def test_killed_bake_leaves_no_partial_output_and_rerun_completes(tmp_path, kit):
    cfg = kit.make_project(tmp_path / "p", 256, 256)
    out = tmp_path / "out"
    proc = subprocess.Popen(
        [sys.executable, "-m", "matgen", "bake", str(cfg), "--out", str(out), "--quiet", "--memory-mb", "1"],
        stderr=subprocess.PIPE,
        text=True,
    )
    deadline = time.monotonic() + 120
    killed = False
    while time.monotonic() < deadline and proc.poll() is None:
        staged = [p for p in out.glob(".matgen-staging-*/**/*.exr")] if out.exists() else []
        if staged:
            proc.send_signal(signal.SIGKILL)
            killed = True
            break
        time.sleep(0.005)
    proc.wait()
    assert killed, f"the bake ended before it could be killed: {proc.stderr.read()}"
    assert _visible_files(out) == []  # nothing but the hidden staging folder and the dead process's lock
    lock = json.loads((out / ".matgen-bake.lock").read_text())
    assert lock["pid"] == proc.pid and lock["host"] == socket.gethostname()
    with pytest.warns(StaleLockWarning, match=str(proc.pid)):
        res = bake(load_config(cfg), out)
    assert not list(out.glob(".matgen-*"))  # stale lock taken over, stale staging removed, own lock released
    assert sorted(res.files) == _visible_files(out)
    assert main(["inspect", str(out / "material.json")]) == 0


def test_udim_tile_missing_from_the_first_map_is_named(tmp_path, kit, capsys):
    """The tile set is the union of every UDIM map's tiles: a tile that the config's first UDIM map lacks
    but the others have is named as missing, for the whole bake, its dry run and a one-tile bake."""
    cfg = kit.make_project(tmp_path / "p", 8, 8, tiles=[1001, 1002, 1003])
    (tmp_path / "p" / "maps" / "melanin.1003.exr").unlink()  # melanin_fraction is the first map of the config
    out = tmp_path / "out"
    for extra in ([], ["--dry-run"], ["--tile", "1003"]):
        err = _fails(capsys, ["bake", str(cfg), "--out", str(out), "--quiet", *extra])
        assert "UDIM tile 1003" in err and "melanin.1003.exr" in err and "melanin_fraction" in err, err
        assert _all_entries(out) == []
