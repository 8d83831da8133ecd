"""Planned field evaluation (each field read by its first source's own code) against the generic evaluation of
every source in turn, and the interval bounds of fields.

The planned path must give bit-for-bit the numbers of the generic one (the same operations in the same order), so
growth is unchanged by it; checked on random points (inside and outside grids, on layer and cell boundaries) for
every source kind, with patches of every shape and mode, and power laws.
"""

import numpy as np
import pytest

from rootsim.soil.fields import (BOX, CONSTANT, CYLINDER, DEPTH_TABLE, GRID_CELLS, GRID_NODES, LAYERS,
                                 PLAN_GENERIC, POWER_LAW, SPHERE, box_patch, compile_fields, constant_source,
                                 cylinder_patch, depth_table_source, field_value_range, gradients_at, grid_source,
                                 layered_source, power_law_source, sphere_patch, values_at)

RNG = np.random.default_rng(2026)
_GRID = RNG.uniform(0.2, 3.0, size=(7, 5, 9))
_ORIGIN, _SPACING = (-30.0, -20.0, -80.0), (10.0, 10.0, 10.0)


def _bases():
    return {
        "constant": constant_source(1.7),
        "layers": layered_source([0, 20, 35], [20, 35, 90], [0.5, 2.5, 1.0], outside_value=0.3),
        "depth_table": depth_table_source([0, 20, 60], [0.2, 0.35, 0.1]),
        "grid_nodes_clamp": grid_source(_GRID, _ORIGIN, _SPACING),
        "grid_nodes_value": grid_source(_GRID, _ORIGIN, _SPACING, outside="value", outside_value=-2.0),
        "grid_nodes_none": grid_source(_GRID, _ORIGIN, _SPACING, outside="none", mode="add"),
        "grid_cells": grid_source(_GRID, _ORIGIN, _SPACING, at="cells"),
        "grid_cells_value": grid_source(_GRID, _ORIGIN, _SPACING, at="cells", outside="value", outside_value=4.0),
    }


def _patches():
    return [box_patch((0, 0, -20), (10, 4, 6), 3.0, edge_width_cm=2.0),
            sphere_patch((5, -3, -30), 6.0, 9.0, mode="replace", edge_width_cm=1.5),
            cylinder_patch((-10, 0, -10), (10, 5, -50), 2.0, 0.5, mode="multiply", edge_width_cm=1.0),
            sphere_patch((-12, 8, -60), 4.0, 0.1, mode="multiply")]


def _points(n=4000):
    # random points over and beyond the grid (outside rules), plus points on layer, table and cell boundaries
    x = np.concatenate([RNG.uniform(-45, 45, n), [-30.0, 30.0, 0.0, 10.0, 0.0, 0.0, 0.0]])
    y = np.concatenate([RNG.uniform(-30, 30, n), [-20.0, 20.0, 0.0, 10.0, 0.0, 0.0, 0.0]])
    z = np.concatenate([RNG.uniform(-100, 5, n), [-80.0, 0.0, -20.0, -35.0, -60.0, -30.0, 0.0]])
    return x, y, z


def _assert_same_as_generic(fields, name):
    x, y, z = _points()
    index = fields.index(name)
    planned = values_at(fields.compiled, index, x, y, z)
    generic = values_at(fields.compiled, index, x, y, z, reference=True)
    np.testing.assert_array_equal(planned, generic)
    np.testing.assert_array_equal(gradients_at(fields.compiled, index, x, y, z),
                                  gradients_at(fields.compiled, index, x, y, z, reference=True))
    assert np.isfinite(planned).all() and np.ptp(planned) > 0 or name.startswith("constant")


@pytest.mark.parametrize("base", list(_bases()))
def test_base_source_plans_equal_the_generic_evaluation(base):
    source = _bases()[base]
    fields = compile_fields({base: [source]})
    assert fields.compiled.plan[0] == source.kind
    _assert_same_as_generic(fields, base)


@pytest.mark.parametrize("base", list(_bases()))
def test_base_source_with_patches_of_every_shape_and_mode_equals_the_generic_evaluation(base):
    fields = compile_fields({base: [_bases()[base], *_patches()]})
    assert fields.compiled.plan[0] == _bases()[base].kind
    assert {BOX, SPHERE, CYLINDER} <= set(fields.compiled.kind.tolist())
    _assert_same_as_generic(fields, base)


def test_power_law_plans_equal_the_generic_evaluation():
    # Busscher's power law of a water grid with a wet sphere and of layered bulk density, then a stone patch
    fields = compile_fields({
        "theta": [grid_source(RNG.uniform(0.05, 0.4, (7, 5, 9)), _ORIGIN, _SPACING),
                  sphere_patch((0, 0, -40), 8.0, 0.45, mode="replace", edge_width_cm=3.0)],
        "rho": [layered_source([0, 25], [25, 100], [1.3, 1.6], outside_value=1.5)],
        "strength": [power_law_source(0.05, "theta", -2.0, "rho", 4.0),
                     sphere_patch((10, 5, -25), 3.0, 12.0, mode="replace")],
    })
    assert fields.compiled.plan[fields.index("strength")] == POWER_LAW
    for name in fields.names:
        _assert_same_as_generic(fields, name)


@pytest.mark.parametrize("sources", [
    [sphere_patch((0, 0, -20), 5.0, 2.0), constant_source(1.0, mode="add")],     # a patch first
    [constant_source(2.0, mode="multiply"), box_patch((0, 0, -20), (4, 4, 4), 3.0)],  # multiply first
    [constant_source(1.0), grid_source(_GRID, _ORIGIN, _SPACING, mode="add")],   # two base sources
    [constant_source(0.3), power_law_source(0.05, "theta", -2.0, "rho", 4.0, mode="add")],  # power law second
])
def test_other_fields_take_the_generic_plan_and_give_its_numbers(sources):
    fields = compile_fields({"theta": [depth_table_source([0, 50], [0.15, 0.35])], "rho": [constant_source(1.4)],
                             "f": sources})
    assert fields.compiled.plan[fields.index("f")] == PLAN_GENERIC
    _assert_same_as_generic(fields, "f")


def test_plans_of_the_documented_forms():
    fields = compile_fields({name: [source] for name, source in _bases().items()})
    assert fields.compiled.plan.tolist() == [CONSTANT, LAYERS, DEPTH_TABLE, GRID_NODES, GRID_NODES, GRID_NODES,
                                             GRID_CELLS, GRID_CELLS]


# -- bounds ---------------------------------------------------------------------------------------------------

def test_value_range_of_base_sources_is_their_extreme_values():
    # hand-computed: the values of each form (and the stated outside values)
    fields = compile_fields({name: [source] for name, source in _bases().items()})
    expected = {"constant": (1.7, 1.7), "layers": (0.3, 2.5), "depth_table": (0.1, 0.35),
                "grid_nodes_clamp": (_GRID.min(), _GRID.max()), "grid_nodes_value": (-2.0, _GRID.max()),
                "grid_nodes_none": (0.0, _GRID.max()), "grid_cells": (_GRID.min(), _GRID.max()),
                "grid_cells_value": (_GRID.min(), 4.0)}
    for name, bounds in expected.items():
        assert field_value_range(fields.compiled, fields.index(name)) == pytest.approx(bounds, abs=1e-15), name


def test_value_range_of_patches_and_power_laws_holds_every_value():
    # hand-computed bounds: 1 + a box adding 3 -> [1, 4]; Busscher Q = 0.05 theta^-2 rho^4 over theta in
    # [0.15, 0.35] and rho in [1.3, 1.6]: lowest at (0.35, 1.3), highest at (0.15, 1.6)
    fields = compile_fields({
        "patched": [constant_source(1.0), box_patch((0, 0, -20), (10, 4, 6), 3.0, edge_width_cm=2.0)],
        "theta": [depth_table_source([0, 50], [0.15, 0.35])],
        "rho": [layered_source([0, 25], [25, 100], [1.3, 1.6], outside_value=1.6)],
        "strength": [power_law_source(0.05, "theta", -2.0, "rho", 4.0)],
        "everything": [grid_source(_GRID, _ORIGIN, _SPACING), *_patches()],
    })
    assert field_value_range(fields.compiled, 0) == (1.0, 4.0)
    low, high = field_value_range(fields.compiled, fields.index("strength"))
    assert low == pytest.approx(0.05 * 0.35 ** -2 * 1.3 ** 4, rel=1e-12)
    assert high == pytest.approx(0.05 * 0.15 ** -2 * 1.6 ** 4, rel=1e-12)
    x, y, z = _points(20000)
    for name in fields.names:
        low, high = field_value_range(fields.compiled, fields.index(name))
        values = fields.values(name, x, y, z)
        assert low - 1e-12 <= values.min() and values.max() <= high + 1e-12, name
