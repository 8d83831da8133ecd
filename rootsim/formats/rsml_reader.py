"""RSML import: an RSML file (see :mod:`rootsim.formats.rsml`) into a segment table.

Two passes: a light walk over the ``<root>`` elements in document order (a pre-order, so each
parent root comes before its nested laterals) collects coordinate and sample strings (attribute
reads per element, about three times faster than XPath attribute queries); then all numbers are converted, and segments, parents and branch points are
built with numpy over all roots at once.

Traced geometry is kept as it is. A lateral's segments are exactly its traced polyline: its
link to the parent root is topology (the parent segment it branches from, its ``parent_id``),
not added root length, so lengths, depths and insertion angles (from the lateral's own first
traced segment) are those of the file. The parent segment is the one ``branch-segment-index``
names, else the parent segment nearest to the lateral's first point.

What the RSML standard (Lobet et al. 2015, Plant Physiology 167(3):617-627,
doi:10.1104/pp.114.253625) says is followed where files from image-tracing tools differ:
a function with fewer samples than polyline points leaves the remaining points without a
value, extra samples are ignored; every length unit the standard lists is accepted; a file
whose points all lie at z = 0 (or have no z) is an image.
"""

from __future__ import annotations

import json
import os
import re
import warnings
from pathlib import Path

import numpy as np

from ..errors import FormatError, SegmentTableError

__all__ = ["read_rsml", "skipped_roots_message"]

_WHOLE_NUMBER = re.compile(r"\s*[+-]?\d+\s*")

#: Point pairs (lateral first point x parent segment) handled per block in the nearest-segment search.
_SEARCH_BLOCK = 1 << 21


def _local(tag) -> str:
    """Tag name without namespace (comments and processing instructions give '')."""
    return tag.rsplit("}", 1)[-1] if isinstance(tag, str) else ""


def _children(element, name: str):
    return [c for c in element if _local(c.tag) == name]


def _is_number(value) -> bool:
    try:
        float(value)
    except (TypeError, ValueError):
        return False
    return True


def _ident(element) -> str | None:
    """The element's ``id`` (or ``ID``) attribute, stripped; None if absent or empty."""
    value = element.get("id")
    if value is None or not value.strip():
        value = element.get("ID")
    return value.strip() if value is not None and value.strip() else None


def _where(source: str, element) -> str:
    """``FILE: plant 1 > root 3 > root 2`` for an element (ids where present, else #ordinal)."""
    parts = []
    el = element
    while el is not None and _local(el.tag) in ("root", "plant"):
        name = _local(el.tag)
        ident = _ident(el)
        if ident is None:
            parent = el.getparent()
            siblings = [c for c in parent if _local(c.tag) == name] if parent is not None else [el]
            ident = f"#{siblings.index(el) + 1}"
        parts.append(f"{name} {ident}")
        el = el.getparent()
    return f"{source}: " + " > ".join(reversed(parts))


def _scale_cm(meta, source: str, cm_per_pixel: float | None) -> tuple[float, dict]:
    """cm per coordinate unit from ``<unit>`` and ``<resolution>`` (coordinate / resolution = value in unit)."""
    from .rsml import PIXEL_UNITS, UNIT_CM

    unit_el = next(iter(_children(meta, "unit")), None) if meta is not None else None
    res_el = next(iter(_children(meta, "resolution")), None) if meta is not None else None
    unit = (unit_el.text or "").strip() if unit_el is not None else ""
    resolution = 1.0
    if res_el is not None and (res_el.text or "").strip():
        text = res_el.text.strip()
        if not _is_number(text) or not np.isfinite(float(text)) or float(text) <= 0:
            raise FormatError(f"{source}: metadata > resolution: {text!r} is not a number > 0")
        resolution = float(text)
    facts = {"unit": unit or "cm (assumed: no <unit>)", "resolution": resolution}
    key = unit.lower()
    if key in PIXEL_UNITS:
        if cm_per_pixel is None:
            raise FormatError(f"{source}: metadata > unit: coordinates are in {unit!r}, which has no physical size; "
                              "give the pixel size (rootsim import-rsml --cm-per-pixel S)")
        return float(cm_per_pixel) / resolution, facts
    if key == "":
        return 1.0 / resolution, facts
    if key not in UNIT_CM:
        allowed = ", ".join(sorted(set(UNIT_CM) | set(PIXEL_UNITS)))
        raise FormatError(f"{source}: metadata > unit: unknown unit {unit!r} (allowed: {allowed})")
    return UNIT_CM[key] / resolution, facts


def _stored_metadata(top, meta) -> dict:
    """Table metadata written by rootsim, else {}.

    Current files hold it in ``<scene><properties><segment-table-metadata>`` (where the RSML
    schema allows project data); older ones in ``<metadata><rootsim-table-metadata>``.
    """
    holders = []
    for scene in _children(top, "scene"):
        for props in _children(scene, "properties"):
            holders += _children(props, "segment-table-metadata")
    if meta is not None:
        holders += _children(meta, "rootsim-table-metadata")
    for el in holders:
        try:
            value = json.loads(el.text or "{}")
        except ValueError:
            return {}
        return value if isinstance(value, dict) else {}
    return {}


def _to_float(strings: list, counts: np.ndarray, elements: list, describe) -> np.ndarray:
    """All strings as float64 in one conversion; on failure name the first bad element."""
    try:
        values = np.array(strings, dtype=np.float64)
    except (ValueError, TypeError):
        values = None
    if values is not None and np.all(np.isfinite(values)):
        return values
    start = 0
    for count, element in zip(counts.tolist(), elements):
        chunk = strings[start:start + count]
        start += count
        for text in chunk:
            if not _is_number(text) or not np.isfinite(float(text)):
                raise FormatError(describe(element, text))
    raise FormatError("internal error: a number did not convert")  # pragma: no cover


def _foot_points(a: np.ndarray, b: np.ndarray, q: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Nearest points on segments ``a -> b`` to ``q`` (all shape (m, 3)) and their distances."""
    d = b - a
    dd = np.einsum("ij,ij->i", d, d)
    t = np.where(dd > 0, np.einsum("ij,ij->i", q - a, d) / np.where(dd > 0, dd, 1.0), 0.0)
    foot = a + np.clip(t, 0.0, 1.0)[:, None] * d
    return foot, np.linalg.norm(foot - q, axis=1)


def _nearest_parent_segment(points, first_point, parent_lo, parent_segments) -> np.ndarray:
    """Index (along the parent) of the parent segment nearest to each lateral's first point.

    Parameters
    ----------
    points : ndarray, shape (m, 3)
        All polyline points.
    first_point : ndarray, shape (k, 3)
        First point of each lateral.
    parent_lo : ndarray of int, shape (k,)
        Index in ``points`` of the parent polyline's first point.
    parent_segments : ndarray of int, shape (k,)
        Segments of the parent polyline (>= 1).

    Returns
    -------
    ndarray of int, shape (k,)
        Ties go to the segment nearer the parent's base. Vectorized in blocks of lateral x
        parent-segment pairs.
    """
    out = np.zeros(len(first_point), dtype=np.int64)
    cum = np.cumsum(parent_segments)
    start = 0
    while start < len(first_point):
        base = cum[start - 1] if start else 0
        stop = max(int(np.searchsorted(cum, base + _SEARCH_BLOCK, side="right")), start + 1)
        counts = parent_segments[start:stop]
        group = np.repeat(np.arange(stop - start), counts)
        local = np.arange(len(group)) - np.repeat(np.cumsum(counts) - counts, counts)
        a_index = parent_lo[start:stop][group] + local
        _, distance = _foot_points(points[a_index], points[a_index + 1], first_point[start:stop][group])
        order = np.lexsort((distance, group))  # stable: equal distances keep the lower segment first
        firsts = np.flatnonzero(np.r_[True, group[order][1:] != group[order][:-1]])
        out[start:stop] = local[order[firsts]]
        start = stop
    return out


def skipped_roots_message(source: str, facts: dict) -> str | None:
    """One warning line counting the roots an import skipped (None if it skipped none)."""
    skipped = facts.get("skipped_roots") or 0
    if not skipped:
        return None
    parts = []
    if facts.get("roots_without_geometry"):
        parts.append(f"{facts['roots_without_geometry']} without <geometry><polyline>")
    if facts.get("roots_with_too_few_points"):
        parts.append(f"{facts['roots_with_too_few_points']} with fewer than 2 points")
    if facts.get("roots_inside_skipped"):
        parts.append(f"{facts['roots_inside_skipped']} nested in a skipped root")
    first = facts.get("first_skipped_root")
    return (f"{source}: skipped {skipped} root{'s' if skipped != 1 else ''} that cannot be measured "
            f"({', '.join(parts)}; first: {first}); --strict refuses such files")


def read_rsml(path: str | os.PathLike, *, default_radius_cm: float | None = None, cm_per_pixel: float | None = None,
              strict: bool = False, connectors: bool = False):
    """Read an RSML file into a :class:`~rootsim.rootsystem.RootSystem`.

    Parameters
    ----------
    path : path-like
    default_radius_cm : float, optional
        Radius of roots (or points) without a ``diameter`` value (domain polyline), cm
        (default :data:`rootsim.formats.rsml.DEFAULT_RADIUS_CM`).
    cm_per_pixel : float, optional
        Pixel size, needed when ``<unit>`` is ``pixel``.
    strict : bool
        Refuse files with roots that cannot be measured (no geometry, fewer than 2 points)
        instead of skipping them with a warning.
    connectors : bool
        Add a connector segment (:mod:`rootsim.connectors`) from the branch point on the parent
        segment (the lateral's first point projected onto it) to the first traced point of each
        lateral that starts off its parent, so drawings show it joined; connectors carry zero
        length and are kept aside from analyses (``system.n_connectors``).

    Returns
    -------
    RootSystem
        Orders from nesting depth (0 for roots directly under a plant); ``root_class`` from the
        root's ``label`` attribute, else ``order_<k>``; radius = diameter / 2 of the segment's end
        point; ``birth_day`` from a ``birth_day`` function, else 0. Files whose points all have
        z = 0 or no z are images: x stays x, image y (downwards) becomes depth (z = -y), y = 0.
        Every root's segments are its traced polyline; a lateral's first segment has as
        ``parent_id`` the parent segment named by ``branch-segment-index`` (index of the parent's
        polyline point at or before the branch point; the last point means the last segment),
        else the parent segment nearest to its first point. ``plant_id`` and ``root_id`` are the
        files' integer ids when those are unique whole numbers, else 0, 1, 2, ... in document
        order. Metadata: ``import`` (source file, unit, resolution, dimensions, default radius
        used, skipped roots, points without a diameter) plus the stand/run facts of files
        written by rootsim.

    Warns
    -----
    UserWarning
        One line counting the skipped roots (see :func:`skipped_roots_message`).

    Raises
    ------
    FormatError
        Not XML, not RSML, no ``<scene>``, non-numeric or missing coordinates, a
        ``branch-segment-index`` that is not an index of the parent's polyline, unknown units, a
        root that cannot be measured when ``strict``; the message names the file and the element
        (``FILE: plant 1 > root 3 > geometry: ...``).
    """
    from lxml import etree

    from ..rootsystem import RootSystem
    from .rsml import DEFAULT_RADIUS_CM

    path = Path(path)
    source = str(path)
    default_radius_cm = DEFAULT_RADIUS_CM if default_radius_cm is None else default_radius_cm
    for name, value in (("default radius", default_radius_cm), ("pixel size", cm_per_pixel)):
        if value is not None and (not _is_number(value) or not np.isfinite(float(value)) or float(value) <= 0):
            raise FormatError(f"{source}: {name} {value!r} cm is not allowed (need a number > 0)")
    if path.is_dir():
        raise FormatError(f"{source}: is a directory (expected an .rsml file)")
    if not path.is_file():
        raise FormatError(f"{source}: no such file")
    parser = etree.XMLParser(resolve_entities=False, no_network=True, huge_tree=True, remove_comments=True)
    try:
        doc = etree.parse(source, parser)
    except etree.XMLSyntaxError as exc:
        raise FormatError(f"{source}: not an XML file ({' '.join(str(exc).split())[:160]})") from None
    except OSError as exc:
        raise FormatError(f"{source}: cannot read ({exc})") from None
    top = doc.getroot()
    if _local(top.tag) != "rsml":
        raise FormatError(f"{source}: not an RSML file (top element is <{_local(top.tag)}>, expected <rsml>)")
    meta = next(iter(_children(top, "metadata")), None)
    scale, unit_facts = _scale_cm(meta, source, cm_per_pixel)
    scenes = _children(top, "scene")
    if not scenes:
        raise FormatError(f"{source}: no <scene> element (an RSML file holds its plants in <rsml><scene>)")

    ns = top.tag[: top.tag.index("}") + 1] if top.tag.startswith("{") else ""
    point_tag, sample_tag = f"{ns}point", f"{ns}sample"
    functions_path = f"{ns}functions/{ns}function"
    hint_path = f"{ns}properties/{ns}branch-segment-index"
    geometry_path = f"{ns}geometry/{ns}polyline"

    # ---- pass 1: walk roots (pre-order), collect strings --------------------------------------
    elements, parent_index, order, plant_of, labels, hints, root_ids = [], [], [], [], [], [], []
    polylines, n_points = [], []
    xs, ys, zs, z_counts = [], [], [], []
    samples = {"diameter": {}, "birth_day": {}}  # name -> {root index: sample strings}
    index_of = {}
    skipped = set()
    skip_counts = {"roots_without_geometry": 0, "roots_with_too_few_points": 0, "roots_inside_skipped": 0}
    first_skipped = None
    plant_ids = []
    for scene in scenes:
        for plant_el in _children(scene, "plant"):
            plant_number = len(plant_ids)
            plant_ids.append(_ident(plant_el))
            for root_el in plant_el.iter(f"{ns}root"):
                up = root_el.getparent()
                if up in skipped:
                    skipped.add(root_el)
                    skip_counts["roots_inside_skipped"] += 1
                    continue
                polyline = root_el.find(geometry_path)
                point_els = list(polyline.iterchildren(point_tag)) if polyline is not None else []
                k = len(point_els)
                if polyline is None or k < 2:
                    if polyline is None:
                        problem = f"{_where(source, root_el)}: no <geometry><polyline> (each root needs one)"
                        skip_counts["roots_without_geometry"] += 1
                    else:
                        problem = (f"{_where(source, root_el)} > geometry: polyline has {k} point"
                                   f"{'' if k == 1 else 's'} (need >= 2)")
                        skip_counts["roots_with_too_few_points"] += 1
                    if strict:
                        raise FormatError(problem + "; without --strict such roots are skipped")
                    first_skipped = first_skipped or _where(source, root_el)[len(source) + 2:]
                    skipped.add(root_el)
                    continue
                r = len(elements)
                index_of[root_el] = r
                elements.append(root_el)
                p = index_of.get(up, -1) if up is not None and up.tag == f"{ns}root" else -1
                parent_index.append(p)
                order.append(order[p] + 1 if p >= 0 else 0)
                plant_of.append(plant_number)
                labels.append((root_el.get("label") or "").strip())
                root_ids.append(_ident(root_el))
                polylines.append(polyline)
                n_points.append(k)
                for axis, store in (("x", xs), ("y", ys)):
                    values = [point.get(axis) for point in point_els]
                    if None in values:
                        _missing(source, root_el, polyline, axis, ns)
                    store.extend(values)
                z_values = [point.get("z") for point in point_els]
                if None in z_values:
                    z_values = [z for z in z_values if z is not None]
                z_counts.append(len(z_values))
                zs.extend(z_values)
                for fn in root_el.iterfind(functions_path):
                    name = (fn.get("name") or "").strip().lower()
                    if name not in samples or (fn.get("domain") or "polyline").strip().lower() != "polyline":
                        continue
                    # The standard: samples beyond the points are ignored; points beyond the samples have no value.
                    sample_els = list(fn.iterchildren(sample_tag))[:k]
                    values = [sample.get("value") for sample in sample_els]
                    if None in values:  # older files hold the value as text
                        values = [v if v is not None else (e.text or "").strip() for v, e in zip(values, sample_els)]
                    samples[name][r] = values
                hint = root_el.find(hint_path) if p >= 0 else None
                hints.append(hint.get("value", "") if hint is not None else None)

    n_roots = len(elements)
    counts = np.asarray(n_points, dtype=np.int64)
    z_counts_arr = np.asarray(z_counts, dtype=np.int64)
    point_offsets = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)

    def bad_coordinate(axis):
        return lambda el, text: f"{_where(source, el)} > geometry: {axis} coordinate {text!r} is not a number"

    is_3d = False
    if z_counts_arr.sum() > 0:
        has_z = z_counts_arr > 0
        z_roots = np.flatnonzero(has_z)
        z_values = _to_float(zs, z_counts_arr[has_z], [elements[r] for r in z_roots.tolist()], bad_coordinate("z"))
        is_3d = bool(np.any(z_values != 0))
        if is_3d:
            if np.any(z_counts_arr != counts):
                r = int(np.flatnonzero(z_counts_arr != counts)[0])
                _missing(source, elements[r], polylines[r], "z", ns)
    x_values = _to_float(xs, counts, elements, bad_coordinate("x"))
    y_values = _to_float(ys, counts, elements, bad_coordinate("y"))
    with np.errstate(over="ignore"):  # overflow is reported below, naming the root
        if is_3d:
            points = np.column_stack([x_values, y_values, z_values]) * scale
        else:  # an image: image y (downwards) becomes depth
            points = np.column_stack([x_values, np.zeros_like(x_values), -y_values]) * scale
    del xs, ys, zs, x_values, y_values
    # Finite coordinates can still overflow once scaled to cm or squared for a length.
    span = np.abs(points).max(axis=1) if len(points) else np.zeros(0)
    too_big = ~(span < 1e150)
    if too_big.any():
        r = int(np.searchsorted(point_offsets, np.flatnonzero(too_big)[0], side="right") - 1)
        raise FormatError(f"{_where(source, elements[r])} > geometry: a coordinate is too large to measure once "
                          "converted to cm (allowed: up to 1e150 cm)")

    point_radius = np.full(len(points), float(default_radius_cm))
    point_birth = np.zeros(len(points))
    has_diameter = np.zeros(len(points), dtype=bool)
    for name, target in (("diameter", point_radius), ("birth_day", point_birth)):
        store = samples[name]
        if not store:
            continue
        roots = np.fromiter(store.keys(), dtype=np.int64, count=len(store))
        lengths = np.fromiter((len(v) for v in store.values()), dtype=np.int64, count=len(store))
        strings = [s for values in store.values() for s in values]
        values = _to_float(strings, lengths, [elements[r] for r in roots.tolist()],
                           lambda el, text, name=name: f"{_where(source, el)} > function {name}: sample {text!r} "
                                                       "is not a number")
        idx = np.repeat(point_offsets[roots], lengths) + (np.arange(len(values)) - np.repeat(np.cumsum(lengths) - lengths, lengths))
        with np.errstate(over="ignore"):
            target[idx] = values * scale / 2.0 if name == "diameter" else values
        if name == "diameter":
            has_diameter[idx] = True
    for name, values in (("diameter", point_radius), ("birth_day", point_birth)):
        if not np.all(np.isfinite(values)):
            r = int(np.searchsorted(point_offsets, np.flatnonzero(~np.isfinite(values))[0], side="right") - 1)
            raise FormatError(f"{_where(source, elements[r])} > function {name}: a sample is too large once "
                              "converted to cm")
    if np.any(point_radius < 0):
        r = int(np.searchsorted(point_offsets, np.flatnonzero(point_radius < 0)[0], side="right") - 1)
        raise FormatError(f"{_where(source, elements[r])} > function diameter: negative diameter")

    # ---- pass 2: branch points of laterals -----------------------------------------------------
    parent = np.asarray(parent_index, dtype=np.int64)
    lateral = np.flatnonzero(parent >= 0)
    attach_seg = np.full(n_roots, -1, dtype=np.int64)  # parent segment index along the parent
    if len(lateral):
        hinted = np.zeros(len(lateral), dtype=bool)
        hint_value = np.zeros(len(lateral), dtype=np.int64)
        for j, r in enumerate(lateral.tolist()):
            text = hints[r]
            if text is None:
                continue
            k_parent = int(counts[parent[r]])
            if _WHOLE_NUMBER.fullmatch(text):
                value = _whole_number(text)
                if value is not None and 0 <= value < k_parent:
                    hinted[j] = True
                    hint_value[j] = min(value, k_parent - 2)
                    continue
            where = f"{_where(source, elements[r])} > properties > branch-segment-index"
            if not _WHOLE_NUMBER.fullmatch(text):
                raise FormatError(f"{where}: value {text.strip()[:40]!r} is not a whole number "
                                  f"(allowed: 0 to {k_parent - 1}, a point of the parent's polyline)")
            shown = text.strip() if len(text.strip()) <= 40 else text.strip()[:37] + "..."
            raise FormatError(f"{where}: value {shown} is not a point of the parent's polyline "
                              f"(allowed: 0 to {k_parent - 1})")
        attach_seg[lateral[hinted]] = hint_value[hinted]
        search = lateral[~hinted]
        if len(search):
            attach_seg[search] = _nearest_parent_segment(points, points[point_offsets[search]],
                                                         point_offsets[parent[search]], counts[parent[search]] - 1)

    # ---- segments: every root's traced polyline --------------------------------------------------
    seg_counts = counts - 1
    seg_base = np.concatenate([[0], np.cumsum(seg_counts)]).astype(np.int64)
    n_seg = int(seg_base[-1])
    root_of_seg = np.repeat(np.arange(n_roots), seg_counts)
    start_pt = np.arange(n_seg) + root_of_seg  # point index of each segment's start
    x0 = points[start_pt]
    x1 = points[start_pt + 1]
    parent_id = np.arange(n_seg, dtype=np.int64) - 1
    first = seg_base[:-1]
    top_level = parent < 0
    parent_id[first[top_level]] = -1
    lat = np.flatnonzero(~top_level)
    parent_id[first[lat]] = seg_base[parent[lat]] + attach_seg[lat]
    root_class = np.array([lab or f"order_{o}" for lab, o in zip(labels, order)], dtype=object)
    root_numbers = _whole_ids(root_ids)
    plant_numbers = _whole_ids(plant_ids)
    columns = {
        "segment_id": np.arange(n_seg, dtype=np.int64),
        "parent_id": parent_id,
        "plant_id": plant_numbers[np.asarray(plant_of, dtype=np.int64)][root_of_seg],
        "root_id": root_numbers[root_of_seg],
        "order": np.asarray(order, dtype=np.int64)[root_of_seg],
        "root_class": root_class[root_of_seg].astype(str) if n_roots else np.zeros(0, dtype=str),
        "x0": x0[:, 0], "y0": x0[:, 1], "z0": x0[:, 2], "x1": x1[:, 0], "y1": x1[:, 1], "z1": x1[:, 2],
        "radius_cm": point_radius[start_pt + 1],
        "length_cm": np.linalg.norm(x1 - x0, axis=1),
        "birth_day": point_birth[start_pt + 1],
    }
    n_connectors = 0
    if connectors and len(lat):
        from ..connectors import insert_connectors
        from .polylines import JOIN_TOLERANCE_CM

        lateral_first = first[lat]
        bearing = parent_id[lateral_first]
        foot, gap = _foot_points(x0[bearing], x1[bearing], x0[lateral_first])
        off = gap > JOIN_TOLERANCE_CM  # laterals traced from a point on the parent need none
        n_connectors = int(off.sum())
        if n_connectors:
            columns = insert_connectors(columns, lateral_first[off], foot[off], bearing[off])
    end_without_diameter = ~has_diameter[start_pt + 1]
    metadata = _stored_metadata(top, meta)
    if not isinstance(metadata.get("stand"), dict):
        metadata["stand"] = {}
    metadata["stand"]["n_plants"] = len(plant_ids)
    n_skipped = sum(skip_counts.values())
    metadata["import"] = {
        "format": "rsml", "source_file": source, **unit_facts, "cm_per_unit": scale * unit_facts["resolution"],
        "dimensions": 3 if is_3d else 2,
        "default_radius_cm": float(default_radius_cm) if end_without_diameter.any() else None,
        "segments_without_diameter": int(end_without_diameter.sum()),
        "skipped_roots": n_skipped, **skip_counts, "first_skipped_root": first_skipped,
    }
    if connectors:
        metadata["import"]["connectors"] = n_connectors
    message = skipped_roots_message(source, metadata["import"])
    if message:
        warnings.warn(message, UserWarning, stacklevel=2)
    try:
        return RootSystem(columns, metadata)
    except SegmentTableError as exc:  # e.g. coordinates beyond the table's range once converted to cm
        raise FormatError(f"{source}: {' '.join(str(exc).split())}") from None


def _whole_ids(idents: list) -> np.ndarray:
    """The ids as int64 when all are unique whole numbers that fit, else 0, 1, 2, ... (shape (len(idents),))."""
    fallback = np.arange(len(idents), dtype=np.int64)
    if not idents or any(i is None or not _WHOLE_NUMBER.fullmatch(i) for i in idents):
        return fallback
    values = [_whole_number(i) for i in idents]
    if None in values or len(set(values)) != len(values) or min(values) < 0:
        return fallback
    return np.asarray(values, dtype=np.int64)


def _whole_number(text: str) -> int | None:
    """``int(text)`` for a whole number that fits in int64, else None (no huge conversions)."""
    digits = text.strip().lstrip("+-").lstrip("0")
    if len(digits) > 19:
        return None
    value = int(text)
    return value if -(2**63) <= value < 2**63 else None


def _missing(source: str, root_el, polyline, axis: str, ns: str):
    """Raise the error for the first point of ``polyline`` without coordinate ``axis``."""
    for k, point in enumerate(polyline.iter(f"{ns}point"), start=1):
        if point.get(axis) is None:
            raise FormatError(f"{_where(source, root_el)} > geometry: point {k} has no {axis} coordinate")
    raise FormatError(f"{_where(source, root_el)} > geometry: points without {axis} coordinates")
