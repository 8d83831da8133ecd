"""RSML (Root System Markup Language) export and import.

RSML is an open XML format for root architecture (Lobet et al. 2015, "Root System Markup
Language: toward a unified root architecture description language", Plant Physiology
167(3):617-627, DOI 10.1104/pp.114.253625). Files written here validate against the
standard's XML Schema (``rsml.xsd``); rootsim's own data sit where the schema allows them::

    <rsml>
      <metadata> version, unit (cm), resolution (1), last-modified, software (rootsim), user,
                 file-key, property-definitions </metadata>
      <scene>
        <properties><segment-table-metadata format="json">{stand, run, ...}</segment-table-metadata></properties>
        <plant id="0">
          <root id="12" label="primary">            one element per root polyline
            <properties><branch-segment-index value="4"/></properties>   (laterals only)
            <geometry><polyline><point x="..." y="..." z="..."/> ...</polyline></geometry>
            <functions>
              <function name="diameter" domain="polyline"><sample value="0.1"/> ...</function>
              <function name="birth_day" domain="polyline"> ... </function>
            </functions>
            <root ...> laterals, nested inside their parent root </root>
          </root>
        </plant>
      </scene>
    </rsml>

Conventions (both directions): a root's polyline has one point per segment end plus its start
point; sample ``j >= 1`` of a function belongs to the segment ending at point ``j``, sample 0 to
the first segment. A grown lateral's polyline starts at its branch point on the parent root;
``branch-segment-index`` (0-based, along the parent's polyline) names the parent segment so
that a branch exactly at a joint keeps its parent segment through a round trip.
Numbers are written as plain decimals (the schema's ``xs:decimal``: no exponent) with the
shortest digits that read back to the same double.

The schema asks for at least one plant with one root: a root system without segments is
written with an empty ``<scene>``, which rootsim reads back but a schema validator refuses.
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
from .polylines import polyline_points, polyline_segments

__all__ = ["write_rsml", "read_rsml", "decimal_strings", "SUFFIXES", "UNIT_CM", "PIXEL_UNITS", "DEFAULT_RADIUS_CM"]

SUFFIXES = (".rsml",)

#: Length of one unit in cm, for the units accepted in ``<metadata><unit>`` (lower case): the
#: metric units the RSML standard lists from metre to nanometre and the inch, by symbol and by
#: name in both spellings, singular and plural.
UNIT_CM = {
    **dict.fromkeys(("m", "meter", "metre", "meters", "metres"), 100.0),
    **dict.fromkeys(("cm", "centimeter", "centimetre", "centimeters", "centimetres"), 1.0),
    **dict.fromkeys(("mm", "millimeter", "millimetre", "millimeters", "millimetres"), 0.1),
    **dict.fromkeys(("um", "\u00b5m", "\u03bcm", "micrometer", "micrometre", "micrometers", "micrometres",
                     "micron", "microns"), 1e-4),
    **dict.fromkeys(("nm", "nanometer", "nanometre", "nanometers", "nanometres"), 1e-7),
    **dict.fromkeys(("in", "inch", "inches"), 2.54),
}
PIXEL_UNITS = ("pixel", "pixels", "px")

#: Radius given to imported roots without a diameter function, cm.
DEFAULT_RADIUS_CM = 0.025

_POINT = '<point x="%s" y="%s" z="%s"/>'
_SAMPLE = '<sample value="%s"/>'
#: Points whose numbers are turned into text at once while writing (bounds the memory of the strings).
_BATCH_POINTS = 16_384


# --------------------------------------------------------------------------------------------
# export
# --------------------------------------------------------------------------------------------

def decimal_strings(values) -> list[str]:
    """Shortest round-trip decimals without exponent (``xs:decimal`` lexical form), one per value.

    Parameters
    ----------
    values : array_like of float, shape (n,)
        Finite numbers.

    Returns
    -------
    list of str
        ``repr`` where it has no exponent (|v| in [1e-4, 1e16) or 0), else
        :func:`numpy.format_float_positional` with ``unique=True`` (the same shortest digits).
    """
    values = np.asarray(values, dtype=np.float64).ravel()
    strings = list(map(repr, values.tolist()))
    magnitude = np.abs(values)
    for i in np.flatnonzero(((magnitude < 1e-4) & (magnitude > 0)) | (magnitude >= 1e16)).tolist():
        strings[i] = np.format_float_positional(values[i], unique=True, trim="0")
    return strings


def _xml_text(value) -> str:
    """``value`` as text without the characters XML 1.0 does not allow (controls other than tab/newline)."""
    text = str(value)
    return "".join(ch for ch in text if ch >= " " or ch in "\t\n\r") if any(ch < " " for ch in text) else text


def _root_tree(system, segment_order, segment_offsets):
    """Parent polyline of every polyline (-1 for roots starting at the plant) and the branch index
    (position of the parent segment along the parent polyline)."""
    from .polylines import sorted_positions

    parent_seg = np.asarray(system["parent_id"], dtype=np.int64)[segment_order[segment_offsets[:-1]]]
    has_parent = parent_seg >= 0
    position = sorted_positions(segment_order)[np.maximum(parent_seg, 0)]  # only the parents' positions kept
    parent_poly = np.searchsorted(segment_offsets, position, side="right") - 1
    branch_index = np.where(has_parent, position - segment_offsets[parent_poly], -1)
    return np.where(has_parent, parent_poly, -1), branch_index


def _file_key(path: Path) -> str:
    """The name a file is known by: the stem of ``path``, or of the final file when ``path`` is a temporary
    name of :func:`rootsim.result_folder.temporary_name` (``.NAME.rootsim-HOST-PID-TOKEN.KIND``)."""
    name = path.name
    marker = name.rfind(".rootsim-")
    if name.startswith(".") and marker > 1:
        return Path(name[1:marker]).stem
    return path.stem


def _metadata_xml(file_key: str, resolution: float, user: str) -> str:
    stamp = datetime.datetime.now(datetime.timezone.utc).replace(microsecond=0).isoformat()
    return (
        "  <metadata>\n"
        "    <version>1</version>\n"
        "    <unit>cm</unit>\n"
        f"    <resolution>{decimal_strings([resolution])[0]}</resolution>\n"
        f"    <last-modified>{stamp}</last-modified>\n"
        "    <software>rootsim</software>\n"
        f"    <user>{escape(user)}</user>\n"
        f"    <file-key>{escape(file_key)}</file-key>\n"
        "    <property-definitions>\n"
        "      <property-definition><label>branch-segment-index</label><type>integer</type>"
        "<default>-1</default></property-definition>\n"
        "    </property-definitions>\n"
        "  </metadata>\n"
    )


def _scene_properties_xml(system) -> str:
    meta = getattr(system, "metadata", None) or {}
    if not meta:
        return ""
    table_meta = escape(json.dumps(meta, sort_keys=True, default=str))
    return (f'    <properties><segment-table-metadata format="json">{table_meta}'
            "</segment-table-metadata></properties>\n")


def write_rsml(system, path: str | os.PathLike, *, resolution: float = 1.0, user: str = "unknown",
               file_key: str | None = None) -> Path:
    """Write the root system as RSML (one ``<plant>`` per plant, laterals nested), atomically.

    Parameters
    ----------
    system : RootSystem
    path : path-like
        Target ``.rsml`` file. An empty system gives a file with an empty ``<scene>``.
    resolution : float
        Value of ``<metadata><resolution>``: coordinates are written in cm times this
        (1 = plain cm).
    user : str
        Value of the mandatory ``<metadata><user>`` (who made the file).
    file_key : str, optional
        Value of ``<metadata><file-key>`` (the name the file is known by); default: the stem of ``path``, or
        of the final file when ``path`` is a temporary name (:func:`rootsim.result_folder.temporary_name`) that
        a caller renames afterwards, so a temporary name never reaches the file.

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
    user = " ".join(_xml_text(user).split()) or "unknown"
    file_key = _xml_text(_file_key(path) if file_key is None else file_key)
    segment_order, segment_offsets = polyline_segments(system)
    parent_poly, branch_index = _root_tree(system, segment_order, segment_offsets)
    first = segment_order[segment_offsets[:-1]]
    plant = np.asarray(system["plant_id"], dtype=np.int64)[first]
    root_id = np.asarray(system["root_id"], dtype=np.int64)[first]
    classes = system["root_class"]  # only the first segments' classes (a Categorical is not expanded)
    classes = classes.take(first) if hasattr(classes, "take") else np.asarray(classes)[first]
    labels = [_xml_text(label) for label in np.asarray(classes).astype(str).tolist()]
    if resolution != 1.0:
        for name in ("x0", "y0", "z0", "x1", "y1", "z1"):
            if not np.all(np.isfinite(np.asarray(system[name], dtype=np.float64) * resolution)):
                raise FormatError(f"{path}: coordinates times resolution {resolution!r} are not finite numbers")
    radius = np.asarray(system["radius_cm"], dtype=np.float64)
    birth_day = np.asarray(system["birth_day"], dtype=np.float64)
    offsets = segment_offsets + np.arange(len(segment_offsets), dtype=np.int64)  # points of each polyline
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

    # The document as a list of events in writing order: ("open", polyline, depth), ("close", depth),
    # or literal text. The numbers are turned into text a batch of polylines at a time, so the
    # strings of at most about _BATCH_POINTS points exist at once.
    events: list[tuple] = []
    for plant_id in plant_ids:
        events.append(("text", f'    <plant id="{plant_id}">\n'))
        for top in tops_by_plant.get(plant_id, []):
            stack: list[tuple[int, int, bool]] = [(top, 3, False)]
            while stack:  # depth-first, laterals inside their parent
                p, depth, closing = stack.pop()
                if closing:
                    events.append(("text", "  " * depth + "</root>\n"))
                    continue
                events.append(("open", p, depth))
                stack.append((p, depth, True))
                stack.extend((c, depth + 1, False) for c in reversed(children.get(p, [])))
        events.append(("text", "    </plant>\n"))

    def root_xml(p: int, depth: int, a: int, coords, diameter, birth) -> str:
        pad = "  " * depth
        k = int(offsets[p + 1] - offsets[p])
        b = a + k
        head = [f'{pad}<root id="{root_id[p]}" label={quoteattr(str(labels[p]))}>\n']
        if branch_index[p] >= 0:
            head.append(f'{pad}  <properties><branch-segment-index value="{branch_index[p]}"/></properties>\n')
        head.append(f"{pad}  <geometry>\n{pad}    <polyline>\n")
        head.append(((pad + "      " + _POINT + "\n") * k) % tuple(coords[3 * a:3 * b]))
        head.append(f"{pad}    </polyline>\n{pad}  </geometry>\n{pad}  <functions>\n")
        head.append(f'{pad}    <function name="diameter" domain="polyline">{(_SAMPLE * k) % tuple(diameter[a:b])}</function>\n')
        head.append(f'{pad}    <function name="birth_day" domain="polyline">{(_SAMPLE * k) % tuple(birth[a:b])}</function>\n')
        head.append(f"{pad}  </functions>\n")
        return "".join(head)

    def write_batch(fh, batch: list[tuple]) -> None:
        opened = np.array([e[1] for e in batch if e[0] == "open"], dtype=np.int64)
        counts = offsets[opened + 1] - offsets[opened]
        local_start = np.r_[0, np.cumsum(counts)[:-1]] if opened.size else np.zeros(0, dtype=np.int64)
        picked, segment = polyline_points(system, segment_order, segment_offsets, opened)
        coords = decimal_strings(picked * resolution if resolution != 1.0 else picked)
        diameter = decimal_strings(2.0 * radius[segment] * resolution)
        birth = decimal_strings(birth_day[segment])
        starts = iter(local_start.tolist())
        fh.write("".join(root_xml(e[1], e[2], next(starts), coords, diameter, birth) if e[0] == "open" else e[1]
                         for e in batch))

    with atomic_path(path) as tmp, open(tmp, "w", encoding="utf-8") as fh:
        fh.write('<?xml version="1.0" encoding="UTF-8"?>\n<rsml>\n')
        fh.write(_metadata_xml(file_key, resolution, user))
        fh.write("  <scene>\n")
        if plant_ids:
            fh.write(_scene_properties_xml(system))
        batch: list[tuple] = []
        batch_points = 0
        for event in events:
            batch.append(event)
            if event[0] == "open":
                batch_points += int(offsets[event[1] + 1] - offsets[event[1]])
                if batch_points >= _BATCH_POINTS:
                    write_batch(fh, batch)
                    batch, batch_points = [], 0
        if batch:
            write_batch(fh, batch)
        fh.write("  </scene>\n</rsml>\n")
    return path


def read_rsml(path: str | os.PathLike, **options):
    """Read an RSML file; see :func:`rootsim.formats.rsml_reader.read_rsml`."""
    from .rsml_reader import read_rsml as _read

    return _read(path, **options)
