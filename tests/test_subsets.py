"""RLD of one root order, root class or plant: `RootSystem.select`, `from_dataframe(subset)` and
`analyze --order/--root-class/--plant`.

Analytic reference (definition of RLD, common practice): root length L in a layer of thickness t over a
ground area A gives RLD = L / (t * A).
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from rootsim.cli import main
from rootsim.errors import RootsimError
from rootsim.rootsystem import RootSystem


def two_plant_system() -> RootSystem:
    """Two plants at x = -10 and +10 cm (ground area 2 x 100 cm2). Each: a vertical order-0 'taproot' of
    4 segments 0..-20 cm, and one horizontal order-1 'lateral' of 2 x 5 cm at 7.5 cm depth from segment 1."""
    rows = []
    for plant, x in enumerate((-10.0, 10.0)):
        base = len(rows)
        for k in range(4):
            rows.append(dict(parent_id=base + k - 1 if k else -1, plant_id=plant, root_id=2 * plant, order=0,
                             root_class="taproot", x0=x, y0=0.0, z0=-5.0 * k, x1=x, y1=0.0, z1=-5.0 * (k + 1)))
        for k in range(2):
            rows.append(dict(parent_id=base + 1 if k == 0 else len(rows) - 1, plant_id=plant, root_id=2 * plant + 1,
                             order=1, root_class="lateral", x0=x + 5.0 * k, y0=0.0, z0=-7.5, x1=x + 5.0 * (k + 1),
                             y1=0.0, z1=-7.5))
    df = pd.DataFrame(rows)
    df.insert(0, "segment_id", np.arange(len(df)))
    df["radius_cm"] = 0.05
    df["length_cm"] = 5.0
    df["birth_day"] = 1.0
    meta = {"stand": {"n_plants": 2, "rows": 1, "plants_per_row": 2, "row_spacing_cm": 10.0, "plant_spacing_cm": 10.0,
                      "sowing_depth_cm": 0.0, "ground_area_cm2": 200.0,
                      "plant_positions_cm": [[-10.0, 0.0, 0.0], [10.0, 0.0, 0.0]]},
            "container": {"kind": "field"}}
    return RootSystem({c: df[c].to_numpy() for c in df.columns}, meta)


def test_select_order_keeps_the_stand_area_and_gives_the_order_rld():
    system = two_plant_system()
    laterals = system.select(order=1)
    assert len(laterals) == 4 and set(laterals["order"]) == {1}
    np.testing.assert_array_equal(laterals["segment_id"], np.arange(4))
    np.testing.assert_array_equal(laterals["parent_id"], [-1, 0, -1, 2])  # bearing taproot left out
    profile = laterals.profile(layer_cm=5.0)
    # 2 x 10 cm of lateral in the 5-10 cm layer over the stand's 200 cm2: 20 / (5 * 200) = 0.02 cm/cm3
    np.testing.assert_allclose(profile["rld_cm_per_cm3"], [0.0, 0.02])
    assert laterals.traits()["total_length_cm"] == pytest.approx(20.0)


def test_select_plant_uses_its_share_of_the_ground_and_keeps_its_position():
    plant = two_plant_system().select(plant=1)
    assert set(plant["plant_id"]) == {1}
    assert plant.metadata["stand"]["plant_positions_cm"] == [[10.0, 0.0, 0.0]]
    assert plant.metadata["stand"]["ground_area_cm2"] == 100.0 and plant.n_plants == 1
    # 5 cm of taproot + 10 cm of lateral in 5-10 cm over 100 cm2: 15 / (5 * 100) = 0.03 cm/cm3
    np.testing.assert_allclose(plant.profile(layer_cm=5.0)["rld_cm_per_cm3"], [0.01, 0.03, 0.01, 0.01])
    both = two_plant_system().select(root_class="taproot", plant=[0])
    assert len(both) == 4 and both.metadata["selection"] == {"root_class": ["taproot"], "plant": [0]}


@pytest.mark.parametrize("kwargs,message", [
    ({"order": 7}, r"select\(order=7\): no roots of order 7 \(allowed: 0, 1\)"),
    ({"root_class": "nodl"}, r"select\(root_class='nodl'\): no root class 'nodl' .*\(allowed: lateral, taproot\)"),
    ({"plant": 5}, r"select\(plant=5\): no plant 5 in this root system \(allowed: 0..1\)"),
    ({"order": 1.5}, r"select\(order=1.5\): must be a whole number"),
])
def test_select_errors_speak_python(kwargs, message):
    with pytest.raises(RootsimError, match=message) as info:
        two_plant_system().select(**kwargs)
    assert "--" not in str(info.value)


def test_from_dataframe_of_a_row_subset_works():
    df = two_plant_system().to_dataframe()
    sub = RootSystem.from_dataframe(df[df["order"] == 1])
    np.testing.assert_array_equal(sub["segment_id"], np.arange(4))
    np.testing.assert_array_equal(sub["parent_id"], [-1, 0, -1, 2])
    assert sub.metadata["stand"]["ground_area_cm2"] == 200.0


def test_profile_without_area_speaks_python():
    system = two_plant_system()
    system.metadata = {}
    with pytest.raises(RootsimError, match=r"area_cm2=A \(cm²\) or box=\(xmin, xmax, ymin, ymax\)"):
        system.profile()


def test_analyze_order_root_class_and_plant(tmp_path, capsys):
    two_plant_system().write(tmp_path / "segments.parquet")
    assert main(["analyze", str(tmp_path), "--order", "1", "--plant", "0"]) == 0
    out = capsys.readouterr().out
    assert "(only order 1, plant 0)" in out
    profile = pd.read_csv(tmp_path / "profile_order-1_plant-0.csv")
    # 10 cm of plant 0's lateral in 5-10 cm over its 100 cm2: 10 / (5 * 100) = 0.02 cm/cm3
    np.testing.assert_allclose(profile["rld_cm_per_cm3"], [0.0, 0.02])
    traits = json.loads((tmp_path / "traits_order-1_plant-0.json").read_text())
    assert traits["selection"] == {"order": [1], "plant": [0]} and traits["total_length_cm"] == pytest.approx(10.0)
    assert not (tmp_path / "profile.csv").exists()  # the stand's own files are not replaced
    assert main(["analyze", str(tmp_path), "--root-class", "taproot"]) == 0
    assert pd.read_csv(tmp_path / "profile_root-class-taproot.csv")["root_length_cm"].sum() == pytest.approx(40.0)


def test_analyze_unknown_selection_exit_2(tmp_path, capsys):
    two_plant_system().write(tmp_path / "segments.parquet")
    capsys.readouterr()
    assert main(["analyze", str(tmp_path), "--root-class", "nodal"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: --root-class nodal: no root class 'nodal'") and "allowed: lateral, taproot" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["segments.parquet"]
