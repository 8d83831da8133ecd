"""`rootsim check`: gaps between soil layers, layers stopping above the deepest roots, container sizes."""

from __future__ import annotations

from pathlib import Path

import pytest

from rootsim.cli import main
from rootsim.cli.check import describe_spec
from rootsim.spec_warnings import reachable_depth_cm, spec_warnings

from growth_specs import grow_frame, make_spec, root_class

PARAMS = Path(__file__).resolve().parents[1] / "params"

LAYERS_WITH_GAP = {"layers": [{"depth_top_cm": 0.0, "depth_bottom_cm": 10.0, "penetration_resistance_mpa": 0.5},
                              {"depth_top_cm": 20.0, "depth_bottom_cm": 60.0, "penetration_resistance_mpa": 1.0}]}


def test_gap_between_layers_is_named():
    spec = make_spec({"primary": root_class()}, soil=LAYERS_WITH_GAP)
    messages = spec_warnings(spec)
    assert any("gap between 10 and 20 cm" in m and "0 MPa" in m for m in messages), messages


def test_layers_stopping_above_the_roots_are_named_and_the_roots_really_go_deeper():
    # a quiet vertical root at 2 cm/day for 10 days from the 3 cm sowing depth ends at 3 + 20 = 23 cm (analytic)
    soil = {"layers": [{"depth_top_cm": 0.0, "depth_bottom_cm": 15.0, "penetration_resistance_mpa": 0.0}]}
    spec = make_spec({"primary": root_class(elongation_rate_cm_per_day=2.0)}, soil=soil, days=10.0)
    assert reachable_depth_cm(spec) == (pytest.approx(23.0), "primary")
    messages = spec_warnings(spec)
    assert any("last layer ends at 15 cm" in m and "about 23 cm" in m for m in messages), messages
    deepest = -grow_frame(spec)[["z0", "z1"]].to_numpy().min()
    assert deepest == pytest.approx(23.0, abs=1e-6)  # the roots do pass the last layer
    # a deep enough layer: no warning
    deep = make_spec({"primary": root_class(elongation_rate_cm_per_day=2.0)}, days=10.0,
                     soil={"layers": [{"depth_top_cm": 0.0, "depth_bottom_cm": 30.0, "penetration_resistance_mpa": 0.0}]})
    assert spec_warnings(deep) == []


@pytest.mark.parametrize("name", ["cereal_fibrous", "taproot_laterals", "shallow_basal"])
def test_shipped_files_check_without_warnings(name, capsys):
    assert main(["check", str(PARAMS / f"{name}.toml")]) == 0
    assert "warning" not in capsys.readouterr().err


def test_check_prints_warnings_on_stderr(tmp_path, capsys):
    path = tmp_path / "gappy.toml"
    text = (PARAMS / "taproot_laterals.toml").read_text()
    text = text.replace("depth_bottom_cm = 150.0", "depth_bottom_cm = 20.0")
    assert "depth_bottom_cm = 20.0" in text
    path.write_text(text)
    assert main(["check", str(path)]) == 0
    err = capsys.readouterr().err
    assert err.startswith("warning: ") and "last layer ends at 20 cm" in err


@pytest.mark.parametrize("container,size", [
    ({"kind": "pot", "diameter_cm": 20.0, "depth_cm": 30.0}, "pot 20 cm diameter x 30 cm deep, cross-section 314 cm2"),
    ({"kind": "rhizobox", "width_cm": 30.0, "thickness_cm": 2.0, "depth_cm": 50.0},
     "rhizobox 30 cm wide (x) x 2 cm thick (y), 50 cm deep, cross-section 60 cm2"),
])
def test_containers_show_their_size_not_row_spacing(container, size):
    # pot cross-section pi * 10^2 = 314.16 cm2; rhizobox 30 x 2 = 60 cm2 (geometry)
    spec = make_spec({"primary": root_class()}, container=container)
    text = describe_spec(spec)
    assert size in text
    assert "rows" not in text and "row spacing" not in text


def test_layers_below_a_pot_bottom_are_named():
    soil = {"layers": [{"depth_top_cm": 0.0, "depth_bottom_cm": 80.0, "penetration_resistance_mpa": 0.5}]}
    spec = make_spec({"primary": root_class()}, soil=soil, container={"kind": "pot", "diameter_cm": 20.0, "depth_cm": 30.0})
    assert any("the pot is only 30 cm deep" in m for m in spec_warnings(spec))
