"""File-system safety shared by every stage that writes: atomic writes and folder locks.

Every output file is written to a temporary file in the same folder and moved into place with
``os.replace``, so a reader (or a crash) never sees a partial file. A folder that one process writes into
(a table job folder, a bake output folder) is guarded by a lock file created with ``O_CREAT | O_EXCL``
that records the owner's host and PID; a lock whose process no longer exists on this host is stale and is
taken over with a warning.
"""

from __future__ import annotations

import contextlib
import json
import os
import socket
import tempfile
import time
import warnings
from pathlib import Path

from matgen.errors import LockError, MatgenError, MatgenWarning, PathError
from matgen.limits import read_text_limited


class StaleLockWarning(MatgenWarning):
    """A lock left by a process that no longer runs was removed."""


@contextlib.contextmanager
def atomic_path(path, suffix: str | None = None):
    """Yield a temporary path beside ``path``: on success it replaces ``path`` atomically, on error it goes.

    Parameters
    ----------
    path : str or Path
        Final destination.
    suffix : str, optional
        Suffix of the temporary file (writers such as OpenImageIO choose the format from it); defaults to
        the destination's suffix.

    """
    path = Path(path)
    folder = path.parent
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise PathError(f"cannot create output folder {folder}: {exc.strerror or exc}") from exc
    suffix = path.suffix if suffix is None else suffix
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=".tmp" + suffix, dir=folder)
    except OSError as exc:
        raise PathError(f"cannot write into {folder}: {exc.strerror or exc}") from exc
    os.close(fd)
    tmp = Path(tmp)
    try:
        yield tmp
        # mkstemp creates 0600; give the file the permissions an ordinary open() would (0666 less the umask),
        # so farm nodes running as other users can read what was written.
        with contextlib.suppress(OSError):
            os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def atomic_write_bytes(path, data: bytes) -> None:
    """Write ``data`` to ``path`` atomically (temporary file + fsync + rename)."""
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())


def atomic_write_text(path, text: str) -> None:
    """Write UTF-8 ``text`` to ``path`` atomically."""
    atomic_write_bytes(path, text.encode("utf-8"))


def pid_alive(pid: int) -> bool:
    """Whether process ``pid`` exists on this host (signal 0; a process of another user counts as alive)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def read_lock_owner(path) -> dict:
    """Return the owner record of lock file ``path``, or ``{}`` when it cannot be read or is not one.

    The file is read through the size-limited text reader; a record that is not a JSON object with a host
    name and a plausible PID (a whole number in 1 .. 2^31 - 1) is unknown, and an unknown owner is never
    taken for a dead one.
    """
    try:
        doc = json.loads(read_text_limited(path, "lock file"))
    except (MatgenError, ValueError, RecursionError):
        return {}
    if not isinstance(doc, dict) or not isinstance(doc.get("host"), str):
        return {}
    pid = doc.get("pid")
    if not (isinstance(pid, int) and not isinstance(pid, bool) and 0 < pid < 2**31):
        return {}
    return doc


def lock_is_stale(owner: dict) -> bool:
    """Whether an owner record names a process that is gone from this host (an unknown owner never is)."""
    pid = owner.get("pid")
    return owner.get("host") == socket.gethostname() and isinstance(pid, int) and not pid_alive(pid)


def live_lock_owner(path) -> dict | None:
    """Owner record of lock file ``path`` while a live (or unverifiable) process holds it; else None.

    None when there is no lock file, when it vanished while being read, or when it is stale.
    """
    path = Path(path)
    if not path.is_file():
        return None
    owner = read_lock_owner(path)
    if not owner and not path.exists():
        return None  # released while it was read
    return None if lock_is_stale(owner) else owner


class FolderLock:
    """An exclusive lock on a folder, held by a lock file ``<folder>/<name>``.

    Use as a context manager. A second process gets :class:`LockError` naming the lock file and its owner
    (or waits up to ``wait_s`` seconds). A lock whose owner PID is gone on this host is stale: it is removed
    with a :class:`StaleLockWarning` and taken.
    """

    def __init__(self, folder, name: str = ".matgen.lock", wait_s: float = 0.0, purpose: str = "write"):
        self.folder = Path(folder)
        self.path = self.folder / name
        self.wait_s = float(wait_s)
        self.purpose = purpose
        self._held = False

    def _owner(self) -> dict:
        """Return the lock file's owner record (:func:`read_lock_owner`)."""
        return read_lock_owner(self.path)

    def acquire(self) -> None:
        """Take the lock or raise :class:`LockError`."""
        self.folder.mkdir(parents=True, exist_ok=True)
        deadline = time.monotonic() + self.wait_s
        record = json.dumps(
            {"host": socket.gethostname(), "pid": os.getpid(), "since": time.time(), "purpose": self.purpose}
        )
        while True:
            try:
                fd = os.open(self.path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
            except FileExistsError:
                owner = self._owner()
                pid = owner.get("pid")
                if lock_is_stale(owner):
                    warnings.warn(
                        f"removing stale lock {self.path} left by process {pid}",
                        StaleLockWarning,
                        stacklevel=2,
                    )
                    with contextlib.suppress(FileNotFoundError):
                        self.path.unlink()
                    continue
                if time.monotonic() < deadline:
                    time.sleep(0.1)
                    continue
                who = f"process {pid} on {owner.get('host', '?')}" if owner else "another process"
                raise LockError(
                    f"{self.folder} is locked by {who} (lock file {self.path}); wait for it to finish, "
                    "or remove the lock file if that process is gone"
                ) from None
            except OSError as exc:
                raise PathError(f"cannot create lock file {self.path}: {exc.strerror or exc}") from exc
            with os.fdopen(fd, "w") as fh:
                fh.write(record)
            self._held = True
            return

    def release(self) -> None:
        """Release the lock if held."""
        if self._held:
            with contextlib.suppress(FileNotFoundError):
                self.path.unlink()
            self._held = False

    def __enter__(self):
        self.acquire()
        return self

    def __exit__(self, *exc):
        self.release()
        return False


def resolve_inside(base, relative, what: str, allow_outside: bool = False) -> Path:
    """Resolve ``relative`` against folder ``base`` and refuse a result outside it.

    Absolute paths, ``..`` components and symbolic links that lead out of ``base`` raise
    :class:`PathError` naming ``what`` and the path, unless ``allow_outside`` is true.
    """
    if "\x00" in str(relative):
        raise PathError(f"{what} {str(relative)!r} contains a NUL byte; give a plain relative path")
    base_resolved = Path(base).resolve()
    candidate = Path(relative)
    full = (candidate if candidate.is_absolute() else base_resolved / candidate).resolve()
    if not allow_outside:
        if candidate.is_absolute():
            raise PathError(
                f"{what} '{relative}' is an absolute path; give a path relative to {base_resolved} "
                "(or allow paths outside explicitly)"
            )
        try:
            full.relative_to(base_resolved)
        except ValueError:
            raise PathError(
                f"{what} '{relative}' leads outside {base_resolved} (through '..' or a symbolic "
                "link); keep it inside, or allow paths outside explicitly"
            ) from None
    return full
