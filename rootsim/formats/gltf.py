"""Binary glTF 2.0 (``.glb``) of a triangle mesh, written with numpy.

glTF 2.0 (Khronos Group, specification 2.0, section 3.4 "Coordinate System and Units") fixes
metres as the unit and +Y as up, with +Z forward and a right-handed frame. rootsim works in
centimetres with z up, so vertices are mapped as

    X = x / 100,   Y = z / 100,   Z = -y / 100     (metres)

a proper rotation (determinant +1) about the x axis, so triangle winding, outward normals and
handedness are kept. The deepest root point has the most negative Y.

Layout: one buffer holding the float32 positions and the uint32 triangle indices; one mesh
with one primitive per root order, all sharing the position accessor, each with a material
whose base colour is that order's colour (given as sRGB bytes, stored linear as the
specification asks for ``baseColorFactor``; sRGB transfer function of IEC 61966-2-1:1999).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

__all__ = ["glb_bytes_header", "glb_document", "write_glb", "srgb_to_linear", "CM_PER_METRE", "empty_glb_bytes"]

CM_PER_METRE = 100.0

_ARRAY_BUFFER = 34962
_ELEMENT_ARRAY_BUFFER = 34963
_FLOAT = 5126
_UNSIGNED_INT = 5125
_TRIANGLES = 4


def srgb_to_linear(rgb_bytes) -> np.ndarray:
    """Linear values in [0, 1] of sRGB colour bytes (IEC 61966-2-1 transfer function).

    Parameters
    ----------
    rgb_bytes : array_like of uint8, shape (..., 3)

    Returns
    -------
    ndarray of float64, same shape
        ``c / 12.92`` for ``c <= 0.04045``, else ``((c + 0.055) / 1.055) ** 2.4`` with ``c = byte / 255``.
    """
    c = np.asarray(rgb_bytes, dtype=np.float64) / 255.0
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def to_gltf_axes(vertices_cm: np.ndarray) -> np.ndarray:
    """rootsim cm with z up, shape (v, 3), to glTF metres with +Y up (float32, shape (v, 3))."""
    out = np.empty((len(vertices_cm), 3), dtype=np.float32)
    out[:, 0] = vertices_cm[:, 0] / CM_PER_METRE
    out[:, 1] = vertices_cm[:, 2] / CM_PER_METRE
    out[:, 2] = vertices_cm[:, 1] / -CM_PER_METRE
    return out


def glb_bytes_header(document: dict, binary_length: int) -> bytes:
    """GLB header plus the padded JSON chunk and the BIN chunk header for ``binary_length`` bytes.

    GLB layout (glTF 2.0 specification, section 4.4 "Binary glTF Layout"): 12-byte header
    (magic ``glTF``, version 2, total length), a JSON chunk padded with spaces to 4 bytes, then a
    BIN chunk padded with zeros to 4 bytes (pass the padded length).
    """
    text = json.dumps(document, separators=(",", ":")).encode("utf-8")
    text += b" " * (-len(text) % 4)
    json_chunk = len(text).to_bytes(4, "little") + b"JSON" + text
    bin_header = (binary_length.to_bytes(4, "little") + b"BIN\x00") if binary_length else b""
    total = 12 + len(json_chunk) + len(bin_header) + binary_length
    return b"glTF" + (2).to_bytes(4, "little") + total.to_bytes(4, "little") + json_chunk + bin_header


def empty_glb_bytes() -> bytes:
    """A valid asset with one empty scene (no nodes, no buffers)."""
    return glb_bytes_header({"asset": {"version": "2.0", "generator": "rootsim"}, "scene": 0, "scenes": [{}]}, 0)


def glb_document(n_vertices: int, n_faces: int, low, high, groups: list, starts: list, counts: list,
                 group_colours_rgb: np.ndarray, group_names: list[str] | None) -> tuple[dict, int]:
    """The glTF JSON document of :func:`write_glb` and the length of its binary chunk.

    Parameters
    ----------
    n_vertices, n_faces : int
        Positions (float32 VEC3) and triangles (3 uint32 indices) in the binary chunk, in that order.
    low, high : array_like, shape (3,)
        Smallest and largest position per axis (float32 values, metres, glTF axes).
    groups, starts, counts : list of int
        Group ids in increasing order, the first triangle of each group (triangles are stored grouped)
        and its triangle count.
    group_colours_rgb : ndarray of uint8, shape (g, 3)
    group_names : list of str, optional
    """
    position_bytes = 12 * int(n_vertices)  # a multiple of 4
    index_bytes = 12 * int(n_faces)
    binary_length = position_bytes + index_bytes
    accessors = [{
        "bufferView": 0, "componentType": _FLOAT, "count": int(n_vertices), "type": "VEC3",
        "min": [float(v) for v in low], "max": [float(v) for v in high],
    }]
    primitives, materials = [], []
    linear = srgb_to_linear(group_colours_rgb)
    for k, (group, start, count) in enumerate(zip(groups, starts, counts)):
        accessors.append({"bufferView": 1, "byteOffset": int(start) * 12, "componentType": _UNSIGNED_INT,
                          "count": int(count) * 3, "type": "SCALAR"})
        name = group_names[group] if group_names is not None else f"group {group}"
        materials.append({"name": name, "pbrMetallicRoughness": {
            "baseColorFactor": [*(round(float(c), 6) for c in linear[group]), 1.0],
            "metallicFactor": 0.0, "roughnessFactor": 0.8}})
        primitives.append({"attributes": {"POSITION": 0}, "indices": k + 1, "material": k, "mode": _TRIANGLES})
    document = {
        "asset": {"version": "2.0", "generator": "rootsim"},
        "scene": 0,
        "scenes": [{"nodes": [0]}],
        "nodes": [{"mesh": 0, "name": "roots"}],
        "meshes": [{"name": "roots", "primitives": primitives}],
        "materials": materials,
        "accessors": accessors,
        "bufferViews": [
            {"buffer": 0, "byteOffset": 0, "byteLength": position_bytes, "target": _ARRAY_BUFFER},
            {"buffer": 0, "byteOffset": position_bytes, "byteLength": index_bytes, "target": _ELEMENT_ARRAY_BUFFER},
        ],
        "buffers": [{"byteLength": binary_length}],
    }
    return document, binary_length


def write_glb(path: str | Path, vertices_cm: np.ndarray, faces: np.ndarray, face_group: np.ndarray,
              group_colours_rgb: np.ndarray, *, group_names: list[str] | None = None) -> None:
    """Write triangles as binary glTF 2.0 in metres with +Y up, one coloured primitive per group.

    Parameters
    ----------
    path : path-like
        Target file (written directly: callers wrap it in :func:`rootsim.atomic.atomic_path`).
    vertices_cm : ndarray of float64, shape (v, 3)
        rootsim coordinates (cm, z up).
    faces : ndarray of int, shape (f, 3)
        Counter-clockwise seen from outside.
    face_group : ndarray of int, shape (f,)
        Group of each triangle (e.g. root order); groups become primitives with their own material.
    group_colours_rgb : ndarray of uint8, shape (g, 3)
        sRGB colour of each group id ``0 .. g - 1``.
    group_names : list of str, optional
        Material names (default ``group <k>``).
    """
    positions = to_gltf_axes(np.asarray(vertices_cm, dtype=np.float64))
    face_group = np.asarray(face_group, dtype=np.int64)
    order = np.argsort(face_group, kind="stable")
    indices = np.asarray(faces, dtype=np.uint32)[order]
    groups, starts, counts = np.unique(face_group[order], return_index=True, return_counts=True)
    low, high = (positions.min(axis=0), positions.max(axis=0)) if len(positions) else (np.zeros(3), np.zeros(3))
    document, binary_length = glb_document(len(positions), len(indices), low, high, groups.tolist(), starts.tolist(),
                                           counts.tolist(), group_colours_rgb, group_names)
    with open(path, "wb") as fh:
        fh.write(glb_bytes_header(document, binary_length))
        positions.tofile(fh)
        indices.tofile(fh)
