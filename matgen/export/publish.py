"""Publishing a bake into its output folder: staging, a journalled commit, recovery of a commit cut short.

A bake (or a tile assembly) writes every file into a hidden staging folder inside the output folder, under
the folder's lock, and then publishes them with :func:`commit`:

1. every destination is checked before anything moves: each parent on the way is a folder (or absent), each
   destination is absent or a regular file, and no input of the bake is among them (:func:`check_targets`);
2. a journal ``.matgen-commit.<lock name>.json`` naming the staging folder and the files, in order, is
   written atomically;
3. the descriptor being replaced is removed, and so is any other descriptor in the folder that lists a
   file about to change (a set's ``material.json`` when a tile is baked again): from here on no reader finds
   a descriptor that disagrees with the textures beside it, only none;
4. each staged file is moved into place with ``os.replace``, the descriptor last;
5. the journal is removed.

A commit cut short (killed, power lost, disk full) leaves the journal and its staging folder; the next
process that takes the folder's lock finishes it (:func:`recover_commits`) before anything else, so the
folder ends as the interrupted bake would have left it. While a journal exists the folder holds no
descriptor of that bake, so ``matgen inspect`` refuses instead of checking new textures against an old
descriptor.
"""

from __future__ import annotations

import contextlib
import json
import logging
import os
import shutil
import uuid
from pathlib import Path

from matgen.errors import MatgenError, PathError
from matgen.fsutil import atomic_write_text, live_lock_owner, pid_alive, read_lock_owner, strict_json
from matgen.limits import read_text_limited
from matgen.provenance import sha256_file

#: Prefix of the hidden staging folders inside an output folder.
STAGING_PREFIX = ".matgen-staging-"
#: Prefix of the commit journals (``.matgen-commit.<lock name>.json``).
JOURNAL_PREFIX = ".matgen-commit."

_log = logging.getLogger("matgen.export")


def journal_path(out_dir: Path, lock_name: str) -> Path:
    """Journal of a commit made under lock ``lock_name`` in ``out_dir``."""
    return Path(out_dir) / f"{JOURNAL_PREFIX}{lock_name}.json"


def _journals(out_dir: Path) -> list:
    return sorted(p for p in Path(out_dir).glob(JOURNAL_PREFIX + "*.json") if p.is_file())


def _staging_in_journals(out_dir: Path) -> set:
    names = set()
    for j in _journals(out_dir):
        with contextlib.suppress(MatgenError, ValueError, OSError):
            names.add(json.loads(j.read_text(encoding="utf-8")).get("staging"))
    return names


def remove_stale_staging(out_dir: Path) -> None:
    """Remove staging folders of processes that are gone (kept: those a commit journal still needs)."""
    keep = _staging_in_journals(out_dir)
    for entry in Path(out_dir).glob(STAGING_PREFIX + "*"):
        if entry.name in keep:
            continue
        try:
            pid = int(entry.name[len(STAGING_PREFIX) :].split("-")[0])
        except ValueError:
            continue
        if not pid_alive(pid) or pid == os.getpid():
            shutil.rmtree(entry, ignore_errors=True)


@contextlib.contextmanager
def staging_folder(out_dir: Path):
    """Yield a fresh hidden staging folder in ``out_dir``; removed on the way out unless a commit needs it.

    Call only under the folder's lock, after :func:`recover_commits` and :func:`remove_stale_staging`.
    """
    staging = Path(out_dir) / f"{STAGING_PREFIX}{os.getpid()}-{uuid.uuid4().hex[:8]}"
    try:
        staging.mkdir()
    except OSError as exc:
        raise PathError(f"cannot create a staging folder in {out_dir}: {exc.strerror or exc}") from exc
    try:
        yield staging
    finally:
        if staging.name not in _staging_in_journals(out_dir):
            shutil.rmtree(staging, ignore_errors=True)


def check_targets(out_dir: Path, files: list, inputs=()) -> None:
    """Refuse a publish that would meet a non-file where a file goes, or replace an input of the bake.

    Parameters
    ----------
    out_dir : Path
        The output folder.
    files : list of str
        Relative paths to be published.
    inputs : iterable of path
        Files the bake reads (maps, table, pass responses, config): none may be among the destinations.

    Raises
    ------
    PathError
        Naming the destination and what is in its way.

    """
    out_dir = Path(out_dir)
    base = out_dir.resolve()
    protected = {}
    for p in inputs:
        with contextlib.suppress(OSError, ValueError):
            protected[Path(p).resolve()] = Path(p)
    for rel in files:
        dst = out_dir / rel
        for parent in list(Path(rel).parents)[:-1][::-1]:
            folder = out_dir / parent
            if (folder.exists() or folder.is_symlink()) and not folder.is_dir():
                raise PathError(f"cannot publish {rel} into {out_dir}: {folder} exists and is not a folder")
        if dst.is_symlink() or (dst.exists() and not dst.is_file()):
            kind = "a symbolic link" if dst.is_symlink() else "a folder" if dst.is_dir() else "not a file"
            raise PathError(
                f"cannot publish {rel} into {out_dir}: {dst} is {kind}; move it away or bake elsewhere"
            )
        full = (base / rel).resolve()
        if full in protected:
            raise PathError(
                f"output {rel} would replace input {protected[full]} of this bake; bake into another folder"
            )


def _descriptors_listing(paths: list, changed: dict) -> list:
    """Return the descriptors among ``paths`` that list a file whose content is about to change."""
    hits = []
    for doc_path in sorted(paths):
        try:
            doc = json.loads(read_text_limited(doc_path, "material descriptor"))
            textures = doc.get("textures", []) if isinstance(doc, dict) else []
        except (MatgenError, OSError, ValueError, RecursionError):
            continue
        for t in textures if isinstance(textures, list) else []:
            if isinstance(t, dict) and t.get("path") in changed and t.get("sha256") != changed[t["path"]]:
                hits.append(doc_path)
                break
    return hits


def commit(staging: Path, out_dir: Path, files: list, lock_name: str, inputs=()) -> None:
    """Publish the staged ``files`` (relative paths, descriptor last) into ``out_dir`` (module docstring).

    Raises
    ------
    PathError
        When a destination is in the way (nothing has moved then) or a staged file is missing.

    """
    staging, out_dir = Path(staging), Path(out_dir)
    check_targets(out_dir, files, inputs)
    for rel in files:
        if not (staging / rel).is_file():
            raise PathError(f"staged output {rel} is missing; nothing was committed")
    others = [p for p in out_dir.glob("material*.json") if p.name != files[-1] and p.is_file()]
    stale_docs = []
    if others:  # hash only when another descriptor could list a file that changes
        changed = {rel: sha256_file(staging / rel) for rel in files[:-1] if (out_dir / rel).is_file()}
        changed = {rel: h for rel, h in changed.items() if sha256_file(out_dir / rel) != h}
        stale_docs = _descriptors_listing(others, changed)
    journal = journal_path(out_dir, lock_name)
    record = {"staging": staging.name, "files": list(files), "pid": os.getpid(), "lock": lock_name}
    atomic_write_text(journal, strict_json(record, f"commit journal {journal}", indent=1) + "\n")
    for doc in [out_dir / files[-1], *stale_docs]:
        with contextlib.suppress(FileNotFoundError):
            doc.unlink()
            if doc.name != files[-1]:
                _log.warning(
                    "removed %s: it lists files of %s that this bake replaces; assemble again", doc, out_dir
                )
    _finish(staging, out_dir, files)
    journal.unlink()


def _finish(staging: Path, out_dir: Path, files: list) -> None:
    """Move what is still staged into place, in order; files already moved are skipped."""
    for rel in files:
        src, dst = staging / rel, out_dir / rel
        if not src.is_file():
            continue  # moved before the interruption
        dst.parent.mkdir(parents=True, exist_ok=True)
        os.replace(src, dst)


def recover_commits(out_dir: Path, own_lock: str) -> list:
    """Finish commits that a killed process left half done in ``out_dir``; returns the journals handled.

    Only journals of locks that no live process holds (or of ``own_lock``, held by the caller) are touched,
    so one-tile bakes of other tiles working in the same folder are left alone.
    """
    done = []
    for tmp in Path(out_dir).glob("." + JOURNAL_PREFIX + "*.tmp*"):  # a journal killed before its rename
        # ".<journal stem>.<random>.tmp.json" (matgen.fsutil.atomic_path): the journal stem names the lock
        lock_name = tmp.name[len(JOURNAL_PREFIX) + 1 :].removesuffix(".tmp.json").rsplit(".", 1)[0]
        if lock_name == own_lock or live_lock_owner(Path(out_dir) / lock_name) is None:
            with contextlib.suppress(OSError):
                tmp.unlink()
    for journal in _journals(out_dir):
        lock_name = journal.name[len(JOURNAL_PREFIX) : -len(".json")]
        lock = Path(out_dir) / lock_name
        if lock_name != own_lock and live_lock_owner(lock) is not None:
            continue
        if lock_name == own_lock and read_lock_owner(lock).get("pid") not in (None, os.getpid()):
            continue
        try:
            rec = json.loads(journal.read_text(encoding="utf-8"))
            staging, files = Path(out_dir) / rec["staging"], [str(f) for f in rec["files"]]
        except (OSError, ValueError, KeyError, TypeError, RecursionError):
            _log.warning("removing unreadable commit journal %s", journal)
            journal.unlink()
            continue
        if staging.is_dir():
            _finish(staging, Path(out_dir), files)
            _log.warning("finished the commit of %d file(s) a stopped bake left in %s", len(files), out_dir)
        elif files and not (Path(out_dir) / files[-1]).is_file():
            _log.warning(
                "a stopped bake left %s without its descriptor %s and its staging folder is gone; bake again",
                out_dir,
                files[-1],
            )
        journal.unlink()
        shutil.rmtree(staging, ignore_errors=True)
        done.append(journal)
    return done
