"""The compiled growth of one plant: every time step of a run in one call (numba ``njit``).

:func:`grow_plant` (a compiled generator: one ``next()`` without checkpoints, or one per checkpoint day when a
driver pauses it, e.g. the coupled soil-water season) grows a plant from sowing to the end of the run with the plant's own
:class:`numpy.random.Generator`: emergence events, elongation under soil impedance, headings (exact
tropism maps and the exact Brownian step, :mod:`rootsim.growth.tropisms`), soil look-ups
(:mod:`rootsim.growth.soil`), branch points, lateral activation, per-root parameter draws
(:mod:`rootsim.growth.draws`) and the segment columns. A plant's roots depend on the spec, the seed and
the plant's index alone.

Stores and their limits (each a hard bound on memory; see :mod:`rootsim.growth.engine`):

* segments: column chunks (``SEGMENT_FLOAT_FIELDS`` and ``SEGMENT_INT_FIELDS``), at most
  ``segment_limit`` rows; a new chunk holds an eighth of the rows so far (at least 8 steps of every tip)
  and is closed when it may not hold the next step, so at most 25 % is spare;
* roots (one row per root, with its growing tip while it grows): at most ``root_limit``;
* pending branch points (waiting for the parent's apical zone to pass): at most ``pending_limit``.

Capacities double up to their limit; a run that would pass one stops with a status naming the store.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, types
from numba.typed import List

from .classes import PARAM_NAMES
from .draws import FIXED, draw_parameter, normal_draw, uniform_draw
from .plant_age import growth_time, time_at_growth_time
from ..soil.biopores import biopore_at
from ..soil.fields import shared_grid_at
from ..soil.strength import elongation_factor_kernel
from .soil import clamp, constrain, contains, deflect, deflect_by_field, elongation_factor, soil_at_tip
from .tropisms import (
    JIT,
    JIT_BORROW,
    JIT_INLINE,
    TANGENT_SERIES_LIMIT,
    brownian_turn,
    combined_sine_law_scalar,
    heading_from_angles_scalar,
    lateral_heading_scalar,
    shrink_factor,
    sine_law_turn,
    tangent_variance_scalar,
    tangent_variance_series,
    toward_by_factor,
    toward_direction_turn,
)

__all__ = ["grow_plant", "chunk_item", "copy_root_columns", "copy_parent_column", "SEGMENT_FLOAT_FIELDS",
           "SEGMENT_INT_FIELDS", "ROOT_FLOAT_FIELDS", "ROOT_INT_FIELDS",
           "STATUS_OK", "STATUS_SEGMENTS", "STATUS_ROOTS", "STATUS_PENDING", "BYTES_PER_ITEM", "STATUS_CHECKPOINT"]

SEGMENT_FLOAT_FIELDS = ("x0", "y0", "z0", "x1", "y1", "z1", "length_cm", "birth_day")
SEGMENT_INT_FIELDS = ("parent_local", "root_local")  # int64, int32
STATUS_OK, STATUS_SEGMENTS, STATUS_ROOTS, STATUS_PENDING = 0, 1, 2, 3
#: Status of a checkpoint yield of :func:`grow_plant` (growth paused; resume with ``next``).
STATUS_CHECKPOINT = 4

# Per-root parameter columns.
P_RADIUS = PARAM_NAMES.index("radius_cm")
P_INITIAL = PARAM_NAMES.index("initial_angle_from_vertical_deg")
P_INSERTION = PARAM_NAMES.index("insertion_angle_deg")
P_RATE = PARAM_NAMES.index("elongation_rate_cm_per_day")
P_MAXLEN = PARAM_NAMES.index("max_length_cm")
P_BASAL = PARAM_NAMES.index("basal_zone_cm")
P_APICAL = PARAM_NAMES.index("apical_zone_cm")
P_APICAL_DAYS = PARAM_NAMES.index("apical_zone_days")
P_INTERBRANCH = PARAM_NAMES.index("interbranch_distance_cm")
P_GRAVI = PARAM_NAMES.index("gravitropism_per_cm")
P_PLAGIO = PARAM_NAMES.index("plagiotropism_per_cm")
P_PREFERRED = PARAM_NAMES.index("preferred_angle_from_vertical_deg")
P_EXO = PARAM_NAMES.index("exotropism_per_cm")
P_TURNING = PARAM_NAMES.index("random_turning_deg_per_sqrt_cm")
P_LIFESPAN = PARAM_NAMES.index("lifespan_days")
N_PARAMS = len(PARAM_NAMES)

# Growing tips: float fields.
(T_X, T_Y, T_Z, T_HX, T_HY, T_HZ, T_H0X, T_H0Y, T_H0Z, T_LEN, T_MAXLEN, T_RATE, T_TROP, T_COSPHI, T_SINPHI,
 T_EXO, T_SIGMA, T_APICAL, T_NEXT, T_CARRY, T_HALF, T_FELT) = range(22)
TIP_NF = 22
# Growing tips: int fields (T_PORE: the biopore the tip follows, -1 none; T_DECLINED: the last pore it met and
# did not enter, or was born in).
T_ROOT, T_CLASS, T_LAST, T_COUNT, T_ORDER, T_DONE, T_PORE, T_DECLINED = range(8)
TIP_NI = 8
# Field look-ups of the step's tips (soil_for_tips): resistance (0 without a resistance field) and its elongation
# factor, proliferation factor, strength and unit direction of the turn toward the tropism field (strength 0:
# none), biopore met (-1: none or not looked up).
S_RESISTANCE, S_FACTOR, S_PROLIFERATION, S_PULL, S_GX, S_GY, S_GZ, S_PORE = range(8)
TIP_SOIL_NF = 8
#: Tips whose soil is looked up together (:func:`soil_for_tips`), ahead of the step's loop over them.
TIP_BLOCK = 256
# Roots: float fields (length now and one step ago, the last step's time and rate, ...).
# (R_PENDING: the root's pending branch points, kept in this row that the tip loop touches anyway, so that lateral
# activation skips a root with none without reading its queue)
R_LEN, R_PREV, R_DT, R_RATE, R_MAXLEN, R_DEATH, R_RADIUS, R_PENDING = range(8)
ROOT_NF = 8
ROOT_FLOAT_FIELDS = ("length_cm", "length_previous_cm", "last_step_days", "last_rate_cm_per_day", "max_length_cm",
                     "death_day", "radius_cm", "pending_branch_points")
# Roots: int fields.
R_CLASS, R_ORDER, R_PARENT, R_GROWING, R_DEAD, R_QUEUE_HEAD, R_QUEUE_TAIL = range(7)
ROOT_NI = 7
ROOT_INT_FIELDS = ("class_code", "order", "parent_root", "growing", "dead", "first_pending", "last_pending")
# Pending branch points: a pool of rows, each root's in a queue (thresholds increase along it), freed rows
# in a free list.
Q_X, Q_Y, Q_Z, Q_DX, Q_DY, Q_DZ, Q_THRESHOLD, Q_AZIMUTH_U = range(8)
PEND_NF = 8
Q_SEGMENT, Q_CLASS, Q_COUNT, Q_NEXT = range(4)
PEND_NI = 4

#: Bytes each store uses per item at full capacity (8-byte fields), for the memory bound.
BYTES_PER_ITEM = {
    "segments": 8 * len(SEGMENT_FLOAT_FIELDS) + 8 + 4 + 1,
    "roots": 8 * (ROOT_NF + ROOT_NI + TIP_NF + TIP_NI),
    "pending branch points": 8 * (PEND_NF + PEND_NI),
}

_FINISH_TOLERANCE = 1e-4  # a root within this fraction of its maximum length has finished growing
_MIN_STEP_CM = 1e-9
_FIRST_CHUNK = 4096


_FLOAT_COLUMN = types.float64[::1]
_PARENT_COLUMN = types.int64[::1]
_ROOT_COLUMN = types.int32[::1]
_PORE_COLUMN = types.uint8[::1]


@njit(**JIT)
def _new_chunk(size, float_chunks, parent_chunks, root_chunks, pore_chunks):
    """A new chunk of ``size`` segment rows: one array per column, each also appended to its list.

    Returns the columns ``SEGMENT_FLOAT_FIELDS`` (float64), then parent (int64), root (int32) and biopore flag
    (uint8, zeros).
    """
    x0, y0, z0 = np.empty(size), np.empty(size), np.empty(size)
    x1, y1, z1 = np.empty(size), np.empty(size), np.empty(size)
    length, birth = np.empty(size), np.empty(size)
    parent = np.empty(size, dtype=np.int64)
    root = np.empty(size, dtype=np.int32)
    pore = np.zeros(size, dtype=np.uint8)
    for column in (x0, y0, z0, x1, y1, z1, length, birth):
        float_chunks.append(column)
    parent_chunks.append(parent)
    root_chunks.append(root)
    pore_chunks.append(pore)
    return x0, y0, z0, x1, y1, z1, length, birth, parent, root, pore


@njit(**JIT)
def _stopped(stop_out, float_chunks, parent_chunks, root_chunks, chunk_counts, n_seg, rootf, rooti, n_roots, status,
             count, day, pore_chunks):
    """The return value of a plant whose growth stopped at a store's limit; status, count and day are also
    written into ``stop_out`` (a generator's return value does not reach its caller)."""
    stop_out[0] = status
    stop_out[1] = count
    stop_out[2] = day
    return (float_chunks, parent_chunks, root_chunks, np.zeros(0, dtype=np.int64), n_seg, rootf[:n_roots].copy(),
            rooti[:n_roots].copy(), np.zeros(n_roots, dtype=np.bool_), status, count, day, pore_chunks)


@njit(**JIT)
def _counts_so_far(chunk_counts, chunk_used):
    """Rows used in each chunk so far (the current chunk's ``chunk_used`` last), int64, shape (n_chunks,)."""
    counts = np.empty(len(chunk_counts) + 1, dtype=np.int64)
    for c in range(len(chunk_counts)):
        counts[c] = chunk_counts[c]
    counts[len(chunk_counts)] = chunk_used
    return counts


@njit(**JIT)
def chunk_item(chunks, index):
    """Chunk ``index`` of a list returned by :func:`grow_plant` (a compiled, cached accessor: reading numba's
    typed lists from Python would compile helpers anew in every process)."""
    return chunks[index]


@njit(**JIT)
def _resized(arr, n, capacity):
    """A copy of ``arr`` with ``capacity`` rows holding its first ``n`` rows."""
    new = np.empty((capacity, arr.shape[1]), dtype=arr.dtype)
    new[:n] = arr[:n]
    return new


@njit(**JIT)
def _room(arr, n, limit):
    """``arr`` (rows = items) with room for item ``n`` (< limit): capacity doubled, at most ``limit``."""
    if n < arr.shape[0]:
        return arr
    new = np.empty((min(max(2 * arr.shape[0], 16), limit), arr.shape[1]), dtype=arr.dtype)
    new[:n] = arr[:n]
    return new


@njit(**JIT_BORROW)
def _draw_root_parameters(bits, kind, values, cls, out):
    """Per-root values of class ``cls`` into ``out`` (N_PARAMS,); one uniform per non-fixed parameter."""
    for p in range(N_PARAMS):
        if kind[cls, p] == FIXED:
            out[p] = values[cls, p, 0]
        else:
            out[p] = draw_parameter(kind, values, cls, p, uniform_draw(bits))


@njit(**JIT_BORROW)
def _set_root(rootf, rooti, tipf, tipi, r, j, cls, order, parent_root, parent_segment, x, y, z, hx, hy, hz,
              params, birth, carry, felt_reference_radius_cm, felt_radius_exponent, apical_by_time):
    """Write root ``r`` and its growing tip (row ``j`` of the tip store); ``apical_by_time``: the class's
    apical zone is ``apical_zone_days`` (a time) rather than ``apical_zone_cm``."""
    rootf[r, R_LEN] = 0.0
    rootf[r, R_PREV] = 0.0
    rootf[r, R_DT] = 0.0
    rootf[r, R_RATE] = 0.0
    rootf[r, R_MAXLEN] = params[P_MAXLEN]
    rootf[r, R_DEATH] = birth + params[P_LIFESPAN]
    rootf[r, R_RADIUS] = params[P_RADIUS]
    rootf[r, R_PENDING] = 0.0
    rooti[r, R_CLASS] = cls
    rooti[r, R_ORDER] = order
    rooti[r, R_PARENT] = parent_root
    rooti[r, R_GROWING] = 1
    rooti[r, R_DEAD] = 0
    rooti[r, R_QUEUE_HEAD] = -1
    rooti[r, R_QUEUE_TAIL] = -1
    tipf[j, T_X] = x
    tipf[j, T_Y] = y
    tipf[j, T_Z] = z
    tipf[j, T_HX] = hx
    tipf[j, T_HY] = hy
    tipf[j, T_HZ] = hz
    tipf[j, T_H0X] = hx
    tipf[j, T_H0Y] = hy
    tipf[j, T_H0Z] = hz
    tipf[j, T_LEN] = 0.0
    tipf[j, T_MAXLEN] = params[P_MAXLEN]
    tipf[j, T_RATE] = params[P_RATE]
    if params[P_GRAVI] == 0 and params[P_PLAGIO] == 0:
        strength, cos_phi, sin_phi = 0.0, 1.0, 0.0
    else:
        strength, cos_phi, sin_phi = combined_sine_law_scalar(params[P_GRAVI], params[P_PLAGIO],
                                                              math.radians(params[P_PREFERRED]))
    tipf[j, T_TROP] = strength
    tipf[j, T_COSPHI] = cos_phi
    tipf[j, T_SINPHI] = sin_phi
    tipf[j, T_EXO] = params[P_EXO]
    tipf[j, T_SIGMA] = math.radians(params[P_TURNING])
    tipf[j, T_APICAL] = params[P_APICAL_DAYS] if apical_by_time else params[P_APICAL]
    tipf[j, T_NEXT] = params[P_BASAL]
    tipf[j, T_CARRY] = carry
    tipf[j, T_HALF] = 0.0
    # resistance felt by this root per unit of soil resistance (thicker roots feel less; rootsim.soil.strength)
    if felt_radius_exponent == 0:
        tipf[j, T_FELT] = 1.0
    else:
        tipf[j, T_FELT] = (felt_reference_radius_cm / params[P_RADIUS]) ** felt_radius_exponent
    tipi[j, T_ROOT] = r
    tipi[j, T_CLASS] = cls
    tipi[j, T_LAST] = parent_segment
    tipi[j, T_COUNT] = 0
    tipi[j, T_ORDER] = order
    tipi[j, T_DONE] = 0
    tipi[j, T_PORE] = -1
    tipi[j, T_DECLINED] = -1


@njit(**JIT_BORROW)
def soil_for_tips(fields, shared, resistance_field, response_code, response_parameter_mpa, proliferation_field,
                  proliferation_half, proliferation_max, tropism_field, tropism_strength, pores, n_pores,
                  pores_z_bottom, pores_z_top, tipf, tipi, start, stop, out):
    """Every field and biopore look-up of the growing tips ``start <= j < stop``, written to ``out[j - start]``
    (``S_*`` columns).

    A tight loop of its own, run for a block of tips just before the step's loop reaches them: the look-ups of
    different tips are independent, so the processor overlaps them (inside the long loop each waits for the
    previous tip's work), and the block's rows are still in cache when the loop reads them. The look-ups
    are made at the tips' positions at the step's start, as the loop would make them; a biopore is looked up only
    for a tip outside every pore within the pores' depth range (elsewhere ``S_PORE`` is -1). Fields of one shared
    grid (``shared``, :func:`rootsim.soil.fields.shared_grid`) are read there, with the same numbers.
    """
    use_shared = shared.values.size > 0
    for j in range(start, stop):
        if tipi[j, T_DONE] != 0:
            continue
        row = j - start
        cls = tipi[j, T_CLASS]
        x, y, z = tipf[j, T_X], tipf[j, T_Y], tipf[j, T_Z]
        if use_shared:
            resistance, level, unused, gx, gy, gz = shared_grid_at(
                shared, resistance_field, proliferation_field[cls], tropism_field[cls], x, y, z)
        else:
            resistance, level, gx, gy, gz = soil_at_tip(fields, resistance_field, proliferation_field[cls],
                                                        tropism_field[cls], x, y, z)
        if resistance_field < 0:
            resistance = 0.0
        out[row, S_RESISTANCE] = resistance
        out[row, S_FACTOR] = elongation_factor_kernel(resistance, response_code, response_parameter_mpa,
                                                    tipf[j, T_FELT])
        proliferation = 1.0
        if proliferation_field[cls] >= 0:
            level = max(level, 0.0)
            proliferation = 1.0 + (proliferation_max[cls] - 1.0) * level / (level + proliferation_half[cls])
        out[row, S_PROLIFERATION] = proliferation
        pull = 0.0
        if tropism_field[cls] >= 0:
            gnorm = math.sqrt(gx * gx + gy * gy + gz * gz)
            if gnorm > 0 and math.isfinite(gnorm):
                gx, gy, gz = gx / gnorm, gy / gnorm, gz / gnorm
                pull = tropism_strength[cls]
        out[row, S_PULL] = pull
        out[row, S_GX] = gx
        out[row, S_GY] = gy
        out[row, S_GZ] = gz
        met = -1
        if n_pores > 0 and tipi[j, T_PORE] < 0 and pores_z_bottom <= z <= pores_z_top:
            met = biopore_at(pores, x, y, z)
        out[row, S_PORE] = met


@njit(**JIT_INLINE)
def _tropic_half_turn(hx, hy, hz, half_arc, strength, cos_phi, sin_phi, exotropism, h0x, h0y, h0z):
    """Half of a step's tropic turn: the combined vertical sine law, then exotropism toward h0."""
    if strength > 0:
        hx, hy, hz = sine_law_turn(hx, hy, hz, half_arc, strength, cos_phi, sin_phi)
    if exotropism > 0:
        hx, hy, hz = toward_direction_turn(hx, hy, hz, h0x, h0y, h0z, half_arc, exotropism)
    return hx, hy, hz


@njit(**JIT_BORROW)
def _time_since_threshold(rootf, law_negexp_parent, pr, threshold):
    """Time (days; growth time when the parent's class has a rate multiplier by plant age) since parent root
    ``pr`` passed length ``threshold`` during its last step: the inverse of its elongation law (exact for both
    laws when nothing slowed the step down), else by proportion."""
    prev = rootf[pr, R_PREV]
    new = rootf[pr, R_LEN]
    grew = new - prev
    if not grew > 0:
        return 0.0
    last_dt = rootf[pr, R_DT]
    rate = rootf[pr, R_RATE]
    max_len = rootf[pr, R_MAXLEN]
    if law_negexp_parent:
        ratio = (max_len - threshold) / (max_len - new)
        after = max_len / rate * math.log(ratio) if ratio > 0 else math.nan
    else:
        after = (new - threshold) / rate
    if not (math.isfinite(after) and rate > 0):
        after = min(max((new - threshold) / grew, 0.0), 1.0) * last_dt
    return min(max(after, 0.0), last_dt)


@njit(**JIT_INLINE)
def _passing_time(dev, cls, law_negexp_class, length, position, max_len, rate, growth_dt, start):
    """The time at which a tip that was ``length`` long at time ``start`` and grew over ``growth_dt`` of growth
    time (:mod:`rootsim.growth.plant_age`) at ``rate`` passed ``position``: the inverse of its elongation law,
    by proportion if that fails."""
    if law_negexp_class:
        ratio = (max_len - length) / (max_len - position) if max_len > position else math.inf
        after = max_len / rate * math.log(ratio) if rate > 0 else math.nan
    else:
        after = (position - length) / rate if rate > 0 else math.nan
    if not math.isfinite(after):
        after = growth_dt
    after = min(max(after, 0.0), growth_dt)
    if dev.age_rows[cls] == 0:
        return start + after
    return time_at_growth_time(dev, cls, growth_time(dev, cls, start) + after)


@njit(**JIT_BORROW)
def _add_length_by_depth(length_per_cell, cell_cm, depth0, depth1, length):
    """Add a straight segment's ``length`` to the cells of thickness ``cell_cm`` (cell k: depth
    ``[k, k + 1) * cell_cm``) in proportion to the part of its depth span in each (exact for a straight
    segment); a level segment goes to the cell holding it. Length below the last cell is not counted."""
    n = length_per_cell.size
    low = min(depth0, depth1)
    high = max(depth0, depth1)
    span = high - low
    if not span > 0:
        cell = int(math.floor(low / cell_cm))
        if 0 <= cell < n:
            length_per_cell[cell] += length
        return
    first = max(int(math.floor(low / cell_cm)), 0)
    last = min(int(math.floor(high / cell_cm)), n - 1)
    for cell in range(first, last + 1):
        part = min(high, (cell + 1) * cell_cm) - max(low, cell * cell_cm)
        if part > 0:
            length_per_cell[cell] += length * part / span


@njit(**JIT)
def grow_plant(rng, seed_x, seed_y, seed_z, event_day, event_class, event_count, event_depth, event_jitter_rad,
               kind, values, law_negexp, spiral, spiral_divergence_rad, branch_cumulative, branch_class,
               soil_bottoms, soil_factor, soil_tops, soil_sin_max, box, log_x_table, ratio_table,
               duration, step_days, n_steps, has_lifespan, segment_limit, root_limit, pending_limit,
               use_fields, fields, shared, resistance_field, response_code, response_parameter_mpa,
               felt_reference_radius_cm, felt_radius_exponent, pores, pore_resistance_mpa, pore_entry_probability,
               tropism_field, tropism_strength, proliferation_field, proliferation_half, proliferation_max,
               field_deflection, deflection_threshold_mpa, dev, checkpoint_days, length_cell_cm, length_per_cell,
               stop_out):
    """Grow one plant over the whole run, pausing at checkpoints (a numba generator).

    A generator: each ``next()`` runs until the next checkpoint or the end. Arrays passed in are shared with
    the caller, so values changed in place between two ``next()`` calls (e.g. the ``data`` of ``fields``
    updated by a soil-water model) are what the following steps read. ``grow`` passes no checkpoints and
    takes the single (final) item.

    Parameters
    ----------
    rng : numpy.random.Generator
        The plant's own stream (advanced in place).
    seed_x, seed_y, seed_z : float
        Seed position, cm.
    event_day, event_class, event_count, event_depth, event_jitter_rad : ndarray, shape (n_events,)
        Emergence events sorted by day: day, root class, roots per event, depth (cm), azimuth jitter.
    kind, values : ndarray
        Parameter tables (:func:`rootsim.growth.draws.parameter_tables`).
    law_negexp, spiral, spiral_divergence_rad : ndarray, shape (n_classes,)
    branch_cumulative, branch_class : ndarray, shape (n_classes, k)
        Cumulative branch probabilities (2 beyond the last) and the child class of each (-1 none).
    soil_bottoms, soil_factor, soil_tops, soil_sin_max, box
        Soil and container (:func:`rootsim.growth.soil.soil_arrays`, :func:`~rootsim.growth.soil.container_box`).
    log_x_table, ratio_table : ndarray
        The Brownian step's variance table (:func:`rootsim.growth.tropisms.tangent_variance_table`).
    duration, step_days : float
    n_steps : int
    has_lifespan : bool
    segment_limit, root_limit, pending_limit : int
        Most segments, roots and pending branch points this plant may hold.
    use_fields : bool
        Impedance from the 3D field ``resistance_field`` of ``fields`` (and biopores) instead of the layer
        arrays ``soil_bottoms``/``soil_factor``.
    fields : rootsim.soil.fields.CompiledFields
    shared : rootsim.soil.fields.SharedGrid
        The fields the step reads, interleaved when they are plain grids of one layout (empty otherwise; see
        :func:`rootsim.soil.fields.shared_grid`): the same numbers, one cell location per tip.
    resistance_field : int
        Index of ``penetration_resistance_mpa`` in ``fields`` (-1: no resistance).
    response_code, response_parameter_mpa : int, float
        Elongation response (:func:`rootsim.soil.strength.elongation_factor_kernel`).
    felt_reference_radius_cm, felt_radius_exponent : float
        Per-root sensitivity ``(reference / radius) ** exponent`` (exponent 0: none).
    pores : rootsim.soil.biopores.CompiledBiopores
    pore_resistance_mpa, pore_entry_probability : float
        Resistance inside a biopore; probability that a tip meeting a pore enters it (once per tip and pore).
    tropism_field, tropism_strength : ndarray, shape (n_classes,)
        Per class: the field whose gradient the heading turns toward (-1: none) and the sine law's strength per
        cm (exact for the gradient's direction at the step's start, like exotropism).
    proliferation_field, proliferation_half, proliferation_max : ndarray, shape (n_classes,)
        Per class: the field (-1: none) whose value v at the tip multiplies elongation and branch-point
        density by ``1 + (max - 1) * v / (v + half)``.
    field_deflection : bool
        Deflect tips by strong regions of the 3D resistance field (:func:`rootsim.growth.soil.deflect_by_field`;
        ``[[soil.layers]]`` deflect through ``soil_tops`` instead).
    deflection_threshold_mpa : float
        Resistance at and above which soil deflects a tip meeting it at a shallow angle.
    dev : rootsim.growth.plant_age.DevelopmentTables
        Per class: apical zone as a time, and the elongation-rate multiplier by plant age (the laws are
        integrated exactly over it, in growth time).
    checkpoint_days : ndarray, shape (n_checkpoints,)
        Increasing times (days): before the first step that starts at or after a checkpoint (steps of
        ``step_days`` from day 0), the generator yields a checkpoint item (status ``STATUS_CHECKPOINT``,
        ``status_count`` the checkpoint's number, ``status_day`` the time reached, the rows used so far in
        each chunk as ``chunk_counts``, empty root tables);
        checkpoints after the start of the last step are not yielded (the final item comes instead).
    length_cell_cm : float
        Thickness of the cells of ``length_per_cell`` (depth ``[k, k + 1) * length_cell_cm``).
    length_per_cell : ndarray, shape (n_cells,)
        Accumulator (size 0: none): every new segment adds its length to the cells its depth span crosses,
        split exactly (:func:`_add_length_by_depth`); length below the last cell is not counted.
    stop_out : ndarray of float64, shape (3,)
        Written when growth stops at a store's limit: status, the count reached, the day. The generator then
        ends without a final item (``next`` raises ``StopIteration``).

    Yields
    ------
    float_chunks, parent_chunks, root_chunks : list of ndarray
        Segment columns in chunks: ``SEGMENT_FLOAT_FIELDS`` of chunk 0, then of chunk 1, ...; parents
        (segment numbers within the plant, -1 none) and roots (root numbers within the plant) per chunk.
    chunk_counts : ndarray of int64, shape (n_chunks,)
        Rows used in each chunk (read the chunks with :func:`chunk_item`).
    n_segments : int
    root_float, root_int : ndarray, shapes (n_roots, ROOT_NF), (n_roots, ROOT_NI)
    dead_at_end : ndarray of bool, shape (n_roots,)
        Roots past their lifespan at the end of the run, or descended from such a root.
    status, status_count : int
        STATUS_OK, or the store that would pass its limit and the count it had reached.
    status_day : float
        Day the growth stopped at.
    pore_chunks : list of ndarray of uint8
        Per chunk: 1 where the segment grew while its tip followed a biopore.
    """
    bits = rng.bit_generator  # draws go to the bit generator (no reference counting per draw)
    # Segment columns in chunks, one array per column and chunk (so each can be released once copied).
    float_chunks = List.empty_list(_FLOAT_COLUMN)  # x0 y0 z0 x1 y1 z1 length birth of chunk 0, then of chunk 1, ...
    parent_chunks = List.empty_list(_PARENT_COLUMN)
    root_chunks = List.empty_list(_ROOT_COLUMN)
    pore_chunks = List.empty_list(_PORE_COLUMN)
    chunk_counts = List()  # rows used in each chunk but the current one
    chunk_counts.append(0)
    chunk_counts.pop()
    c_x0, c_y0, c_z0, c_x1, c_y1, c_z1, c_len, c_birth, c_parent, c_root, c_pore = _new_chunk(
        _FIRST_CHUNK, float_chunks, parent_chunks, root_chunks, pore_chunks)
    chunk_used = 0
    n_seg = 0
    n_pores = pores.radius_cm.size
    pores_z_top = -math.inf  # the depth range holding every pore: tips outside it skip the look-up
    pores_z_bottom = math.inf
    for p in range(n_pores):
        pores_z_top = max(pores_z_top, pores.top[p, 2] + pores.radius_cm[p])
        pores_z_bottom = min(pores_z_bottom, pores.top[p, 2] + pores.axis[p, 2] * pores.length_cm[p]
                             - pores.radius_cm[p])

    tipf = np.empty((16, TIP_NF))
    tipi = np.empty((16, TIP_NI), dtype=np.int64)
    rootf = np.empty((16, ROOT_NF))
    rooti = np.empty((16, ROOT_NI), dtype=np.int64)
    pendf = np.empty((16, PEND_NF))
    pendi = np.empty((16, PEND_NI), dtype=np.int64)
    n_tips = 0
    n_done = 0  # finished tips still in the table
    n_roots = 0
    n_pend = 0  # live pending branch points
    n_pend_rows = 0  # rows of the pool ever used
    free_row = -1  # first row of the free list
    stepped = np.empty(16, dtype=np.int64)  # roots whose tips stepped this step, in tip order
    tip_soil = np.empty((TIP_BLOCK if use_fields else 0, TIP_SOIL_NF))  # field look-ups of a block of tips
    params = np.empty(N_PARAMS)
    fallback = np.empty(3)
    n_events = event_day.size
    n_branch_options = branch_class.shape[1]
    min_interbranch = np.empty(kind.shape[0])  # shortest interbranch distance of each class (bounds the
    for c in range(kind.shape[0]):  # branch points one step can pass)
        row = 0 if kind[c, P_INTERBRANCH] == FIXED else 4
        min_interbranch[c] = values[c, P_INTERBRANCH, row] / proliferation_max[c]
    ev = 0
    checkpoint = 0
    counting_length = length_per_cell.size > 0
    status = STATUS_OK
    status_count = 0
    status_day = 0.0
    k = 0
    while True:
        if k < n_steps:
            t0 = k * step_days
            t1 = min((k + 1) * step_days, duration)
        else:
            # Laterals that emerged during the last step still have the rest of that step to grow.
            if k >= n_steps + 64:
                break
            carrying = False
            for j in range(n_tips):
                if tipf[j, T_CARRY] > 0:
                    carrying = True
                    break
            if not carrying:
                break
            t0 = duration
            t1 = duration
        while k < n_steps and checkpoint < checkpoint_days.size and checkpoint_days[checkpoint] <= t0 + 1e-9:
            yield (float_chunks, parent_chunks, root_chunks, _counts_so_far(chunk_counts, chunk_used), n_seg,
                   rootf[:0].copy(),
                   rooti[:0].copy(), np.zeros(0, dtype=np.bool_), STATUS_CHECKPOINT, checkpoint, t0, pore_chunks)
            checkpoint += 1
        k += 1
        if 4 * n_done > n_tips:  # drop finished tips once they are a quarter of the table (order kept)
            kept = 0
            for j in range(n_tips):
                if tipi[j, T_DONE] == 0:
                    if kept != j:
                        for field in range(TIP_NF):
                            tipf[kept, field] = tipf[j, field]
                        for field in range(TIP_NI):
                            tipi[kept, field] = tipi[j, field]
                    kept += 1
            n_tips = kept
            n_done = 0

        # -- emergence -------------------------------------------------------------------------------
        while ev < n_events and event_day[ev] < t1:
            cls = event_class[ev]
            count = event_count[ev]
            whorl_turn = 2 * math.pi * uniform_draw(bits)
            for slot in range(count):
                if n_roots >= root_limit:
                    return _stopped(stop_out, float_chunks, parent_chunks, root_chunks, chunk_counts, n_seg,
                                    rootf, rooti, n_roots, STATUS_ROOTS, n_roots, t0, pore_chunks)
                jitter = event_jitter_rad[ev] * (2 * uniform_draw(bits) - 1) if event_jitter_rad[ev] > 0 else 0.0
                azimuth = whorl_turn + 2 * math.pi * slot / count + jitter
                _draw_root_parameters(bits, kind, values, cls, params)
                hx, hy, hz = heading_from_angles_scalar(math.radians(params[P_INITIAL]), azimuth)
                x, y, z = clamp(box, seed_x, seed_y, -event_depth[ev])
                rootf = _room(rootf, n_roots, root_limit)
                rooti = _room(rooti, n_roots, root_limit)
                tipf = _room(tipf, n_tips, root_limit)
                tipi = _room(tipi, n_tips, root_limit)
                _set_root(rootf, rooti, tipf, tipi, n_roots, n_tips, cls, 0, -1, -1, x, y, z, hx, hy, hz, params,
                          event_day[ev], -(event_day[ev] - t0), felt_reference_radius_cm, felt_radius_exponent,
                          dev.apical_by_time[cls])
                n_roots += 1
                n_tips += 1
            ev += 1
        if n_tips == 0 and n_pend == 0:
            continue

        # -- roots past their lifespan (with their laterals) -------------------------------------------
        if has_lifespan:
            for r in range(n_roots):
                if rooti[r, R_DEAD] == 0:
                    parent = rooti[r, R_PARENT]
                    if rootf[r, R_DEATH] <= t1 + 1e-12 or (parent >= 0 and rooti[parent, R_DEAD] != 0):
                        rooti[r, R_DEAD] = 1

        # -- every growing tip ---------------------------------------------------------------------------
        # Arrays that may be replaced by larger ones are replaced here, outside the loop over tips (an array
        # variable reassigned inside a compiled loop costs reference counting on every pass).
        if stepped.size < n_tips:
            stepped = np.empty(max(2 * stepped.size, n_tips), dtype=np.int64)
        if chunk_used + n_tips > c_len.size:  # at most one segment per tip and step
            chunk_counts.append(chunk_used)
            size = max(_FIRST_CHUNK, n_seg // 8, 8 * n_tips)  # at most 1/8 + 1/8 of the rows spare
            c_x0, c_y0, c_z0, c_x1, c_y1, c_z1, c_len, c_birth, c_parent, c_root, c_pore = _new_chunk(
                size, float_chunks, parent_chunks, root_chunks, pore_chunks)
            chunk_used = 0
        n_stepped = n_tips
        j = 0
        need_pending = 0
        block_start = 0  # tips block_start <= j < block_end have their soil looked up in tip_soil
        field_first = (k & 1) == 1  # the turn toward a field's gradient before the Brownian turn (odd steps)
        block_end = 0
        while j < n_tips:
            if need_pending > 0:
                capacity = min(pending_limit, max(2 * pendf.shape[0], n_pend + need_pending))
                pendf = _resized(pendf, n_pend_rows, capacity)
                pendi = _resized(pendi, n_pend_rows, capacity)
                need_pending = 0
            while j < n_tips:
                if tipi[j, T_DONE] != 0:  # finished in an earlier step, not yet dropped
                    stepped[j] = -1
                    j += 1
                    continue
                if use_fields and j >= block_end:  # every field and biopore look-up of the next block of tips
                    block_start = j
                    block_end = min(j + TIP_BLOCK, n_tips)
                    soil_for_tips(fields, shared, resistance_field, response_code, response_parameter_mpa,
                                  proliferation_field, proliferation_half, proliferation_max, tropism_field,
                                  tropism_strength, pores, n_pores, pores_z_bottom, pores_z_top, tipf, tipi,
                                  block_start, block_end, tip_soil)
                row = j - block_start
                cls = tipi[j, T_CLASS]
                sx, sy, sz = tipf[j, T_X], tipf[j, T_Y], tipf[j, T_Z]
                dt = (t1 - t0) + tipf[j, T_CARRY]
                growth_dt = dt  # elapsed growth time: dt scaled by the class's multiplier by plant age
                if dev.age_rows[cls] > 0:
                    growth_dt = growth_time(dev, cls, t1) - growth_time(dev, cls, t1 - dt)
                length = tipf[j, T_LEN]
                max_len = tipf[j, T_MAXLEN]
                pore = -1
                proliferation = 1.0
                field_pull = 0.0  # strength of the turn toward the class's tropism field (0: none)
                gx, gy, gz = 0.0, 0.0, 0.0  # the field's gradient direction at the tip
                if use_fields:  # looked up before the loop (soil_for_tips)
                    if n_pores > 0:
                        pore = tipi[j, T_PORE]
                        if pore < 0:
                            met = int(tip_soil[row, S_PORE])
                            if met >= 0 and met != tipi[j, T_DECLINED]:
                                if pore_entry_probability >= 1.0 or uniform_draw(bits) < pore_entry_probability:
                                    pore = met
                                    tipi[j, T_PORE] = met
                                else:
                                    tipi[j, T_DECLINED] = met
                    if pore >= 0:
                        resistance = pore_resistance_mpa
                        rate = tipf[j, T_RATE] * elongation_factor_kernel(resistance, response_code,
                                                                          response_parameter_mpa, tipf[j, T_FELT])
                    else:
                        resistance = tip_soil[row, S_RESISTANCE]
                        rate = tipf[j, T_RATE] * tip_soil[row, S_FACTOR]
                        field_pull = tip_soil[row, S_PULL]
                        gx, gy, gz = tip_soil[row, S_GX], tip_soil[row, S_GY], tip_soil[row, S_GZ]
                    proliferation = tip_soil[row, S_PROLIFERATION]
                    rate *= proliferation
                else:
                    rate = tipf[j, T_RATE] * elongation_factor(soil_bottoms, soil_factor, sx, sy, sz)
                if law_negexp[cls]:
                    grown = max_len - (max_len - length) * math.exp(-rate * growth_dt / max_len)
                else:
                    grown = min(length + rate * growth_dt, max_len)
                ds = max(grown - length, 0.0)
                # Room for every branch point this step can pass, before any draw for this tip.
                reach = length + ds * (1 + 1e-9) + 1e-9
                if branch_class[cls, 0] >= 0 and tipf[j, T_NEXT] <= reach and pendf.shape[0] < pending_limit:
                    bound = int((reach - tipf[j, T_NEXT]) / min_interbranch[cls]) + 1
                    if bound > pendf.shape[0] - n_pend:
                        need_pending = bound
                        break
                tipf[j, T_CARRY] = 0.0
                # Headings live at segment midpoints (staggered): the stored heading is the direction of the last
                # segment and is advanced over the arc from its middle to the middle of the new segment by Strang
                # splitting: half the tropic turn, the Brownian turn over the whole arc, the other half. The turn
                # toward a field's gradient is made whole, before the Brownian turn in odd steps and after it in
                # even ones (alternating Lie splitting: two steps compose as Strang's half, whole, half).
                arc = tipf[j, T_HALF] + 0.5 * ds
                strength, cos_phi, sin_phi = tipf[j, T_TROP], tipf[j, T_COSPHI], tipf[j, T_SINPHI]
                exotropism, h0x, h0y, h0z = tipf[j, T_EXO], tipf[j, T_H0X], tipf[j, T_H0Y], tipf[j, T_H0Z]
                hx, hy, hz = _tropic_half_turn(tipf[j, T_HX], tipf[j, T_HY], tipf[j, T_HZ], 0.5 * arc, strength,
                                               cos_phi, sin_phi, exotropism, h0x, h0y, h0z)
                # tropism toward the gradient of a field: the sine law toward its direction at the step's start
                field_shrink = 1.0
                if field_pull > 0:
                    field_shrink = shrink_factor(field_pull * arc)
                    if field_first:
                        hx, hy, hz = toward_by_factor(hx, hy, hz, gx, gy, gz, field_shrink)
                sigma = tipf[j, T_SIGMA]
                drawn = False
                if sigma > 0:
                    fallback[0] = normal_draw(bits)
                    fallback[1] = normal_draw(bits)
                    fallback[2] = normal_draw(bits)
                    drawn = True
                    variance = sigma * sigma * arc
                    if variance < TANGENT_SERIES_LIMIT:
                        tau = tangent_variance_series(variance)
                    else:
                        tau = tangent_variance_scalar(variance, log_x_table, ratio_table)
                    hx, hy, hz = brownian_turn(hx, hy, hz, fallback[0], fallback[1], fallback[2], tau)
                if field_pull > 0 and not field_first:
                    hx, hy, hz = toward_by_factor(hx, hy, hz, gx, gy, gz, field_shrink)
                hx, hy, hz = _tropic_half_turn(hx, hy, hz, 0.5 * arc, strength, cos_phi, sin_phi, exotropism, h0x,
                                               h0y, h0z)
                if pore >= 0:  # a tip in a biopore follows its axis (no tropism, no deflection by layers)
                    hx, hy, hz = pores.axis[pore, 0], pores.axis[pore, 1], pores.axis[pore, 2]
                else:
                    hx, hy, hz = deflect(soil_tops, soil_sin_max, sx, sy, sz, hx, hy, hz, ds)
                    if field_deflection:  # strong regions of a 3D resistance field (layers deflect above)
                        hx, hy, hz = deflect_by_field(fields, resistance_field, deflection_threshold_mpa,
                                                      soil_sin_max, resistance, sx, sy, sz, hx, hy, hz, ds)
                if contains(box, sx + hx * ds, sy + hy * ds, sz + hz * ds):
                    ex, ey, ez = sx + hx * ds, sy + hy * ds, sz + hz * ds
                else:
                    if not drawn:
                        fallback[0] = normal_draw(bits)
                        fallback[1] = normal_draw(bits)
                        fallback[2] = normal_draw(bits)
                    ex, ey, ez, hx, hy, hz = constrain(box, sx, sy, sz, hx, hy, hz, ds, fallback)
                seg_x, seg_y, seg_z = ex - sx, ey - sy, ez - sz
                seg_len = math.sqrt(seg_x * seg_x + seg_y * seg_y + seg_z * seg_z)
                new_length = length
                root = tipi[j, T_ROOT]
                stepped[j] = root
                if ds > _MIN_STEP_CM and seg_len > 0:
                    if n_seg >= segment_limit:
                        return _stopped(stop_out, float_chunks, parent_chunks, root_chunks, chunk_counts, n_seg,
                                        rootf, rooti, n_roots, STATUS_SEGMENTS, n_seg, t0, pore_chunks)
                    c = chunk_used
                    c_x0[c] = sx
                    c_y0[c] = sy
                    c_z0[c] = sz
                    c_x1[c] = ex
                    c_y1[c] = ey
                    c_z1[c] = ez
                    c_len[c] = seg_len
                    c_birth[c] = t1 - 0.5 * dt
                    c_parent[c] = tipi[j, T_LAST]
                    c_root[c] = root
                    c_pore[c] = 1 if pore >= 0 else 0
                    if counting_length:
                        _add_length_by_depth(length_per_cell, length_cell_cm, -sz, -ez, seg_len)
                    seg_id = n_seg
                    chunk_used += 1
                    n_seg += 1
                    new_length = length + seg_len
                    # Branch points passed by the new segment (one round per branch point).
                    apical = tipf[j, T_APICAL]
                    apical_time = dev.apical_by_time[cls]
                    nxt = tipf[j, T_NEXT]
                    while nxt <= new_length and (apical_time or nxt + apical <= max_len):
                        u_pick = uniform_draw(bits)
                        pick = 0
                        while pick < n_branch_options and u_pick >= branch_cumulative[cls, pick]:
                            pick += 1
                        child = branch_class[cls, pick] if pick < n_branch_options else -1
                        if child >= 0:
                            if n_pend >= pending_limit:
                                return _stopped(stop_out, float_chunks, parent_chunks, root_chunks, chunk_counts, n_seg,
                                                rootf, rooti, n_roots, STATUS_PENDING, n_pend, t0, pore_chunks)
                            if free_row >= 0:
                                q = free_row
                                free_row = pendi[q, Q_NEXT]
                            elif n_pend_rows < pendf.shape[0]:
                                q = n_pend_rows
                                n_pend_rows += 1
                            else:  # not reached: room was made above
                                return _stopped(stop_out, float_chunks, parent_chunks, root_chunks, chunk_counts, n_seg,
                                                rootf, rooti, n_roots, STATUS_PENDING, n_pend, t0, pore_chunks)
                            frac = min(max((nxt - length) / seg_len, 0.0), 1.0)
                            pendf[q, Q_X] = sx + frac * seg_x
                            pendf[q, Q_Y] = sy + frac * seg_y
                            pendf[q, Q_Z] = sz + frac * seg_z
                            pendf[q, Q_DX] = seg_x / seg_len
                            pendf[q, Q_DY] = seg_y / seg_len
                            pendf[q, Q_DZ] = seg_z / seg_len
                            if apical_time:  # a time: when the tip passed the point plus the zone's days
                                pendf[q, Q_THRESHOLD] = apical + _passing_time(
                                    dev, cls, law_negexp[cls], length, nxt, max_len, rate, growth_dt, t1 - dt)
                            else:
                                pendf[q, Q_THRESHOLD] = nxt + apical
                            pendf[q, Q_AZIMUTH_U] = 0.0 if spiral[cls] else uniform_draw(bits)
                            pendi[q, Q_SEGMENT] = seg_id
                            pendi[q, Q_CLASS] = child
                            pendi[q, Q_COUNT] = tipi[j, T_COUNT]
                            pendi[q, Q_NEXT] = -1
                            if rooti[root, R_QUEUE_TAIL] >= 0:
                                pendi[rooti[root, R_QUEUE_TAIL], Q_NEXT] = q
                            else:
                                rooti[root, R_QUEUE_HEAD] = q
                            rooti[root, R_QUEUE_TAIL] = q
                            rootf[root, R_PENDING] += 1.0
                            n_pend += 1
                        tipi[j, T_COUNT] += 1
                        if kind[cls, P_INTERBRANCH] == FIXED:
                            nxt += values[cls, P_INTERBRANCH, 0] / proliferation
                        else:
                            nxt += draw_parameter(kind, values, cls, P_INTERBRANCH, uniform_draw(bits)) / proliferation
                    tipf[j, T_NEXT] = nxt
                    # Commit the tip.
                    tipi[j, T_LAST] = seg_id
                    tipf[j, T_X] = ex
                    tipf[j, T_Y] = ey
                    tipf[j, T_Z] = ez
                    tipf[j, T_HX] = hx
                    tipf[j, T_HY] = hy
                    tipf[j, T_HZ] = hz
                    tipf[j, T_HALF] = 0.5 * seg_len
                    tipf[j, T_LEN] = new_length
                    if pore >= 0:  # past the pore's bottom (or pushed out of it by a wall): back in the soil
                        rx, ry, rz = ex - pores.top[pore, 0], ey - pores.top[pore, 1], ez - pores.top[pore, 2]
                        along = rx * pores.axis[pore, 0] + ry * pores.axis[pore, 1] + rz * pores.axis[pore, 2]
                        off2 = rx * rx + ry * ry + rz * rz - along * along
                        if along >= pores.length_cm[pore] or off2 > pores.radius_cm[pore] ** 2:
                            tipi[j, T_PORE] = -1
                            tipi[j, T_DECLINED] = pore
                rootf[root, R_PREV] = rootf[root, R_LEN]
                rootf[root, R_LEN] = new_length
                rootf[root, R_DT] = growth_dt
                rootf[root, R_RATE] = rate
                finished = (max_len - new_length <= _FINISH_TOLERANCE * max_len) or tipf[j, T_RATE] <= 0
                if has_lifespan and rooti[root, R_DEAD] != 0:
                    finished = True
                if finished:
                    rooti[root, R_GROWING] = 0
                    tipi[j, T_DONE] = 1
                    n_done += 1
                j += 1

        # -- branch points whose parent's apical zone has passed become laterals ------------------------
        # Each root's branch points wait in a queue with increasing thresholds: the ready ones are at its front.
        # Room for every pending branch point to become a root is made first (outside the loop).
        if n_roots + n_pend > rootf.shape[0] and rootf.shape[0] < root_limit:
            capacity = min(root_limit, max(2 * rootf.shape[0], n_roots + n_pend))
            rootf = _resized(rootf, n_roots, capacity)
            rooti = _resized(rooti, n_roots, capacity)
        if n_tips + n_pend > tipf.shape[0] and tipf.shape[0] < root_limit:
            capacity = min(root_limit, max(2 * tipf.shape[0], n_tips + n_pend))
            tipf = _resized(tipf, n_tips, capacity)
            tipi = _resized(tipi, n_tips, capacity)
        for s_idx in range(n_stepped):
            pr = stepped[s_idx]
            if pr < 0 or rootf[pr, R_PENDING] == 0:  # nothing queued: head and tail stay -1
                continue
            q = rooti[pr, R_QUEUE_HEAD]
            alive = not (has_lifespan and rooti[pr, R_DEAD] != 0)
            by_time = dev.apical_by_time[rooti[pr, R_CLASS]]  # thresholds are times, else lengths
            reached = t1 if by_time else rootf[pr, R_LEN]
            while q >= 0 and alive and reached >= pendf[q, Q_THRESHOLD]:
                if n_roots >= root_limit:
                    return _stopped(stop_out, float_chunks, parent_chunks, root_chunks, chunk_counts, n_seg,
                                    rootf, rooti, n_roots, STATUS_ROOTS, n_roots, t0, pore_chunks)
                parent_cls = rooti[pr, R_CLASS]
                if by_time:
                    carry = t1 - pendf[q, Q_THRESHOLD]
                else:
                    carry = _time_since_threshold(rootf, law_negexp[parent_cls], pr, pendf[q, Q_THRESHOLD])
                    if dev.age_rows[parent_cls] > 0:  # growth time since the threshold -> days
                        carry = t1 - time_at_growth_time(dev, parent_cls,
                                                         growth_time(dev, parent_cls, t1) - carry)
                cls = pendi[q, Q_CLASS]
                _draw_root_parameters(bits, kind, values, cls, params)
                if spiral[parent_cls]:
                    azimuth = pendi[q, Q_COUNT] * spiral_divergence_rad[parent_cls]
                else:
                    azimuth = 2 * math.pi * pendf[q, Q_AZIMUTH_U]
                hx, hy, hz = lateral_heading_scalar(pendf[q, Q_DX], pendf[q, Q_DY], pendf[q, Q_DZ],
                                                    math.radians(params[P_INSERTION]), azimuth)
                _set_root(rootf, rooti, tipf, tipi, n_roots, n_tips, cls, rooti[pr, R_ORDER] + 1, pr,
                          pendi[q, Q_SEGMENT], pendf[q, Q_X], pendf[q, Q_Y], pendf[q, Q_Z], hx, hy, hz, params,
                          t1 - carry, carry, felt_reference_radius_cm, felt_radius_exponent,
                          dev.apical_by_time[cls])
                if n_pores > 0:  # a lateral born in a biopore grows out of it into the soil
                    tipi[n_tips, T_DECLINED] = biopore_at(pores, pendf[q, Q_X], pendf[q, Q_Y], pendf[q, Q_Z])
                n_roots += 1
                n_tips += 1
                following = pendi[q, Q_NEXT]
                pendi[q, Q_NEXT] = free_row
                free_row = q
                n_pend -= 1
                rootf[pr, R_PENDING] -= 1.0
                q = following
            if rooti[pr, R_GROWING] == 0:
                # The parent stopped short of the remaining thresholds: they never carry a lateral.
                while q >= 0:
                    following = pendi[q, Q_NEXT]
                    pendi[q, Q_NEXT] = free_row
                    free_row = q
                    n_pend -= 1
                    rootf[pr, R_PENDING] -= 1.0
                    q = following
            rooti[pr, R_QUEUE_HEAD] = q
            if q < 0:
                rooti[pr, R_QUEUE_TAIL] = -1

    dead_at_end = np.zeros(n_roots, dtype=np.bool_)
    if has_lifespan:
        for r in range(n_roots):
            parent = rooti[r, R_PARENT]
            dead_at_end[r] = rootf[r, R_DEATH] <= duration + 1e-12 or (parent >= 0 and dead_at_end[parent])
    chunk_counts.append(chunk_used)
    counts = np.empty(len(chunk_counts), dtype=np.int64)
    for c in range(counts.size):
        counts[c] = chunk_counts[c]
    yield (float_chunks, parent_chunks, root_chunks, counts, n_seg, rootf[:n_roots].copy(),
                            rooti[:n_roots].copy(),
            dead_at_end, STATUS_OK, 0, duration, pore_chunks)


@njit(**JIT)
def copy_root_columns(local_root, count, offset, root_offset, plant, root_order, root_class, root_radius,
                      root, plant_id, order, class_code, radius):
    """Columns that come from a segment's root, for ``count`` segments of a chunk from row ``offset`` on.

    ``local_root`` holds root numbers within the plant; ``root_offset`` is the plant's first root id.
    """
    for c in range(count):
        i = offset + c
        r = local_root[c]
        root[i] = r + root_offset
        plant_id[i] = plant
        order[i] = root_order[r]
        class_code[i] = root_class[r]
        radius[i] = root_radius[r]


@njit(**JIT)
def copy_parent_column(local_parent, count, offset, segment_offset, parent):
    """Parent ids within the plant (-1: none) as table ids (``segment_offset``: the plant's first segment)."""
    for c in range(count):
        p = local_parent[c]
        parent[offset + c] = p + segment_offset if p >= 0 else -1
