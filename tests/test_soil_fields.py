"""Soil fields: interpolation against analytic fields, layer/grid equivalence, patches, files and bad input."""

import numpy as np
import pytest

from rootsim.cli import main
from rootsim.errors import RootsimError
from rootsim.soil.fields import (box_patch, compile_fields, constant_source, cylinder_patch, depth_table_source,
                                 gradient_at, grid_source, layered_source, power_law_source, sphere_patch,
                                 value_at)
from rootsim.soil.strength import busscher_penetration_resistance_mpa
from rootsim.spec import parse_spec

RNG = np.random.default_rng(12)


def _linear_grid(coef, origin, spacing, shape):
    axes = [origin[a] + spacing[a] * np.arange(shape[a]) for a in range(3)]
    x, y, z = np.meshgrid(*axes, indexing="ij")
    return coef[0] + coef[1] * x + coef[2] * y + coef[3] * z


def test_trilinear_reproduces_a_linear_field_and_its_gradient_exactly():
    # analytic: trilinear interpolation is exact for f = a + b x + c y + d z
    coef = (2.0, 0.3, -0.15, 0.04)
    origin, spacing, shape = (-20.0, -10.0, -80.0), (4.0, 2.5, 5.0), (11, 9, 17)
    fields = compile_fields({"f": [grid_source(_linear_grid(coef, origin, spacing, shape), origin, spacing)]})
    x, y, z = RNG.uniform(-20, 20, 500), RNG.uniform(-10, 10, 500), RNG.uniform(-80, 0, 500)
    expected = coef[0] + coef[1] * x + coef[2] * y + coef[3] * z
    np.testing.assert_allclose(fields.values("f", x, y, z), expected, rtol=0, atol=1e-12)
    np.testing.assert_allclose(fields.gradients("f", x, y, z), np.broadcast_to(coef[1:], (500, 3)), atol=1e-12)
    # the scalar kernels the engine calls give the same numbers
    assert value_at(fields.compiled, 0, x[0], y[0], z[0]) == pytest.approx(expected[0], abs=1e-12)
    assert gradient_at(fields.compiled, 0, 1.0, 2.0, -3.0) == pytest.approx(coef[1:], abs=1e-12)


def test_trilinear_matches_scipy_on_a_random_grid():
    # independent library: scipy's RegularGridInterpolator (method="linear" is trilinear)
    from scipy.interpolate import RegularGridInterpolator

    origin, spacing = (0.0, -5.0, -30.0), (1.5, 2.0, 3.0)
    values = RNG.normal(size=(6, 5, 11))
    axes = [origin[a] + spacing[a] * np.arange(values.shape[a]) for a in range(3)]
    fields = compile_fields({"f": [grid_source(values, origin, spacing)]})
    pts = np.stack([RNG.uniform(a[0], a[-1], 400) for a in axes], axis=1)
    np.testing.assert_allclose(fields.values("f", *pts.T), RegularGridInterpolator(axes, values)(pts), atol=1e-12)


def test_outside_rules_of_a_grid():
    values = np.arange(8.0).reshape(2, 2, 2)
    base = dict(origin_cm=(0, 0, -10), spacing_cm=(10, 10, 10))
    clamp = compile_fields({"f": [grid_source(values, **base)]})
    stated = compile_fields({"f": [grid_source(values, **base, outside="value", outside_value=-1.0)]})
    none = compile_fields({"f": [constant_source(5.0), grid_source(values, **base, outside="none")]})
    # beyond the high-x face: clamp gives the face value (the x = 10 nodes), 'value' the stated one, 'none' the base
    assert clamp.values("f", 25.0, 0.0, -10.0) == pytest.approx(values[1, 0, 0])
    assert clamp.gradients("f", 25.0, 0.0, -10.0)[0] == 0.0
    assert stated.values("f", 25.0, 0.0, -10.0) == -1.0
    assert none.values("f", 25.0, 0.0, -10.0) == 5.0 and none.values("f", 10.0, 10.0, 0.0) == values[1, 1, 1]


def test_layer_form_and_cell_grid_form_of_the_same_soil_agree():
    # Three layers 0-20, 20-35 (a pan), 35-100 cm as layers and as a 5 cm cell grid aligned with them.
    layers = layered_source([0, 20, 35], [20, 35, 100], [0.5, 2.5, 1.0])
    depth_centres = np.arange(2.5, 100, 5.0)
    column = np.where(depth_centres < 20, 0.5, np.where(depth_centres < 35, 2.5, 1.0))[::-1]  # z upward
    grid = grid_source(np.broadcast_to(column, (3, 3, column.size)), (-30, -30, -100), (20, 20, 5), at="cells")
    fields = compile_fields({"layers": [layers], "grid": [grid]})
    x, y = RNG.uniform(-30, 30, 2000), RNG.uniform(-30, 30, 2000)
    z = -np.concatenate([RNG.uniform(0, 99.9, 1990), [0.0, 20.0, 35.0, 19.999, 20.001, 34.999, 35.001, 5, 50, 99]])
    np.testing.assert_array_equal(fields.values("layers", x, y, z), fields.values("grid", x, y, z))
    # a depth on a boundary belongs to the layer above (as in the growth engine's layers)
    assert fields.values("layers", 0, 0, -20.0) == 0.5 and fields.values("layers", 0, 0, -35.0) == 2.5


def test_layers_with_gaps_take_the_stated_outside_value():
    fields = compile_fields({"f": [layered_source([10, 40], [30, 50], [1.0, 2.0], outside_value=-7.0)]})
    np.testing.assert_array_equal(fields.values("f", 0, 0, -np.array([0, 5, 10, 20, 30, 35, 45, 55])),
                                  [-7, -7, -7, 1, 1, -7, 2, -7])


def test_depth_table_is_linear_between_rows_and_flat_beyond():
    fields = compile_fields({"f": [depth_table_source([0, 20, 60], [0.2, 0.3, 0.1])]})
    # hand-computed: depth 10 -> 0.25, depth 40 -> 0.2, slope -0.005 per cm of depth -> dz gradient +0.005
    np.testing.assert_allclose(fields.values("f", 0, 0, -np.array([10.0, 40.0, 80.0])), [0.25, 0.2, 0.1])
    np.testing.assert_allclose(fields.gradients("f", 0, 0, -40.0), [0, 0, 0.005])
    np.testing.assert_allclose(fields.gradients("f", 0, 0, -10.0), [0, 0, -0.005])


@pytest.mark.parametrize("patch, inside, outside", [
    (box_patch((0, 0, -20), (10, 4, 6), 3.0), (4.9, -1.9, -17.1), (5.1, 0, -20)),
    (sphere_patch((1, 2, -30), 5.0, 3.0), (1, 2 + 4.99, -30), (1, 2, -35.01)),
    (cylinder_patch((0, 0, -10), (10, 0, -20), 2.0, 3.0), (5, 1.99, -15), (-1, 0, -9)),
])
def test_patches_add_inside_only(patch, inside, outside):
    fields = compile_fields({"f": [constant_source(1.0), patch]})
    assert fields.values("f", *inside) == 4.0
    assert fields.values("f", *outside) == 1.0


def test_patch_modes_and_soft_edge_gradient():
    replace = compile_fields({"f": [constant_source(1.0), sphere_patch((0, 0, -20), 4.0, 9.0, mode="replace",
                                                                       edge_width_cm=2.0)]})
    multiply = compile_fields({"f": [constant_source(2.0), box_patch((0, 0, -20), (4, 4, 4), 3.0, mode="multiply")]})
    assert replace.values("f", 0, 0, -20) == 9.0 and multiply.values("f", 0, 0, -20) == 6.0
    # half-way through the 2 cm edge (1 cm outside the ball): weight 1/2 -> (1 + 9) / 2, analytic gradient
    # d/dx of (1 - w) 1 + w 9 with w = 1 - (r - 4) / 2 is 8 * (-1/2) along the outward normal
    assert replace.values("f", 5.0, 0, -20) == pytest.approx(5.0)
    np.testing.assert_allclose(replace.gradients("f", 5.0, 0, -20), [-4.0, 0, 0], atol=1e-12)


def test_power_law_field_matches_the_pedotransfer_function():
    theta = depth_table_source([0, 50], [0.15, 0.35])
    rho = layered_source([0, 25], [25, 100], [1.3, 1.6])
    strength = power_law_source(0.05, "theta", -2.0, "rho", 4.0)
    fields = compile_fields({"theta": [theta], "rho": [rho], "strength": [strength]})
    depth = np.array([5.0, 24.0, 30.0, 45.0])
    expected = busscher_penetration_resistance_mpa(0.15 + 0.004 * depth, np.where(depth <= 25, 1.3, 1.6),
                                                   coefficient_mpa=0.05, water_content_exponent=-2.0,
                                                   bulk_density_exponent=4.0)
    np.testing.assert_allclose(fields.values("strength", 0, 0, -depth), expected, rtol=1e-12)
    # chain rule: dQ/dz = Q * b * (dtheta/dz) / theta with dtheta/dz = -0.004 (constant density at 30 cm)
    q = expected[2]
    np.testing.assert_allclose(fields.gradients("strength", 0, 0, -30.0), [0, 0, q * -2.0 * -0.004 / 0.27])


def test_power_law_of_an_undefined_field_is_refused():
    with pytest.raises(RootsimError, match="'nope'"):
        compile_fields({"strength": [power_law_source(1.0, "nope", -1.0, "nope", 1.0)]})


# -- parameter files -------------------------------------------------------------------------------

BASE = {"run": {"duration_days": 2}, "emergence": [{"root_class": "main"}], "root_classes": {"main": {}}}


def _spec(tmp_path, soil):
    from rootsim.soil.build import soil_fields_from_spec

    spec = parse_spec({**BASE, "soil": soil}, source=str(tmp_path / "spec.toml"))
    return soil_fields_from_spec(spec)


def test_npy_grid_in_a_parameter_file_uses_depth_downward(tmp_path):
    # third array axis runs downward from origin depth: node k at depth 10 + 5 k
    values = np.zeros((2, 2, 4)) + np.array([0.1, 0.2, 0.3, 0.4])
    np.save(tmp_path / "water.npy", values)
    fields = _spec(tmp_path, {"fields": {"volumetric_water_content": {"grid": {
        "file": "water.npy", "origin_cm": [0, 0, 10], "spacing_cm": [5, 5, 5]}}}})
    np.testing.assert_allclose(fields.values("volumetric_water_content", 2, 2, -np.array([10, 12.5, 25, 30, 40])),
                               [0.1, 0.15, 0.4, 0.4, 0.4])


def test_vti_grid_read_with_vtk_matches_the_written_values(tmp_path):
    import vtk
    from vtk.util.numpy_support import numpy_to_vtk

    values = _linear_grid((1.0, 0.02, 0.01, 0.005), (-10, -10, -40), (5, 5, 10), (5, 5, 5))
    image = vtk.vtkImageData()
    image.SetDimensions(5, 5, 5)
    image.SetOrigin(-10, -10, -40)
    image.SetSpacing(5, 5, 10)
    array = numpy_to_vtk(np.ascontiguousarray(values.transpose(2, 1, 0).ravel()), deep=True)
    array.SetName("bulk")
    image.GetPointData().AddArray(array)
    writer = vtk.vtkXMLImageDataWriter()
    writer.SetFileName(str(tmp_path / "bulk.vti"))
    writer.SetInputData(image)
    writer.Write()
    fields = _spec(tmp_path, {"fields": {"bulk_density_g_per_cm3": {"grid": {"file": "bulk.vti"}}}})
    x, y, z = RNG.uniform(-10, 10, 50), RNG.uniform(-10, 10, 50), RNG.uniform(-40, 0, 50)
    np.testing.assert_allclose(fields.values("bulk_density_g_per_cm3", x, y, z), 1 + 0.02 * x + 0.01 * y + 0.005 * z,
                               atol=1e-12)


def _run_check(tmp_path, capsys, soil_toml: str, files=()):
    for name, writer in files:
        writer(tmp_path / name)
    spec = tmp_path / "bad.toml"
    spec.write_text('[run]\nduration_days = 2\n[[emergence]]\nroot_class = "main"\n[root_classes.main]\n'
                    + soil_toml)
    code = main(["check", str(spec)])
    err = capsys.readouterr().err.strip()
    return code, err, str(spec)


@pytest.mark.parametrize("soil_toml, files, fragment", [
    ('[soil.fields.bulk_density_g_per_cm3]\ngrid = { file = "g.npy", origin_cm = [0,0,0], spacing_cm = [1,1,1] }\n',
     [("g.npy", lambda p: np.save(p, np.where(np.arange(8).reshape(2, 2, 2) == 5, np.nan, 1.3)))],
     "soil.fields.bulk_density_g_per_cm3.grid.file"),
    ('[soil.fields.bulk_density_g_per_cm3]\ngrid = { file = "g.npy", origin_cm = [0,0,0], spacing_cm = [1,1,1] }\n',
     [("g.npy", lambda p: np.save(p, np.ones((3, 4))))], "shape (3, 4)"),
    ('[soil.fields.penetration_resistance_mpa]\npedotransfer = { coefficient_mpa = 1, water_content_exponent = -1,'
     ' bulk_density_exponent = 1 }\n', [], "pedotransfer.water_content_field"),
    ('[soil.fields.volumetric_water_content]\ndepth_table_file = "t.csv"\n',
     [("t.csv", lambda p: p.write_text("depth_cm,value\n0,0.2\n10,0.3\n5,0.3\n"))], "not increasing"),
    ('[soil.fields.volumetric_water_content]\nvalue = 1.7\n', [], "outside the range"),
    ('[soil.fields.NO3]\nvalue = 1.0\n', [], "soil.fields.NO3: field names"),
    ('[soil.fields.bulk_density_g_per_cm3]\nvalue = 1.3\nlayers = []\n', [], "exactly one of"),
    ('[soil.fields.bulk_density_g_per_cm3]\nvaleu = 1.3\n', [], "did you mean 'value'?"),
    ('[soil.biopores]\ndensity_per_m3 = 3\n', [], "did you mean 'density_per_m2'?"),
    ('[soil.fields.nitrate_mg_per_kg]\nvalue = 3\n[[soil.fields.nitrate_mg_per_kg.patches]]\nshape = "box"\n'
     'value = 3\nradius_cm = 2\n', [], "patches[0]: a box patch needs center_cm, size_cm"),
    ('[weather]\nfile = "nope.csv"\n', [], "weather.file: "),
    ('[soil.biopores]\ndensity_per_m2 = 90000\n[stand]\nrows = 100\nplants_per_row = 100\n', [],
     "soil.biopores.density_per_m2: 90000 per m² over 1500 m² gives about 135,000,000 biopores"),
])
def test_bad_soil_input_gives_one_error_line_and_exit_2(tmp_path, capsys, soil_toml, files, fragment):
    code, err, spec = _run_check(tmp_path, capsys, soil_toml, files)
    assert code == 2
    assert err.startswith("error: ") and spec in err and fragment in err and "\n" not in err


def test_compiled_layers_match_the_growth_engines_layer_rule():
    # independent implementation: the growth engine's own layer look-up (rootsim.growth.soil: interval table and
    # elongation_factor) must give the same resistance, hence the same elongation factor 2^(-R / R_half), as the
    # compiled field kernel
    from rootsim.growth.soil import elongation_factor as engine_factor
    from rootsim.growth.soil import soil_arrays
    from rootsim.soil.build import soil_fields_from_spec
    from rootsim.soil.strength import EXPONENTIAL, elongation_factor_kernel

    layers = [{"depth_top_cm": 5, "depth_bottom_cm": 20, "penetration_resistance_mpa": 0.8},
              {"depth_top_cm": 20, "depth_bottom_cm": 35, "penetration_resistance_mpa": 3.0},
              {"depth_top_cm": 50, "depth_bottom_cm": 90, "penetration_resistance_mpa": 1.2}]
    spec = parse_spec({**BASE, "soil": {"elongation_halving_resistance_mpa": 1.5, "layers": layers}})
    fields = soil_fields_from_spec(spec)
    depth = np.concatenate([RNG.uniform(-1, 120, 3000), [0, 5, 20, 35, 50, 90, 4.999999, 35.000001]])
    resistance = fields.values("penetration_resistance_mpa", 0.0, 0.0, -depth)
    bottoms, engine_table, _, _ = soil_arrays(spec.soil)
    factor = [elongation_factor_kernel(r, EXPONENTIAL, 1.5, 1.0) for r in resistance]
    engine = [engine_factor(bottoms, engine_table, 0.0, 0.0, -d) for d in depth]
    np.testing.assert_allclose(factor, engine, rtol=1e-14)


def test_layers_and_an_npy_cell_grid_in_parameter_files_agree(tmp_path):
    # the same soil written as [soil.fields.X] layers and as a .npy grid of cells (axes x, y, depth downward)
    np.save(tmp_path / "cells.npy", np.broadcast_to(np.repeat([1.3, 1.7, 1.5], [5, 2, 13]), (4, 3, 20)).copy())
    layers = [{"depth_top_cm": 0, "depth_bottom_cm": 25, "value": 1.3},
              {"depth_top_cm": 25, "depth_bottom_cm": 35, "value": 1.7},
              {"depth_top_cm": 35, "depth_bottom_cm": 100, "value": 1.5}]
    as_layers = _spec(tmp_path, {"fields": {"bulk_density_g_per_cm3": {"layers": layers}}})
    as_grid = _spec(tmp_path, {"fields": {"bulk_density_g_per_cm3": {"grid": {
        "file": "cells.npy", "origin_cm": [-40, -30, 0], "spacing_cm": [20, 20, 5], "values_at": "cells"}}}})
    x, y = RNG.uniform(-40, 40, 3000), RNG.uniform(-30, 30, 3000)
    z = -np.concatenate([RNG.uniform(0, 99.99, 2990), [0, 25, 35, 24.9999, 25.0001, 34.9999, 35.0001, 5, 50, 99]])
    np.testing.assert_array_equal(as_layers.values("bulk_density_g_per_cm3", x, y, z),
                                  as_grid.values("bulk_density_g_per_cm3", x, y, z))
