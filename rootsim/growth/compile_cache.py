"""Where numba keeps the compiled growth step between processes.

Every compiled function of :mod:`rootsim.growth` is declared with ``cache=True``: the first process
compiles it (tens of seconds) and later processes load it from disk (well under a second). numba writes
the cache into ``__pycache__`` beside the source files; where the installed package is read-only it falls
back to the user's cache folder (``$XDG_CACHE_HOME/numba`` or ``~/.cache/numba``), and ``NUMBA_CACHE_DIR``
overrides both. If none of these can be written (a locked-down account), numba would refuse to declare a
cached function at all; :func:`ensure_writable_cache` then points numba at a folder of the system's
temporary directory instead, so rootsim still imports and runs (each such session may compile afresh).
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

__all__ = ["ensure_writable_cache", "cache_folder"]


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
