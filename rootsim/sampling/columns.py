"""Reading segment end points and table facts from a root system or a DataFrame."""

from __future__ import annotations

from typing import Any, Callable, Iterable

import numpy as np

from ..errors import SamplingError

__all__ = ["segment_endpoints", "point_columns", "table_metadata", "sampling_inputs", "optional_radius"]

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
    cols = list(point_columns(system).values())
    p0 = np.column_stack(cols[:3]) if cols[0].size else np.zeros((0, 3))
    p1 = np.column_stack(cols[3:]) if cols[0].size else np.zeros((0, 3))
    return p0, p1


def point_columns(system: Any) -> dict[str, np.ndarray]:
    """The end point columns ``x0 y0 z0 x1 y1 z1`` as float64 arrays (views where they already are), cm."""
    cols = {}
    for name in _POINT_COLUMNS:
        try:
            values = system[name]
        except (KeyError, IndexError):
            raise SamplingError(f"root system has no column {name} (required: {', '.join(_POINT_COLUMNS)})") from None
        cols[name] = np.asarray(values.to_numpy() if hasattr(values, "to_numpy") else values, dtype=np.float64)
    return cols


def table_metadata(system: Any) -> dict:
    """Table facts (stand, container, run) of a RootSystem or a DataFrame read from one; ``{}`` if none."""
    meta = getattr(system, "metadata", None)
    if meta is None:
        meta = getattr(system, "attrs", {}).get("rootsim", {})
    return dict(meta or {})


def optional_radius(system: Any) -> np.ndarray | None:
    """The ``radius_cm`` column as float64, or None when the table has none."""
    try:
        values = system["radius_cm"]
    except (KeyError, IndexError):
        return None
    return np.asarray(values.to_numpy() if hasattr(values, "to_numpy") else values, dtype=np.float64)


def sampling_inputs(system: Any, items: Iterable[Any], *, kind: type, noun: str, form: str,
                    parse: Callable[..., Any], validate: Callable[..., None], describe: Callable[[Any], str],
                    check_container: bool, periodic: bool = True
                    ) -> tuple[list, np.ndarray, np.ndarray, np.ndarray | None]:
    """Turn sampling geometries into checked objects and read the segment end points (with periodic images).

    Parameters
    ----------
    system : RootSystem or pandas.DataFrame
    items : iterable
        Objects of type ``kind`` or option strings in ``form`` (parsed with ``parse``).
    kind : type
        Geometry class (Core, Wall, Tube); it has ``resolve(metadata, label=...)`` (fills in
        positions given relative to the stand) and ``footprint()`` (horizontal extent, cm).
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
    periodic : bool
        In a field stand, add the periodic images of the roots that reach the geometries
        (:mod:`rootsim.periodic_stand`); False samples the table's roots only (a bordered plot).

    Returns
    -------
    items : list of ``kind``
    p0, p1 : ndarray, shape (n, 3)
        Segment end points (images included), cm.
    radius : ndarray, shape (n,), or None
        Radius of each returned segment, cm (None if the table has no ``radius_cm``).
    """
    from ..periodic_stand import segment_images_of_columns, stand_cell

    out = []
    for i, item in enumerate(items):
        if isinstance(item, str):
            item = parse(item, option=f"{noun} {i}")
        elif not isinstance(item, kind):
            raise SamplingError(f"{noun} {i}: expected a {kind.__name__} or '{form}', got {type(item).__name__}")
        out.append(item)
    if not out:
        raise SamplingError(f"no {noun}s given (give at least one {noun}: {form})")
    meta = table_metadata(system)
    out = [item.resolve(meta, label=f"{noun} {i}") for i, item in enumerate(out)]
    for i, item in enumerate(out):
        validate(item, label=f"{noun} {i} at {describe(item)}", metadata=meta if check_container else None)
    columns = point_columns(system)
    radius = optional_radius(system)
    cell = stand_cell(meta) if periodic else None
    if cell is None or not len(columns["x0"]):
        p0, p1 = segment_endpoints(columns)
        return out, p0, p1, radius
    boxes = np.array([item.footprint() for item in out], dtype=np.float64)
    box = (boxes[:, 0].min(), boxes[:, 1].max(), boxes[:, 2].min(), boxes[:, 3].max())
    # images built from the columns a chunk at a time: no stacked copy of the table beside them
    p0, p1, source = segment_images_of_columns(columns, cell, box)
    del columns
    if radius is not None:
        radius = radius[source]
    return out, p0, p1, radius
