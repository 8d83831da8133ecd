"""Parameter files built on other files (``based_on``): table-by-table merging, provenance, bad bases."""

from __future__ import annotations

from pathlib import Path

import pytest

from rootsim.cli import main
from rootsim.errors import SpecError
from rootsim.spec import load_spec, load_spec_layers, merge_layers

PARAMS = Path(__file__).resolve().parents[1] / "params"


def test_merge_is_table_by_table_and_arrays_replace_whole():
    base = {"run": {"duration_days": 30, "seed": 1}, "soil": {"layers": [{"a": 1}, {"a": 2}]},
            "root_classes": {"x": {"radius_cm": 0.1, "insertion_angle_deg": {"low": 60, "high": 80}}}}
    top = {"run": {"seed": 5}, "soil": {"layers": [{"a": 9}]},
           "root_classes": {"x": {"insertion_angle_deg": {"mean": 70, "standard_deviation": 4}}}}
    origins = {"run.duration_days": "base", "run.seed": "base", "soil.layers": "base",
               "root_classes.x.radius_cm": "base", "root_classes.x.insertion_angle_deg": "base"}
    merged = merge_layers(base, top, origins=origins, top_name="top")
    assert merged["run"] == {"duration_days": 30, "seed": 5}
    assert merged["soil"]["layers"] == [{"a": 9}]  # an array of tables is one value: replaced, not merged
    # a distribution table is one value too (a {low, high} under a {mean, sd} would be an invalid mixture)
    assert merged["root_classes"]["x"] == {"radius_cm": 0.1, "insertion_angle_deg": {"mean": 70, "standard_deviation": 4}}
    assert origins["run.seed"] == "top" and origins["run.duration_days"] == "base"
    assert origins["root_classes.x.insertion_angle_deg"] == "top" and origins["soil.layers"] == "top"
    assert base["run"]["seed"] == 1  # inputs untouched


def test_layered_file_changes_only_its_keys(tmp_path):
    (tmp_path / "steep.toml").write_text(
        f'based_on = "{PARAMS / "taproot_laterals.toml"}"\n[run]\nduration_days = 9\n'
        "[root_classes.taproot]\ninitial_angle_from_vertical_deg = 5.0\n")
    (tmp_path / "steeper.toml").write_text('based_on = "steep.toml"\n[root_classes.lateral_first]\nradius_cm = 0.03\n')
    base = load_spec(PARAMS / "taproot_laterals.toml")
    spec = load_spec(tmp_path / "steeper.toml")
    assert spec.name == "steeper"  # a layer is its own variant
    assert spec.run.duration_days == 9 and spec.run.seed == base.run.seed
    assert spec.root_classes["taproot"].initial_angle_from_vertical_deg.value == 5.0
    assert spec.root_classes["lateral_first"].radius_cm.value == 0.03
    assert spec.root_classes["taproot"].elongation_rate_cm_per_day == base.root_classes["taproot"].elongation_rate_cm_per_day
    assert spec.stand == base.stand and spec.soil == base.soil
    _, origins = load_spec_layers(tmp_path / "steeper.toml")
    assert origins["run.duration_days"].endswith("steep.toml")
    assert origins["root_classes.lateral_first.radius_cm"].endswith("steeper.toml")
    assert origins["stand.rows"].endswith("taproot_laterals.toml")


def test_check_shows_merged_values_and_their_files(tmp_path, capsys):
    (tmp_path / "v.toml").write_text(f'based_on = "{PARAMS / "taproot_laterals.toml"}"\n[run]\nduration_days = 9\n')
    assert main(["check", str(tmp_path / "v.toml")]) == 0
    out = capsys.readouterr().out
    assert "merged values" in out
    line = next(l for l in out.splitlines() if l.strip().startswith("run.duration_days"))
    assert "= 9" in line and "v.toml" in line
    assert any(l.strip().startswith("stand.rows") and "taproot_laterals.toml" in l for l in out.splitlines())


@pytest.mark.parametrize("files, target, words", [
    ({"a.toml": 'based_on = "b.toml"\n', "b.toml": 'based_on = "a.toml"\n'}, "a.toml", ["cycle", "a.toml -> b.toml -> a.toml"]),
    ({"self.toml": 'based_on = "self.toml"\n'}, "self.toml", ["cycle"]),
    ({"m.toml": 'based_on = "nothere.toml"\n'}, "m.toml", ["nothere.toml", "does not exist"]),
    ({"n.toml": "based_on = 3\n"}, "n.toml", ["file name"]),
])
def test_bad_bases_are_one_line_errors(tmp_path, capsys, files, target, words):
    for name, text in files.items():
        (tmp_path / name).write_text(text)
    with pytest.raises(SpecError) as info:
        load_spec(tmp_path / target)
    assert info.value.key_path == "based_on"
    assert main(["check", str(tmp_path / target)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and err.count("\n") == 1 and "based_on" in err
    for w in words:
        assert w in err


def test_fitted_file_of_a_layered_file_still_finds_its_base(tmp_path):
    from rootsim.fitting import fitted_toml

    (tmp_path / "in").mkdir()
    (tmp_path / "out").mkdir()
    layered = tmp_path / "in" / "v.toml"
    (tmp_path / "in" / "base.toml").write_text((PARAMS / "taproot_laterals.toml").read_text())
    layered.write_text('# my variant\nbased_on = "base.toml"\n[root_classes.taproot]\nradius_cm = 0.07\n')
    written = tmp_path / "out" / "fitted.toml"
    written.write_text(fitted_toml(layered, {"root_classes.taproot.radius_cm": 0.09}))
    spec = load_spec(written)
    assert spec.root_classes["taproot"].radius_cm.value == 0.09
    assert written.read_text().startswith("# my variant")


def test_input_files_of_a_base_are_found_from_a_file_in_another_folder(tmp_path):
    # A base naming its weather table relative to itself: a file in another folder built on it still finds it.
    base_dir, top_dir = tmp_path / "base", tmp_path / "variants" / "deep"
    base_dir.mkdir()
    top_dir.mkdir(parents=True)
    (base_dir / "season.csv").write_text("day,mean_air_temperature_c\n" + "".join(f"{d},20.0\n" for d in range(10)))
    (base_dir / "base.toml").write_text(
        '[run]\nduration_days = 5\n[weather]\nfile = "season.csv"\n[development]\nclock = "thermal"\n'
        '[[emergence]]\nroot_class = "a"\n[root_classes.a]\n')
    (top_dir / "top.toml").write_text('based_on = "../../base/base.toml"\n[run]\nduration_days = 4\n')
    spec = load_spec(top_dir / "top.toml")
    assert Path(spec.weather.file).is_absolute()
    assert Path(spec.weather.file).resolve() == (base_dir / "season.csv").resolve()
    own, _ = load_spec_layers(base_dir / "base.toml")
    assert own["weather"]["file"] == "season.csv"  # a file's own names stay as written
