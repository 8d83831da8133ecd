"""RSML import: an RSML file (see :mod:`rootsim.formats.rsml`) into a segment table.

Two passes: a light walk over the ``<root>`` elements in document order (a pre-order, so each
parent root comes before its nested laterals) collects coordinate and sample strings with
compiled XPath; then all numbers are converted, and segments, parents and attachments are
built with numpy over all roots at once. Only laterals whose branch point is not on the
parent segment named by ``branch-segment-index`` need a search along the parent polyline.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np

from ..errors import FormatError

__all__ = ["read_rsml"]


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


def _where(source: str, element) -> str:
    """``FILE: plant 1 > root 3 > root 2`` for an element (ids where present, else #ordinal)."""
    parts = []
    el = element
    while el is not None and _local(el.tag) in ("root", "plant"):
        name = _local(el.tag)
        ident = el.get("id")
        if ident in (None, ""):
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


def _stored_metadata(meta) -> dict:
    """Table metadata written by rootsim (``<rootsim-table-metadata>``), else {}."""
    if meta is None:
        return {}
    for el in _children(meta, "rootsim-table-metadata"):
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
    except ValueError:
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


def read_rsml(path: str | os.PathLike, *, default_radius_cm: float | None = None, cm_per_pixel: float | None = None):
    """Read an RSML file into a :class:`~rootsim.rootsystem.RootSystem`.

    Parameters
    ----------
    path : path-like
    default_radius_cm : float, optional
        Radius of roots without a ``diameter`` function (domain polyline), cm
        (default :data:`rootsim.formats.rsml.DEFAULT_RADIUS_CM`).
    cm_per_pixel : float, optional
        Pixel size, needed when ``<unit>`` is ``pixel``.

    Returns
    -------
    RootSystem
        Orders from nesting depth (0 for roots directly under a plant); ``root_class`` from the
        root's ``label`` attribute, else ``order_<k>``; radius = diameter / 2 of the segment's end
        point; ``birth_day`` from a ``birth_day`` function, else 0. 2-D files (no ``z`` on any
        point) are taken as images: x stays x, image y (downwards) becomes depth (z = -y), y = 0.
        A lateral's first segment starts at the nearest point on its parent's polyline (its
        ``parent_id`` is that segment); if the lateral's first point is off the parent, a
        connecting segment from that nearest point is added. Metadata: ``import`` (source file,
        unit, resolution, whether default radii were used) plus the stand/run facts of files
        written by rootsim.

    Raises
    ------
    FormatError
        Not XML, not RSML, no ``<scene>``, a polyline with fewer than 2 points, non-numeric or
        missing coordinates, sample counts not matching points, unknown units; the message names
        the file and the element (``FILE: plant 1 > root 3 > geometry: ...``).
    """
    from lxml import etree

    from ..rootsystem import RootSystem
    from .rsml import ATTACH_TOLERANCE_CM, DEFAULT_RADIUS_CM

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
    nsmap = {"r": ns[1:-1]} if ns else None
    q = "r:" if ns else ""
    xpath = {name: etree.XPath(expr, namespaces=nsmap, smart_strings=False) for name, expr in {
        "x": f"{q}point/@x", "y": f"{q}point/@y", "z": f"{q}point/@z", "n": f"count({q}point)",
        "function": f"{q}functions/{q}function",
        "sample_value": f"{q}sample/@value", "sample_text": f"{q}sample/text()", "n_samples": f"count({q}sample)",
        "hint": f"{q}properties/{q}branch-segment-index/@value",
    }.items()}
    geometry_path = f"{ns}geometry/{ns}polyline"

    # ---- pass 1: walk roots (pre-order), collect strings --------------------------------------
    elements, parent_index, order, plant_of, labels, hints = [], [], [], [], [], []
    polylines, n_points = [], []
    xs, ys, zs, z_counts = [], [], [], []
    diameters, births = {}, {}  # root index -> sample strings
    index_of = {}
    n_plants = 0
    for scene in scenes:
        for plant_el in _children(scene, "plant"):
            for root_el in plant_el.iter(f"{ns}root"):
                r = len(elements)
                index_of[root_el] = r
                elements.append(root_el)
                up = root_el.getparent()
                p = index_of.get(up, -1) if up is not None and up.tag == f"{ns}root" else -1
                parent_index.append(p)
                order.append(order[p] + 1 if p >= 0 else 0)
                plant_of.append(n_plants)
                labels.append((root_el.get("label") or "").strip())
                polyline = root_el.find(geometry_path)
                if polyline is None:
                    raise FormatError(f"{_where(source, root_el)}: no <geometry><polyline> (each root needs one)")
                k = int(xpath["n"](polyline))
                if k < 2:
                    raise FormatError(f"{_where(source, root_el)} > geometry: polyline has {k} point"
                                      f"{'' if k == 1 else 's'} (need >= 2)")
                polylines.append(polyline)
                n_points.append(k)
                for axis, store in (("x", xs), ("y", ys)):
                    values = xpath[axis](polyline)
                    if len(values) != k:
                        _missing(source, root_el, polyline, axis, ns)
                    store.extend(values)
                z_values = xpath["z"](polyline)
                z_counts.append(len(z_values))
                zs.extend(z_values)
                for fn in xpath["function"](root_el):
                    name = (fn.get("name") or "").strip().lower()
                    if name not in ("diameter", "birth_day") or (fn.get("domain") or "polyline").strip().lower() != "polyline":
                        continue
                    values = xpath["sample_value"](fn) or [t.strip() for t in xpath["sample_text"](fn)]
                    n_samples = int(xpath["n_samples"](fn))
                    if n_samples != k or len(values) != k:
                        raise FormatError(f"{_where(source, root_el)} > function {name}: {n_samples} samples for "
                                          f"{k} points (need one per point)")
                    (diameters if name == "diameter" else births)[r] = values
                hint = xpath["hint"](root_el)
                hints.append(int(hint[0]) if hint and hint[0].strip().lstrip("-").isdigit() else -1)
            n_plants += 1

    n_roots = len(elements)
    counts = np.asarray(n_points, dtype=np.int64)
    z_counts_arr = np.asarray(z_counts, dtype=np.int64)
    is_3d = bool(z_counts_arr.sum() > 0)
    if is_3d and np.any(z_counts_arr != counts):
        r = int(np.flatnonzero(z_counts_arr != counts)[0])
        _missing(source, elements[r], polylines[r], "z", ns)

    def bad_coordinate(axis):
        return lambda el, text: f"{_where(source, el)} > geometry: {axis} coordinate {text!r} is not a number"

    coords = [_to_float(xs, counts, elements, bad_coordinate("x")), _to_float(ys, counts, elements, bad_coordinate("y"))]
    if is_3d:
        coords.append(_to_float(zs, counts, elements, bad_coordinate("z")))
        points = np.column_stack(coords) * scale
    else:
        points = np.column_stack([coords[0], np.zeros_like(coords[0]), -coords[1]]) * scale
    del xs, ys, zs, coords

    point_offsets = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    point_radius = np.full(len(points), float(default_radius_cm))
    point_birth = np.zeros(len(points))
    for store, target, name in ((diameters, point_radius, "diameter"), (births, point_birth, "birth_day")):
        if not store:
            continue
        roots = np.fromiter(store.keys(), dtype=np.int64, count=len(store))
        strings = [s for values in store.values() for s in values]
        values = _to_float(strings, counts[roots], [elements[r] for r in roots.tolist()],
                           lambda el, text, name=name: f"{_where(source, el)} > function {name}: sample {text!r} "
                                                       "is not a number")
        idx = np.concatenate([np.arange(point_offsets[r], point_offsets[r + 1]) for r in roots.tolist()])
        target[idx] = values * scale / 2.0 if name == "diameter" else values
    if np.any(point_radius < 0):
        r = int(np.searchsorted(point_offsets, np.flatnonzero(point_radius < 0)[0], side="right") - 1)
        raise FormatError(f"{_where(source, elements[r])} > function diameter: negative diameter")
    used_default = len(diameters) < n_roots

    # ---- pass 2: attach laterals ------------------------------------------------------------
    parent = np.asarray(parent_index, dtype=np.int64)
    lateral = np.flatnonzero(parent >= 0)
    attach_seg = np.full(n_roots, -1, dtype=np.int64)  # parent's native segment index
    foot = np.zeros((n_roots, 3))
    dist = np.zeros(n_roots)
    if len(lateral):
        first_pt = points[point_offsets[lateral]]
        par = parent[lateral]
        hint = np.asarray(hints, dtype=np.int64)[lateral]
        valid = (hint >= 0) & (hint < counts[par] - 1)
        h = np.where(valid, hint, 0)
        a = points[point_offsets[par] + h]
        b = points[point_offsets[par] + h + 1]
        f, d = _foot_points(a, b, first_pt)
        ok = valid & (d <= ATTACH_TOLERANCE_CM)
        attach_seg[lateral[ok]] = h[ok]
        foot[lateral[ok]] = f[ok]
        dist[lateral[ok]] = d[ok]
        for j in np.flatnonzero(~ok).tolist():  # search the whole parent polyline
            r, pr = int(lateral[j]), int(par[j])
            lo, hi = point_offsets[pr], point_offsets[pr + 1]
            f_all, d_all = _foot_points(points[lo:hi - 1], points[lo + 1:hi],
                                        np.broadcast_to(first_pt[j], (hi - 1 - lo, 3)))
            s = int(np.argmin(d_all))
            attach_seg[r], foot[r], dist[r] = s, f_all[s], d_all[s]
    connect = (parent >= 0) & (dist > ATTACH_TOLERANCE_CM)

    # ---- segments ---------------------------------------------------------------------------
    native = counts - 1
    seg_counts = native + connect
    seg_base = np.concatenate([[0], np.cumsum(seg_counts)]).astype(np.int64)
    n_seg = int(seg_base[-1])
    root_of_seg = np.repeat(np.arange(n_roots), seg_counts)
    local = np.arange(n_seg) - seg_base[root_of_seg]
    is_connect = connect[root_of_seg] & (local == 0)
    native_local = local - connect[root_of_seg]
    start_pt = point_offsets[root_of_seg] + np.maximum(native_local, 0)
    x0 = points[start_pt]
    x1 = points[np.minimum(start_pt + 1, len(points) - 1)] if len(points) else points
    x0[is_connect] = foot[root_of_seg[is_connect]]
    x1[is_connect] = points[start_pt[is_connect]]
    end_pt = np.where(is_connect, start_pt, start_pt + 1)
    parent_id = np.arange(n_seg, dtype=np.int64) - 1
    first = seg_base[:-1]
    top_level = parent < 0
    parent_id[first[top_level]] = -1
    lat = np.flatnonzero(~top_level)
    parent_id[first[lat]] = seg_base[parent[lat]] + connect[parent[lat]] + attach_seg[lat]
    root_class = np.array([lab or f"order_{o}" for lab, o in zip(labels, order)], dtype=object)
    columns = {
        "segment_id": np.arange(n_seg, dtype=np.int64),
        "parent_id": parent_id,
        "plant_id": np.asarray(plant_of, dtype=np.int64)[root_of_seg],
        "root_id": root_of_seg.astype(np.int64),
        "order": np.asarray(order, dtype=np.int64)[root_of_seg],
        "root_class": root_class[root_of_seg].astype(str) if n_roots else np.zeros(0, dtype=str),
        "x0": x0[:, 0], "y0": x0[:, 1], "z0": x0[:, 2], "x1": x1[:, 0], "y1": x1[:, 1], "z1": x1[:, 2],
        "radius_cm": point_radius[end_pt] if n_seg else np.zeros(0),
        "length_cm": np.linalg.norm(x1 - x0, axis=1),
        "birth_day": point_birth[end_pt] if n_seg else np.zeros(0),
    }
    if n_seg == 0:
        columns.update({c: np.zeros(0) for c in ("x0", "y0", "z0", "x1", "y1", "z1", "length_cm")})
    metadata = _stored_metadata(meta)
    if not isinstance(metadata.get("stand"), dict):
        metadata["stand"] = {}
    metadata["stand"]["n_plants"] = n_plants
    metadata["import"] = {
        "format": "rsml", "source_file": source, **unit_facts, "cm_per_unit": scale * unit_facts["resolution"],
        "dimensions": 3 if is_3d else 2, "default_radius_cm": float(default_radius_cm) if used_default else None,
        "connecting_segments": int(connect.sum()),
    }
    return RootSystem(columns, metadata)


def _missing(source: str, root_el, polyline, axis: str, ns: str):
    """Raise the error for the first point of ``polyline`` without coordinate ``axis``."""
    for k, point in enumerate(polyline.iter(f"{ns}point"), start=1):
        if point.get(axis) is None:
            raise FormatError(f"{_where(source, root_el)} > geometry: point {k} has no {axis} coordinate")
    raise FormatError(f"{_where(source, root_el)} > geometry: points without {axis} coordinates")
