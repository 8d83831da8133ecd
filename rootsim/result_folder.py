"""Result folders committed as a whole: a staged sibling swapped in, a manifest with checksums, stale-file cleanup.

A result folder (``rootsim grow --out DIR``) holds ``segments.parquet``, ``summary.json`` and ``manifest.json``.
It is written into a fresh hidden sibling (``.DIR.rootsim-<pid>-<token>.staging``), the manifest last, and then
swapped in with one atomic exchange of the two directory entries (Linux ``renameat2(RENAME_EXCHANGE)``; two
renames where the file system lacks it). A reader therefore sees the earlier run or the new run, never a mix,
whatever moment the writer is killed.

``manifest.json`` names the run (``run_id``: the first 16 hex digits of the SHA-256 of ``segments.parquet``, so
equal results have equal ids) and the SHA-256 and size of every file of the run. Readers refuse a folder whose
files disagree with it. Files that later commands write into the folder (profiles, traits, samples, exports,
pictures) are recorded under ``derived`` with the run they came from.

Temporary files and folders carry the writing machine's tag and process id; :func:`remove_stale_temporaries`
deletes those of processes of this machine that no longer run (and, for other machines sharing the folder or
id-less names of older versions, those older than a day).
"""

from __future__ import annotations

import contextlib
import ctypes
import errno
import fcntl
import hashlib
import json
import os
import re
import secrets
import shutil
import time
from pathlib import Path
from typing import Callable, Iterable, Iterator, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from .errors import RootsimError, SegmentTableError

__all__ = [
    "MANIFEST_NAME",
    "Manifest",
    "file_sha256",
    "read_manifest",
    "verify_result_folder",
    "check_new_result_folder",
    "write_result_folder",
    "record_derived",
    "check_derived_file",
    "remove_stale_temporaries",
    "temporary_name",
]

MANIFEST_NAME = "manifest.json"
#: Suffixes of files rootsim writes into a result folder; ``grow --overwrite`` may replace a folder holding
#: only these (plus the files its manifest lists), never one holding other files.
OUTPUT_SUFFIXES = (".parquet", ".json", ".csv", ".png", ".svg", ".pdf", ".vtp", ".vti", ".stl", ".ply", ".obj",
                   ".glb", ".rsml", ".toml")
#: Age after which a temporary file without a process id counts as stale, seconds.
ID_LESS_STALE_SECONDS = 24 * 3600

_TEMP_PATTERN = re.compile(r"^\..+\.rootsim-(?:(?P<host>[0-9a-f]{8})-)?(?P<pid>\d+)-[0-9a-f]+\."
                           r"(?:staging|old|part(?:\..*)?)$")
_LEGACY_PART = re.compile(r"^\..+\.[a-z0-9_]{8}\.part(?:\..*)?$")
_CHUNK = 1 << 22


class FileEntry(BaseModel):
    """Checksum and size of one file of the run."""

    model_config = ConfigDict(extra="forbid", strict=True)
    sha256: str = Field(pattern=r"^[0-9a-f]{64}$")
    bytes: int = Field(ge=0)


class DerivedEntry(FileEntry):
    """A file a later command wrote into the folder, and the run it was computed from."""

    run_id: str
    command: str


class Manifest(BaseModel):
    """``manifest.json`` of a result folder (validated with pydantic, like parameter files)."""

    model_config = ConfigDict(extra="forbid", strict=True)
    format: Literal["rootsim-result-folder"] = "rootsim-result-folder"
    format_version: Literal[1] = 1
    run_id: str = Field(pattern=r"^[0-9a-f]{16}$")
    command: str
    rootsim_version: str
    facts: dict = Field(default_factory=dict)
    files: dict[str, FileEntry]
    derived: dict[str, DerivedEntry] = Field(default_factory=dict)


def _host_tag() -> str:
    import socket

    return hashlib.sha256(socket.gethostname().encode("utf-8", "replace")).hexdigest()[:8]


_HOST = _host_tag()


def temporary_name(target_name: str, kind: str) -> str:
    """Hidden temporary name for ``target_name``: ``.NAME.rootsim-HOST-PID-TOKEN.KIND`` (machine tag, process id)."""
    return f".{target_name}.rootsim-{_HOST}-{os.getpid()}-{secrets.token_hex(4)}.{kind}"


def file_sha256(path: str | os.PathLike) -> str:
    """SHA-256 of a file's bytes, hex (read in 4 MiB chunks)."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        while chunk := fh.read(_CHUNK):
            digest.update(chunk)
    return digest.hexdigest()


def _entry(path: Path) -> dict:
    return {"sha256": file_sha256(path), "bytes": path.stat().st_size}


def _process_alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    except OverflowError:
        return False
    return True


def remove_stale_temporaries(folder: str | os.PathLike, *, prefix: str = ".") -> list[Path]:
    """Delete temporary files and folders left in ``folder`` by processes that no longer run.

    Names ``.NAME.rootsim-HOST-PID-TOKEN.{staging,old,part...}`` of this machine are removed when process PID
    is gone; those of other machines, and id-less ``.NAME.XXXXXXXX.part...`` files of older versions, when older
    than :data:`ID_LESS_STALE_SECONDS`.

    Parameters
    ----------
    folder : path-like
    prefix : str, keyword-only
        Only names starting with this are considered (e.g. ``".segments.parquet."``).

    Returns
    -------
    list of Path
        What was removed.
    """
    folder = Path(folder)
    removed = []
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return removed
    now = time.time()
    for entry in entries:
        if not entry.name.startswith(prefix):
            continue
        match = _TEMP_PATTERN.match(entry.name)
        if match and match["host"] in (None, _HOST):
            stale = not _process_alive(int(match["pid"]))
        elif match or _LEGACY_PART.match(entry.name):  # another machine's, or an older version's: by age
            try:
                stale = now - entry.stat(follow_symlinks=False).st_mtime > ID_LESS_STALE_SECONDS
            except OSError:
                stale = False
        else:
            continue
        if not stale:
            continue
        with contextlib.suppress(OSError):
            if entry.is_dir(follow_symlinks=False):
                shutil.rmtree(entry.path)
            else:
                os.unlink(entry.path)
            removed.append(Path(entry.path))
    return removed


# -- reading -------------------------------------------------------------------------------------

def read_manifest(folder: str | os.PathLike) -> Manifest | None:
    """The validated manifest of ``folder``, or None if it has none.

    Raises
    ------
    SegmentTableError
        If ``manifest.json`` is unreadable or does not follow the schema (key path named).
    """
    path = Path(folder) / MANIFEST_NAME
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        return None
    except OSError as exc:
        raise SegmentTableError(f"{path}: cannot read ({exc.strerror or exc})") from None
    try:
        return Manifest.model_validate_json(raw)
    except ValidationError as exc:
        err = exc.errors(include_url=False)[0]
        where = ".".join(str(p) for p in err.get("loc", ())) or "<top level>"
        raise SegmentTableError(f"{path}: {where}: {err.get('msg', 'invalid value')} "
                                "(allowed: a manifest written by rootsim; grow the run again)") from None


def verify_result_folder(folder: str | os.PathLike) -> Manifest | None:
    """Check every file the manifest of ``folder`` lists against its size and SHA-256.

    Returns
    -------
    Manifest or None
        The manifest, or None for a folder without one (written by an older version or by hand).

    Raises
    ------
    SegmentTableError
        A listed file is missing, has another size or another checksum (damaged, or replaced by another run).
    """
    folder = Path(folder)
    manifest = read_manifest(folder)
    if manifest is None:
        return None
    for name, entry in manifest.files.items():
        path = folder / name
        try:
            size = path.stat().st_size
        except OSError:
            raise SegmentTableError(f"{path}: listed in {MANIFEST_NAME} of run {manifest.run_id} but missing "
                                    "(the folder is incomplete; grow the run again)") from None
        if size != entry.bytes or file_sha256(path) != entry.sha256:
            raise SegmentTableError(f"{path}: does not match {MANIFEST_NAME} of run {manifest.run_id} (checksum "
                                    "differs: the file was damaged or replaced; grow the run again)")
    return manifest


# -- writing -------------------------------------------------------------------------------------

def _nearest_existing(path: Path) -> Path:
    probe = path.absolute()
    while not probe.exists() and probe != probe.parent:
        probe = probe.parent
    return probe


def check_new_result_folder(folder: str | os.PathLike, *, overwrite: bool) -> Path:
    """Check, before any work, that a run may be written to ``folder``; create nothing.

    ``folder`` may be missing or empty; a folder holding an earlier run is replaced as a whole only with
    ``overwrite`` and only if it holds nothing but rootsim outputs (files its manifest lists, or with an
    output suffix such as ``.csv`` or ``.png``), so no other file is ever deleted.

    Raises
    ------
    RootsimError
        One line naming the folder and what to do.
    """
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise RootsimError(f"{folder}: exists and is not a folder (allowed: a new or empty folder)")
    ancestor = _nearest_existing(folder if folder.exists() else folder.parent)
    if not ancestor.is_dir() or not os.access(ancestor, os.W_OK | os.X_OK):
        raise RootsimError(f"{folder}: cannot create output folder ({ancestor} is not a writable folder)")
    if folder.exists():
        if not os.access(folder.absolute().parent, os.W_OK | os.X_OK):
            raise RootsimError(f"{folder}: cannot replace it ({folder.absolute().parent} is not writable)")
        remove_stale_temporaries(folder)
        names = sorted(entry.name for entry in os.scandir(folder))
        if names:
            if not overwrite:
                raise RootsimError(f"{folder}: is not empty ({', '.join(names[:4])}"
                                   f"{', ...' if len(names) > 4 else ''}); pass --overwrite to replace an earlier "
                                   "run there and every file derived from it, or choose a new --out folder")
            try:
                manifest = read_manifest(folder)
            except SegmentTableError:
                manifest = None
            known = set(manifest.files) | set(manifest.derived) | {MANIFEST_NAME} if manifest else {MANIFEST_NAME}
            foreign = [n for n in names
                       if n not in known and not (Path(n).suffix.lower() in OUTPUT_SUFFIXES and (folder / n).is_file())]
            if foreign:
                raise RootsimError(f"{folder}: holds files that are not rootsim results ({', '.join(foreign[:4])}"
                                   f"{', ...' if len(foreign) > 4 else ''}); --overwrite replaces the whole folder, "
                                   "so move them or choose a new --out folder")
    return folder


def _fsync(path: Path) -> None:
    with contextlib.suppress(OSError):
        fd = os.open(path, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


_RENAME_EXCHANGE = 2
_AT_FDCWD = -100


def _exchange(first: Path, second: Path) -> bool:
    """Swap two directory entries atomically (Linux ``renameat2``); False if the system cannot."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    renameat2.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    if renameat2(_AT_FDCWD, os.fsencode(first), _AT_FDCWD, os.fsencode(second), _RENAME_EXCHANGE) == 0:
        return True
    code = ctypes.get_errno()
    if code in (errno.EINVAL, errno.ENOSYS, errno.EOPNOTSUPP, errno.EXDEV):
        return False
    raise OSError(code, os.strerror(code), str(second))


def _swap_in(staging: Path, folder: Path) -> None:
    """Make ``staging`` appear as ``folder`` in one step; the earlier ``folder`` (if any) is deleted after."""
    try:
        os.rename(staging, folder)  # also replaces an empty folder atomically
        return
    except OSError as exc:
        if exc.errno not in (errno.ENOTEMPTY, errno.EEXIST):
            raise
    if _exchange(staging, folder):
        shutil.rmtree(staging, ignore_errors=True)  # now holds the earlier run
        return
    old = folder.parent / temporary_name(folder.name, "old")
    os.rename(folder, old)
    os.rename(staging, folder)
    shutil.rmtree(old, ignore_errors=True)


def write_result_folder(folder: str | os.PathLike, write_files: Callable[[Path], dict], *, overwrite: bool,
                        command: str, run_file: str = "segments.parquet") -> Manifest:
    """Write a run into a fresh sibling of ``folder``, add ``manifest.json`` last and swap it in.

    Parameters
    ----------
    folder : path-like
        The result folder (missing, empty, or holding an earlier run when ``overwrite``).
    write_files : callable
        ``write_files(staging_dir) -> facts`` writes the run's files into the staging folder and returns a
        JSON-serialisable dict of facts stored in the manifest (spec name, seed, days, ...).
    overwrite : bool, keyword-only
        Replace an earlier run (and everything derived from it) as a whole.
    command : str, keyword-only
        The command that made the run, e.g. ``"grow"``.
    run_file : str, keyword-only
        The file whose SHA-256 names the run.

    Returns
    -------
    Manifest
    """
    from . import __version__

    folder = check_new_result_folder(folder, overwrite=overwrite)
    if folder.is_symlink():  # replace the folder the link points to, keep the link
        folder = folder.resolve()
    parent = folder.absolute().parent
    try:
        parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise RootsimError(f"{folder}: cannot create output folder ({exc.strerror or exc})") from None
    remove_stale_temporaries(parent)
    staging = parent / temporary_name(folder.name, "staging")
    try:
        staging.mkdir()
        facts = write_files(staging)
        files = {}
        for path in sorted(staging.iterdir()):
            if path.is_file() and not path.name.startswith("."):
                files[path.name] = _entry(path)
                _fsync(path)
        if run_file not in files:
            raise RuntimeError(f"write_files did not write {run_file}")
        manifest = Manifest(run_id=files[run_file]["sha256"][:16], command=command, rootsim_version=__version__,
                            facts=dict(facts or {}), files=files)
        manifest_path = staging / MANIFEST_NAME
        manifest_path.write_text(manifest.model_dump_json(indent=2) + "\n", encoding="utf-8")
        _fsync(manifest_path)
        _fsync(staging)
        _swap_in(staging, folder.absolute())
        _fsync(parent)
    except OSError as exc:
        shutil.rmtree(staging, ignore_errors=True)
        raise RootsimError(f"{folder}: cannot write the run ({exc.strerror or exc})") from None
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    return manifest


# -- derived files -------------------------------------------------------------------------------

@contextlib.contextmanager
def _locked(folder: Path) -> Iterator[None]:
    fd = os.open(folder, os.O_RDONLY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        yield
    finally:
        os.close(fd)


def _result_folder_of(source: str | os.PathLike) -> Path:
    source = Path(source)
    return source.parent if source.suffix == ".parquet" else source


def record_derived(source: str | os.PathLike, paths: Iterable[str | os.PathLike], *, command: str) -> None:
    """Record files written from the run in ``source`` (a result folder or its ``segments.parquet``).

    Only files inside that folder are recorded, with their SHA-256 and the run id, under ``derived`` in its
    manifest; a folder without a manifest is left alone.
    """
    folder = _result_folder_of(source)
    if not (folder / MANIFEST_NAME).is_file():
        return
    try:
        with _locked(folder):
            manifest = read_manifest(folder)
            if manifest is None:
                return
            base = folder.resolve()
            derived = dict(manifest.derived)
            for item in paths:
                path = Path(item)
                if path.resolve().parent != base or path.name in manifest.files or path.name == MANIFEST_NAME:
                    continue
                derived[path.name] = DerivedEntry(run_id=manifest.run_id, command=command, **_entry(path))
            updated = manifest.model_copy(update={"derived": dict(sorted(derived.items()))})
            from .atomic import atomic_write_text

            atomic_write_text(folder / MANIFEST_NAME, updated.model_dump_json(indent=2) + "\n")
    except OSError as exc:
        raise RootsimError(f"{folder / MANIFEST_NAME}: cannot record derived files ({exc.strerror or exc})") from None


def check_derived_file(path: str | os.PathLike) -> None:
    """Refuse a file that its folder's manifest records as derived from another run, or that was changed.

    Files not recorded (hand-made, or in folders without a manifest) pass.

    Raises
    ------
    RootsimError
    """
    path = Path(path)
    manifest = read_manifest(path.parent) if (path.parent / MANIFEST_NAME).is_file() else None
    if manifest is None or path.name not in manifest.derived:
        return
    entry = manifest.derived[path.name]
    if entry.run_id != manifest.run_id:
        raise RootsimError(f"{path}: was computed from run {entry.run_id}, not from the folder's run "
                           f"{manifest.run_id}; compute it again")
    if not path.is_file() or path.stat().st_size != entry.bytes or file_sha256(path) != entry.sha256:
        raise RootsimError(f"{path}: differs from the file '{entry.command}' wrote (checksum in {MANIFEST_NAME}); "
                           "it was damaged or edited: compute it again, or copy it out of the result folder")
