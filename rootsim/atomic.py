"""Atomic output: files and directories appear complete or not at all."""

from __future__ import annotations

import contextlib
import os
import shutil
from pathlib import Path
from typing import Iterator

from .errors import RootsimError

__all__ = ["atomic_path", "atomic_paths", "atomic_write_text", "check_output_location", "ensure_output_dir"]


def check_output_location(target: str | os.PathLike, *, folder: bool = False) -> None:
    """Raise a one-line :class:`RootsimError` now if ``target`` could not be written later; create nothing.

    Lets a command refuse an output path before it spends time computing (and before it commits any other
    output): a part of the path that exists but is a file, a folder given where a file is written (or a file
    where a folder is), or a nearest existing folder that is not writable.

    Parameters
    ----------
    target : path-like
        A file to be written, or (``folder=True``) an output folder.
    folder : bool, keyword-only
        ``target`` is a folder.
    """
    target = Path(target)
    if folder and target.exists() and not target.is_dir():
        raise RootsimError(f"{target}: is a file, not a folder (allowed: a new or existing folder)")
    if not folder and target.is_dir():
        raise RootsimError(f"{target}: is a folder (allowed: a file name)")
    start = target if folder else (target.parent if str(target.parent) else Path("."))
    for part in (start, *start.parents):
        if part.exists():
            if not part.is_dir():
                raise RootsimError(f"{part}: is a file, not a folder, so cannot write {target} "
                                   "(allowed: a path through folders)")
            if not os.access(part, os.W_OK | os.X_OK):
                raise RootsimError(f"{part}: folder is not writable, so cannot write {target}")
            return


def ensure_output_dir(path: str | os.PathLike) -> Path:
    """Create ``path`` (and parents) or raise a one-line :class:`RootsimError`."""
    out = Path(path)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        try:
            check_output_location(out, folder=True)
        except RootsimError as why:  # names the part of the path that is a file, if any
            raise RootsimError(f"{out}: cannot create output directory ({why.cli_message()})") from None
        raise RootsimError(f"{out}: cannot create output directory ({exc.strerror or exc})") from None
    if not os.access(out, os.W_OK):
        raise RootsimError(f"{out}: output directory is not writable")
    return out


@contextlib.contextmanager
def atomic_path(target: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary path next to ``target``; on success rename it over ``target``.

    If the body raises, the temporary file is removed and ``target`` is left untouched. The temporary name
    (``.NAME.rootsim-PID-TOKEN.part.SUFFIX``) carries this process's id, so temporaries of the same target
    left by a killed process are removed here (see :func:`rootsim.result_folder.remove_stale_temporaries`).
    """
    from .result_folder import remove_stale_temporaries, temporary_name

    target = Path(target)
    parent = target.parent if str(target.parent) else Path(".")
    try:
        parent.mkdir(parents=True, exist_ok=True)
        remove_stale_temporaries(parent, prefix=f".{target.name}.")
        tmp_path = parent / temporary_name(target.name, "part" + target.suffix)
        fd = os.open(tmp_path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)  # usual permissions (umask applies)
    except OSError as exc:
        check_output_location(target)  # names the part of the path that is a file, if any
        raise RootsimError(f"{target}: cannot write ({exc.strerror or exc})") from None
    os.close(fd)
    try:
        yield tmp_path
        try:
            os.replace(tmp_path, target)
        except OSError as exc:
            raise RootsimError(f"{target}: cannot write ({exc.strerror or exc})") from None
    except BaseException:
        with contextlib.suppress(OSError):
            if tmp_path.is_dir():
                shutil.rmtree(tmp_path)
            else:
                tmp_path.unlink()
        raise


def atomic_write_text(target: str | os.PathLike, text: str) -> None:
    """Write ``text`` to ``target`` atomically (UTF-8)."""
    with atomic_path(target) as tmp:
        tmp.write_text(text, encoding="utf-8")


@contextlib.contextmanager
def atomic_paths(targets) -> Iterator[list[Path]]:
    """All-or-nothing output of several files: yield one temporary path per target, rename them all at the end.

    If the body raises, every temporary file is removed and no target is touched. Before the first rename
    every target is checked (not a folder, its folder writable), so a set of outputs (the files of one
    ``export`` or ``plot`` command) appears as a whole or not at all.

    Parameters
    ----------
    targets : iterable of path-like
        Final file names (distinct).

    Raises
    ------
    RootsimError
        A target cannot be written; no target was changed.
    """
    from .result_folder import temporary_name

    targets = [Path(t) for t in targets]
    temps: list[Path] = []
    try:
        for target in targets:
            parent = target.parent if str(target.parent) else Path(".")
            try:
                parent.mkdir(parents=True, exist_ok=True)
                tmp = parent / temporary_name(target.name, "part" + target.suffix)
                os.close(os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666))
            except OSError as exc:
                raise RootsimError(f"{target}: cannot write ({exc.strerror or exc})") from None
            temps.append(tmp)
        yield temps
        for target in targets:
            if target.is_dir():
                raise RootsimError(f"{target}: is a folder, expected a file name; nothing was written")
        for tmp, target in zip(temps, targets):
            os.replace(tmp, target)
    except OSError as exc:
        raise RootsimError(f"cannot write the output files ({exc.strerror or exc})") from None
    finally:
        for tmp in temps:
            with contextlib.suppress(OSError):
                if tmp.is_dir():
                    shutil.rmtree(tmp)
                elif tmp.exists():
                    tmp.unlink()
