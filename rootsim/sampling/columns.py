"""Reading segment end points and table facts from a root system or a DataFrame."""

from __future__ import annotations

from typing import Any, Callable, Iterable

import numpy as np

from ..errors import SamplingError

__all__ = ["segment_endpoints", "table_metadata", "sampling_inputs"]

_POINT_COLUMNS = ("x0", "y0", "z0", "x1", "y1", "z1")


def segment_endpoints(system: Any) -> tuple[np.ndarray, np.ndarray]:
    """Start and end points of every segment.

    Parameters
    ----------
    system : RootSystem or pandas.DataFrame or mapping
        Anything that gives the columns ``x0 y0 z0 x1 y1 z1`` (cm) as ``system[name]``.

    Returns
    -------
    p0, p1 : ndarray, shape (n, 3)
        End points, cm (z up, soil surface at z = 0).
    """
    cols = []
    for name in _POINT_COLUMNS:
        try:
            values = system[name]
        except (KeyError, IndexError):
            raise SamplingError(f"root system has no column {name} (required: {', '.join(_POINT_COLUMNS)})") from None
        cols.append(np.asarray(values.to_numpy() if hasattr(values, "to_numpy") else values, dtype=np.float64))
    p0 = np.column_stack(cols[:3]) if cols[0].size else np.zeros((0, 3))
    p1 = np.column_stack(cols[3:]) if cols[0].size else np.zeros((0, 3))
    return p0, p1


def table_metadata(system: Any) -> dict:
    """Table facts (stand, container, run) of a RootSystem or a DataFrame read from one; ``{}`` if none."""
    meta = getattr(system, "metadata", None)
    if meta is None:
        meta = getattr(system, "attrs", {}).get("rootsim", {})
    return dict(meta or {})


def sampling_inputs(system: Any, items: Iterable[Any], *, kind: type, noun: str, form: str,
                    parse: Callable[..., Any], validate: Callable[..., None], describe: Callable[[Any], str],
                    check_container: bool) -> tuple[list, np.ndarray, np.ndarray]:
    """Turn sampling geometries into checked objects and read the segment end points.

    Parameters
    ----------
    system : RootSystem or pandas.DataFrame
    items : iterable
        Objects of type ``kind`` or option strings in ``form`` (parsed with ``parse``).
    kind : type
        Geometry class (Core, Wall, Tube).
    noun : str
        Name used in messages (``"core"``).
    form : str
        The string form, for messages (``"X,Y,DIAMETER,DEPTH[,INCREMENT]"``).
    parse : callable
        ``parse(text, option=...)`` returning a ``kind``.
    validate : callable
        ``validate(item, label=..., metadata=...)`` raising :class:`SamplingError`.
    describe : callable
        Short position text of an item for messages.
    check_container : bool
        Check against the container in the metadata.

    Returns
    -------
    items : list of ``kind``
    p0, p1 : ndarray, shape (n, 3)
    """
    out = []
    for i, item in enumerate(items):
        if isinstance(item, str):
            item = parse(item, option=f"{noun} {i}")
        elif not isinstance(item, kind):
            raise SamplingError(f"{noun} {i}: expected a {kind.__name__} or '{form}', got {type(item).__name__}")
        out.append(item)
    if not out:
        raise SamplingError(f"no {noun}s given (give at least one {noun}: {form})")
    meta = table_metadata(system) if check_container else None
    for i, item in enumerate(out):
        validate(item, label=f"{noun} {i} at {describe(item)}", metadata=meta)
    p0, p1 = segment_endpoints(system)
    return out, p0, p1
