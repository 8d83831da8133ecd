"""Property-based fuzz of every input file type: one `error:` line and exit code 2, never a traceback.

Parameter files (structured and byte-level mutations of a shipped file), segment tables (Parquet columns,
metadata and bytes), observed-profile CSV files and RSML files. Derandomized (the same examples on every CI
run) and bounded in examples, so the whole module stays within a few tens of seconds.
"""

from __future__ import annotations

import copy
import io
import json
import tomllib
from contextlib import redirect_stderr, redirect_stdout
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import tomlkit
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import rootsim
from rootsim.cli import main
from rootsim.errors import RootsimError
from rootsim.segment_table import METADATA_KEY

PARAMS = Path(__file__).resolve().parents[1] / "params"
TAPROOT = PARAMS / "taproot_laterals.toml"
FUZZ = settings(max_examples=40, deadline=None, derandomize=True, database=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture,
                                       HealthCheck.data_too_large])


def run_cli(argv: list[str]) -> tuple[int, str]:
    """Run the command line in-process; an exception other than RootsimError fails the test (a traceback)."""
    err = io.StringIO()
    with redirect_stderr(err), redirect_stdout(io.StringIO()):
        code = main(argv)
    return code, err.getvalue()


def assert_clean(code: int, err: str, name: str) -> None:
    assert code in (0, 2), (code, err)
    if code == 2:
        lines = err.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("error: "), err
        assert name in lines[0], err
    assert "Traceback" not in err


# -- parameter files -----------------------------------------------------------------------------

BASE = tomllib.loads(TAPROOT.read_text())


def _leaf_paths(node, prefix=()):
    if isinstance(node, dict):
        for key, value in node.items():
            yield from _leaf_paths(value, prefix + (key,))
    elif isinstance(node, list) and node and all(isinstance(v, dict) for v in node):
        for i, value in enumerate(node):
            yield from _leaf_paths(value, prefix + (i,))
    else:
        yield prefix


LEAVES = sorted(_leaf_paths(BASE), key=str)
scalars = (st.integers(-2**70, 2**70) | st.floats(allow_nan=True, allow_infinity=True) | st.booleans()
           | st.text(max_size=12) | st.sampled_from([0, -1, 1e308, -1e-308, 1e-12, 10**9, "", "linear", "pot"]))
values = st.recursive(scalars, lambda inner: st.lists(inner, max_size=3)
                      | st.dictionaries(st.sampled_from(["mean", "standard_deviation", "low", "high", "kind", "x"]),
                                        inner, max_size=3), max_leaves=6)
mutation = st.tuples(st.sampled_from(["set", "delete", "add"]), st.sampled_from(LEAVES), values,
                     st.sampled_from(["radius_cm", "rows", "depth_cm", "unknown_key", "kind", "layers"]))


def _apply(doc, op, path, value, new_key):
    node = doc
    for part in path[:-1]:
        node = node[part]
    last = path[-1]
    if op == "set":
        node[last] = value
    elif op == "delete":
        del node[last]
    elif isinstance(node, dict):
        node[new_key] = value


@FUZZ
@given(st.lists(mutation, min_size=1, max_size=4))
def test_fuzzed_parameter_files(tmp_path_factory, mutations):
    doc = copy.deepcopy(BASE)
    for op, path, value, new_key in mutations:
        try:
            _apply(doc, op, path, value, new_key)
        except (KeyError, IndexError, TypeError):
            continue
    spec = tmp_path_factory.mktemp("spec") / "fuzzed.toml"
    spec.write_text(tomlkit.dumps(doc))
    code, err = run_cli(["check", str(spec)])
    assert_clean(code, err, "fuzzed.toml")
    if code == 0:  # what check accepts must grow (briefly) or stop with one line
        out = spec.parent / "out"
        code, err = run_cli(["grow", str(spec), "--out", str(out), "--days", "1", "--max-segments", "3000", "--quiet"])
        assert_clean(code, err, "")


toml_noise = st.text(alphabet=st.sampled_from(list("[]{}.=\"'#\n\\,0123456789e+-_ abcxyz\x00\x7f\u00e9\u2028")),
                     min_size=1, max_size=8)


@FUZZ
@given(st.lists(st.tuples(st.floats(0, 1), st.integers(0, 6), toml_noise), min_size=1, max_size=6),
       st.binary(max_size=4))
def test_byte_level_mutations_of_a_parameter_file(tmp_path_factory, edits, raw):
    text = TAPROOT.read_text()
    for where, cut, insert in edits:
        pos = int(where * len(text))
        text = text[:pos] + insert + text[pos + cut:]
    spec = tmp_path_factory.mktemp("spec") / "mutated.toml"
    spec.write_bytes(text.encode("utf-8", "surrogatepass") + raw)
    code, err = run_cli(["check", str(spec)])
    assert_clean(code, err, "mutated.toml")


# -- segment tables ------------------------------------------------------------------------------

_CACHE: dict = {}


def base_table_bytes(folder: Path) -> bytes:
    """A small grown table as Parquet bytes (grown once per session; not a fixture, so failures print short)."""
    if "table" not in _CACHE:
        system = rootsim.grow(rootsim.load_spec(TAPROOT), days=5, progress=False)
        _CACHE["table"] = system.write(folder / "base.parquet").read_bytes()
    return _CACHE["table"]


json_values = st.recursive(st.none() | st.booleans() | st.integers(-2**64, 2**64) | st.floats() | st.text(max_size=6),
                           lambda inner: st.lists(inner, max_size=3) | st.dictionaries(
                               st.sampled_from(["stand", "container", "run", "kind", "n_plants", "ground_area_cm2",
                                                "plant_positions_cm", "depth_cm", "diameter_cm", "soil_layers", "x"]),
                               inner, max_size=4), max_leaves=8)
column_values = st.sampled_from(["text", "nan", "inf", "huge", "negative", "float_ids", "null"])


def _replace_column(table: pa.Table, name: str, kind: str) -> pa.Table:
    n = table.num_rows
    if kind == "text":
        new = pa.array(["a"] * n)
    elif kind == "null":
        new = pa.nulls(n, pa.float64())
    else:
        base = table.column(name).to_numpy(zero_copy_only=False)
        try:
            arr = np.asarray(base, dtype=np.float64).copy()
        except (TypeError, ValueError):
            arr = np.zeros(n)
        if n:
            arr[n // 2] = {"nan": np.nan, "inf": np.inf, "huge": 1e300, "negative": -5.0, "float_ids": 0.5}[kind]
        new = pa.array(arr)
    return table.set_column(table.column_names.index(name), name, new)


@FUZZ
@given(st.one_of(
    st.tuples(st.just("metadata"), json_values),
    st.tuples(st.just("column"), st.tuples(st.sampled_from(list(rootsim.segment_table.COLUMNS)), column_values)),
    st.tuples(st.just("drop"), st.sampled_from(list(rootsim.segment_table.COLUMNS))),
    st.tuples(st.just("truncate"), st.floats(0, 1)),
    st.tuples(st.just("flip"), st.lists(st.tuples(st.floats(0, 1), st.integers(1, 255)), min_size=1, max_size=3)),
))
def test_fuzzed_segment_tables(tmp_path_factory, change):
    kind, detail = change
    folder = tmp_path_factory.mktemp("table")
    table_bytes = base_table_bytes(folder)
    path = folder / "segments.parquet"
    if kind in ("truncate", "flip"):
        data = bytearray(table_bytes)
        if kind == "truncate":
            data = data[: int(detail * len(data))]
        else:
            for where, mask in detail:
                data[min(int(where * len(data)), len(data) - 1)] ^= mask
        path.write_bytes(bytes(data))
    else:
        table = pq.read_table(io.BytesIO(table_bytes))
        if kind == "metadata":
            meta = dict(table.schema.metadata)
            meta[METADATA_KEY] = json.dumps(detail).encode()
            table = table.replace_schema_metadata(meta)
        elif kind == "column":
            table = _replace_column(table, *detail)
        else:
            table = table.drop_columns([detail])
        pq.write_table(table, path)
    code, err = run_cli(["analyze", str(path), "--out-dir", str(folder / "a")])
    assert_clean(code, err, "")
    code, err = run_cli(["sample", str(path), "--core", "0,0,4,20", "--out-dir", str(folder / "s")])
    assert_clean(code, err, "")


# -- observed profiles (CSV) ---------------------------------------------------------------------

cells = st.one_of(st.floats(allow_nan=True, allow_infinity=True).map(repr), st.integers(-10**30, 10**30).map(str),
                  st.text(alphabet=st.sampled_from(list("abc,\"\n;-.e0123456789 ")), max_size=6), st.just(""))
headers = st.lists(st.sampled_from(["depth_top_cm", "depth_bottom_cm", "rld_cm_per_cm3", "core_id", "x", ""]),
                   min_size=1, max_size=5)


@FUZZ
@given(headers, st.lists(st.lists(cells, min_size=1, max_size=5).filter(lambda r: ",".join(r).strip()),
                         min_size=1, max_size=5))
def test_fuzzed_observed_profile_csv(tmp_path_factory, header, rows):
    # Files with a header and no data rows (blank lines only) are the fitting module's own case (issue 7.5,
    # handled with the study runner's fit changes); every file here has at least one non-blank data row.
    from rootsim.fitting import read_observed_profile

    path = tmp_path_factory.mktemp("csv") / "cores.csv"
    path.write_text(",".join(header) + "\n" + "\n".join(",".join(r) for r in rows) + "\n")
    try:
        table = read_observed_profile(path)
    except RootsimError as exc:
        message = exc.cli_message()
        assert "cores.csv" in message and "\n" not in message
    else:
        assert np.isfinite(table.to_numpy(dtype=float)).all()


# -- RSML ----------------------------------------------------------------------------------------

def base_rsml_text(folder: Path) -> str:
    if "rsml" not in _CACHE:
        system = rootsim.grow(rootsim.load_spec(TAPROOT), days=3, progress=False)
        _CACHE["rsml"] = Path(system.export(folder / "roots.rsml")).read_text()
    return _CACHE["rsml"]


rsml_noise = st.sampled_from(["<", ">", "/>", "</root>", "<root>", "<point x=\"1\"/>", "\"", "=", "-1", "1e400",
                              "nan", "&amp;", "&bogus;", "<!DOCTYPE x [<!ENTITY e \"y\">]>", "\x00", "", "9" * 5])


@FUZZ
@given(st.lists(st.tuples(st.floats(0, 1), st.integers(0, 12), rsml_noise), min_size=1, max_size=5))
def test_fuzzed_rsml(tmp_path_factory, edits):
    folder = tmp_path_factory.mktemp("rsml")
    text = base_rsml_text(folder)
    for where, cut, insert in edits:
        pos = int(where * len(text))
        text = text[:pos] + insert + text[pos + cut:]
    path = folder / "traced.rsml"
    path.write_text(text)
    code, err = run_cli(["import-rsml", str(path), "--out", str(folder / "out")])
    assert_clean(code, err, "")
