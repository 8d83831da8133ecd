"""Parsing of sampling geometries given on the command line as comma-separated numbers."""

from __future__ import annotations

import math

from ..errors import SamplingError
from ..limits import check_magnitude

__all__ = ["parse_numbers", "parse_placed_numbers"]


def parse_numbers(text: str, *, option: str, names: tuple[str, ...], optional: tuple[str, ...] = ()) -> dict[str, float]:
    """Split ``"1,2,3"`` into named finite floats.

    Parameters
    ----------
    text : str
        The option value, e.g. ``"0,0,5,60,10"``.
    option : str
        Option name for messages, e.g. ``"--core"``.
    names : tuple of str
        Names of the required numbers, in order.
    optional : tuple of str
        Names of numbers that may follow.

    Returns
    -------
    dict of str to float
        Only the numbers given (optional ones may be missing).

    Raises
    ------
    SamplingError
        Wrong count or a value that is not a finite number (one line naming the option).
    """
    form = ",".join(n.upper() for n in names) + "".join(f"[,{n.upper()}]" for n in optional)
    parts = [p.strip() for p in str(text).split(",")]
    if not (len(names) <= len(parts) <= len(names) + len(optional)):
        raise SamplingError(f"{option} {text!r}: expected {form} ({len(parts)} value(s) given)")
    out = {}
    for name, part in zip(names + optional, parts):
        try:
            value = float(part)
        except ValueError:
            raise SamplingError(f"{option} {text!r}: {name.upper()} must be a number, got {part!r} (form: {form})") from None
        if not math.isfinite(value):
            raise SamplingError(f"{option} {text!r}: {name.upper()} must be finite, got {part!r}")
        check_magnitude(value, what=f"{option} {text!r}: {name.upper()}")
        out[name] = value
    return out


def parse_placed_numbers(text: str, *, option: str, names: tuple[str, ...], optional: tuple[str, ...] = ()
                         ) -> tuple[dict[str, float], tuple[str, int] | None]:
    """Like :func:`parse_numbers` for ``X,Y,...`` forms whose ``X,Y`` may be a stand position word.

    ``"mid_row,5,60"`` gives ``({"x": nan, "y": nan, ...}, ("mid_row", -1))``; ``"0,10,5,60"``
    gives the numbers and None (see :mod:`rootsim.sampling.stand_positions`).
    """
    from .stand_positions import is_position_word, parse_position

    head, _, rest = str(text).partition(",")
    if is_position_word(head):
        place = parse_position(head, option=f"{option} {text!r}")
        try:
            values = parse_numbers(rest, option=option, names=names, optional=optional)
        except SamplingError as exc:
            form = "POSITION," + ",".join(n.upper() for n in names) + "".join(f"[,{n.upper()}]" for n in optional)
            raise SamplingError(f"{option} {text!r}: expected {form} ({exc})") from None
        return {"x": math.nan, "y": math.nan, **values}, place
    return parse_numbers(text, option=option, names=("x", "y") + names, optional=optional), None
