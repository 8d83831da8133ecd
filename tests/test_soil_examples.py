"""Shipped soil examples: `rootsim check` accepts them, `rootsim soil --vti` shows their fields."""

from pathlib import Path

import numpy as np
import pytest

from rootsim.cli import main
from rootsim.soil.build import biopores_from_spec, soil_fields_from_spec
from rootsim.spec import load_spec

PARAMS = Path(__file__).resolve().parents[1] / "params"


@pytest.mark.parametrize("name", ["field_plough_pan.toml", "pot_nutrient_patch.toml"])
def test_check_accepts_the_shipped_soil_examples(name, capsys):
    assert main(["check", str(PARAMS / name)]) == 0
    assert capsys.readouterr().out.startswith("ok: ")


def test_plough_pan_fields_and_biopores_through_the_pan():
    spec = load_spec(PARAMS / "field_plough_pan.toml")
    fields = soil_fields_from_spec(spec)
    # the layer rule (DEVELOPERS.md): a depth on a boundary (25 and 35 cm) belongs to the layer above, a depth
    # just below it to the layer below; within a layer the value does not change with depth
    for name in ("bulk_density_g_per_cm3", "penetration_resistance_mpa"):
        above_pan = fields.values(name, 0, 0, -np.array([5.0, 24.0, 25.0]))
        pan = fields.values(name, 0, 0, -np.array([25.0001, 30.0, 35.0]))
        below_pan = fields.values(name, 0, 0, -np.array([35.0001, 60.0, 199.0]))
        for block in (above_pan, pan, below_pan):
            assert np.ptp(block) == 0.0, name
        assert above_pan[0] != pan[0] != below_pan[0], name
    # water content from the depth table, linear between rows: 35 cm (0.27) to 80 cm (0.30) -> 0.28 at 50 cm;
    # 0 cm (0.18) to 20 cm (0.24) -> 0.21 at 10 cm
    assert fields.values("volumetric_water_content", 0, 0, -50.0) == pytest.approx(0.28)
    assert fields.values("volumetric_water_content", 0, 0, -10.0) == pytest.approx(0.21)
    pores = biopores_from_spec(spec)
    assert pores.count > 1
    assert np.all(pores.top_cm[:, 2] >= -25.0) and np.all(pores.bottom_cm[:, 2] <= -35.0)  # they cross the pan
    # the explicit channel under the first plant: a point on its axis at 30 cm depth is inside a pore
    index, _ = pores.lookup(0.0 + 2.0 * 15 / 105, -10.0, -30.0)
    assert index >= 0


def test_soil_command_writes_a_vti_that_vtk_reads_back(tmp_path, capsys):
    import vtk
    from vtk.util.numpy_support import vtk_to_numpy

    out = tmp_path / "soil.vti"
    assert main(["soil", str(PARAMS / "pot_nutrient_patch.toml"), "--vti", str(out), "--voxel-cm", "2"]) == 0
    assert "nitrate_mg_per_kg" in capsys.readouterr().out
    reader = vtk.vtkXMLImageDataReader()
    reader.SetFileName(str(out))
    reader.Update()
    image = reader.GetOutput()
    dims = image.GetDimensions()
    assert dims == (11, 11, 21) and image.GetSpacing() == (2.0, 2.0, 2.0)
    nitrate = vtk_to_numpy(image.GetPointData().GetArray("nitrate_mg_per_kg")).reshape(dims[::-1])
    water = vtk_to_numpy(image.GetPointData().GetArray("volumetric_water_content")).reshape(dims[::-1])
    ox, oy, oz = image.GetOrigin()
    # node (x=4, y=0, depth 14 cm) is 1.4 cm from the patch centre (5, 0, 15): 60 mg/kg; a far corner keeps the
    # 4 mg/kg background
    k, j, i = int(round((-14 - oz) / 2)), int(round((0 - oy) / 2)), int(round((4 - ox) / 2))
    assert (ox + 2 * i, oy + 2 * j, oz + 2 * k) == (4, 0, -14)
    assert nitrate[k, j, i] == 60.0 and nitrate[0, 0, 0] == 4.0
    # the shipped water grid is 0.24 + 0.004 x + 0.0005 depth (linear, so trilinear nodes reproduce it exactly)
    z, y, x = np.meshgrid(oz + 2 * np.arange(dims[2]), oy + 2 * np.arange(dims[1]), ox + 2 * np.arange(dims[0]),
                          indexing="ij")
    expected = 0.24 + 0.004 * np.clip(x, -10, 10) + 0.0005 * np.clip(-z, 0, 40)
    np.testing.assert_allclose(water, expected, atol=1e-9)


def test_soil_command_refuses_a_bad_voxel_size_and_writes_nothing(tmp_path, capsys):
    out = tmp_path / "soil.vti"
    assert main(["soil", str(PARAMS / "pot_nutrient_patch.toml"), "--vti", str(out), "--voxel-cm", "0"]) == 2
    assert capsys.readouterr().err.startswith("error: ") and not out.exists()


def test_plough_pan_stand_establishes_slowly_then_deepens_at_field_rates():
    from rootsim.soil.thermal import (calendar_days_from_effective_days, daily_effective_days,
                                      grow_for_spec, weather_table_for_spec)

    spec = load_spec(PARAMS / "field_plough_pan.toml")
    front, systems = {}, {}
    for days in (20, 45, 60):
        system = grow_for_spec(spec.with_overrides(duration_days=days), progress=False)
        front[days] = -min(system["z0"].min(), system["z1"].min())
        systems[days] = system
    late_rate = (front[60] - front[45]) / 15
    # after establishment a maize-like rooting front advances 2.5-3 cm/day (common practice, extension sources);
    # the band reaches down to 2.0 for the plough pan, which slows roots crossing it
    assert 2.0 <= late_rate <= 3.5
    # cool first weeks of the invented season: the front advances far slower than later
    assert (front[20] - spec.stand.sowing_depth_cm) / 20 < 0.6 * late_rate
    # fine laterals live 15 days at the optimum: none older than that is left at day 60
    dev = spec.development
    daily = daily_effective_days(weather_table_for_spec(spec), shape=dev.temperature_response,
                                 base_c=dev.base_temperature_c, optimum_c=dev.optimum_temperature_c,
                                 maximum_c=dev.maximum_temperature_c)
    effective_60 = systems[60].metadata["development"]["effective_days"]
    oldest_allowed = calendar_days_from_effective_days(daily, effective_60 - 15.0)
    fine = systems[60]["root_class"] == "lateral_second"
    assert fine.any() and systems[60]["birth_day"][fine].min() >= oldest_allowed - 1e-9
    assert systems[45]["birth_day"][systems[45]["root_class"] == "lateral_second"].min() < oldest_allowed
