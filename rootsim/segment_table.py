"""The segment table: column layout, validation, and Parquet input/output.

A root system is stored as one row per straight segment. The layout is fixed (further
columns may follow these):

========== ======= ===================================================================
column     dtype   meaning
========== ======= ===================================================================
segment_id int64   0 .. n-1, equal to the row number
parent_id  int64   segment this one continues or branches from; -1 for the first
                   segment of a root that starts at the plant (seed or shoot)
plant_id   int64   plant the segment belongs to (0 .. n_plants-1)
root_id    int64   root (axis) the segment belongs to
order      int64   0 for roots from the seed or shoot, 1 for their laterals, ...
root_class category name of the root class in the parameter file (dictionary-encoded:
                   a pandas Categorical in memory, an Arrow dictionary in Parquet)
x0 y0 z0   float64 start point, cm; z up, soil surface at z = 0, soil below (z < 0)
x1 y1 z1   float64 end point, cm
radius_cm  float64 segment radius, cm
length_cm  float64 segment length, cm
birth_day  float64 day (since sowing) the segment formed
========== ======= ===================================================================

Table-level facts (stand layout, ground area, container, run settings) travel as JSON in
the Parquet key-value metadata under the key ``rootsim`` (schema: :mod:`rootsim.table_metadata`).

Parquet files are written with page checksums (CRC-32 of every page, part of the Parquet format) and read
with their verification on, so a damaged file is reported instead of measured. A file inside a result folder
is also checked against the folder's ``manifest.json`` (:mod:`rootsim.result_folder`).

Field stands are periodic: a field stand is the unit cell of an infinite field in which
its plants repeat every row and plant spacing (:mod:`rootsim.periodic_stand`). Coordinates
stay unwrapped (each plant's roots around its own seed, reaching past the cell); samplers and
the voxel RLD add the periodic images where their geometry reaches past the cell. Written
tables of field stands say so in ``stand.boundary = "periodic"`` and ``stand.cell_cm =
[xmin, xmax, ymin, ymax]`` (set ``stand.boundary = "bordered"`` for a finite plot).
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from .atomic import atomic_path
from .errors import SegmentTableError
from .limits import MAX_COORDINATE_CM

__all__ = [
    "COLUMNS",
    "FLOAT_COLUMNS",
    "INT_COLUMNS",
    "METADATA_KEY",
    "validate_columns",
    "as_categorical",
    "read_segments",
    "write_segments",
    "with_stand_convention",
]

INT_COLUMNS = ("segment_id", "parent_id", "plant_id", "root_id", "order")
FLOAT_COLUMNS = ("x0", "y0", "z0", "x1", "y1", "z1", "radius_cm", "length_cm", "birth_day")
COLUMNS = INT_COLUMNS[:5] + ("root_class",) + FLOAT_COLUMNS
METADATA_KEY = b"rootsim"
#: Most columns a segment table may have (the layout has 15; analyses may add a few).
MAX_COLUMNS = 256


def validate_columns(columns: Mapping[str, Any], *, source: str = "segment table") -> dict[str, np.ndarray]:
    """Check a mapping of columns against the segment-table layout.

    Parameters
    ----------
    columns : mapping of str to array_like
        Column name to values (a :class:`pandas.DataFrame` works).
    source : str
        Name used in error messages (usually the file path).

    Returns
    -------
    dict of str to ndarray
        The required columns as numpy arrays with canonical dtypes, followed by any extra columns.

    Raises
    ------
    SegmentTableError
        Missing columns, NaN or infinite values, negative radii or lengths, ids out of range,
        or parents that do not precede their children.
    """
    missing = [c for c in COLUMNS if c not in columns]
    if missing:
        raise SegmentTableError(
            f"{source}: missing column(s) {', '.join(missing)} (required: {', '.join(COLUMNS)})"
        )
    out: dict[str, np.ndarray] = {}
    n = None
    for name in COLUMNS:
        values = columns[name]
        if name == "root_class":  # kept dictionary-encoded: never expanded to one Python string per row
            values = as_categorical(values, source=source)
        else:
            values = values.to_numpy() if hasattr(values, "to_numpy") else np.asarray(values)
        if n is None:
            n = len(values)
        elif len(values) != n:
            raise SegmentTableError(f"{source}: column {name} has {len(values)} rows, expected {n}")
        if name == "root_class":
            out[name] = values
            continue
        if name in INT_COLUMNS and np.asarray(values).dtype.kind in "iu":  # integers already: no float copy
            arr = np.asarray(values)
            if arr.size and (int(arr.max()) > 2**53 or int(arr.min()) < -(2**53)):
                raise SegmentTableError(f"{source}: column {name} has values beyond ±2^53 (allowed: ids and orders "
                                        "that fit a 64-bit integer exactly)")
            out[name] = arr.astype(np.int64, copy=False)
        elif name in INT_COLUMNS:
            try:
                arr = np.asarray(values, dtype=np.float64)
            except (TypeError, ValueError):
                raise SegmentTableError(f"{source}: column {name} must be integers") from None
            if not np.all(np.isfinite(arr)):
                raise SegmentTableError(f"{source}: column {name} has NaN or infinite values")
            if np.any(arr != np.round(arr)):
                raise SegmentTableError(f"{source}: column {name} must be integers")
            if np.any(np.abs(arr) > 2.0**53):
                raise SegmentTableError(f"{source}: column {name} has values beyond ±2^53 (allowed: ids and orders "
                                        "that fit a 64-bit integer exactly)")
            out[name] = arr.astype(np.int64)
        else:
            try:
                arr = np.asarray(values, dtype=np.float64)
            except (TypeError, ValueError):
                raise SegmentTableError(f"{source}: column {name} must be numbers") from None
            bad = ~np.isfinite(arr)
            if bad.any():
                row = int(np.flatnonzero(bad)[0])
                raise SegmentTableError(f"{source}: column {name} has NaN or infinite values (first at row {row})")
            too_big = np.abs(arr) > MAX_COORDINATE_CM
            if too_big.any():
                row = int(np.flatnonzero(too_big)[0])
                raise SegmentTableError(f"{source}: column {name} has {arr[row]:.3g} at row {row} "
                                        f"(allowed: values within ±{MAX_COORDINATE_CM:g} cm or days)")
            out[name] = arr
    n = int(n or 0)
    if np.any(out["radius_cm"] < 0):
        row = int(np.flatnonzero(out["radius_cm"] < 0)[0])
        raise SegmentTableError(f"{source}: column radius_cm has negative values (first at row {row}; allowed: >= 0)")
    if np.any(out["length_cm"] < 0):
        raise SegmentTableError(f"{source}: column length_cm has negative values (allowed: >= 0)")
    if np.any(out["order"] < 0):
        raise SegmentTableError(f"{source}: column order has negative values (allowed: 0, 1, 2, ...)")
    if not np.array_equal(out["segment_id"], np.arange(n)):
        raise SegmentTableError(f"{source}: column segment_id must be 0..n-1 in row order")
    parent = out["parent_id"]
    if np.any((parent < -1) | (parent >= np.arange(n))):
        row = int(np.flatnonzero((parent < -1) | (parent >= np.arange(n)))[0])
        raise SegmentTableError(
            f"{source}: column parent_id at row {row} must be -1 or the id of an earlier segment"
        )
    for name in columns.keys() if hasattr(columns, "keys") else []:
        if name not in out:
            values = columns[name]
            out[name] = values.to_numpy() if hasattr(values, "to_numpy") else np.asarray(values)
    return out


def as_categorical(values, *, source: str = "segment table"):
    """``root_class`` values as a :class:`pandas.Categorical` of str (kept if already one; no missing values).

    Raises
    ------
    SegmentTableError
        If a value is missing.
    """
    import pandas as pd

    if isinstance(values, pd.Series):
        values = values.array
    if isinstance(values, pd.Categorical):
        cat = values
        if len(cat.categories) and not all(isinstance(c, str) for c in cat.categories):
            cat = cat.rename_categories([str(c) for c in cat.categories])
    else:
        arr = np.asarray(values, dtype=object)
        if len(arr) and pd.isna(arr).any():
            raise SegmentTableError(f"{source}: column root_class has missing values")
        codes, uniques = pd.factorize(arr, sort=True)
        cat = pd.Categorical.from_codes(codes, categories=pd.Index([str(u) for u in uniques], dtype=object)) \
            if len(uniques) == len({str(u) for u in uniques}) else pd.Categorical(arr.astype(str))
    if (cat.codes < 0).any():
        raise SegmentTableError(f"{source}: column root_class has missing values")
    return cat


def _arrow_root_class(values):
    import pandas as pd
    import pyarrow as pa

    cat = as_categorical(values)
    return pa.DictionaryArray.from_arrays(pa.array(np.asarray(cat.codes, dtype=np.int32)),
                                          pa.array(np.asarray(cat.categories, dtype=object).astype(str),
                                                   type=pa.string()))


def write_segments(columns: Mapping[str, np.ndarray], path: str | os.PathLike, *, metadata: Mapping | None = None) -> Path:
    """Write a segment table to Parquet atomically.

    Parameters
    ----------
    columns : mapping of str to ndarray
        Columns in the segment-table layout (extra columns are written after them).
    path : path-like
        Target ``.parquet`` file.
    metadata : mapping, optional
        JSON-serialisable table facts stored under the ``rootsim`` metadata key.
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    names = list(COLUMNS) + [c for c in columns if c not in COLUMNS]
    arrays = []
    for name in names:
        if name == "root_class":
            arrays.append(_arrow_root_class(columns[name]))
        else:
            arrays.append(pa.array(np.asarray(columns[name])))
    table = pa.Table.from_arrays(arrays, names=names)
    meta = dict(table.schema.metadata or {})
    facts = {k: v for k, v in with_stand_convention(metadata).items() if k != "run_id"}  # a run id names a folder
    meta[METADATA_KEY] = json.dumps(facts, sort_keys=True).encode()
    table = table.replace_schema_metadata(meta)
    path = Path(path)
    with atomic_path(path) as tmp:
        # fast to read back (zstd is 6x slower here); page checksums so damage is detected on reading
        pq.write_table(table, tmp, compression="lz4", write_page_checksum=True)
    return path


def with_stand_convention(metadata: Mapping | None) -> dict:
    """Metadata with the periodic-stand convention recorded for field stands (module docstring).

    Adds ``stand.boundary`` (``"periodic"``) and ``stand.cell_cm`` when the table is a field
    stand with a plant layout and they are absent; other metadata is returned unchanged.
    """
    from .periodic_stand import BOUNDARY_PERIODIC, stand_cell

    out = dict(metadata or {})
    stand = out.get("stand")
    if not isinstance(stand, Mapping) or "boundary" in stand:
        return out
    cell = stand_cell(out)
    if cell is not None:
        out["stand"] = {**stand, "boundary": BOUNDARY_PERIODIC, "cell_cm": cell.as_list()}
    return out


def read_segments(path: str | os.PathLike) -> tuple[dict[str, np.ndarray], dict]:
    """Read and validate a segment table from Parquet (or from a directory holding ``segments.parquet``).

    Returns
    -------
    columns : dict of str to ndarray
    metadata : dict
        Table facts from the ``rootsim`` metadata key (empty if absent).

    Raises
    ------
    SegmentTableError
        If the file is missing, unreadable or does not follow the layout.
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    path = Path(path)
    if path.is_dir():
        path = path / "segments.parquet"
    if not path.exists():
        raise SegmentTableError(f"{path}: no such file (expected a segments.parquet written by 'rootsim grow' or 'rootsim import-rsml')")
    manifest = _check_folder(path)
    from .limits import MAX_SEGMENT_BUDGET

    try:
        shape = pq.read_metadata(path)
    except (OSError, pa.ArrowException) as exc:
        raise SegmentTableError(f"{path}: not a readable Parquet file, or damaged "
                                f"({' '.join(str(exc).split())[:200]})") from None
    if shape.num_rows > MAX_SEGMENT_BUDGET or shape.num_columns > MAX_COLUMNS:
        raise SegmentTableError(f"{path}: {shape.num_rows:,} rows and {shape.num_columns:,} columns (allowed: at most "
                                f"{MAX_SEGMENT_BUDGET:,} segments and {MAX_COLUMNS} columns)")
    # One column at a time: the Arrow buffers of a column are freed once it is a numpy array, so the
    # peak is the numpy table plus one column instead of the Arrow table plus the numpy table.
    cols = {}
    pool = pa.default_memory_pool()
    try:
        parquet = pq.ParquetFile(path, page_checksum_verification=True)
        schema = parquet.schema_arrow
        for name in schema.names:
            kind = schema.field(name).type
            if parquet.num_row_groups > 1 and (pa.types.is_integer(kind) or pa.types.is_floating(kind)):
                cols[name] = _read_numeric_column(parquet, name, shape.num_rows, source=str(path))
                pool.release_unused()
                continue
            col = parquet.read(columns=[name]).column(0)
            if name == "root_class" and pa.types.is_dictionary(col.type):
                cols[name] = col.to_pandas().array  # a pandas Categorical, no Python strings per row
                continue
            if pa.types.is_dictionary(col.type):
                col = col.cast(col.type.value_type)
            cols[name] = col.to_numpy(zero_copy_only=False)
            del col
            pool.release_unused()  # decoding buffers back to the system before the next column
    except (OSError, pa.ArrowException) as exc:
        raise SegmentTableError(f"{path}: not a readable Parquet file, or damaged "
                                f"({' '.join(str(exc).split())[:200]})") from None
    from .table_metadata import parse_table_metadata

    metadata = parse_table_metadata((schema.metadata or {}).get(METADATA_KEY), source=str(path))
    if manifest is not None:
        metadata["run_id"] = manifest.run_id
    columns = validate_columns(cols, source=str(path))
    del cols
    connectors = int(np.count_nonzero(columns["is_connector"])) if "is_connector" in columns else 0
    _check_summary(path, len(columns["segment_id"]) - connectors, manifest)  # summaries count traced segments
    return columns, metadata


def _read_numeric_column(parquet, name: str, n_rows: int, *, source: str) -> np.ndarray:
    """One numeric column read row group by row group into one numpy array (no Arrow copy of the whole column)."""
    out = None
    start = 0
    for group in range(parquet.num_row_groups):
        part = parquet.read_row_group(group, columns=[name]).column(0).to_numpy(zero_copy_only=False)
        if out is None:
            out = np.empty(n_rows, dtype=part.dtype)
        out[start:start + part.size] = part
        start += part.size
        del part
    if start != n_rows:
        raise SegmentTableError(f"{source}: column {name} has {start} rows, the file's metadata says {n_rows}")
    return out


def _check_folder(path: Path):
    """The manifest of the result folder holding ``path`` after checking it (None without one)."""
    from .result_folder import MANIFEST_NAME, read_manifest, verify_result_folder

    folder = path.parent
    if not (folder / MANIFEST_NAME).exists():
        return None
    manifest = read_manifest(folder)
    if manifest is None or path.name not in manifest.files:
        return None
    return verify_result_folder(folder)


def _check_summary(path: Path, n_rows: int, manifest) -> None:
    """Refuse a ``summary.json`` beside the table that describes another table (an earlier run)."""
    summary_path = path.parent / "summary.json"
    if path.name != "segments.parquet" or not summary_path.is_file():
        return
    if manifest is not None and "summary.json" in manifest.files:
        return  # checked against the manifest with the table
    try:
        if summary_path.stat().st_size > 1 << 20:
            return
        summary = json.loads(summary_path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return
    count = summary.get("n_segments") if isinstance(summary, dict) else None
    if isinstance(count, int) and count != n_rows:
        raise SegmentTableError(f"{path}: has {n_rows:,} segments but {summary_path.name} beside it describes "
                                f"{count:,} (files of different runs; grow the run again)")
