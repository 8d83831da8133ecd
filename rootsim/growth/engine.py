"""The growth engine: a run is its plants, each grown by the compiled step with its own random stream.

Every plant draws from its own generator, ``SeedSequence(seed).spawn(n_plants)[k]``, and is grown from
sowing to the end of the run by :func:`rootsim.growth.step.grow_plant` (numba-compiled, cached on disk),
so a plant's roots depend on the spec, the seed and the plant's index alone: never on the other plants or
on how the work is split. The segment columns come back in chunks that are copied into the table's
columns and released one by one.

Memory is bounded by the run's segment budget ``run.max_segments`` (B): at most B segments, B roots and
B pending branch points are ever stored (:data:`MEMORY_BYTES_PER_BUDGET_SEGMENT` bytes per budget segment
at most, all stores full); a run that would pass a limit stops with a :class:`SegmentBudgetError` naming
the store.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from ..errors import SegmentBudgetError
from ..rootsystem import RootSystem
from ..spec import Spec
from .classes import ClassTable
from .soil import container_box, soil_arrays
from .step import (
    BYTES_PER_ITEM,
    R_CLASS,
    R_ORDER,
    R_RADIUS,
    STATUS_OK,
    STATUS_PENDING,
    STATUS_ROOTS,
    SEGMENT_FLOAT_FIELDS,
    STATUS_SEGMENTS,
    chunk_item,
    copy_parent_column,
    copy_root_columns,
    grow_plant,
)
from .tropisms import tangent_variance_table

__all__ = ["grow", "plant_positions", "MEMORY_BYTES_PER_BUDGET_SEGMENT", "RESULT_BYTES_PER_SEGMENT"]

_STORE_NAMES = {STATUS_SEGMENTS: "segments", STATUS_ROOTS: "roots", STATUS_PENDING: "pending branch points"}

#: Bytes per segment of the returned table (five int64 columns, root_class references, nine float64 columns).
RESULT_BYTES_PER_SEGMENT = 8 * 5 + 8 + 8 * 9
#: Most bytes a run's stores may hold per segment of its budget, all stores full: segment chunks (25 %
#: spare) plus roots with their tips and pending branch points (capacity doubling: old and new arrays while
#: copying) while growing; at the end the table is built column by column as the chunks are released
#: (at most the table plus the chunks plus one column).
MEMORY_BYTES_PER_BUDGET_SEGMENT = int(max(
    1.25 * BYTES_PER_ITEM["segments"] + 1.5 * (BYTES_PER_ITEM["roots"] + BYTES_PER_ITEM["pending branch points"]),
    RESULT_BYTES_PER_SEGMENT + 1.25 * BYTES_PER_ITEM["segments"],
))


def plant_positions(spec: Spec) -> np.ndarray:
    """Seed positions, shape (n_plants, 3), cm: rows along y spaced in x, centred on the origin."""
    st = spec.stand
    i, j = np.meshgrid(np.arange(st.rows), np.arange(st.plants_per_row), indexing="ij")
    x = (i.ravel() - (st.rows - 1) / 2) * st.row_spacing_cm
    y = (j.ravel() - (st.plants_per_row - 1) / 2) * st.plant_spacing_cm
    z = np.full(x.shape, -st.sowing_depth_cm)
    return np.stack([x, y, z], axis=1).astype(np.float64)


def _emergence_events(spec: Spec, classes: ClassTable):
    """Emergence events before the end of the run, sorted by (day, emergence entry, event number):
    day, class code, roots per event, depth (cm), azimuth jitter (rad); arrays of shape (n_events,)."""
    events = []
    for e_idx, em in enumerate(spec.emergence):
        base = spec.stand.sowing_depth_cm if em.depth_cm is None else em.depth_cm
        for k in range(em.event_count):
            t = em.first_day + k * em.interval_days
            if t < spec.run.duration_days:
                events.append((t, e_idx, k, classes.index[em.root_class], em.roots_per_event,
                               max(0.0, base + k * em.depth_step_cm), math.radians(em.azimuth_jitter_deg)))
    events.sort(key=lambda ev: ev[:3])
    columns = list(zip(*events)) if events else [()] * 7
    return (np.asarray(columns[0], dtype=np.float64), np.asarray(columns[3], dtype=np.int64),
            np.asarray(columns[4], dtype=np.int64), np.asarray(columns[5], dtype=np.float64),
            np.asarray(columns[6], dtype=np.float64))


def _soil_inputs(spec: Spec, classes: ClassTable, *, replace_fields=None):
    """Arguments of the compiled step for 3D soil fields and biopores, and whether the spec has biopores.

    The layer arrays (:func:`~rootsim.growth.soil.soil_arrays`) serve specs that only have ``[[soil.layers]]``
    and the default response, so their growth is unchanged. Otherwise resistance comes from the field
    ``penetration_resistance_mpa`` (``[soil.fields]``, or ``[[soil.layers]]`` compiled to a field with the same
    layer rule), read through :func:`rootsim.soil.fields.value_at` at each tip, with the response and per-class
    sensitivity of ``[soil]`` (:mod:`rootsim.soil.strength`); biopores come from
    :func:`rootsim.soil.build.biopores_from_spec` (seeded by ``run.seed``). Per class: the field index and
    strength of ``field_tropism`` and the field index, half-saturation value and maximum factor of
    ``proliferation`` (-1: none). ``replace_fields`` (name -> sources) replaces or adds fields before compiling
    (:func:`rootsim.soil.build.soil_fields_from_spec`); the compiled fields are returned last.
    """
    from ..soil.biopores import biopores_from_list
    from ..soil.build import biopores_from_spec, soil_fields_from_spec
    from ..soil.fields import compile_fields, field_value_range, shared_grid
    from ..soil.strength import EXPONENTIAL, LINEAR_TO_LIMIT

    soil = spec.soil
    responds = any(c.field_tropism is not None or c.proliferation is not None for c in classes.classes)
    use = bool(soil.fields) or soil.biopores is not None or soil.elongation_response != "exponential" \
        or soil.resistance_radius_exponent != 0 or responds
    fields = soil_fields_from_spec(spec, replace=replace_fields) if use else compile_fields({})
    pores = biopores_from_spec(spec) if soil.biopores is not None else None
    empty = np.zeros((0, 3))
    compiled_pores = (pores if pores is not None else biopores_from_list(empty, empty, np.zeros(0))).compiled
    resistance_field = fields.names.index("penetration_resistance_mpa") \
        if "penetration_resistance_mpa" in fields.names else -1
    if soil.elongation_response == "linear_to_limit":
        code, parameter = LINEAR_TO_LIMIT, soil.limiting_resistance_mpa
    else:
        code, parameter = EXPONENTIAL, soil.elongation_halving_resistance_mpa
    arguments = (bool(use), fields.compiled, int(resistance_field), int(code), float(parameter),
                 float(soil.resistance_reference_radius_cm), float(soil.resistance_radius_exponent), compiled_pores,
                 float(pores.resistance_mpa if pores is not None else 0.0),
                 float(soil.biopores.entry_probability if soil.biopores is not None else 1.0))
    n = len(classes.classes)
    tropism_field, tropism_strength = np.full(n, -1, np.int64), np.zeros(n)
    proliferation_field, proliferation_half, proliferation_max = np.full(n, -1, np.int64), np.ones(n), np.ones(n)
    for c, root_class in enumerate(classes.classes):
        if root_class.field_tropism is not None:
            tropism_field[c] = fields.index(root_class.field_tropism.field)
            tropism_strength[c] = root_class.field_tropism.strength_per_cm
        if root_class.proliferation is not None:
            proliferation_field[c] = fields.index(root_class.proliferation.field)
            proliferation_half[c] = root_class.proliferation.half_saturation_value
            proliferation_max[c] = root_class.proliferation.maximum_factor
    arguments += (tropism_field, tropism_strength, proliferation_field, proliferation_half, proliferation_max)
    # 3D deflection: strong regions of a [soil.fields] resistance (layers deflect by their tops), only where the
    # field can reach the threshold at all (else every look-ahead would be wasted); fields replaced for a coupled
    # season change during the run, so there it is always on
    field_deflection = bool(use) and "penetration_resistance_mpa" in soil.fields and resistance_field >= 0 \
        and (replace_fields is not None
             or field_value_range(fields.compiled, resistance_field)[1] >= soil.deflection_threshold_mpa)
    arguments += (field_deflection, float(soil.deflection_threshold_mpa))
    # fields that are grids of one layout are read interleaved (same numbers); not when a coupled season
    # rewrites the fields' values during the run
    needed = [resistance_field, *tropism_field.tolist(), *proliferation_field.tolist()] \
        if use and replace_fields is None else []
    shared = shared_grid(fields.compiled, needed)
    arguments = arguments[:2] + (shared,) + arguments[2:]
    return arguments, pores is not None, fields


def _absolute_if_file(source):
    """The spec's source as an absolute path when it names an existing file (so commands run later from another
    folder, such as ``render --soil-field``, find it), else as given (``<bench>``, ``<dict>``, ...)."""
    from pathlib import Path

    if source and Path(str(source)).is_file():
        return str(Path(str(source)).resolve())
    return source


def _metadata(spec: Spec, positions: np.ndarray, class_names: list[str]) -> dict:
    st = spec.stand
    c = spec.container
    if c.kind == "pot":
        area = math.pi * (c.diameter_cm / 2) ** 2
    elif c.kind == "rhizobox":
        area = c.width_cm * c.thickness_cm
    else:
        area = st.ground_area_cm2
    return {
        "spec_name": spec.name,
        "spec_file": _absolute_if_file(spec.source),
        "run": {"duration_days": spec.run.duration_days, "time_step_days": spec.run.time_step_days,
                "seed": spec.run.seed},
        "stand": {"n_plants": st.n_plants, "rows": st.rows, "plants_per_row": st.plants_per_row,
                  "row_spacing_cm": st.row_spacing_cm, "plant_spacing_cm": st.plant_spacing_cm,
                  "sowing_depth_cm": st.sowing_depth_cm, "ground_area_cm2": area,
                  "plant_positions_cm": positions.tolist()},
        "container": c.model_dump(exclude_none=True),
        "soil_layers": [layer.model_dump() for layer in spec.soil.layers],
        "root_classes": list(class_names),
    }


class _PlantResult:
    """One plant's segment chunks (one array per column and chunk) and root table."""

    def __init__(self, out):
        float_chunks, parent_chunks, root_chunks, chunk_counts, self.n_segments, root_float, root_int = out[:7]
        self.dead_at_end = out[7]
        self.death_day = _effective_death_day(root_float, root_int, self.dead_at_end)  # keep_dead_roots
        pore_chunks = out[11]
        n_fields = len(SEGMENT_FLOAT_FIELDS)
        self.chunk_counts = [int(m) for m in chunk_counts]
        n_chunks = len(self.chunk_counts)
        floats = [chunk_item(float_chunks, i) for i in range(n_fields * n_chunks)]
        self.float_chunks = {name: floats[f::n_fields] for f, name in enumerate(SEGMENT_FLOAT_FIELDS)}
        self.parent_chunks = [chunk_item(parent_chunks, i) for i in range(n_chunks)]
        self.root_chunks = [chunk_item(root_chunks, i) for i in range(n_chunks)]
        self.pore_chunks = [chunk_item(pore_chunks, i) for i in range(n_chunks)]
        del floats, float_chunks, parent_chunks, root_chunks, pore_chunks
        self.radius = np.ascontiguousarray(root_float[:, R_RADIUS])
        self.order = np.ascontiguousarray(root_int[:, R_ORDER])
        self.class_code = np.ascontiguousarray(root_int[:, R_CLASS], dtype=np.int16)
        self.n_roots = len(self.radius)


def _assemble(plants: list[_PlantResult], class_names: list[str], *, in_biopore: bool = False
              ) -> dict[str, np.ndarray]:
    """The segment table's columns from the plants' chunks.

    One column (or the columns derived from one chunk column) at a time, releasing each chunk array once
    copied, so the chunks and the table are never both held whole.
    """
    n = sum(p.n_segments for p in plants)
    columns = {}

    def each_chunk(chunks_of):
        """(plant index, plant, chunk array, rows, first row in the table) of every chunk, releasing each."""
        offset = 0
        for k, p in enumerate(plants):
            chunks = chunks_of(p)
            for c, m in enumerate(p.chunk_counts):
                array, chunks[c] = chunks[c], None
                yield k, p, array, m, offset
                offset += m

    # root_class as a Categorical straight from codes into the sorted class names (as a table read from Parquet
    # has them), written per segment with the other root columns: no Python string per segment, no factorizing
    # or re-coding afterwards; int8 codes (pandas' own code type below 128 categories, so it keeps the array)
    import pandas as pd

    sorted_names = sorted(class_names)
    rank = np.asarray([sorted_names.index(name) for name in class_names], dtype=np.int64)
    code_type = np.int8 if len(sorted_names) < 128 else np.int16
    root = np.empty(n, dtype=np.int64)
    plant_id = np.empty(n, dtype=np.int64)
    order = np.empty(n, dtype=np.int64)
    class_code = np.empty(n, dtype=code_type)
    radius = np.empty(n)
    root_offsets = np.cumsum([0] + [p.n_roots for p in plants])
    root_codes = [rank[p.class_code].astype(code_type) for p in plants]  # per plant and root
    for k, p, local_root, m, offset in each_chunk(lambda p: p.root_chunks):
        copy_root_columns(local_root, m, offset, root_offsets[k], k, p.order, root_codes[k], p.radius, root,
                          plant_id, order, class_code, radius)
        del local_root
    # codes are ranks of class codes the engine made, so in range: pandas need not check them again
    root_class = pd.Categorical.from_codes(class_code, categories=pd.Index(sorted_names, dtype=object),
                                           validate=False)
    del class_code
    parent = np.empty(n, dtype=np.int64)
    segment_offsets = np.cumsum([0] + [p.n_segments for p in plants])
    for k, p, local_parent, m, offset in each_chunk(lambda p: p.parent_chunks):
        copy_parent_column(local_parent, m, offset, segment_offsets[k], parent)
        del local_parent
    columns = {"segment_id": np.arange(n, dtype=np.int64), "parent_id": parent, "plant_id": plant_id,
               "root_id": root, "order": order, "root_class": root_class}
    floats = {}
    for name in SEGMENT_FLOAT_FIELDS:
        column = np.empty(n)
        for _, _, chunk, m, offset in each_chunk(lambda p: p.float_chunks[name]):
            column[offset: offset + m] = chunk[:m]
            del chunk
        floats[name] = column
    for name in ("x0", "y0", "z0", "x1", "y1", "z1"):
        columns[name] = floats[name]
    columns["radius_cm"] = radius
    columns["length_cm"] = floats["length_cm"]
    columns["birth_day"] = floats["birth_day"]
    if in_biopore:  # extra column: the segment grew while its tip followed a biopore
        column = np.empty(n, dtype=bool)
        for _, _, chunk, m, offset in each_chunk(lambda p: p.pore_chunks):
            column[offset: offset + m] = chunk[:m] != 0
            del chunk
        columns["in_biopore"] = column
    return columns


def _drop_dead(columns: dict, plants: list[_PlantResult]) -> dict:
    """Leave out the segments of roots past their lifespan at the end (with their laterals)."""
    dead_roots = np.concatenate([p.dead_at_end for p in plants]) if plants else np.zeros(0, bool)
    if not dead_roots.any():
        return columns
    alive = ~dead_roots[columns["root_id"]]
    new_id = np.cumsum(alive) - 1
    out = {name: values[alive] for name, values in columns.items()}
    parent = out["parent_id"]
    out["parent_id"] = np.where(parent >= 0, new_id[np.maximum(parent, 0)], -1)
    out["segment_id"] = np.arange(int(alive.sum()), dtype=np.int64)
    return out


def _effective_death_day(root_float: np.ndarray, root_int: np.ndarray, dead_at_end: np.ndarray) -> np.ndarray:
    """Day each root of a plant died (its own lifespan or an ancestor's, whichever came first), shape (n_roots,);
    +inf for roots alive at the end of the run. Parents come before their laterals, so a few passes of
    "the earlier of mine and my parent's" reach every order."""
    from .step import R_DEATH, R_PARENT

    death = np.array(root_float[:, R_DEATH], dtype=np.float64)
    parent = np.asarray(root_int[:, R_PARENT], dtype=np.int64)
    has_parent = parent >= 0
    while death.size:
        earlier = np.where(has_parent, np.minimum(death, death[np.maximum(parent, 0)]), death)
        if np.array_equal(earlier, death):
            break
        death = earlier
    return np.where(dead_at_end, death, np.inf)


def _with_death_day(columns: dict, plants: list[_PlantResult]) -> dict:
    """Keep every segment and add ``death_day`` (the day its root died; +inf while alive at the end)."""
    death = np.concatenate([p.death_day for p in plants]) if plants else np.zeros(0)
    return {**columns, "death_day": death[columns["root_id"]] if death.size else np.full(len(columns["root_id"]),
                                                                                         np.inf)}


def drop_dead_roots(system) -> RootSystem:
    """The root system without the segments of roots that died during the run (rows of finite ``death_day``),
    renumbered exactly as :func:`grow` does without ``keep_dead_roots``; the ``death_day`` column is left out.

    A system without a ``death_day`` column is returned as it is.
    """
    if "death_day" not in system.columns:
        return system
    alive = ~np.isfinite(np.asarray(system["death_day"]))
    new_id = np.cumsum(alive) - 1
    out = {name: system[name][alive] for name in system.columns if name != "death_day"}
    parent = out["parent_id"]
    out["parent_id"] = np.where(parent >= 0, new_id[np.maximum(parent, 0)], -1)
    out["segment_id"] = np.arange(int(alive.sum()), dtype=np.int64)
    return RootSystem(out, system.metadata, validate=False)


def grow(spec: Spec, *, seed: int | None = None, days: float | None = None, step_days: float | None = None,
         max_segments: int | None = None, progress: bool | None = None,
         keep_dead_roots: bool = False) -> RootSystem:
    """Grow the root systems of a spec's stand.

    Parameters
    ----------
    spec : Spec
        A validated parameter file (:func:`rootsim.load_spec`).
    seed, days, step_days, max_segments : optional
        Override ``run.seed``, ``run.duration_days``, ``run.time_step_days``, ``run.max_segments``.
    progress : bool, optional
        Show a progress bar on stderr (default: when stderr is a terminal).
    keep_dead_roots : bool
        Keep the segments of roots that died during the run (``lifespan_days``, with their laterals) and add a
        ``death_day`` column (the day the root died, +inf for roots alive at the end), so that models of the
        season (``rootsim.capture``) count each segment from its ``birth_day`` to its ``death_day``;
        :func:`drop_dead_roots` gives the usual table back. Default: dead roots are left out.

    Returns
    -------
    RootSystem
        Segments ordered by plant, then by time step; ``segment_id`` 0..n-1, parents before children.

    Raises
    ------
    SegmentBudgetError
        If the run would store more than ``run.max_segments`` segments, roots or pending branch points.
    SpecError
        If an override is invalid.
    """
    from ..progress import progress_bar

    spec = spec.with_overrides(seed=seed, duration_days=days, time_step_days=step_days, max_segments=max_segments)
    inputs = growth_inputs(spec)
    duration = spec.run.duration_days
    budget = spec.run.max_segments
    plants: list[_PlantResult] = []
    n_segments = 0
    n_roots = 0
    with progress_bar(total=duration * inputs.n_plants, desc="growing", enabled=progress) as bar:
        for k in range(inputs.n_plants):
            stop_out = np.zeros(3)
            out = next(plant_steps(inputs, k, segment_limit=budget - n_segments, root_limit=budget - n_roots,
                                   stop_out=stop_out), None)
            plant = plant_result(out, k, stop_out=stop_out, budget=budget, segments_before=n_segments,
                                 roots_before=n_roots)
            del out
            n_segments += plant.n_segments
            n_roots += plant.n_roots
            plants.append(plant)
            bar.update(duration)
    return root_system(inputs, plants, keep_dead_roots=keep_dead_roots)


class GrowthInputs(NamedTuple):
    """Everything the compiled step needs for a spec's plants (:func:`growth_inputs`)."""

    spec: Spec
    classes: ClassTable
    positions: np.ndarray
    seeds: list
    leading: tuple     # arguments of grow_plant before the seed position ... up to the store limits
    soil_3d: tuple     # arguments of grow_plant after the store limits (fields, biopores, responses)
    has_pores: bool
    fields: object     # the compiled SoilFields the step reads (shared arrays)

    @property
    def n_plants(self) -> int:
        return len(self.positions)


_NO_CHECKPOINTS = np.zeros(0)
_NO_CELLS = np.zeros(0)


def growth_inputs(spec: Spec, *, replace_fields=None) -> GrowthInputs:
    """Arguments of the compiled step for every plant of ``spec`` (``replace_fields``: see :func:`_soil_inputs`)."""
    classes = ClassTable(spec)
    positions = plant_positions(spec)
    events = _emergence_events(spec, classes)
    bottoms, factor, tops, sin_max = soil_arrays(spec.soil)
    box = container_box(spec.container)
    soil_3d, has_pores, fields = _soil_inputs(spec, classes, replace_fields=replace_fields)
    log_x, ratio = tangent_variance_table()
    duration = spec.run.duration_days
    dt = spec.run.time_step_days
    n_steps = max(1, math.ceil(duration / dt - 1e-9))
    tables = (classes.parameter_kind, classes.parameter_values, classes.law_negexp, classes.spiral,
              np.asarray(classes.spiral_divergence_rad, dtype=np.float64), classes.branch_cumulative_probability,
              classes.branch_class)
    # Plain Python scalars of fixed types: one compiled (and cached) version serves every spec.
    leading = (*events, *tables, bottoms, factor, tops, float(sin_max), box, log_x, ratio, float(duration),
               float(dt), int(n_steps), bool(classes.has_lifespan))
    seeds = np.random.SeedSequence(spec.run.seed).spawn(len(positions))
    return GrowthInputs(spec, classes, positions, seeds, leading, soil_3d, has_pores, fields)


def plant_steps(inputs: GrowthInputs, k: int, *, segment_limit: int, root_limit: int,
                stop_out: np.ndarray, checkpoint_days: np.ndarray = _NO_CHECKPOINTS, length_cell_cm: float = 1.0,
                length_per_cell: np.ndarray = _NO_CELLS):
    """The compiled generator growing plant ``k`` (:func:`rootsim.growth.step.grow_plant`): each ``next()``
    runs to the next of ``checkpoint_days`` or to the end (the final item, status ``STATUS_OK``); a plant that
    stops at a store's limit ends without a final item and writes status, count and day into ``stop_out``
    (float64, shape (3,))."""
    rng = np.random.default_rng(inputs.seeds[k])
    x, y, z = inputs.positions[k]
    return grow_plant(rng, float(x), float(y), float(z), *inputs.leading, int(segment_limit), int(root_limit),
                      int(inputs.spec.run.max_segments), *inputs.soil_3d, inputs.classes.development,
                      np.ascontiguousarray(checkpoint_days, dtype=np.float64), float(length_cell_cm), length_per_cell,
                      stop_out)


def plant_result(out, k: int, *, stop_out: np.ndarray, budget: int, segments_before: int = 0,
                 roots_before: int = 0) -> _PlantResult:
    """The final item of a plant's generator as a :class:`_PlantResult`; ``out`` None (the generator ended
    without one) raises a :class:`SegmentBudgetError` from ``stop_out`` (``*_before``: what earlier plants
    hold, for the message)."""
    if out is None:
        status, count, day = int(stop_out[0]), int(stop_out[1]), float(stop_out[2])
    else:
        status, count, day = out[8:11]
    if status != STATUS_OK:
        before = {STATUS_SEGMENTS: segments_before, STATUS_ROOTS: roots_before}.get(status, 0)
        raise SegmentBudgetError(budget, count + before, day, store=_STORE_NAMES[status], plant=k)
    return _PlantResult(out)


def root_system(inputs: GrowthInputs, plants: list, *, keep_dead_roots: bool = False) -> RootSystem:
    """The segment table of the plants' results (in plant order) as a :class:`RootSystem` (``keep_dead_roots``:
    see :func:`grow`)."""
    classes = inputs.classes
    columns = _assemble(plants, classes.names, in_biopore=inputs.has_pores)
    if keep_dead_roots:
        columns = _with_death_day(columns, plants)
    elif classes.has_lifespan:
        columns = _drop_dead(columns, plants)
    return RootSystem(columns, _metadata(inputs.spec, inputs.positions, classes.names), validate=False)
