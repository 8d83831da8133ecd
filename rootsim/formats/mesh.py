"""Closed tube surfaces around roots, written as STL, PLY, OBJ (numpy, in bulk) or binary glTF (.glb, trimesh).

Construction is vectorized over all roots at once:

1. Each root polyline is optionally simplified: interior points are dropped so that merged
   pieces are about ``merge_short_cm`` long (their radius is the length-weighted mean), and
   zero-length segments are always merged away.
2. Every segment gets a ring of ``sides`` vertices on a circle of its radius (the regular
   polygon is inscribed in the circle). Ring orientation follows a rotation-minimizing frame
   (parallel transport, Bishop 1975, "There is more than one way to frame a curve",
   Amer. Math. Monthly 82(3):246-251, DOI 10.2307/2319846): the minimal rotation taking one
   segment's direction to the next is applied to the previous frame. Because the rotation of a
   frame expressed as an angle in a fixed per-segment reference frame simply adds up, the
   transported angles are a segmented cumulative sum, with no sequential loop.
3. At a gentle bend consecutive segments share one ring in the mitre (bisector) plane; this
   keeps the prism volume exactly area x centre-line length. At a sharp bend (turn above
   ``sharp_turn_deg``, or a mitre that would reach past half of an adjacent segment) the tube
   is split: both pieces end in flat caps at the joint. So a root is one closed surface, or a few
   closed surfaces touching at its sharp bends; all are watertight with outward normals.
4. Each piece gets flat end caps (triangle fans around a centre vertex).

PLY files carry vertex colours by root order (:data:`ORDER_COLOURS_RGB`); glTF files one
material of that colour per root order, in metres with +Y up (:mod:`rootsim.formats.gltf`).
An empty root system gives a valid file with no triangles in every mesh format (for .glb: an
asset with one empty scene).
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..atomic import atomic_path
from ..errors import FormatError
from .polylines import polylines_from_segments

__all__ = ["TubeMesh", "check_mesh_options", "order_colours", "ORDER_COLOURS_RGB", "tube_mesh_arrays", "tube_mesh", "write_mesh", "SUFFIXES", "prism_volume_factor"]

SUFFIXES = (".stl", ".ply", ".obj", ".glb")

#: Segments (after merging) shorter than this are merged into a neighbour, cm.
MIN_EDGE_CM = 1e-7
#: Radius floor so that a root with zero radius still gives a non-degenerate tube, cm.
MIN_RADIUS_CM = 1e-4


@dataclass(frozen=True)
class TubeMesh:
    """Tube surfaces of a root system.

    Attributes
    ----------
    vertices : ndarray of float64, shape (v, 3)
        cm.
    faces : ndarray of int64, shape (f, 3)
        Counter-clockwise seen from outside (outward normals).
    face_root_id : ndarray of int64, shape (f,)
        ``root_id`` of the root each triangle belongs to.
    face_order : ndarray of int64, shape (f,)
        Root order of each triangle.
    vertex_order : ndarray of int64, shape (v,)
        Root order of each vertex (for vertex colours).
    n_pieces : int
        Closed surfaces (one per root, plus one per split at a sharp bend).
    n_edges : int
        Tube segments after merging.
    """

    vertices: np.ndarray
    faces: np.ndarray
    face_root_id: np.ndarray
    face_order: np.ndarray
    vertex_order: np.ndarray
    n_pieces: int
    n_edges: int


def prism_volume_factor(sides: int) -> float:
    """Area of a regular ``sides``-gon inscribed in the unit circle, ``(n/2) sin(2 pi / n)``."""
    return 0.5 * sides * np.sin(2 * np.pi / sides)


def check_mesh_options(sides, merge_short_cm, sharp_turn_deg) -> tuple[int, float, float]:
    """Validated ``(sides, merge_short_cm, sharp_turn_deg)``; :class:`FormatError` naming the bad option."""
    try:
        n = int(sides)
    except (TypeError, ValueError):
        n = -1
    if n != sides or n < 3 or n > 256:
        raise FormatError(f"mesh sides {sides!r} is not allowed (need a whole number from 3 to 256)")
    try:
        merge = float(merge_short_cm)
    except (TypeError, ValueError):
        merge = float("nan")
    if not np.isfinite(merge) or merge < 0:
        raise FormatError(f"merge length {merge_short_cm!r} cm is not allowed (need a number >= 0)")
    try:
        sharp = float(sharp_turn_deg)
    except (TypeError, ValueError):
        sharp = float("nan")
    if not (0 <= sharp < 180):
        raise FormatError(f"sharp-turn angle {sharp_turn_deg!r} degrees is not allowed (need 0 <= angle < 180)")
    return n, merge, sharp


def _simplify(points, point_offsets, edge_radius, merge_cm, carry: float = 0.0):
    """Drop interior polyline points (merging) and zero-length pieces.

    Returns kept points (m, 3), their polyline offsets (q + 1,), merged edge radii (m - q,),
    for each kept polyline the index of the source polyline (q,), and the running sum of edge
    lengths after these points. ``carry`` is that sum before them: polylines handled in
    consecutive chunks then get bit for bit the arc lengths of one pass over all of them.
    """
    n_points = len(points)
    n_poly = len(point_offsets) - 1
    counts = np.diff(point_offsets)
    poly_of_point = np.repeat(np.arange(n_poly), counts)
    is_first = np.zeros(n_points, dtype=bool)
    is_first[point_offsets[:-1]] = True
    is_last = np.zeros(n_points, dtype=bool)
    is_last[point_offsets[1:] - 1] = True
    # Edge k ends at point j = k + poly + 1; per point (non-first): length of the edge ending there.
    seg_len = np.zeros(n_points)
    seg_len[1:] = np.linalg.norm(np.diff(points, axis=0), axis=1)
    seg_len[is_first] = 0.0
    cum = _running_sum(seg_len, carry)
    carry = float(cum[-1]) if len(cum) else carry
    cum -= np.repeat(cum[point_offsets[:-1]], counts)  # arc length from the polyline start
    total = cum[point_offsets[1:] - 1]
    keep = seg_len > MIN_EDGE_CM
    if merge_cm > 0:
        keep &= np.floor(cum / merge_cm) > np.floor((cum - seg_len) / merge_cm)
    keep |= is_first | is_last
    # A tiny last edge: merge it into the previous kept piece instead.
    kept = np.flatnonzero(keep)
    last_pos = np.flatnonzero(is_last[kept])
    if len(last_pos):
        prev = kept[last_pos - 1]
        tiny = (~is_first[prev]) & (np.linalg.norm(points[kept[last_pos]] - points[prev], axis=1) <= MIN_EDGE_CM)
        keep[prev[tiny]] = False
    # Roots of (about) zero length have no tube.
    alive = total > MIN_EDGE_CM
    keep &= alive[poly_of_point]
    kept = np.flatnonzero(keep)
    kept_first = is_first[kept]
    new_offsets = np.append(np.flatnonzero(kept_first), len(kept)).astype(np.int64)
    # Merged radius: length-weighted mean of the source edges ending in (prev kept, this kept].
    nonfirst_kept = keep & ~is_first
    group = np.cumsum(nonfirst_kept) - nonfirst_kept  # merged edges completed before point j
    edge_points = np.flatnonzero(~is_first & alive[poly_of_point])
    g = group[edge_points]
    n_merged = int(nonfirst_kept.sum())
    src_radius = edge_radius[edge_points - poly_of_point[edge_points] - 1]
    w = seg_len[edge_points]
    wsum = np.bincount(g, weights=w, minlength=n_merged)
    rsum = np.bincount(g, weights=w * src_radius, minlength=n_merged)
    rplain = np.bincount(g, weights=src_radius, minlength=n_merged) / np.maximum(np.bincount(g, minlength=n_merged), 1)
    radius = np.where(wsum > 0, rsum / np.where(wsum > 0, wsum, 1.0), rplain)
    return points[kept], new_offsets, radius, np.flatnonzero(alive), carry


def _running_sum(values: np.ndarray, carry: float) -> np.ndarray:
    """``cumsum(values)`` continued from ``carry``: the same numbers as the cumulative sum of a longer
    array whose earlier entries summed to ``carry`` (``cumsum`` adds in order, one value at a time)."""
    if carry == 0.0:
        return np.cumsum(values)
    return np.cumsum(np.concatenate(([carry], values)))[1:]


def _unit(v):
    norm = np.linalg.norm(v, axis=-1, keepdims=True)
    return v / np.where(norm > 0, norm, 1.0), norm[..., 0]


def _trim_at_parent_surface(system, lines, pts, offsets, src_poly) -> int:
    """Move each lateral's first point out to its parent's tube surface, in place; count moved.

    A lateral's polyline starts at its branch point on the parent's centre line, so its tube
    would run through the parent's tube. The start is moved along the lateral's first edge to
    the point at distance ``R`` (the parent segment's radius) from the parent segment's line:
    the smallest ``s > 0`` with ``|(a - c + s d) x e| = R`` (``a`` start, ``d`` unit direction of
    the first edge, ``c`` and ``e`` a point and the unit direction of the parent segment), a
    quadratic in ``s``. The lateral's tube then begins with its cap centred on the parent's
    surface: the tubes touch with no tube inside the other. Laterals starting outside the
    parent, running along it, or whose first edge would keep less than a tenth of its length are
    left as they are.
    """
    first_row = lines.first_segment[src_poly]
    parent_row = np.asarray(system["parent_id"], dtype=np.int64)[first_row]
    root_id = np.asarray(system["root_id"], dtype=np.int64)
    has_parent = parent_row >= 0
    lateral = np.flatnonzero(has_parent)
    lateral = lateral[root_id[parent_row[lateral]] != root_id[first_row[lateral]]]
    if not len(lateral):
        return 0
    bearing = parent_row[lateral]
    c0 = np.column_stack([np.asarray(system[k], dtype=np.float64)[bearing] for k in ("x0", "y0", "z0")])
    c1 = np.column_stack([np.asarray(system[k], dtype=np.float64)[bearing] for k in ("x1", "y1", "z1")])
    big_r = np.asarray(system["radius_cm"], dtype=np.float64)[bearing]
    e, parent_length = _unit(c1 - c0)
    a = pts[offsets[lateral]]
    d, edge_length = _unit(pts[offsets[lateral] + 1] - a)
    w = np.cross(a - c0, e)
    m = np.cross(d, e)
    mm = np.einsum("ij,ij->i", m, m)
    wm = np.einsum("ij,ij->i", w, m)
    c = np.einsum("ij,ij->i", w, w) - big_r**2
    with np.errstate(invalid="ignore", divide="ignore"):
        step = (-wm + np.sqrt(np.maximum(wm**2 - mm * c, 0.0))) / mm
    ok = (c < 0) & (mm > 1e-12) & (parent_length > 0) & (edge_length > 0) & (step > 0) & (step < 0.9 * edge_length)
    moved = lateral[ok]
    pts[offsets[moved]] = a[ok] + step[ok, None] * d[ok]
    return int(ok.sum())


def tube_mesh_arrays(system, *, sides: int = 8, merge_short_cm: float = 0.0, sharp_turn_deg: float = 60.0,
                     trim_junctions: bool = True) -> TubeMesh:
    """Vertices and faces of closed tubes around every root.

    Parameters
    ----------
    system : RootSystem
    sides : int
        Vertices per ring (3 .. 256); the ring is a regular polygon inscribed in the root's circle.
    merge_short_cm : float
        Merge consecutive segments into pieces about this long (0: keep every segment).
    sharp_turn_deg : float
        Bends sharper than this split the tube (flat caps at the joint) instead of mitring.
    trim_junctions : bool
        Start each lateral's tube at its parent's surface instead of the parent's centre line
        (see :func:`_trim_at_parent_surface`), so tubes do not run inside each other.

    Returns
    -------
    TubeMesh
    """
    n_sides, merge, sharp = check_mesh_options(sides, merge_short_cm, sharp_turn_deg)
    mesh, _ = _tube_mesh_of_lines(system, polylines_from_segments(system), n_sides, merge, sharp, trim_junctions)
    return mesh


def _tube_mesh_of_lines(system, lines, n_sides: int, merge: float, sharp: float, trim_junctions: bool,
                        carry: tuple[float, float] = (0.0, 0.0)) -> tuple[TubeMesh, tuple[float, float]]:
    """:func:`tube_mesh_arrays` of some polylines (all, or a consecutive range of them).

    ``carry`` holds the running sums (arc length, frame angle) of the polylines before ``lines``;
    the new sums are returned with the mesh, so consecutive ranges meshed one after the other give
    the vertices of one whole-system pass, bit for bit.
    """
    radius_col = np.asarray(system["radius_cm"], dtype=np.float64)
    edge_radius = np.maximum(radius_col[lines.segment_order], MIN_RADIUS_CM)
    pts, offsets, radius, src_poly, arc_carry = _simplify(lines.points, lines.point_offsets, edge_radius, merge,
                                                          carry[0])
    del edge_radius
    if trim_junctions and len(src_poly):
        _trim_at_parent_surface(system, lines, pts, offsets[:-1], src_poly)
    first_seg = lines.first_segment[src_poly]
    poly_root = np.asarray(system["root_id"], dtype=np.int64)[first_seg]
    poly_order = np.asarray(system["order"], dtype=np.int64)[first_seg]
    n_poly = len(offsets) - 1
    n_edges = len(pts) - n_poly
    if n_edges <= 0:
        empty_i = np.zeros(0, dtype=np.int64)
        return TubeMesh(np.zeros((0, 3)), np.zeros((0, 3), dtype=np.int64), empty_i, empty_i, empty_i, 0, 0), \
            (arc_carry, carry[1])

    edge_counts = np.diff(offsets) - 1
    edge_poly = np.repeat(np.arange(n_poly), edge_counts)
    edge_first = np.zeros(n_edges, dtype=bool)
    edge_offsets = offsets - np.arange(n_poly + 1)
    edge_first[edge_offsets[:-1]] = True
    edge_last = np.zeros(n_edges, dtype=bool)
    edge_last[edge_offsets[1:] - 1] = True
    start_pt = np.arange(n_edges) + edge_poly  # point index of each edge's start
    a = pts[start_pt]
    b = pts[start_pt + 1]
    tangent, length = _unit(b - a)
    tangent[length <= 0] = (0.0, 0.0, -1.0)

    # Reference frame per edge: u perpendicular to the tangent, v = t x u (right-handed u, v, t).
    axis = np.zeros_like(tangent)
    axis[np.arange(n_edges), np.argmin(np.abs(tangent), axis=1)] = 1.0
    u, _ = _unit(np.cross(tangent, axis))
    v = np.cross(tangent, u)

    # Joint between edge e-1 and e (e not first in its polyline).
    joint = np.flatnonzero(~edge_first)
    ta, tb = tangent[joint - 1], tangent[joint]
    cos_turn = np.clip(np.einsum("ij,ij->i", ta, tb), -1.0, 1.0)
    k = np.cross(ta, tb)
    ua = u[joint - 1]
    denom = 1.0 + cos_turn
    safe = denom > 1e-12
    ru = ua * cos_turn[:, None] + np.cross(k, ua) + k * (np.einsum("ij,ij->i", k, ua) / np.where(safe, denom, 1.0))[:, None]
    delta = np.where(safe, np.arctan2(np.einsum("ij,ij->i", ru, v[joint]), np.einsum("ij,ij->i", ru, u[joint])), 0.0)
    inc = np.zeros(n_edges)
    inc[joint] = delta
    theta = _running_sum(inc, carry[1])
    angle_carry = float(theta[-1])
    theta -= np.repeat(theta[edge_offsets[:-1]], edge_counts)

    # Mitre or split at each joint.
    half_tan = np.sqrt(np.clip(1.0 - cos_turn, 0, None) / np.clip(denom, 1e-300, None))  # tan(turn / 2)
    reach = np.maximum(radius[joint - 1], radius[joint]) * half_tan
    split = (cos_turn < np.cos(np.radians(sharp))) | (reach > 0.5 * np.minimum(length[joint - 1], length[joint])) | ~safe
    piece_first = edge_first.copy()
    piece_first[joint[split]] = True
    mitred_end = np.zeros(n_edges, dtype=bool)  # the joint after edge e is mitred
    mitred_end[joint[~split] - 1] = True
    piece_index = np.cumsum(piece_first) - 1
    n_pieces = int(piece_first.sum())

    # Rings: one at the start of each piece, one at the end of every edge.
    n_rings = n_edges + n_pieces
    end_ring = np.arange(n_edges) + piece_index + 1
    start_ring = np.flatnonzero(piece_first) + np.arange(n_pieces)
    ring_center = np.empty((n_rings, 3))
    ring_edge = np.empty(n_rings, dtype=np.int64)
    ring_radius = np.empty(n_rings)
    ring_plane = np.empty((n_rings, 3))
    pf = np.flatnonzero(piece_first)
    ring_center[start_ring] = a[pf]
    ring_edge[start_ring] = pf
    ring_radius[start_ring] = radius[pf]
    ring_plane[start_ring] = tangent[pf]
    ring_center[end_ring] = b
    ring_edge[end_ring] = np.arange(n_edges)
    ring_radius[end_ring] = radius
    ring_plane[end_ring] = tangent
    mj = np.flatnonzero(mitred_end)
    ring_radius[end_ring[mj]] = 0.5 * (radius[mj] + radius[mj + 1])
    ring_plane[end_ring[mj]], _ = _unit(tangent[mj] + tangent[mj + 1])

    # Ring vertex: centre + radius * (w - (w.m / t.m) t), with w the ring direction in the edge's
    # transported frame, m the ring plane normal (mitre bisector or the tangent), t the tangent.
    # With e1 = cos(theta) u + sin(theta) v (the transported frame) and e2 = t x e1, the direction
    # at polygon angle alpha is w = cos(alpha) e1 + sin(alpha) e2. The projection is linear in w,
    # so vertex = centre + cos(alpha) E1 + sin(alpha) E2 with E_i = radius (e_i - (e_i.m / t.m) t)
    # per ring, and the (rings, sides, 3) array is written in place in one pass per term.
    re = ring_edge
    t_r = tangent[re]
    th = theta[re][:, None]
    e1 = np.cos(th) * u[re] + np.sin(th) * v[re]
    e2 = np.cross(t_r, e1)
    del th
    t_dot_m = np.einsum("rk,rk->r", t_r, ring_plane)
    scale = ring_radius / t_dot_m
    big1 = e1 * ring_radius[:, None] - (np.einsum("rk,rk->r", e1, ring_plane) * scale)[:, None] * t_r
    big2 = e2 * ring_radius[:, None] - (np.einsum("rk,rk->r", e2, ring_plane) * scale)[:, None] * t_r
    del e1, e2, t_r
    alpha = (2 * np.pi / n_sides) * np.arange(n_sides)
    vertices = np.empty((n_rings * n_sides + 2 * n_pieces, 3))
    ring_vertices = vertices[:n_rings * n_sides].reshape(n_rings, n_sides, 3)
    np.multiply(big1[:, None, :], np.cos(alpha)[None, :, None], out=ring_vertices)
    ring_vertices += big2[:, None, :] * np.sin(alpha)[None, :, None]
    ring_vertices += ring_center[:, None, :]
    del big1, big2

    piece_last_edge = np.append(pf[1:] - 1, n_edges - 1)
    vertices[n_rings * n_sides:n_rings * n_sides + n_pieces] = a[pf]  # cap centres
    vertices[n_rings * n_sides + n_pieces:] = b[piece_last_edge]
    cap_start = n_rings * n_sides + np.arange(n_pieces)
    cap_end = cap_start + n_pieces
    # the per-edge and per-ring geometry is done: free it before the faces are built
    del a, b, tangent, length, axis, u, v, ring_center, ring_radius, ring_plane, ring_vertices, theta, inc

    # Faces, written in place: per edge 2 * sides side triangles, then a start and an end cap
    # (a triangle fan) per piece.
    kk = np.arange(n_sides)
    kn = (kk + 1) % n_sides
    n_side_faces = 2 * n_sides * n_edges
    faces = np.empty((n_side_faces + 2 * n_sides * n_pieces, 3), dtype=np.int64)
    side = faces[:n_side_faces].reshape(n_edges, 2, n_sides, 3)
    ra = ((end_ring - 1) * n_sides)[:, None]
    rb = ra + n_sides
    side[:, 0, :, 0] = ra + kk
    side[:, 0, :, 1] = ra + kn
    side[:, 0, :, 2] = rb + kk
    side[:, 1, :, 0] = ra + kn
    side[:, 1, :, 1] = rb + kn
    side[:, 1, :, 2] = rb + kk
    caps = faces[n_side_faces:].reshape(2, n_pieces, n_sides, 3)
    rs = (start_ring * n_sides)[:, None]
    re_ = (end_ring[piece_last_edge] * n_sides)[:, None]
    caps[0, :, :, 0] = cap_start[:, None]
    caps[0, :, :, 1] = rs + kn
    caps[0, :, :, 2] = rs + kk
    caps[1, :, :, 0] = cap_end[:, None]
    caps[1, :, :, 1] = re_ + kk
    caps[1, :, :, 2] = re_ + kn

    edge_root = poly_root[edge_poly]
    edge_order = poly_order[edge_poly]
    piece_poly = edge_poly[pf]
    # filled in place (no concatenated copies): side faces per edge, then start and end caps per piece
    face_root = np.empty(len(faces), dtype=np.int64)
    face_order = np.empty(len(faces), dtype=np.int64)
    for out, per_edge, per_poly in ((face_root, edge_root, poly_root), (face_order, edge_order, poly_order)):
        out[:n_side_faces].reshape(n_edges, 2 * n_sides)[:] = per_edge[:, None]
        out[n_side_faces:].reshape(2, n_pieces, n_sides)[:] = per_poly[piece_poly][None, :, None]
    vertex_order = np.empty(len(vertices), dtype=np.int64)
    vertex_order[:n_rings * n_sides].reshape(n_rings, n_sides)[:] = edge_order[ring_edge][:, None]
    vertex_order[n_rings * n_sides:].reshape(2, n_pieces)[:] = poly_order[piece_poly][None, :]
    return TubeMesh(vertices, faces, face_root, face_order, vertex_order, n_pieces, n_edges), (arc_carry, angle_carry)


# Vertex colours by root order: the one palette of rootsim (colour-blind safe, Okabe & Ito 2008).
from ..palette import CATEGORY_COLOURS_RGB as ORDER_COLOURS_RGB, order_colours  # noqa: E402


def tube_mesh(system, **options):
    """Tubes around every root as a :class:`trimesh.Trimesh` (options as :func:`tube_mesh_arrays`)."""
    import trimesh

    arrays = tube_mesh_arrays(system, **options)
    return trimesh.Trimesh(arrays.vertices, arrays.faces, process=False, validate=False)


def _empty_mesh_bytes(suffix: str) -> bytes:
    if suffix == ".stl":  # binary STL: 80-byte header, uint32 triangle count 0
        return b"rootsim tube mesh (empty root system)".ljust(80, b" ") + (0).to_bytes(4, "little")
    if suffix == ".ply":
        return (b"ply\nformat binary_little_endian 1.0\ncomment rootsim tube mesh (empty root system)\n"
                b"element vertex 0\nproperty float x\nproperty float y\nproperty float z\n"
                b"element face 0\nproperty list uchar int vertex_indices\nend_header\n")
    if suffix == ".obj":
        return b"# rootsim tube mesh (empty root system)\n"
    from .gltf import empty_glb_bytes

    return empty_glb_bytes()  # glTF 2.0 binary: an asset with one empty scene


#: Segments meshed at a time by :func:`write_mesh` (bounds its memory: about 450 bytes per segment
#: of a chunk, against about 130 per segment of the system for the grouping and the table itself).
MESH_CHUNK_SEGMENTS = 100_000


def write_mesh(system, path: str | os.PathLike, *, sides: int = 8, merge_short_cm: float = 0.0,
               sharp_turn_deg: float = 60.0, trim_junctions: bool = True,
               chunk_segments: int | None = None) -> Path:
    """Write tubes around every root as STL, PLY, OBJ or binary glTF (by suffix), atomically.

    The roots are meshed ``chunk_segments`` segments at a time (whole polylines, consecutive in the
    grouping of :func:`rootsim.formats.polylines.polyline_segments`) and streamed to the file through
    :mod:`rootsim.formats.mesh_stream`, so memory does not grow with the mesh; the file is byte for
    byte that of :func:`tube_mesh_arrays` of the whole system.

    Parameters
    ----------
    system : RootSystem
    path : path-like
        ``.stl`` (binary), ``.ply`` (binary) or ``.obj`` in cm with z up; ``.glb`` (binary glTF 2.0)
        in metres with +Y up as that standard requires (see :mod:`rootsim.formats.gltf`).
    sides, merge_short_cm, sharp_turn_deg, trim_junctions
        See :func:`tube_mesh_arrays`.
    chunk_segments : int, optional
        Segments per chunk (default :data:`MESH_CHUNK_SEGMENTS`).

    Returns
    -------
    pathlib.Path
    """
    from .mesh_stream import sink_for_suffix
    from .polylines import polyline_chunks, polyline_segments, polyline_subset

    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in SUFFIXES:
        raise FormatError(f"{path}: unknown mesh suffix {path.suffix!r} (allowed: {', '.join(SUFFIXES)})")
    try:
        n_sides, merge, sharp = check_mesh_options(sides, merge_short_cm, sharp_turn_deg)
    except FormatError as exc:
        raise FormatError(f"{path}: {exc}") from None
    chunk = MESH_CHUNK_SEGMENTS if chunk_segments is None else int(chunk_segments)
    order, segment_offsets = polyline_segments(system)
    with atomic_path(path) as tmp:
        with sink_for_suffix(suffix, tmp.parent) as sink:
            carry = (0.0, 0.0)
            for first, stop in polyline_chunks(segment_offsets, chunk):
                lines = polyline_subset(system, order, segment_offsets, first, stop)
                mesh, carry = _tube_mesh_of_lines(system, lines, n_sides, merge, sharp, trim_junctions, carry)
                del lines
                sink.add(mesh, n_sides)
                del mesh
            del order, segment_offsets
            if sink.faces == 0:
                tmp.write_bytes(_empty_mesh_bytes(suffix))
            elif suffix == ".obj":
                sink.finish(tmp, writer=_write_obj)
            elif suffix == ".glb":
                orders = np.arange(sink.max_order + 1)
                sink.finish(tmp, group_colours_rgb=order_colours(orders),
                            group_names=[f"root order {k}" for k in orders.tolist()])
            else:
                sink.finish(tmp)
    return path


#: Faces turned into STL records per block (bounds the temporary memory).
_STL_BLOCK = 1 << 21
STL_HEADER = b"rootsim tube mesh, units cm".ljust(80, b" ")


def stl_records(vertices: np.ndarray, faces: np.ndarray):
    """Binary STL records of ``faces``, a block at a time: per triangle its unit normal, 3 vertices
    (float32) and a zero uint16 attribute, 50 bytes per record (the STL layout, common practice).

    Parameters
    ----------
    vertices : ndarray of float32, shape (v, 3)
    faces : ndarray of int, shape (f, 3)
    """
    from .mesh_stream import STL_RECORD

    for start in range(0, len(faces), _STL_BLOCK):
        block = faces[start:start + _STL_BLOCK]
        tri = np.take(vertices, block.ravel(), axis=0).reshape(-1, 3, 3)  # contiguous (b, 3, 3)
        e1 = tri[:, 1] - tri[:, 0]
        e2 = tri[:, 2] - tri[:, 0]
        normal = np.empty_like(e1)
        normal[:, 0] = e1[:, 1] * e2[:, 2] - e1[:, 2] * e2[:, 1]
        normal[:, 1] = e1[:, 2] * e2[:, 0] - e1[:, 0] * e2[:, 2]
        normal[:, 2] = e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0]
        norm = np.sqrt(np.einsum("ij,ij->i", normal, normal))
        normal /= np.where(norm > 0, norm, 1.0)[:, None]
        record = np.empty(len(block), dtype=STL_RECORD)
        record["normal"] = normal
        record["vertices"] = tri
        record["attribute"] = 0
        yield record


def ply_header(n_vertices: int, n_faces: int, *, colours: bool) -> bytes:
    """Header of a binary little-endian PLY of float32 vertices (with uchar RGB colours if ``colours``)
    and triangles as (uchar 3, int32 x 3)."""
    colour_props = "property uchar red\nproperty uchar green\nproperty uchar blue\n" if colours else ""
    return ("ply\nformat binary_little_endian 1.0\ncomment rootsim tube mesh, units cm; colours by root order\n"
            f"element vertex {n_vertices}\nproperty float x\nproperty float y\nproperty float z\n{colour_props}"
            f"element face {n_faces}\nproperty list uchar int vertex_indices\nend_header\n").encode("ascii")


def _write_obj(path: Path, vertices, faces) -> None:
    """Wavefront OBJ text (vertices ``v x y z``, faces ``f i j k`` 1-based), formatted in bulk.

    ``vertices`` and ``faces`` are arrays of shape (k, 3) or iterables of such blocks, in order.
    """
    def rows(blocks, chunk):
        for block in [blocks] if isinstance(blocks, np.ndarray) else blocks:
            for start in range(0, len(block), chunk):
                yield block[start:start + chunk]

    with open(path, "w", encoding="ascii") as fh:
        fh.write("# rootsim tube mesh, units cm\n")
        for block in rows(vertices, 200_000):
            fh.write(("v %.9g %.9g %.9g\n" * len(block)) % tuple(block.ravel()))
        for block in rows(faces, 200_000):
            block = block + 1
            fh.write(("f %d %d %d\n" * len(block)) % tuple(block.ravel()))
