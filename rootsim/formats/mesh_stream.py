"""Tube-mesh files written a chunk of roots at a time, in the layout of a whole-system mesh.

:func:`rootsim.formats.mesh.write_mesh` meshes the roots in chunks (consecutive polylines) and
hands each chunk's :class:`~rootsim.formats.mesh.TubeMesh` to a sink of this module, so only one
chunk's vertices and faces are in memory at a time. The file is byte for byte the one a single
pass over all roots gives: a whole-system mesh lists all ring vertices, then all start-cap
centres, then all end-cap centres, and all side triangles, then all start caps, then all end caps.
Each of these sections is appended to an anonymous temporary file (deleted when closed, also if the
process is killed) next to the output while the chunks come in, and the sections are copied into
the output at the end, when the counts a header needs are known. A cap triangle points to its cap
centre, whose index is only known then; it is stored as the piece's number and offset while copying.

Chunk-local indices of a :class:`TubeMesh` with ``r`` ring vertices and ``q`` pieces: ring
vertices ``0 .. r - 1``, start-cap centres ``r .. r + q - 1``, end-cap centres after them; faces:
``2 sides e`` side triangles, then ``sides q`` start caps, then ``sides q`` end caps.
"""

from __future__ import annotations

import shutil
import tempfile
from pathlib import Path

import numpy as np

__all__ = ["MeshSink", "sink_for_suffix", "PLY_VERTEX", "PLY_FACE", "STL_RECORD"]

#: Rows read back from a section file at a time (bounds the memory of copying and formatting).
BLOCK_ROWS = 1 << 18

PLY_VERTEX = np.dtype([("xyz", "<f4", (3,)), ("rgb", "u1", (3,))])
PLY_FACE = np.dtype([("count", "u1"), ("index", "<i4", (3,))])
STL_RECORD = np.dtype([("normal", "<f4", (3,)), ("vertices", "<f4", (3, 3)), ("attribute", "<u2")])

_KINDS = ("side", "start_cap", "end_cap")


class Section:
    """Records of one dtype appended to an anonymous temporary file and read back in blocks."""

    def __init__(self, directory: Path, dtype, row_shape: tuple = ()):
        self.dtype = np.dtype(dtype)
        self.row_shape = tuple(row_shape)
        self.rows = 0
        self._file = tempfile.TemporaryFile(dir=directory, prefix=".rootsim-mesh-")

    def append(self, records: np.ndarray) -> None:
        records = np.ascontiguousarray(records, dtype=self.dtype)
        if records.size:
            self._file.write(memoryview(records.reshape(-1)).cast("B"))
        self.rows += len(records)

    def blocks(self, rows: int = BLOCK_ROWS):
        """The records in order, ``rows`` at a time."""
        self._file.flush()
        self._file.seek(0)
        left = self.rows
        while left:
            k = min(rows, left)
            block = np.empty((k, *self.row_shape), dtype=self.dtype)
            self._file.readinto(memoryview(block.reshape(-1)).cast("B"))
            left -= k
            yield block

    def copy_to(self, out) -> None:
        """Copy the records' bytes unchanged to the open binary file ``out``."""
        self._file.flush()
        self._file.seek(0)
        shutil.copyfileobj(self._file, out, 1 << 22)

    def close(self) -> None:
        self._file.close()


class MeshSink:
    """Collects chunk meshes into sections; :meth:`finish` writes the file. Use as a context manager."""

    def __init__(self, directory: Path):
        self.directory = Path(directory)
        self.sections: dict = {}
        self.ring_vertices = 0  # ring vertices of the chunks so far
        self.pieces = 0  # pieces (closed tube surfaces) of the chunks so far
        self.faces = 0
        self.max_order = -1

    def section(self, key, dtype, row_shape: tuple = ()) -> Section:
        if key not in self.sections:
            self.sections[key] = Section(self.directory, dtype, row_shape)
        return self.sections[key]

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        for section in self.sections.values():
            section.close()

    def add(self, mesh, sides: int) -> None:
        """Append one chunk's mesh (a :class:`rootsim.formats.mesh.TubeMesh` of ``sides``-gon rings)."""
        if len(mesh.faces) == 0:
            return
        r = len(mesh.vertices) - 2 * mesh.n_pieces
        q = mesh.n_pieces
        n_side = 2 * sides * mesh.n_edges
        faces = mesh.faces
        parts = {"side": faces[:n_side] + self.ring_vertices,
                 "start_cap": faces[n_side:n_side + sides * q].copy(),
                 "end_cap": faces[n_side + sides * q:].copy()}
        for kind, local_centre in (("start_cap", r), ("end_cap", r + q)):
            part = parts[kind]
            part[:, 0] += self.pieces - local_centre  # the piece's number: the centre's index is known at the end
            part[:, 1:] += self.ring_vertices
        bounds = {"side": (0, n_side), "start_cap": (n_side, n_side + sides * q),
                  "end_cap": (n_side + sides * q, len(faces))}
        vertex_parts = {"side": slice(0, r), "start_cap": slice(r, r + q), "end_cap": slice(r + q, r + 2 * q)}
        self.write_chunk(mesh, parts, bounds, vertex_parts)
        self.ring_vertices += r
        self.pieces += q
        self.faces += len(faces)
        self.max_order = max(self.max_order, int(mesh.face_order.max()))

    def centre_offsets(self) -> dict:
        """Index of the first start-cap and end-cap centre in the whole mesh (added to the piece numbers)."""
        return {"side": 0, "start_cap": self.ring_vertices, "end_cap": self.ring_vertices + self.pieces}

    @property
    def n_vertices(self) -> int:
        return self.ring_vertices + 2 * self.pieces

    def write_chunk(self, mesh, faces: dict, bounds: dict, vertex_parts: dict) -> None:  # pragma: no cover
        raise NotImplementedError

    def finish(self, path: Path, **options) -> None:  # pragma: no cover
        raise NotImplementedError

    def fixed_faces(self, key, kind: str, column):
        """Blocks of a face section with the cap centres' final indices (``column`` selects the index array)."""
        offset = self.centre_offsets()[kind]
        for block in self.sections[key].blocks() if key in self.sections else ():
            if offset:
                column(block)[:, 0] += offset
            yield block


class PlySink(MeshSink):
    """Binary little-endian PLY with vertex colours by root order (the layout of ``mesh._write_ply``)."""

    def write_chunk(self, mesh, faces, bounds, vertex_parts):
        from ..palette import order_colours

        for kind, rows in vertex_parts.items():
            record = np.empty(rows.stop - rows.start, dtype=PLY_VERTEX)
            record["xyz"] = mesh.vertices[rows]
            record["rgb"] = order_colours(mesh.vertex_order[rows])
            self.section(("vertex", kind), PLY_VERTEX).append(record)
        for kind, part in faces.items():
            record = np.empty(len(part), dtype=PLY_FACE)
            record["count"] = 3
            record["index"] = part
            self.section(("face", kind), PLY_FACE).append(record)

    def finish(self, path: Path, **options) -> None:
        from .mesh import ply_header

        with open(path, "wb") as fh:
            fh.write(ply_header(self.n_vertices, self.faces, colours=True))
            for kind in _KINDS:
                if ("vertex", kind) in self.sections:
                    self.sections[("vertex", kind)].copy_to(fh)
            for kind in _KINDS:
                for block in self.fixed_faces(("face", kind), kind, lambda b: b["index"]):
                    block.tofile(fh)


class StlSink(MeshSink):
    """Binary STL: one 50-byte record per triangle (no indices, so each chunk's records are final)."""

    def write_chunk(self, mesh, faces, bounds, vertex_parts):
        from .mesh import stl_records

        vertices = mesh.vertices.astype(np.float32)
        for kind, (lo, hi) in bounds.items():
            section = self.section(kind, STL_RECORD)
            for record in stl_records(vertices, mesh.faces[lo:hi]):
                section.append(record)

    def finish(self, path: Path, **options) -> None:
        from .mesh import STL_HEADER

        with open(path, "wb") as fh:
            fh.write(STL_HEADER)
            fh.write(np.uint32(self.faces).tobytes())
            for kind in _KINDS:
                if kind in self.sections:
                    self.sections[kind].copy_to(fh)


class ObjSink(MeshSink):
    """Wavefront OBJ text, formatted from the float64 vertices and the faces at the end."""

    def write_chunk(self, mesh, faces, bounds, vertex_parts):
        for kind, rows in vertex_parts.items():
            self.section(("vertex", kind), "<f8", (3,)).append(mesh.vertices[rows])
        for kind, part in faces.items():
            self.section(("face", kind), "<i8", (3,)).append(part)

    def _vertex_blocks(self):
        for kind in _KINDS:
            if ("vertex", kind) in self.sections:
                yield from self.sections[("vertex", kind)].blocks()

    def _face_blocks(self):
        for kind in _KINDS:
            yield from self.fixed_faces(("face", kind), kind, lambda b: b)

    def finish(self, path: Path, *, writer=None, **options) -> None:
        writer(path, self._vertex_blocks(), self._face_blocks())


class GlbSink(MeshSink):
    """Binary glTF 2.0: float32 positions in metres (+Y up), uint32 indices grouped by root order."""

    def __init__(self, directory: Path):
        super().__init__(directory)
        self.low = np.full(3, np.inf, dtype=np.float32)
        self.high = np.full(3, -np.inf, dtype=np.float32)

    def write_chunk(self, mesh, faces, bounds, vertex_parts):
        from .gltf import to_gltf_axes

        positions = to_gltf_axes(np.asarray(mesh.vertices, dtype=np.float64))
        if len(positions):
            self.low = np.minimum(self.low, positions.min(axis=0))
            self.high = np.maximum(self.high, positions.max(axis=0))
        for kind, rows in vertex_parts.items():
            self.section(("vertex", kind), "<f4", (3,)).append(positions[rows])
        for kind, part in faces.items():
            lo, hi = bounds[kind]
            group = mesh.face_order[lo:hi]
            for g in np.unique(group).tolist():
                self.section(("face", g, kind), "<u4", (3,)).append(part[group == g])

    def finish(self, path: Path, *, group_colours_rgb=None, group_names=None, **options) -> None:
        from .gltf import glb_document, glb_bytes_header

        groups = sorted({key[1] for key in self.sections if key[0] == "face"})
        counts = [sum(self.sections[("face", g, kind)].rows for kind in _KINDS if ("face", g, kind) in self.sections)
                  for g in groups]
        starts = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(np.int64).tolist() if groups else []
        document, binary_length = glb_document(self.n_vertices, self.faces, self.low, self.high, groups, starts,
                                               counts, group_colours_rgb, group_names)
        with open(path, "wb") as fh:
            fh.write(glb_bytes_header(document, binary_length))
            for kind in _KINDS:
                if ("vertex", kind) in self.sections:
                    self.sections[("vertex", kind)].copy_to(fh)
            for g in groups:
                for kind in _KINDS:
                    for block in self.fixed_faces(("face", g, kind), kind, lambda b: b):
                        block.tofile(fh)


def sink_for_suffix(suffix: str, directory: Path) -> MeshSink:
    """The sink writing ``suffix`` (``.stl``, ``.ply``, ``.obj`` or ``.glb``)."""
    return {".ply": PlySink, ".stl": StlSink, ".obj": ObjSink, ".glb": GlbSink}[suffix](directory)
