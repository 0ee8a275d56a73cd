"""Atomic writes, folder locks (with stale-lock detection) and path confinement."""

import os
import subprocess
import sys

import pytest

from matgen.errors import LockError, PathError
from matgen.fsutil import FolderLock, StaleLockWarning, atomic_path, atomic_write_text, resolve_inside


def test_atomic_write_replaces_and_leaves_no_temporary(tmp_path):
    target = tmp_path / "out.json"
    atomic_write_text(target, "one")
    atomic_write_text(target, "two")
    assert target.read_text() == "two"
    assert [p.name for p in tmp_path.iterdir()] == ["out.json"]


def test_atomic_path_failure_keeps_old_file(tmp_path):
    target = tmp_path / "out.txt"
    target.write_text("old")
    with pytest.raises(RuntimeError):
        with atomic_path(target) as tmp:
            tmp.write_text("partial")
            raise RuntimeError("boom")
    assert target.read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["out.txt"]


def test_second_lock_refused_with_name(tmp_path):
    with FolderLock(tmp_path):
        with pytest.raises(LockError, match=r"\.matgen\.lock"):
            FolderLock(tmp_path).acquire()
    with FolderLock(tmp_path):  # released: can be taken again
        pass


def test_stale_lock_of_dead_process_is_taken(tmp_path):
    proc = subprocess.run(
        [sys.executable, "-c", "import os, sys; print(os.getpid())"],
        capture_output=True,
        text=True,
        check=True,
    )
    dead_pid = int(proc.stdout)
    import json
    import socket

    (tmp_path / ".matgen.lock").write_text(json.dumps({"host": socket.gethostname(), "pid": dead_pid}))
    with pytest.warns(StaleLockWarning):
        with FolderLock(tmp_path):
            assert json.loads((tmp_path / ".matgen.lock").read_text())["pid"] == os.getpid()


def test_resolve_inside_refuses_escape(tmp_path):
    (tmp_path / "inner").mkdir()
    assert resolve_inside(tmp_path, "inner/a.exr", "map") == (tmp_path / "inner" / "a.exr").resolve()
    with pytest.raises(PathError, match="outside"):
        resolve_inside(tmp_path / "inner", "../a.exr", "map")
    with pytest.raises(PathError, match="absolute"):
        resolve_inside(tmp_path, "/etc/passwd", "map")
    os.symlink("/tmp", tmp_path / "link")
    with pytest.raises(PathError, match="outside"):
        resolve_inside(tmp_path, "link/x", "map")
    assert (
        resolve_inside(tmp_path / "inner", "../a.exr", "map", allow_outside=True)
        == (tmp_path / "a.exr").resolve()
    )


def test_atomic_write_gives_ordinary_permissions(tmp_path):
    """mkstemp's 0600 must not leak into outputs that other users (farm nodes) read."""
    target = tmp_path / "out.bin"
    atomic_write_text(target, "x")
    mask = os.umask(0)
    os.umask(mask)
    assert (target.stat().st_mode & 0o777) == (0o666 & ~mask)
