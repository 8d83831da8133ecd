"""Part of a root system: the segments of some root orders, root classes or plants.

:func:`select_segments` keeps the chosen segments, renumbers ``segment_id`` to 0..m-1 and points
``parent_id`` at the renumbered parents (-1 where the parent was left out, e.g. the first segment
of a lateral when only laterals are kept), so the result is a valid segment table. The stand
metadata travel with it: selecting plants keeps their seed positions and ids and their share of
the ground area (ground area x selected plants / plants), so RLD stays per cm³ of the soil those
plants stand on; selecting orders or classes keeps the whole stand's ground area (the RLD of
order 1 is then the stand's order-1 RLD).
"""

from __future__ import annotations

from typing import Any, Mapping

import numpy as np

from .errors import RootsimError

__all__ = ["select_segments", "renumber_segments", "selection_name"]

#: How the Python API names each filter in messages (the CLI passes its option names instead).
PYTHON_LABELS = {"order": "select(order={value})", "root_class": "select(root_class={value})",
                 "plant": "select(plant={value})"}


def _as_list(value) -> list:
    if isinstance(value, (str, bytes)) or np.isscalar(value):
        return [value]
    return list(value)


def _as_ints(values: list, label: str) -> np.ndarray:
    out = []
    for v in values:
        if isinstance(v, (bool, np.bool_)) or not isinstance(v, (int, np.integer, float, np.floating, str)):
            raise RootsimError(f"{label}: must be a whole number or a list of them")
        try:
            number = float(v)
        except ValueError:
            number = float("nan")
        if not (np.isfinite(number) and number == int(number)):
            raise RootsimError(f"{label}: must be a whole number or a list of them")
        out.append(int(number))
    return np.asarray(out, dtype=np.int64)


def renumber_segments(keep: np.ndarray, parent_id: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """New ids of the kept segments and their parents.

    Parameters
    ----------
    keep : ndarray of bool, shape (n,)
        Segments to keep.
    parent_id : ndarray of int, shape (n,)
        Parents in the full table (-1 for none).

    Returns
    -------
    segment_id : ndarray of int64, shape (m,)
        0..m-1.
    parent_id : ndarray of int64, shape (m,)
        New id of each kept segment's parent, -1 where the parent is not kept (or had none).
    """
    keep = np.asarray(keep, dtype=bool)
    parent_id = np.asarray(parent_id, dtype=np.int64)
    new_id = np.cumsum(keep, dtype=np.int64) - 1
    parent = parent_id[keep]
    has = parent >= 0
    kept_parent = np.zeros(parent.shape, dtype=bool)
    kept_parent[has] = keep[parent[has]]
    out = np.full(parent.shape, -1, dtype=np.int64)
    out[kept_parent] = new_id[parent[kept_parent]]
    return np.arange(int(keep.sum()), dtype=np.int64), out


def selection_name(selection: Mapping[str, Any]) -> str:
    """A short file-name part for a selection, e.g. ``"order-1_plant-0"`` (empty for no selection)."""
    parts = []
    for key in ("root_class", "order", "plant"):
        values = selection.get(key)
        if values is not None:
            parts.append(f"{key.replace('_', '-')}-{'+'.join(str(v) for v in values)}")
    return "_".join(parts)


def select_segments(system, *, order=None, root_class=None, plant=None,
                    labels: Mapping[str, str] | None = None):
    """The segments of the chosen root orders, root classes and plants, as a new :class:`RootSystem`.

    Parameters
    ----------
    system : RootSystem
        The full root system.
    order : int or sequence of int, optional
        Root orders to keep (0 = roots from the seed or shoot, 1 = their laterals, ...).
    root_class : str or sequence of str, optional
        Root class names from the parameter file.
    plant : int or sequence of int, optional
        Plant ids (``plant_id``; plant k stands at ``metadata["stand"]["plant_positions_cm"][k]``).
    labels : mapping, optional
        How messages name each filter, with ``{value}`` for the value given; default the Python
        call, e.g. ``select(order={value})``.

    Returns
    -------
    RootSystem
        Segments kept in their original order, renumbered; metadata with ``selection`` (the
        filters, as lists) and, when plants are chosen, the stand's ``plant_ids``,
        ``plant_positions_cm``, ``n_plants`` and ``ground_area_cm2`` of those plants.

    Raises
    ------
    RootsimError
        A value that names no order, class or plant of this root system (the message lists
        the ones there are).
    """
    from .rootsystem import RootSystem

    labels = {**PYTHON_LABELS, **dict(labels or {})}
    keep = np.ones(len(system), dtype=bool)
    selection: dict[str, list] = {}
    if order is not None:
        label = labels["order"].format(value=order)
        wanted = _as_ints(_as_list(order), label)
        present = np.unique(system["order"])
        missing = sorted(set(wanted.tolist()) - set(present.tolist()))
        if missing:
            raise RootsimError(f"{label}: no roots of order {', '.join(map(str, missing))} "
                               f"(allowed: {', '.join(map(str, present.tolist())) or 'none, the system is empty'})")
        keep &= np.isin(system["order"], wanted)
        selection["order"] = sorted(set(wanted.tolist()))
    if root_class is not None:
        label = labels["root_class"].format(value=repr(root_class))
        wanted_names = [str(v) for v in _as_list(root_class)]
        classes = np.asarray(system["root_class"]).astype(str)
        present_names = sorted(set(np.unique(classes).tolist()))
        missing = [v for v in wanted_names if v not in present_names]
        if missing:
            raise RootsimError(f"{label}: no root class {', '.join(map(repr, missing))} in this root system "
                               f"(allowed: {', '.join(present_names) or 'none, the system is empty'})")
        keep &= np.isin(classes, wanted_names)
        selection["root_class"] = sorted(set(wanted_names))
    metadata = {k: (dict(v) if isinstance(v, dict) else v) for k, v in (system.metadata or {}).items()}
    if plant is not None:
        label = labels["plant"].format(value=plant)
        wanted = _as_ints(_as_list(plant), label)
        stand = dict(metadata.get("stand") or {})
        n_plants = int(stand.get("n_plants", np.unique(system["plant_id"]).size))
        known = stand.get("plant_ids")
        known = list(range(n_plants)) if known is None else [int(k) for k in known]
        missing = sorted(set(wanted.tolist()) - set(known))
        if missing:
            shown = f"0..{known[-1]}" if known == list(range(len(known))) and known else ", ".join(map(str, known))
            raise RootsimError(f"{label}: no plant {', '.join(map(str, missing))} in this root system "
                               f"(allowed: {shown or 'none'})")
        chosen = sorted(set(wanted.tolist()))
        keep &= np.isin(system["plant_id"], chosen)
        index = [known.index(k) for k in chosen]
        if stand.get("plant_positions_cm") is not None:
            stand["plant_positions_cm"] = [stand["plant_positions_cm"][i] for i in index]
        if stand.get("ground_area_cm2") is not None and n_plants > 0:
            stand["ground_area_cm2"] = float(stand["ground_area_cm2"]) * len(chosen) / n_plants
        stand["plant_ids"] = chosen
        stand["n_plants"] = len(chosen)
        metadata["stand"] = stand
        selection["plant"] = chosen
    previous = dict(metadata.get("selection") or {})
    previous.update(selection)
    metadata["selection"] = previous
    segment_id, parent_id = renumber_segments(keep, system["parent_id"])
    columns = {}
    for name in system.columns:
        columns[name] = np.asarray(system[name])[keep]
    columns["segment_id"], columns["parent_id"] = segment_id, parent_id
    return RootSystem(columns, metadata, validate=False)
