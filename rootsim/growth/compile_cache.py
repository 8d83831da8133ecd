"""Where numba keeps the compiled growth step between processes.

Every compiled function of :mod:`rootsim.growth` is declared with ``cache=True``: the first process
compiles it (tens of seconds) and later processes load it from disk (well under a second). numba writes
the cache into ``__pycache__`` beside the source files; where the installed package is read-only it falls
back to the user's cache folder (``$XDG_CACHE_HOME/numba`` or ``~/.cache/numba``), and ``NUMBA_CACHE_DIR``
overrides both. If none of these can be written (a locked-down account), numba would refuse to declare a
cached function at all; :func:`ensure_writable_cache` then points numba at a folder of the system's
temporary directory instead, so rootsim still imports and runs (each such session may compile afresh).

numba checks a cached function against its own source file only, so a compiled growth step would outlive a
change of a kernel it calls from another file (``rootsim/soil/fields.py``, ``growth/soil.py``, ...), e.g. after
an upgrade. :func:`drop_stale_compiled_code` therefore keeps a SHA-256 of the package's source files that use numba beside
the cache and deletes the package's cached machine code when it no longer matches.
"""

from __future__ import annotations

import hashlib
import os
import tempfile
from pathlib import Path

__all__ = ["ensure_writable_cache", "cache_folder", "drop_stale_compiled_code"]


def _writable(folder: Path) -> bool:
    try:
        folder.mkdir(parents=True, exist_ok=True)
        with tempfile.TemporaryFile(dir=folder):
            pass
        return True
    except OSError:
        return False


def _user_cache_folder() -> Path:
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "numba"


def cache_folder() -> Path:
    """The folder numba will use for the growth step's cache (the first writable of its choices)."""
    from numba.core import config

    if config.CACHE_DIR:
        return Path(config.CACHE_DIR)
    package = Path(__file__).resolve().parent / "__pycache__"
    if _writable(package):
        return package
    return _user_cache_folder()


def ensure_writable_cache() -> Path:
    """Make sure numba has a writable cache folder for :mod:`rootsim.growth`; return the folder used."""
    from numba.core import config

    folder = cache_folder()
    if config.CACHE_DIR or _writable(folder):
        return folder
    fallback = Path(tempfile.gettempdir()) / f"rootsim-numba-cache-{os.getuid() if hasattr(os, 'getuid') else 0}"
    fallback.mkdir(parents=True, exist_ok=True)
    config.CACHE_DIR = str(fallback)
    return fallback


def _package_root() -> Path:
    """The package folder as numba sees its files (``os.path.abspath``, symbolic links kept)."""
    return Path(os.path.abspath(__file__)).parents[1]


def _sources_digest(package: Path) -> str:
    """SHA-256 of the package's compiled sources: every file that uses numba (the others cannot change
    machine code, and editing them should not cost a recompilation)."""
    digest = hashlib.sha256()
    for path in sorted(package.rglob("*.py")):
        text = path.read_bytes()
        if b"numba" in text:
            digest.update(str(path.relative_to(package)).encode())
            digest.update(text)
    return digest.hexdigest()


def _cached_files(package: Path, folder: Path) -> list[Path]:
    """numba's index and data files of this package in the cache ``folder`` numba uses: the ``__pycache__``
    folders beside the sources, or one subfolder per source folder of a cache folder (named as numba names it,
    ``numba.core.caching._CacheLocator.get_suitable_cache_subpath``)."""
    from numba.core.caching import _CacheLocator

    patterns = ("*.nbi", "*.nbc")
    if folder.resolve() == (package / "growth" / "__pycache__").resolve():
        return [p for pattern in patterns for p in package.rglob(f"__pycache__/{pattern}")]
    files = []
    for source_folder in {p.parent for p in package.rglob("*.py")}:
        sub = folder / _CacheLocator.get_suitable_cache_subpath(str(source_folder / "__init__.py"))
        if sub.is_dir():
            files += [p for pattern in patterns for p in sub.glob(pattern)]
    return files


def drop_stale_compiled_code() -> bool:
    """Delete the package's cached machine code when any source file of the package changed since it was
    compiled (a stamp file in the cache folder holds the sources' SHA-256); return whether it did.

    Best effort: a folder that cannot be written is left as it is (numba then compiles in memory as usual).
    """
    package = _package_root()
    folder = cache_folder()
    stamp = folder / f"rootsim-sources-{hashlib.sha256(str(package).encode()).hexdigest()[:12]}.sha256"
    digest = _sources_digest(package)
    try:
        if stamp.is_file() and stamp.read_text(encoding="ascii").strip() == digest:
            return False
        for path in _cached_files(package, folder):
            try:
                path.unlink()
            except OSError:
                pass
        folder.mkdir(parents=True, exist_ok=True)
        temporary = stamp.with_suffix(f".{os.getpid()}.tmp")
        temporary.write_text(digest + "\n", encoding="ascii")
        os.replace(temporary, stamp)
    except OSError:
        return False
    return True
