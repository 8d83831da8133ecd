"""RSML (Root System Markup Language) export and import.

RSML is an open XML format for root architecture (Lobet et al. 2015, "Root System Markup
Language: toward a unified root architecture description language", Plant Physiology
167(3):617-627, DOI 10.1104/pp.114.253625). Layout written here::

    <rsml>
      <metadata> version, unit (cm), resolution (1), last-modified, software (rootsim),
                 file-key, property-definitions, rootsim-table-metadata (JSON) </metadata>
      <scene>
        <plant id="0">
          <root id="12" label="primary">            one element per root polyline
            <properties><branch-segment-index value="4"/></properties>   (laterals only)
            <geometry><polyline><point x="..." y="..." z="..."/> ...</polyline></geometry>
            <functions>
              <function name="diameter" domain="polyline"><sample>0.1</sample> ...</function>
              <function name="birth_day" domain="polyline"> ... </function>
            </functions>
            <root ...> laterals, nested inside their parent root </root>
          </root>
        </plant>
      </scene>
    </rsml>

Conventions (both directions): a root's polyline has one point per segment end plus its start
point; sample ``j >= 1`` of a function belongs to the segment ending at point ``j``, sample 0 to
the first segment. A lateral's polyline starts at its branch point on the parent root;
``branch-segment-index`` (0-based, along the parent's polyline) names the parent segment so
that a branch exactly at a joint keeps its parent segment through a round trip.
Coordinates are written with the shortest decimal that reads back to the same double.
"""

from __future__ import annotations

import datetime
import json
import os
from pathlib import Path
from xml.sax.saxutils import escape, quoteattr

import numpy as np

from ..atomic import atomic_path
from ..errors import FormatError
from .polylines import polylines_from_segments

__all__ = ["write_rsml", "read_rsml", "SUFFIXES", "UNIT_CM", "DEFAULT_RADIUS_CM"]

SUFFIXES = (".rsml",)

#: Length of one unit in cm, for the units accepted in ``<metadata><unit>``.
UNIT_CM = {
    "cm": 1.0, "centimeter": 1.0, "centimetre": 1.0,
    "mm": 0.1, "millimeter": 0.1, "millimetre": 0.1,
    "m": 100.0, "meter": 100.0, "metre": 100.0,
    "um": 1e-4, "µm": 1e-4, "micrometer": 1e-4, "micron": 1e-4,
    "inch": 2.54, "in": 2.54,
}
PIXEL_UNITS = ("pixel", "pixels", "px")

#: Radius given to imported roots without a diameter function, cm.
DEFAULT_RADIUS_CM = 0.025

#: A lateral whose first point is farther than this from its parent gets a connecting segment, cm.
ATTACH_TOLERANCE_CM = 1e-6

_POINT = '<point x="%r" y="%r" z="%r"/>'
_SAMPLE = "<sample>%r</sample>"


# --------------------------------------------------------------------------------------------
# export
# --------------------------------------------------------------------------------------------

def _root_tree(system, lines):
    """Parent polyline of every polyline (-1 for roots starting at the plant) and the branch index."""
    parent = np.asarray(system["parent_id"], dtype=np.int64)
    first = lines.first_segment
    poly_of_seg = lines.polyline_of_segment()
    parent_seg = parent[first]
    has_parent = parent_seg >= 0
    parent_poly = np.where(has_parent, poly_of_seg[np.maximum(parent_seg, 0)], -1)
    # Position of the parent segment along the parent polyline.
    position = np.empty(len(parent), dtype=np.int64)
    position[lines.segment_order] = np.arange(len(parent)) - np.repeat(lines.segment_offsets[:-1], lines.segment_counts)
    branch_index = np.where(has_parent, position[np.maximum(parent_seg, 0)], -1)
    return parent_poly, branch_index


def _metadata_xml(system, path: Path, resolution: float) -> str:
    meta = getattr(system, "metadata", None) or {}
    stamp = datetime.datetime.now(datetime.timezone.utc).replace(microsecond=0).isoformat()
    table_meta = escape(json.dumps(meta, sort_keys=True, default=str))
    return (
        "  <metadata>\n"
        "    <version>1</version>\n"
        "    <unit>cm</unit>\n"
        f"    <resolution>{resolution!r}</resolution>\n"
        f"    <last-modified>{stamp}</last-modified>\n"
        "    <software>rootsim</software>\n"
        f"    <file-key>{escape(path.stem)}</file-key>\n"
        "    <property-definitions>\n"
        "      <property-definition><label>branch-segment-index</label><type>integer</type>"
        "<default>-1</default></property-definition>\n"
        "    </property-definitions>\n"
        f"    <rootsim-table-metadata>{table_meta}</rootsim-table-metadata>\n"
        "  </metadata>\n"
    )


def write_rsml(system, path: str | os.PathLike, *, resolution: float = 1.0) -> Path:
    """Write the root system as RSML (one ``<plant>`` per plant, laterals nested), atomically.

    Parameters
    ----------
    system : RootSystem
    path : path-like
        Target ``.rsml`` file. An empty system gives a valid file with an empty ``<scene>``.
    resolution : float
        Value of ``<metadata><resolution>``: coordinates are written in cm times this
        (1 = plain cm).

    Returns
    -------
    pathlib.Path
    """
    path = Path(path)
    try:
        resolution = float(resolution)
    except (TypeError, ValueError):
        resolution = float("nan")
    if not np.isfinite(resolution) or resolution <= 0:
        raise FormatError(f"{path}: RSML resolution must be a number > 0")
    lines = polylines_from_segments(system)
    parent_poly, branch_index = _root_tree(system, lines)
    first = lines.first_segment
    plant = np.asarray(system["plant_id"], dtype=np.int64)[first]
    root_id = np.asarray(system["root_id"], dtype=np.int64)[first]
    labels = np.asarray(system["root_class"]).astype(str)[first]
    coords = (lines.points * resolution).tolist() if resolution != 1.0 else lines.points.tolist()
    diameter = (2.0 * np.asarray(system["radius_cm"], dtype=np.float64)[lines.point_segment]).tolist()
    birth = np.asarray(system["birth_day"], dtype=np.float64)[lines.point_segment].tolist()
    offsets = lines.point_offsets.tolist()
    # Children of each polyline, in order along the parent.
    kids = np.flatnonzero(parent_poly >= 0)
    kids = kids[np.lexsort((branch_index[kids], parent_poly[kids]))]
    children: dict[int, list[int]] = {}
    for child, par in zip(kids.tolist(), parent_poly[kids].tolist()):
        children.setdefault(par, []).append(child)
    tops = np.flatnonzero(parent_poly < 0)
    tops = tops[np.lexsort((root_id[tops], plant[tops]))]
    plant_ids = np.unique(np.asarray(system["plant_id"], dtype=np.int64)).tolist()
    tops_by_plant: dict[int, list[int]] = {}
    for p in tops.tolist():
        tops_by_plant.setdefault(int(plant[p]), []).append(p)

    def root_xml(p: int, depth: int) -> str:
        pad = "  " * depth
        a, b = offsets[p], offsets[p + 1]
        k = b - a
        head = [f'{pad}<root id="{root_id[p]}" label={quoteattr(str(labels[p]))}>\n']
        if branch_index[p] >= 0:
            head.append(f'{pad}  <properties><branch-segment-index value="{branch_index[p]}"/></properties>\n')
        head.append(f"{pad}  <geometry>\n{pad}    <polyline>\n")
        head.append(((pad + "      " + _POINT + "\n") * k) % tuple(v for xyz in coords[a:b] for v in xyz))
        head.append(f"{pad}    </polyline>\n{pad}  </geometry>\n{pad}  <functions>\n")
        head.append(f'{pad}    <function name="diameter" domain="polyline">{(_SAMPLE * k) % tuple(diameter[a:b])}</function>\n')
        head.append(f'{pad}    <function name="birth_day" domain="polyline">{(_SAMPLE * k) % tuple(birth[a:b])}</function>\n')
        head.append(f"{pad}  </functions>\n")
        return "".join(head)

    with atomic_path(path) as tmp, open(tmp, "w", encoding="utf-8") as fh:
        fh.write('<?xml version="1.0" encoding="UTF-8"?>\n<rsml>\n')
        fh.write(_metadata_xml(system, path, resolution))
        fh.write("  <scene>\n")
        for plant_id in plant_ids:
            fh.write(f'    <plant id="{plant_id}">\n')
            for top in tops_by_plant.get(plant_id, []):
                stack: list[tuple[int, int, bool]] = [(top, 3, False)]
                while stack:  # depth-first, laterals inside their parent
                    p, depth, closing = stack.pop()
                    if closing:
                        fh.write("  " * depth + "</root>\n")
                        continue
                    fh.write(root_xml(p, depth))
                    stack.append((p, depth, True))
                    stack.extend((c, depth + 1, False) for c in reversed(children.get(p, [])))
            fh.write("    </plant>\n")
        fh.write("  </scene>\n</rsml>\n")
    return path


# --------------------------------------------------------------------------------------------
# import
# --------------------------------------------------------------------------------------------

def _local(tag) -> str:
    """Tag name without namespace (comments and processing instructions give '')."""
    return tag.rsplit("}", 1)[-1] if isinstance(tag, str) else ""


def _children(element, name: str):
    return [c for c in element if _local(c.tag) == name]


def _label(element, name: str, ordinal: int) -> str:
    ident = element.get("id")
    return f"{name} {ident}" if ident not in (None, "") else f"{name} #{ordinal}"


def _numbers(values: list, where: str, what: str) -> np.ndarray:
    try:
        out = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError):
        bad = next((v for v in values if not _is_number(v)), values[0] if values else "")
        raise FormatError(f"{where}: {what} {bad!r} is not a number") from None
    if not np.all(np.isfinite(out)):
        raise FormatError(f"{where}: {what} has NaN or infinite values")
    return out


def _is_number(value) -> bool:
    try:
        float(value)
    except (TypeError, ValueError):
        return False
    return True


def _scale_cm(meta, source: str, cm_per_pixel: float | None) -> tuple[float, dict]:
    """cm per coordinate unit from ``<unit>`` and ``<resolution>`` (coordinate / resolution = value in unit)."""
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


def _function_samples(root, name: str, n_points: int, where: str) -> np.ndarray | None:
    """Samples of a polyline-domain function with this name, shape (n_points,), or None if absent."""
    for functions in _children(root, "functions"):
        for fn in _children(functions, "function"):
            if (fn.get("name") or "").strip().lower() != name:
                continue
            domain = (fn.get("domain") or "polyline").strip().lower()
            if domain != "polyline":
                return None
            samples = _children(fn, "sample")
            values = [s.get("value") if s.get("value") is not None else (s.text or "").strip() for s in samples]
            if len(values) != n_points:
                raise FormatError(f"{where} > function {name}: {len(values)} samples for {n_points} points "
                                  "(need one per point)")
            return _numbers(values, f"{where} > function {name}", "sample")
    return None


def _branch_index(root) -> int | None:
    for props in _children(root, "properties"):
        for prop in _children(props, "branch-segment-index"):
            value = prop.get("value", prop.text)
            try:
                return int(str(value).strip())
            except ValueError:
                return None
    return None


def _nearest_on_polyline(start: np.ndarray, end: np.ndarray, point: np.ndarray) -> tuple[int, np.ndarray, float]:
    """Nearest point to ``point`` on segments ``start -> end`` (shape (k, 3)); (segment, point, distance)."""
    d = end - start
    dd = np.einsum("ij,ij->i", d, d)
    t = np.where(dd > 0, np.einsum("ij,ij->i", point - start, d) / np.where(dd > 0, dd, 1.0), 0.0)
    t = np.clip(t, 0.0, 1.0)
    foot = start + t[:, None] * d
    dist = np.linalg.norm(foot - point, axis=1)
    k = int(np.argmin(dist))
    return k, foot[k], float(dist[k])


def read_rsml(path: str | os.PathLike, *, default_radius_cm: float = DEFAULT_RADIUS_CM,
              cm_per_pixel: float | None = None):
    """Read an RSML file into a :class:`~rootsim.rootsystem.RootSystem`.

    Parameters
    ----------
    path : path-like
    default_radius_cm : float
        Radius of roots without a ``diameter`` function (domain polyline), cm.
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

    path = Path(path)
    source = str(path)
    for name, value in (("default radius", default_radius_cm), ("pixel size", cm_per_pixel)):
        if value is not None and (not _is_number(value) or not np.isfinite(float(value)) or float(value) <= 0):
            raise FormatError(f"{source}: {name} {value!r} cm is not allowed (need a number > 0)")
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
    all_points = [p for p in top.iter() if _local(p.tag) == "point"]
    is_3d = any(p.get("z") is not None for p in all_points)

    seg_cols: dict[str, list] = {k: [] for k in ("parent_id", "plant_id", "root_id", "order", "root_class",
                                                   "start", "end", "radius_cm", "birth_day")}
    n_segments = 0
    n_roots = 0
    used_default_radius = False
    plant_index = 0
    for scene in scenes:
        for plant_ordinal, plant_el in enumerate(_children(scene, "plant"), start=1):
            plant_where = f"{source}: {_label(plant_el, 'plant', plant_ordinal)}"
            # Depth-first over nested roots: (element, where, order, parent root (start, end, first id)).
            stack = [(el, f"{plant_where} > {_label(el, 'root', k)}", 0, None)
                     for k, el in reversed(list(enumerate(_children(plant_el, "root"), start=1)))]
            while stack:
                root_el, where, order, parent_geom = stack.pop()
                polylines = [pl for g in _children(root_el, "geometry") for pl in _children(g, "polyline")]
                if not polylines:
                    raise FormatError(f"{where}: no <geometry><polyline> (each root needs one)")
                points_el = _children(polylines[0], "point")
                if len(points_el) < 2:
                    raise FormatError(f"{where} > geometry: polyline has {len(points_el)} point"
                                      f"{'' if len(points_el) == 1 else 's'} (need >= 2)")
                coords = []
                for axis in ("x", "y", "z") if is_3d else ("x", "y"):
                    values = [p.get(axis) for p in points_el]
                    if any(v is None for v in values):
                        missing = next(i for i, v in enumerate(values) if v is None) + 1
                        raise FormatError(f"{where} > geometry: point {missing} has no {axis} coordinate")
                    coords.append(_numbers(values, f"{where} > geometry", f"{axis} coordinate"))
                if is_3d:
                    pts = np.column_stack(coords) * scale
                else:
                    pts = np.column_stack([coords[0], np.zeros_like(coords[0]), -coords[1]]) * scale
                k = len(pts)
                diameter = _function_samples(root_el, "diameter", k, where)
                if diameter is None:
                    point_radius = np.full(k, float(default_radius_cm))
                    used_default_radius = True
                else:
                    point_radius = diameter * scale / 2.0
                    if np.any(point_radius < 0):
                        raise FormatError(f"{where} > function diameter: negative diameter")
                birth = _function_samples(root_el, "birth_day", k, where)
                point_birth = np.zeros(k) if birth is None else birth
                start, end = pts[:-1], pts[1:]
                seg_radius, seg_birth = point_radius[1:], point_birth[1:]
                ids = n_segments + np.arange(k - 1)
                parent = ids - 1
                if parent_geom is None:
                    parent[0] = -1
                else:
                    p_start, p_end, p_first = parent_geom
                    hint = _branch_index(root_el)
                    seg, foot, dist = _nearest_on_polyline(p_start, p_end, pts[0])
                    if hint is not None and 0 <= hint < len(p_start):
                        h_seg, h_foot, h_dist = _nearest_on_polyline(p_start[hint:hint + 1], p_end[hint:hint + 1], pts[0])
                        if h_dist <= dist + ATTACH_TOLERANCE_CM:
                            seg, foot, dist = hint, h_foot, h_dist
                    if dist > ATTACH_TOLERANCE_CM:  # connect the lateral to its parent
                        start = np.vstack([foot, start])
                        end = np.vstack([pts[0], end])
                        seg_radius = np.concatenate([point_radius[:1], seg_radius])
                        seg_birth = np.concatenate([point_birth[:1], seg_birth])
                        ids = n_segments + np.arange(k)
                        parent = ids - 1
                    parent[0] = p_first + seg
                m = len(start)
                label = (root_el.get("label") or "").strip() or f"order_{order}"
                seg_cols["parent_id"].append(parent)
                seg_cols["plant_id"].append(np.full(m, plant_index))
                seg_cols["root_id"].append(np.full(m, n_roots))
                seg_cols["order"].append(np.full(m, order))
                seg_cols["root_class"].append(np.full(m, label, dtype=object))
                seg_cols["start"].append(start)
                seg_cols["end"].append(end)
                seg_cols["radius_cm"].append(seg_radius)
                seg_cols["birth_day"].append(seg_birth)
                geom = (start, end, n_segments)
                n_segments += m
                n_roots += 1
                laterals = _children(root_el, "root")
                stack.extend((el, f"{where} > {_label(el, 'root', j)}", order + 1, geom)
                             for j, el in reversed(list(enumerate(laterals, start=1))))
            plant_index += 1

    def cat(name, empty):
        return np.concatenate(seg_cols[name]) if seg_cols[name] else empty

    start = cat("start", np.zeros((0, 3)))
    end = cat("end", np.zeros((0, 3)))
    columns = {
        "segment_id": np.arange(n_segments, dtype=np.int64),
        "parent_id": cat("parent_id", np.zeros(0, np.int64)),
        "plant_id": cat("plant_id", np.zeros(0, np.int64)),
        "root_id": cat("root_id", np.zeros(0, np.int64)),
        "order": cat("order", np.zeros(0, np.int64)),
        "root_class": cat("root_class", np.zeros(0, dtype=object)).astype(str),
        "x0": start[:, 0], "y0": start[:, 1], "z0": start[:, 2],
        "x1": end[:, 0], "y1": end[:, 1], "z1": end[:, 2],
        "radius_cm": cat("radius_cm", np.zeros(0)),
        "length_cm": np.linalg.norm(end - start, axis=1),
        "birth_day": cat("birth_day", np.zeros(0)),
    }
    metadata = _stored_metadata(meta)
    metadata.setdefault("stand", {})
    if isinstance(metadata["stand"], dict):
        metadata["stand"]["n_plants"] = plant_index
    metadata["import"] = {
        "format": "rsml", "source_file": source, **unit_facts, "cm_per_unit": scale * unit_facts["resolution"],
        "dimensions": 3 if is_3d else 2,
        "default_radius_cm": float(default_radius_cm) if used_default_radius else None,
    }
    return RootSystem(columns, metadata)


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
