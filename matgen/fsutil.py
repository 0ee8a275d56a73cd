"""File-system safety shared by every stage that writes: atomic writes and folder locks.

Every output file is written to a temporary file in the same folder and moved into place with
``os.replace``, so a reader (or a crash) never sees a partial file. A folder that one process writes into
(a table job folder, a bake output folder) is guarded by a lock file written whole (a temporary file
hard-linked into place, which fails when the lock exists) that records the owner's host, PID, start time
and a heartbeat refreshed while the work runs; a lock whose process no longer exists on this host, or whose
heartbeat is older than the lease (``MATGEN_LOCK_LEASE_S``, default 300 s) on any host, is stale and is
taken over with a warning.
"""

from __future__ import annotations

import contextlib
import errno
import json
import math
import os
import socket
import tempfile
import threading
import time
import uuid
import warnings
from pathlib import Path

from matgen.errors import ConfigError, DataError, LockError, MatgenError, MatgenWarning, PathError
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


def strict_json(obj, what: str, **kwargs) -> str:
    """Return ``json.dumps(obj, allow_nan=False, **kwargs)``; NaN or infinity raises :class:`DataError`.

    Strict JSON has no NaN or Infinity token; Python's default writes them and strict parsers then refuse the
    whole file. Every JSON document matgen writes goes through this (or passes ``allow_nan=False`` itself).
    """
    try:
        return json.dumps(obj, allow_nan=False, **kwargs)
    except ValueError as exc:
        raise DataError(
            f"{what} holds a non-finite number (NaN or infinity); nothing was written ({exc})"
        ) from None


#: Environment variable of the lock lease, seconds (:func:`lock_lease_s`).
LEASE_ENV = "MATGEN_LOCK_LEASE_S"
#: Default lock lease, s: a lock whose heartbeat is older is taken over from any host. Holders refresh the
#: heartbeat every lease / 4, so a live holder is never older than that unless it is frozen for a lease.
DEFAULT_LEASE_S = 300.0


def lock_lease_s() -> float:
    """Return the lock lease in seconds: ``MATGEN_LOCK_LEASE_S`` when set (1 .. 1e7), else 300 s."""
    raw = os.environ.get(LEASE_ENV, "").strip()
    if not raw:
        return DEFAULT_LEASE_S
    try:
        v = float(raw)
    except ValueError:
        v = float("nan")
    if not (math.isfinite(v) and 1.0 <= v <= 1e7):
        raise ConfigError(f"environment variable {LEASE_ENV}={raw!r}: give a lease in seconds, 1 .. 1e7")
    return v


def pid_alive(pid: int) -> bool:
    """Whether process ``pid`` exists on this host (signal 0; a process of another user counts as alive)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    except (OverflowError, ValueError):
        return False
    return True


def read_lock_owner(path) -> dict:
    """Return the owner record of lock file ``path``, or ``{}`` when it cannot be read or is not one.

    The file is read through the size-limited text reader; a record that is not a JSON object with a host
    name and a plausible PID (a whole number in 1 .. 2^31 - 1) is unknown, and an unknown owner is never
    taken for a dead one (but its file age still counts against the lease: :func:`lock_is_stale`).
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


def _heartbeat_age_s(owner: dict, path=None) -> float | None:
    """Seconds since the owner's last heartbeat (the lock file's modification time when it has none)."""
    beat = owner.get("heartbeat", owner.get("since"))
    if isinstance(beat, (int, float)) and not isinstance(beat, bool) and math.isfinite(beat):
        return time.time() - float(beat)
    if path is not None:
        try:
            return time.time() - Path(path).stat().st_mtime
        except OSError:
            return None
    return None


def lock_is_stale(owner: dict, path=None, lease_s: float | None = None) -> bool:
    """Whether a lock may be taken over.

    Stale when its owner is a process gone from this host, or when its heartbeat (for an unreadable record:
    the file's modification time, if ``path`` is given) is older than the lease (:func:`lock_lease_s`),
    whatever host wrote it. A holder refreshes its heartbeat every lease / 4 while it works.
    """
    pid = owner.get("pid")
    if owner.get("host") == socket.gethostname() and isinstance(pid, int) and not pid_alive(pid):
        return True
    lease = lock_lease_s() if lease_s is None else lease_s
    age = _heartbeat_age_s(owner, path if not owner else None)
    if age is None and owner and path is not None:
        age = _heartbeat_age_s({}, path)
    return age is not None and age > lease


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
    return None if lock_is_stale(owner, path) else owner


def _write_new_file(path: Path, data: bytes) -> bool:
    """Create ``path`` holding ``data`` whole, or not at all; False when ``path`` already exists.

    The record goes to a temporary file first (fsynced), which is then hard-linked to ``path``: ``link``
    fails if ``path`` exists, like ``O_EXCL``, but the lock never exists half written, so a full disk
    leaves no empty lock behind.
    """
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".new", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        try:
            os.link(tmp, path)
        except FileExistsError:
            return False
        except OSError as exc:
            if exc.errno not in (errno.EPERM, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EXDEV):
                raise
            # a file system without hard links: O_EXCL with the whole record written, removed if short
            try:
                fd2 = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
            except FileExistsError:
                return False
            try:
                if os.write(fd2, data) != len(data):
                    raise OSError(errno.ENOSPC, "short write")
                os.fsync(fd2)
            except BaseException:
                os.close(fd2)
                with contextlib.suppress(OSError):
                    path.unlink()
                raise
            os.close(fd2)
        return True
    finally:
        with contextlib.suppress(OSError):
            os.unlink(tmp)


class FolderLock:
    """An exclusive lock on a folder, held by a lock file ``<folder>/<name>``.

    Use as a context manager. The lock file is written whole (:func:`_write_new_file`) and records host,
    PID, start time, purpose and a heartbeat that a daemon thread refreshes every lease / 4 while the lock
    is held. A second process gets :class:`LockError` naming the lock file and its owner (or waits up to
    ``wait_s`` seconds). A stale lock (:func:`lock_is_stale`: owner gone from this host, or heartbeat older
    than the lease from any host) is taken over with a :class:`StaleLockWarning`.
    """

    def __init__(
        self,
        folder,
        name: str = ".matgen.lock",
        wait_s: float = 0.0,
        purpose: str = "write",
        lease_s: float | None = None,
    ):
        self.folder = Path(folder)
        self.path = self.folder / name
        self.wait_s = float(wait_s)
        self.purpose = purpose
        self.lease_s = lock_lease_s() if lease_s is None else float(lease_s)
        self._held = False
        self._record: dict = {}
        self._stop = threading.Event()
        self._beat: threading.Thread | None = None

    def _owner(self) -> dict:
        """Return the lock file's owner record (:func:`read_lock_owner`)."""
        return read_lock_owner(self.path)

    def _take_over(self, owner: dict) -> None:
        """Remove a stale lock, unless another process replaced it with a fresh one meanwhile."""
        aside = self.path.with_name(f"{self.path.name}.stale-{uuid.uuid4().hex[:8]}")
        try:
            os.rename(self.path, aside)
        except FileNotFoundError:
            return
        if read_lock_owner(aside) != owner:  # a fresh lock was moved aside: put it back if still free
            with contextlib.suppress(OSError):
                os.link(aside, self.path)
        with contextlib.suppress(OSError):
            os.unlink(aside)
        who = f"process {owner.get('pid', '?')} on {owner.get('host', '?')}" if owner else "an unknown owner"
        warnings.warn(f"removing stale lock {self.path} left by {who}", StaleLockWarning, stacklevel=3)

    def acquire(self) -> None:
        """Take the lock or raise :class:`LockError` (:class:`PathError` when it cannot be written)."""
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise PathError(f"cannot create folder {self.folder}: {exc.strerror or exc}") from exc
        deadline = time.monotonic() + self.wait_s
        now = time.time()
        self._record = {
            "host": socket.gethostname(),
            "pid": os.getpid(),
            "since": now,
            "heartbeat": now,
            "lease_s": self.lease_s,
            "purpose": self.purpose,
        }
        while True:
            try:
                created = _write_new_file(self.path, json.dumps(self._record).encode("utf-8"))
            except OSError as exc:
                raise PathError(f"cannot create lock file {self.path}: {exc.strerror or exc}") from exc
            if created:
                self._held = True
                self._start_heartbeat()
                return
            owner = self._owner()
            if not owner and not self.path.exists():
                continue  # released while it was read
            if lock_is_stale(owner, self.path, self.lease_s):
                self._take_over(owner)
                continue
            if time.monotonic() < deadline:
                time.sleep(0.1)
                continue
            pid = owner.get("pid")
            who = f"process {pid} on {owner.get('host', '?')}" if owner else "another process"
            raise LockError(
                f"{self.folder} is locked by {who} (lock file {self.path}); wait for it to finish, or "
                f"remove the lock file if that process is gone (it is taken over after a lease of "
                f"{self.lease_s:g} s without heartbeat, {LEASE_ENV})"
            ) from None

    def _start_heartbeat(self) -> None:
        self._stop.clear()
        self._beat = threading.Thread(target=self._heartbeat_loop, name="matgen-lock-heartbeat", daemon=True)
        self._beat.start()

    def _heartbeat_loop(self) -> None:
        while not self._stop.wait(max(self.lease_s / 4.0, 0.05)):
            self.refresh()

    def refresh(self) -> None:
        """Write a fresh heartbeat into the lock file (whole, by rename); skipped if the lock was lost."""
        if not self._held or read_lock_owner(self.path).get("since") != self._record.get("since"):
            return
        self._record["heartbeat"] = time.time()
        with contextlib.suppress(OSError, MatgenError):
            atomic_write_bytes(self.path, json.dumps(self._record).encode("utf-8"))

    def release(self) -> None:
        """Release the lock if held (stops the heartbeat; leaves a lock that another process took over)."""
        if self._held:
            self._stop.set()
            if self._beat is not None and self._beat is not threading.current_thread():
                self._beat.join(timeout=5.0)
            owner = read_lock_owner(self.path)
            if not owner or (owner.get("pid"), owner.get("since")) == (os.getpid(), self._record["since"]):
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
