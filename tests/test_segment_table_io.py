"""Segment-table I/O: dictionary-encoded root classes, older string files, metadata schema, absurd coordinates.

Parquet layouts are checked with pyarrow's own schema reader and files of the older layout are written with
pyarrow directly; counts are checked against pandas.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import rootsim
from rootsim.cli import main
from rootsim.errors import SegmentTableError
from rootsim.rootsystem import RootSystem, count_distinct
from rootsim.segment_table import METADATA_KEY

PARAMS = Path(__file__).resolve().parents[1] / "params"


@pytest.fixture(scope="module")
def system():
    return rootsim.grow(rootsim.load_spec(PARAMS / "shallow_basal.toml"), days=8, progress=False)


def one_error_line(capsys) -> str:
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: ") and len(err.splitlines()) == 1, err
    return err


def test_root_class_is_categorical_in_memory_and_dictionary_in_parquet(system, tmp_path):
    assert isinstance(system["root_class"], pd.Categorical)
    path = system.write(tmp_path / "segments.parquet")
    field = pq.read_schema(path).field("root_class")
    assert pa.types.is_dictionary(field.type) and pa.types.is_string(field.type.value_type)
    back = RootSystem.read(path)
    assert isinstance(back["root_class"], pd.Categorical)
    assert back["root_class"].tolist() == system["root_class"].tolist()
    assert set(back["root_class"].categories) == set(rootsim.load_spec(PARAMS / "shallow_basal.toml").root_classes) \
        & set(system["root_class"].tolist())
    # plain pandas sees a categorical column too
    assert isinstance(pd.read_parquet(path).root_class.dtype, pd.CategoricalDtype)


def test_older_files_with_string_classes_still_read(system, tmp_path):
    table = pq.read_table(system.write(tmp_path / "new.parquet"))
    plain = table.set_column(table.column_names.index("root_class"), "root_class",
                             table.column("root_class").cast(pa.string()))
    old = tmp_path / "old" / "segments.parquet"
    old.parent.mkdir()
    pq.write_table(plain, old)  # no page checksums, plain strings: the layout of earlier versions
    assert pa.types.is_string(pq.read_schema(old).field("root_class").type)
    back = RootSystem.read(old)
    assert isinstance(back["root_class"], pd.Categorical)
    assert back["root_class"].tolist() == system["root_class"].tolist()
    assert back.summary() == system.summary()


def test_summary_counts_roots_like_pandas(system):
    summary = system.summary()
    assert summary["n_roots"] == pd.Series(system["root_id"]).nunique()
    for ids in (np.array([5, 5, 0, 9, 9, 9]), np.array([-3, 7, 7, 2**40]), np.zeros(0, np.int64)):
        assert count_distinct(ids) == pd.Series(ids, dtype="int64").nunique()


def _with_metadata(system, tmp_path, raw: bytes) -> Path:
    table = pq.read_table(system.write(tmp_path / "plain.parquet"))
    meta = dict(table.schema.metadata)
    meta[METADATA_KEY] = raw
    out = tmp_path / "meta" / "segments.parquet"
    out.parent.mkdir(exist_ok=True)
    pq.write_table(table.replace_schema_metadata(meta), out)
    return out


BAD_METADATA = [
    (b"[1, 2, 3]", "<top level>"),
    (b'"just a string"', "<top level>"),
    (b'{"stand": [1, 2]}', "stand"),
    (b'{"stand": {"ground_area_cm2": "big"}}', "stand.ground_area_cm2"),
    (b'{"stand": {"plant_positions_cm": [[0, "a"]]}}', "stand.plant_positions_cm[0][1]"),
    (b'{"stand": {"plant_positions_cm": [[0]]}}', "stand.plant_positions_cm"),
    (b'{"container": {"kind": "bucket"}}', "container.kind"),
    (b'{"container": {"kind": "pot", "diameter_cm": -4, "depth_cm": 10}}', "container.diameter_cm"),
    (b'{"run": {"duration_days": true}}', "run.duration_days"),
    (b"{not json", "<top level>"),
]


@pytest.mark.parametrize("raw,where", BAD_METADATA)
def test_metadata_of_the_wrong_shape_is_one_line_for_every_reader(system, tmp_path, capsys, raw, where):
    path = _with_metadata(system, tmp_path, raw)
    for argv in (["analyze", str(path), "--out-dir", str(tmp_path / "a")],
                 ["sample", str(path), "--core", "0,0,5,20", "--out-dir", str(tmp_path / "s")],
                 ["export", str(path), "--vtk", str(tmp_path / "x.vtp")],
                 ["plot", str(path), "--out-dir", str(tmp_path / "p")],
                 ["render", str(path), "--png", str(tmp_path / "x.png")]):
        assert main(argv) == 2, argv
        err = one_error_line(capsys)
        assert f"metadata: {where}" in err and "segments.parquet" in err
    assert not any((tmp_path / n).exists() for n in ("a", "s", "p", "x.vtp", "x.png"))


def test_valid_metadata_keeps_unknown_keys(system, tmp_path):
    extra = json.dumps({"stand": {"n_plants": 2, "ground_area_cm2": 300.0, "note": "kept"}, "lab": {"bench": 3}})
    back = RootSystem.read(_with_metadata(system, tmp_path, extra.encode()))
    assert back.metadata["lab"] == {"bench": 3} and back.metadata["stand"]["note"] == "kept"


def test_astronomical_coordinates_are_refused_not_written_as_inf(system, tmp_path, capsys):
    frame = system.to_dataframe()
    frame.loc[3, "x1"] = 1e300
    out = tmp_path / "far" / "segments.parquet"
    out.parent.mkdir()
    frame.to_parquet(out)  # written by hand, as a user might
    for argv in (["analyze", str(out)], ["sample", str(out), "--core", "0,0,5,20"],
                 ["export", str(out), "--rld-grid", str(tmp_path / "g.vti"), "--voxel-cm", "2"]):
        assert main(argv) == 2
        assert "x1 has 1e+300 at row 3" in one_error_line(capsys)
    assert sorted(p.name for p in out.parent.iterdir()) == ["segments.parquet"]
    with pytest.raises(SegmentTableError):
        RootSystem(frame)


def test_export_and_plot_write_all_files_or_none(system, tmp_path, capsys):
    path = system.write(tmp_path / "run" / "segments.parquet")
    # the VTK file would be fine; the voxel grid is absurd: neither may appear
    assert main(["export", str(path), "--vtk", str(tmp_path / "x.vtp"), "--rld-grid", str(tmp_path / "g.vti"),
                 "--voxel-cm", "1e-6"]) == 2
    one_error_line(capsys)
    assert not (tmp_path / "x.vtp").exists() and not (tmp_path / "g.vti").exists()
    figures = tmp_path / "figures"
    (figures / "projection.png").mkdir(parents=True)  # the second figure cannot be written
    assert main(["plot", str(path), "--out-dir", str(figures)]) == 2
    assert "projection.png" in one_error_line(capsys)
    assert sorted(p.name for p in figures.iterdir()) == ["projection.png"]
    assert main(["plot", str(path), "--out-dir", str(tmp_path / "ok")]) == 0
    assert sorted(p.name for p in (tmp_path / "ok").iterdir()) == ["projection.png", "rld_profile.png"]


@pytest.mark.parametrize("argv", [
    ["sample", "{path}", "--core", "1e300,0,5,30"],
    ["sample", "{path}", "--tube", "0,0,45,120,1e300,0.2"],
    ["sample", "{path}", "--wall", "1e300,-30,30,60,5"],
    ["sample", "{path}", "--projection-grid-cm", "1e300"],
    ["sample", "{path}", "--core", "0,0,5,30", "--projection-grid-cm", "1", "--projection-band-cm", "1e300"],
    ["analyze", "{path}", "--box", "-1e300,1e300,-1e300,1e300"],
    ["analyze", "{path}", "--max-depth-cm", "1e300"],
])
def test_options_of_1e300_are_one_line_errors_and_write_nothing(system, tmp_path, capsys, argv):
    path = system.write(tmp_path / "run" / "segments.parquet")
    assert main([a.format(path=path) for a in argv]) == 2
    assert "1e+300 is out of range" in one_error_line(capsys)
    assert sorted(p.name for p in path.parent.iterdir()) == ["segments.parquet"]


def test_require_finite_names_the_column_and_key():
    from rootsim.errors import RootsimError
    from rootsim.limits import require_finite

    with pytest.raises(RootsimError, match="cores.csv: column rld_cm_per_cm3"):
        require_finite(pd.DataFrame({"depth_top_cm": [0.0], "rld_cm_per_cm3": [np.inf]}), what="cores.csv")
    with pytest.raises(RootsimError, match=r"traits.json: profile.layers\[1\] would be nan"):
        require_finite({"profile": {"layers": [1.0, float("nan")]}}, what="traits.json")
    require_finite({"name": "ok", "values": [1.0, 2]}, what="traits.json")


def test_plot_file_names_from_spec_names_stay_in_the_output_folder(system, tmp_path):
    # two variants in folders of the same name are labelled by their spec names, which are user text
    for folder, name in (("a", "../../escaped"), ("b", "/etc/x y")):
        meta = dict(system.metadata, spec_name=name)
        RootSystem({c: system[c] for c in system.columns}, meta).write(tmp_path / folder / "run" / "segments.parquet")
    figures = tmp_path / "figures"
    assert main(["plot", str(tmp_path / "a" / "run"), "--compare", str(tmp_path / "b" / "run"),
                 "--out-dir", str(figures)]) == 0
    assert sorted(p.name for p in figures.iterdir()) == ["projection_escaped.png", "projection_etc_x_y.png",
                                                         "rld_profile.png"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a", "b", "figures"]


def test_tables_wider_than_the_limit_are_refused_before_reading(tmp_path, capsys):
    from rootsim.segment_table import MAX_COLUMNS

    path = tmp_path / "wide" / "segments.parquet"
    path.parent.mkdir()
    pq.write_table(pa.table({f"c{i}": [0.0] for i in range(MAX_COLUMNS + 1)}), path)
    assert main(["analyze", str(path)]) == 2
    assert f"{MAX_COLUMNS + 1:,} columns" in one_error_line(capsys)
