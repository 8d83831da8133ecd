"""Names that become file or folder names: one place that makes them safe or refuses them.

Every user-controlled name that reaches a path (a variant's ``name``, a study factor level, a run id) goes
through :func:`safe_path_component`, so no name can climb out of an output folder (``..``, ``/``, an absolute
path), carry control characters, or exceed the file system's name length.
"""

from __future__ import annotations

import re
import unicodedata

from .errors import RootsimError

__all__ = ["MAX_NAME_BYTES", "safe_path_component"]

#: Longest name (UTF-8 bytes) used as one path component; common file systems allow 255.
MAX_NAME_BYTES = 120

_ALLOWED = re.compile(r"[^A-Za-z0-9._+-]+")


def safe_path_component(name: object, *, what: str = "name") -> str:
    """Return ``name`` as a single safe path component, or raise a one-line :class:`RootsimError`.

    Letters, digits, ``. _ + -`` are kept; every other run of characters (spaces, slashes, backslashes,
    colons, non-ASCII letters after NFKD folding) becomes one ``_``. Leading dots and underscores are dropped
    (``../../x`` becomes ``x``) so the result is never ``.``, ``..`` or a hidden file.

    Parameters
    ----------
    name : object
        The user's name (converted with ``str``).
    what : str, keyword-only
        What the name is, for the error message (e.g. ``"params/a.toml: name"``).

    Raises
    ------
    RootsimError
        If the name contains NUL or other control characters, is empty after cleaning, or is longer than
        :data:`MAX_NAME_BYTES` bytes.
    """
    text = str(name)
    if any(unicodedata.category(ch) == "Cc" for ch in text):
        raise RootsimError(f"{what}: contains control characters (allowed: printable letters, digits, . _ + -)")
    if len(text.encode("utf-8", "surrogatepass")) > MAX_NAME_BYTES:
        raise RootsimError(f"{what}: is {len(text)} characters long (allowed: at most {MAX_NAME_BYTES} bytes)")
    folded = unicodedata.normalize("NFKD", text).encode("ascii", "ignore").decode("ascii")
    cleaned = re.sub(r"^[._]+", "", _ALLOWED.sub("_", folded)).rstrip("_")  # never hidden, never . or ..
    if not cleaned:
        raise RootsimError(f"{what}: {text!r} gives no usable file name (allowed: letters, digits, . _ + -)")
    return cleaned
