"""Farm bakes of a UDIM set: whole and one-tile bakes of a folder exclude each other, different tiles share
it, and ``--assemble-tiles`` turns the tiles into the set's descriptor and documents.

The table is test data (tests/bake/conftest.py). Locks are held by separate Python processes (matgen's own
``FolderLock``), as a farm node would hold them.
"""

import json
import subprocess
import sys
import warnings

import numpy as np
import pytest

from matgen.bake.config import load_config
from matgen.cli import main
from matgen.errors import DataError, LockError
from matgen.export.assemble import assemble_tiles
from matgen.export.descriptor import descriptor_schema
from matgen.export.exr import read_exr, write_exr
from matgen.export.job import BAKE_LOCK, bake, tile_lock_name

TILES = [1001, 1002, 1011]

HOLDER = """
import sys, time
from matgen.fsutil import FolderLock
with FolderLock(sys.argv[1], name=sys.argv[2], purpose="test holder"):
    print("HELD", flush=True)
    time.sleep(120)
"""


@pytest.fixture
def hold(tmp_path):
    """Start processes that hold a lock file in a folder until the test ends; returns their PIDs."""
    procs = []

    def start(folder, name):
        folder.mkdir(parents=True, exist_ok=True)
        p = subprocess.Popen(
            [sys.executable, "-c", HOLDER, str(folder), name], stdout=subprocess.PIPE, text=True
        )
        procs.append(p)
        assert p.stdout.readline().strip() == "HELD"
        return p.pid

    yield start
    for p in procs:
        p.kill()
        p.wait()
        p.stdout.close()


def _visible(folder):
    return sorted(
        str(p.relative_to(folder))
        for p in folder.rglob("*")
        if p.is_file() and not any(part.startswith(".") for part in p.relative_to(folder).parts)
    )


def _quiet_bake(*args, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return bake(*args, **kw)


def _quiet_assemble(*args, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return assemble_tiles(*args, **kw)


def _udim_project(kit, root, scene=False):
    cfg = kit.make_project(root, 12, 10, tiles=TILES)
    if scene:  # the preview scene needs albedo_single and mean_free_path_mm stacks
        text = cfg.read_text().replace(
            'spectral = ["albedo_multiple", "mean_free_path_mm"]',
            'spectral = ["albedo_single", "mean_free_path_mm"]\nmitsuba_scene = true',
        )
        cfg.write_text(text)
    return cfg


# --- locks -------------------------------------------------------------------------------------------------


def test_whole_bake_refuses_while_a_tile_bake_holds_its_lock(tmp_path, kit, hold, capsys):
    cfg = _udim_project(kit, tmp_path / "p")
    out = tmp_path / "out"
    pid = hold(out, tile_lock_name(1002))
    with pytest.raises(LockError) as exc:
        _quiet_bake(load_config(cfg), out)
    msg = str(exc.value)
    assert ".matgen-bake.1002.lock" in msg and f"process {pid}" in msg and "tile 1002" in msg
    assert sorted(p.name for p in out.iterdir()) == [".matgen-bake.1002.lock"]  # ours released, nothing else
    rc = main(["bake", str(cfg), "--out", str(out), "--quiet"])
    err = capsys.readouterr().err
    assert rc == 75 and err.count("\n") == 1 and ".matgen-bake.1002.lock" in err
    # the dry run reports it too, and so does the assembly (which takes the whole-bake lock)
    assert main(["bake", str(cfg), "--out", str(out), "--dry-run"]) == 75  # busy: retry later
    assert ".matgen-bake.1002.lock" in capsys.readouterr().err
    with pytest.raises(LockError, match=r"\.matgen-bake\.1002\.lock"):
        _quiet_assemble(load_config(cfg), out)


def test_tile_bake_refuses_while_a_whole_bake_holds_its_lock(tmp_path, kit, hold, capsys):
    cfg = _udim_project(kit, tmp_path / "p")
    out = tmp_path / "out"
    pid = hold(out, BAKE_LOCK)
    with pytest.raises(LockError) as exc:
        _quiet_bake(load_config(cfg), out, tile=1001)
    msg = str(exc.value)
    assert f"{out / BAKE_LOCK}" in msg and f"process {pid}" in msg
    assert sorted(p.name for p in out.iterdir()) == [BAKE_LOCK]  # the tile's own lock was released
    assert main(["bake", str(cfg), "--out", str(out), "--tile", "1001", "--dry-run"]) == 75
    assert BAKE_LOCK in capsys.readouterr().err


def test_different_tiles_bake_into_one_folder_at_once(tmp_path, kit, hold):
    cfg = _udim_project(kit, tmp_path / "p")
    out = tmp_path / "out"
    hold(out, tile_lock_name(1002))  # a live bake of another tile
    res = _quiet_bake(load_config(cfg), out, tile=1001)
    assert res.files[-1] == "material.1001.json" and (out / "material.1001.json").is_file()
    # and two real bake processes of two tiles, started together, both succeed
    procs = [
        subprocess.Popen(
            [
                sys.executable,
                "-m",
                "matgen",
                "bake",
                str(cfg),
                "--out",
                str(out),
                "--tile",
                str(t),
                "--quiet",
            ],
            stderr=subprocess.PIPE,
            text=True,
        )
        for t in (1002, 1011)
    ]
    # 1002 is held by the holder above: that bake must refuse, naming the lock; 1011 must succeed
    errs = [p.communicate(timeout=300)[1] for p in procs]
    assert procs[0].returncode == 75 and ".matgen-bake.1002.lock" in errs[0]
    assert procs[1].returncode == 0, errs[1]


def test_two_tile_bake_processes_at_once_both_complete(tmp_path, kit):
    cfg = _udim_project(kit, tmp_path / "p")
    out = tmp_path / "out"
    procs = [
        subprocess.Popen(
            [
                sys.executable,
                "-m",
                "matgen",
                "bake",
                str(cfg),
                "--out",
                str(out),
                "--tile",
                str(t),
                "--quiet",
            ],
            stderr=subprocess.PIPE,
            text=True,
        )
        for t in (1001, 1011)
    ]
    errs = [p.communicate(timeout=300)[1] for p in procs]
    assert [p.returncode for p in procs] == [0, 0], errs
    assert (out / "material.1001.json").is_file() and (out / "material.1011.json").is_file()
    assert not list(out.glob(".matgen-*"))


def test_stale_tile_lock_does_not_block_a_whole_bake(tmp_path, kit):
    cfg = _udim_project(kit, tmp_path / "p")
    out = tmp_path / "out"
    out.mkdir()
    dead = subprocess.Popen([sys.executable, "-c", "pass"])
    dead.wait()
    import socket

    (out / tile_lock_name(1002)).write_text(json.dumps({"host": socket.gethostname(), "pid": dead.pid}))
    res = _quiet_bake(load_config(cfg), out)
    assert (out / "material.json").is_file() and res.texels == 3 * 12 * 10


# --- assembly ----------------------------------------------------------------------------------------------


def test_assembled_tiles_equal_a_whole_bake(tmp_path, kit, capsys):
    """Per-tile bakes of a 3-tile UDIM set + --assemble-tiles give byte-identical material.json,
    material.mtlx and preview scene to a whole bake of the set (no field of them records time)."""
    cfg = _udim_project(kit, tmp_path / "p", scene=True)
    config = load_config(cfg)
    whole = _quiet_bake(config, tmp_path / "whole")
    farm = tmp_path / "farm"
    for t in reversed(TILES):  # tile order on the farm does not matter
        assert main(["bake", str(cfg), "--out", str(farm), "--tile", str(t), "--quiet"]) == 0
    assert not (farm / "material.json").exists() and not (farm / "material.mtlx").exists()
    capsys.readouterr()
    assert main(["bake", str(cfg), "--out", str(farm), "--assemble-tiles", "--dry-run"]) == 0
    assert not (farm / "material.json").exists()
    assert main(["bake", str(cfg), "--out", str(farm), "--assemble-tiles"]) == 0
    text = capsys.readouterr().out
    assert "material.json" in text and "material.mtlx" in text
    for name in ("material.json", "material.mtlx", "scene_mitsuba.xml"):
        assert (farm / name).read_bytes() == (tmp_path / "whole" / name).read_bytes(), name
    doc = json.loads((farm / "material.json").read_text())
    assert doc["udim_tiles"] == TILES and len(doc["textures"]) == len(whole.files) - 3
    assert set(doc["documents"]) == {"materialx", "mitsuba_scene"}
    import jsonschema

    jsonschema.Draft202012Validator(descriptor_schema()).validate(doc)
    assert main(["inspect", str(farm / "material.json")]) == 0
    assert not list(farm.glob(".matgen-*"))


def test_assembly_lists_missing_and_modified_tiles_and_writes_nothing(tmp_path, kit):
    cfg = _udim_project(kit, tmp_path / "p")
    config = load_config(cfg)
    farm = tmp_path / "farm"
    for t in TILES:
        _quiet_bake(config, farm, tile=t)
    (farm / "material.1011.json").unlink()
    target = farm / "rgb" / "albedo_multiple.1002.exr"
    pix, chans, _ = read_exr(target)
    pix[0, 0, 0] += 0.25
    write_exr(target, pix, chans, pixel_type="float")
    (farm / "qa" / "qa.1001.exr").unlink()
    with pytest.raises(DataError) as exc:
        _quiet_assemble(config, farm)
    msg = str(exc.value)
    assert "tile 1011: material.1011.json is missing" in msg
    assert "tile 1002: rgb/albedo_multiple.1002.exr does not match its SHA-256" in msg
    assert "tile 1001: qa/qa.1001.exr is missing" in msg
    assert not (farm / "material.json").exists() and not (farm / "material.mtlx").exists()


def test_assembly_refuses_a_tile_baked_from_another_config_or_table(tmp_path, kit, capsys):
    cfg = _udim_project(kit, tmp_path / "p")
    farm = tmp_path / "farm"
    for t in TILES:
        _quiet_bake(load_config(cfg), farm, tile=t)
    original = cfg.read_text()
    cfg.write_text(original.replace("value = 0.75", "value = 0.8"))  # another oxygen saturation
    _quiet_bake(load_config(cfg), farm, tile=1002)
    cfg.write_text(original)
    rc = main(["bake", str(cfg), "--out", str(farm), "--assemble-tiles"])
    err = capsys.readouterr().err
    assert rc == 2 and err.count("\n") == 1
    assert (
        "tile 1002: material.1002.json does not match this config and table: baked from a different config"
        in err
    )
    assert "tile 1001" not in err and "tile 1011" not in err
    assert not (farm / "material.json").exists()
    # a tile baked with another table is named as such
    other = kit.make_test_table()
    other.quantities["albedo_multiple"] *= 0.5
    other.save(tmp_path / "other.npz")
    assert (
        main(
            [
                "bake",
                str(cfg),
                "--out",
                str(farm),
                "--tile",
                "1002",
                "--quiet",
                "--table",
                str(tmp_path / "other.npz"),
            ]
        )
        == 0
    )
    with pytest.raises(DataError, match=r"tile 1002: .*baked with a different table \(other\.npz\)"):
        _quiet_assemble(load_config(cfg), farm)


def test_assembly_needs_a_udim_set_and_an_existing_folder(tmp_path, kit):
    cfg = kit.make_project(tmp_path / "p", 8, 8)
    with pytest.raises(Exception, match="UDIM set"):
        _quiet_assemble(load_config(cfg), tmp_path / "p")
    cfg2 = _udim_project(kit, tmp_path / "q")
    with pytest.raises(Exception, match="does not exist"):
        _quiet_assemble(load_config(cfg2), tmp_path / "nowhere")
    assert not (tmp_path / "nowhere").exists()


def test_assembled_statistics_add_up_the_tiles(tmp_path, kit):
    cfg = _udim_project(kit, tmp_path / "p")
    _, blood, eu = kit.smooth_maps(12, 10, 1)
    eu[3, 4] = 1.5  # one texel outside the encoding range in tile 1002: clamped and counted
    kit.write_map(tmp_path / "p" / "maps" / "eumelanin.1002.exr", eu)
    config = load_config(cfg)
    whole = _quiet_bake(config, tmp_path / "whole")
    for t in TILES:
        _quiet_bake(config, tmp_path / "farm", tile=t)
    res = _quiet_assemble(config, tmp_path / "farm")
    assert res.encoding_clamped == whole.encoding_clamped == 1
    stats = json.loads((tmp_path / "farm" / "material.json").read_text())["statistics"]
    assert stats["texels"] == 3 * 12 * 10 and stats["encoding_clamped_texels"] == 1
    np.testing.assert_array_equal(
        read_exr(tmp_path / "farm" / "qa" / "qa.1002.exr")[0],
        read_exr(tmp_path / "whole" / "qa" / "qa.1002.exr")[0],
    )
