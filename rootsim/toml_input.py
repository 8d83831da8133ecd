"""Reading TOML text with bounded cost: size, nesting, dotted-key length and number length are limited first.

The standard library's parser recurses once per nesting level (1,000 levels raise ``RecursionError``), converts
integers of any length (100,000 digits raise ``ValueError``) and takes time quadratic in the parts of a dotted
key (100,000 parts take minutes). A linear scan of the text with strings and comments removed bounds all three
before the parser runs, so every parameter file costs at most milliseconds to reject.
"""

from __future__ import annotations

import re
import tomllib

import numpy as np

from .errors import SpecError
from .limits import MAX_TOML_BYTES, MAX_TOML_KEY_PARTS, MAX_TOML_NESTING, MAX_TOML_NUMBER_DIGITS

__all__ = ["parse_toml_text"]

# Strings (multi-line first) and comments, removed before counting brackets, dots and digits.
_STRINGS_AND_COMMENTS = re.compile(r'"""[\s\S]*?"""|\'\'\'[\s\S]*?\'\'\'|"(?:[^"\\\n]|\\.)*"|\'[^\'\n]*\'|#[^\n]*')
_LONG_NUMBER = re.compile(r"[0-9_]{%d,}" % (MAX_TOML_NUMBER_DIGITS + 1))
# A dot that is not the decimal point of a number: a separator of key parts.
_KEY_DOT = re.compile(r"(?<![0-9])\.|\.(?![0-9])")


def _line_of(text: str, position: int) -> int:
    return text.count("\n", 0, position) + 1


def parse_toml_text(text: str, *, source: str) -> dict:
    """Parse TOML text into a dict after bounding its size, nesting, key parts and number lengths.

    Parameters
    ----------
    text : str
        The document.
    source : str, keyword-only
        File name for messages.

    Raises
    ------
    SpecError
        ``SOURCE: <top level>: problem at line N (allowed: the limit)``, or the parser's own message.
    """
    size = len(text.encode("utf-8", "surrogatepass"))
    if size > MAX_TOML_BYTES:
        raise SpecError(source, "", f"the file has {size:,} bytes", f"at most {MAX_TOML_BYTES:,} bytes")
    bare = _STRINGS_AND_COMMENTS.sub(lambda m: "\n" * m.group(0).count("\n"), text)
    codes = np.frombuffer(bare.encode("utf-8", "surrogatepass"), dtype=np.uint8)
    step = np.zeros(codes.shape, dtype=np.int32)
    step[(codes == ord("[")) | (codes == ord("{"))] = 1
    step[(codes == ord("]")) | (codes == ord("}"))] = -1
    if len(step):
        depth = np.cumsum(step)
        deepest = int(depth.max())
        if deepest > MAX_TOML_NESTING:
            where = int(np.count_nonzero(codes[: int(np.argmax(depth))] == ord("\n"))) + 1
            raise SpecError(source, "", f"arrays or tables nested {deepest} deep at line {where}",
                            f"at most {MAX_TOML_NESTING} levels")
    match = _LONG_NUMBER.search(bare)
    if match:
        raise SpecError(source, "", f"a number of {len(match.group(0)):,} digits at line {_line_of(bare, match.start())}",
                        f"at most {MAX_TOML_NUMBER_DIGITS} digits")
    if bare.count(".") >= MAX_TOML_KEY_PARTS:
        for number, line in enumerate(bare.split("\n"), start=1):
            dots = len(_KEY_DOT.findall(line))
            if dots >= MAX_TOML_KEY_PARTS:
                raise SpecError(source, "", f"line {number} has a key of {dots + 1:,} dotted parts",
                                f"keys of at most {MAX_TOML_KEY_PARTS} parts")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SpecError(source, "", f"not valid TOML: {exc}") from None
    except (RecursionError, ValueError, MemoryError) as exc:  # safety net behind the bounds above
        raise SpecError(source, "", f"not a usable TOML file ({type(exc).__name__})") from None
