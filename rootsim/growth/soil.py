"""Soil look-ups of the compiled growth step: impedance, deflection by strong layers, surface and walls.

Every look-up the step makes goes through the compiled functions of this module, which take plain
arrays built once per run by :func:`soil_arrays` and :func:`container_box`:

* :func:`elongation_factor` – multiplier of elongation at a point,
* :func:`deflect` – turn a direction that would enter a strong layer at a shallow angle,
* :func:`constrain` – keep a step inside the soil and the container (slide along the boundary),
* :func:`clamp` – move a point into the soil volume.

These serve soils given as depth layers alone. 3D fields are read through :func:`soil_at_tip`
(every field look-up of a tip and step in one call; fields that are plain grids of one layout through
:func:`rootsim.soil.fields.shared_grid_at`), for all of a step's tips before its loop over them
(:func:`rootsim.growth.step.soil_for_tips`), and strong regions of a 3D resistance field deflect tips
through :func:`deflect_by_field`; biopores are read through :mod:`rootsim.soil.biopores` (see
:func:`rootsim.growth.step.grow_plant`). Positions are (x, y, z) in cm, z up, soil surface at z = 0; depth is -z.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from ..soil.fields import planned_value_and_gradient
from ..spec import Container, Soil
from .tropisms import JIT, JIT_BORROW, JIT_INLINE

__all__ = ["soil_arrays", "container_box", "elongation_factor", "deflect", "deflect_by_field", "soil_at_tip",
           "constrain", "clamp", "contains"]

#: Bisection steps that locate where a step enters strong soil (to 2**-24 of the step).
_BOUNDARY_BISECTIONS = 24
#: How far short of the boundary (cm, at most) the normal is measured, and how far along each axis it looks (in
#: multiples of that distance).
_NORMAL_OFFSET_CM = 1e-3
_AXIS_REACH = 64.0
#: Most slides of one step (each along the boundary the previous one still crossed).
_SLIDES = 4

#: Container kinds in :func:`container_box` (its element 0).
FIELD, POT, RHIZOBOX = 0, 1, 2
_TOLERANCE_CM = 1e-9


def soil_arrays(soil: Soil):
    """Arrays describing the layered soil for the compiled look-ups.

    The elongation factor is ``2 ** (-R / R_half)`` (exponential decline of elongation with
    penetration resistance R, common practice; Bengough et al. 2011, J. Exp. Bot. 62:59-68,
    doi:10.1093/jxb/erq350). Depths outside every layer have R = 0.

    Returns
    -------
    interval_bottoms_cm : ndarray, shape (k,)
        Interval i of depth is [bottoms[i-1], bottoms[i]) (interval 0 starts at the surface).
    factor : ndarray, shape (k + 1,)
        Elongation factor of each interval (the last one extends below the deepest layer).
    deflecting_tops_cm : ndarray, shape (m,)
        Depths of the tops of layers at or above the deflection threshold.
    sin_max_incidence : float
        Sine of the largest angle (from the horizontal) at which a tip is deflected.
    """
    layers = sorted(soil.layers, key=lambda layer: layer.depth_top_cm)
    edges = [0.0]
    resist = []
    for layer in layers:
        if layer.depth_top_cm > edges[-1]:
            edges.append(layer.depth_top_cm)
            resist.append(0.0)
        elif layer.depth_top_cm < edges[-1]:  # touching layers: top equals previous bottom
            edges[-1] = layer.depth_top_cm
        edges.append(layer.depth_bottom_cm)
        resist.append(layer.penetration_resistance_mpa)
    resist.append(0.0)
    bottoms = np.asarray(edges[1:], dtype=np.float64)
    factor = np.exp2(-np.asarray(resist, dtype=np.float64) / soil.elongation_halving_resistance_mpa)
    tops = np.asarray([layer.depth_top_cm for layer in layers
                       if layer.penetration_resistance_mpa >= soil.deflection_threshold_mpa and layer.depth_top_cm > 0],
                      dtype=np.float64)
    return bottoms, factor, tops, math.sin(math.radians(soil.deflection_max_incidence_deg))


def container_box(container: Container) -> np.ndarray:
    """``[kind, radius_cm, half_width_cm, half_thickness_cm, depth_cm]`` (depth inf for an open field)."""
    kind = {"field": FIELD, "pot": POT, "rhizobox": RHIZOBOX}[container.kind]
    depth = math.inf if container.depth_cm is None else container.depth_cm
    return np.array([kind, (container.diameter_cm or 0.0) / 2.0, (container.width_cm or 0.0) / 2.0,
                     (container.thickness_cm or 0.0) / 2.0, depth], dtype=np.float64)


@njit(**JIT_INLINE)
def elongation_factor(interval_bottoms_cm, factor, x, y, z):
    """Multiplier of elongation at the point (x, y, z).

    A tip lying exactly on a layer's top is still above it (as in :func:`deflect`).
    """
    depth = -z
    i = 0
    n = interval_bottoms_cm.size
    while i < n and interval_bottoms_cm[i] < depth:
        i += 1
    return factor[i]


@njit(**JIT_INLINE)
def deflect(deflecting_tops_cm, sin_max_incidence, x, y, z, dx, dy, dz, step_cm):
    """Turn a shallow-angled direction that would enter a strong layer to run along its top.

    Returns the direction (unchanged, or horizontal where deflected).
    """
    if deflecting_tops_cm.size == 0 or not (-dz < sin_max_incidence):
        return dx, dy, dz
    depth0 = -z
    depth1 = depth0 - dz * step_cm
    for top in deflecting_tops_cm:
        if depth0 <= top and depth1 > top:
            horiz = math.hypot(dx, dy)
            if horiz > 1e-12:
                return dx / horiz, dy / horiz, 0.0
            return 1.0, 0.0, 0.0
    return dx, dy, dz


@njit(**JIT_BORROW)
def soil_at_tip(fields, resistance_field, proliferation_field, tropism_field, x, y, z):
    """Every field look-up of one tip and step, in one call.

    One call rather than one per look-up: each call out of the large compiled step saves and restores
    registers and passes the arrays of ``fields``; inside this function (compiled without reference counting)
    the look-ups are inlined, and a field that the class both proliferates in and turns toward is read once for
    its value and gradient. Biopores are looked up by the step itself (only tips in the pores' depth range).

    Parameters
    ----------
    fields : rootsim.soil.fields.CompiledFields
    resistance_field, proliferation_field, tropism_field : int
        Field indices (-1: none) of the penetration resistance, the class's proliferation field and its tropism
        field.
    x, y, z : float
        The tip, cm.

    Returns
    -------
    resistance_mpa, level : float
        Values of the resistance and proliferation fields (0 where none).
    gx, gy, gz : float
        Gradient of the tropism field (zeros where none), field units per cm.
    """
    resistance = 0.0
    if resistance_field >= 0:
        resistance = planned_value_and_gradient(fields, resistance_field, x, y, z)[0]
    level = 0.0
    gx, gy, gz = 0.0, 0.0, 0.0
    if tropism_field >= 0 and tropism_field == proliferation_field:  # value and gradient in one pass
        level, gx, gy, gz = planned_value_and_gradient(fields, tropism_field, x, y, z)
    else:
        if proliferation_field >= 0:
            level = planned_value_and_gradient(fields, proliferation_field, x, y, z)[0]
        if tropism_field >= 0:
            unused, gx, gy, gz = planned_value_and_gradient(fields, tropism_field, x, y, z)
    return resistance, level, gx, gy, gz


@njit(**JIT_BORROW)
def _axis_normal(fields, resistance_field, threshold_mpa, x, y, z, axis, reach):
    """Component ``axis`` of the (unnormalized) boundary normal seen from (x, y, z): ``±1 / t`` for the nearer
    distance t along ∓axis at which the resistance reaches the threshold (0 if neither direction does within
    ``reach``); positive toward stronger soil."""
    best = 0.0
    best_distance = math.inf
    for sign in (1.0, -1.0):
        ux = sign if axis == 0 else 0.0
        uy = sign if axis == 1 else 0.0
        uz = sign if axis == 2 else 0.0
        if planned_value_and_gradient(fields, resistance_field, x + ux * reach, y + uy * reach,
                                      z + uz * reach)[0] < threshold_mpa:
            continue
        low = 0.0
        high = reach
        for _ in range(_BOUNDARY_BISECTIONS):
            mid = 0.5 * (low + high)
            if planned_value_and_gradient(fields, resistance_field, x + ux * mid, y + uy * mid, z + uz * mid)[0] \
                    >= threshold_mpa:
                high = mid
            else:
                low = mid
        if high < best_distance:
            best_distance = high
            best = sign / high
    return best


@njit(**JIT_BORROW)
def deflect_by_field(fields, resistance_field, threshold_mpa, sin_max_incidence, resistance_here_mpa, x, y, z,
                     dx, dy, dz, step_cm):
    """Turn a direction that would enter strong soil of a 3D resistance field at a shallow angle to slide along
    the strong region's boundary (the rule of :func:`deflect`, for any shape of strong region).

    A tip in soil weaker than ``threshold_mpa`` whose step of ``step_cm`` along d would end in soil at or above
    it is deflected when it meets the boundary at less than the largest incidence: the boundary point is found
    by bisection along the step, its normal n (toward stronger soil) from the distances at which the axes
    through a point just short of it meet the boundary (so it serves smooth fields, cell grids, layers and sharp
    patches alike; a level boundary gives an exactly vertical normal), and a direction with
    ``d · n < sin_max_incidence`` is projected onto the boundary's tangent plane and normalized. For a
    horizontal strong layer this is exactly :func:`deflect`'s horizontal slide; for a convex obstacle (a stone)
    the slid step stays outside it (a step that still ends inside a curved boundary slides again, up to
    ``_SLIDES`` times). Steeper tips enter the strong soil, slowed by the impedance.

    Parameters
    ----------
    fields : rootsim.soil.fields.CompiledFields
    resistance_field : int
        Index of ``penetration_resistance_mpa``.
    threshold_mpa, sin_max_incidence : float
        ``[soil] deflection_threshold_mpa`` and the sine of ``deflection_max_incidence_deg``.
    resistance_here_mpa : float
        The field's value at the tip (already read by the step).
    x, y, z, dx, dy, dz, step_cm : float
        Tip (cm), unit direction and step length (cm).

    Returns
    -------
    dx, dy, dz : float
        The direction, unchanged or slid along the boundary.
    """
    if resistance_here_mpa >= threshold_mpa or not step_cm > 0:
        return dx, dy, dz
    for _ in range(_SLIDES):  # a slid step that still ends in strong soil (a curved boundary) slides again
        if planned_value_and_gradient(fields, resistance_field, x + dx * step_cm, y + dy * step_cm,
                                      z + dz * step_cm)[0] < threshold_mpa:
            return dx, dy, dz
        low = 0.0
        high = step_cm
        for _ in range(_BOUNDARY_BISECTIONS):
            mid = 0.5 * (low + high)
            if planned_value_and_gradient(fields, resistance_field, x + dx * mid, y + dy * mid, z + dz * mid)[0] \
                    >= threshold_mpa:
                high = mid
            else:
                low = mid
        # the normal, from a point q just short of the boundary: along each axis the surface (locally a plane at
        # distance d from q) is met at d / |n_a|, so n_a is the signed inverse of that distance (an axis that
        # meets no surface within _AXIS_REACH times the distance has n_a = 0); exact for planes, sharp steps
        # (cell grids, layers, patches without an edge) and smooth fields alike
        back = min(_NORMAL_OFFSET_CM, high)
        qx, qy, qz = x + dx * (high - back), y + dy * (high - back), z + dz * (high - back)
        reach = _AXIS_REACH * back
        nx = _axis_normal(fields, resistance_field, threshold_mpa, qx, qy, qz, 0, reach)
        ny = _axis_normal(fields, resistance_field, threshold_mpa, qx, qy, qz, 1, reach)
        nz = _axis_normal(fields, resistance_field, threshold_mpa, qx, qy, qz, 2, reach)
        norm = math.sqrt(nx * nx + ny * ny + nz * nz)
        if not (norm > 0 and math.isfinite(norm)):
            return dx, dy, dz
        nx, ny, nz = nx / norm, ny / norm, nz / norm
        into = dx * nx + dy * ny + dz * nz
        if not (into < sin_max_incidence):
            return dx, dy, dz
        px, py, pz = dx - into * nx, dy - into * ny, dz - into * nz
        along = math.sqrt(px * px + py * py + pz * pz)
        if along <= 1e-12:  # head-on: the direction of the tangent plane nearest the x axis (else the y axis)
            px, py, pz = 1.0 - nx * nx, -nx * ny, -nx * nz
            along = math.sqrt(px * px + py * py + pz * pz)
            if along < 1e-6:
                px, py, pz = -ny * nx, 1.0 - ny * ny, -ny * nz
                along = math.sqrt(px * px + py * py + pz * pz)
        dx, dy, dz = px / along, py / along, pz / along
    return dx, dy, dz


@njit(**JIT_INLINE)
def contains(box, x, y, z):
    """True if (x, y, z) lies inside the soil volume (within 1e-9 cm)."""
    tol = _TOLERANCE_CM
    if z > tol or z < -box[4] - tol:
        return False
    kind = box[0]
    if kind == POT:
        return math.hypot(x, y) <= box[1] + tol
    if kind == RHIZOBOX:
        return abs(x) <= box[2] + tol and abs(y) <= box[3] + tol
    return True


@njit(**JIT_BORROW)
def clamp(box, x, y, z):
    """The nearest point inside the soil volume."""
    z = min(z, 0.0)
    z = max(z, -box[4])
    if box[0] == POT:
        rad = math.hypot(x, y)
        if rad > box[1]:
            scale = box[1] * (1 - 1e-12) / rad
            x *= scale
            y *= scale
    elif box[0] == RHIZOBOX:
        x = min(max(x, -box[2]), box[2])
        y = min(max(y, -box[3]), box[3])
    return x, y, z


@njit(**JIT_BORROW)
def _snap(box, x, y, z):
    """Put a point within 1e-9 cm of a flat boundary exactly on it (rounding of landings)."""
    tol = _TOLERANCE_CM
    if z > -tol:
        z = 0.0
    if abs(z + box[4]) < tol:
        z = -box[4]
    if box[0] == RHIZOBOX:
        if abs(x - box[2]) < tol:
            x = box[2]
        if abs(x + box[2]) < tol:
            x = -box[2]
        if abs(y - box[3]) < tol:
            y = box[3]
        if abs(y + box[3]) < tol:
            y = -box[3]
    return x, y, z


@njit(**JIT_BORROW)
def _reflect_inward(box, ex, ey, ez, dx, dy, dz):
    """Flip the components of d that point out through a boundary the end point e crosses."""
    if ez > 0:
        dz = -abs(dz)
    if ez < -box[4]:
        dz = abs(dz)
    if box[0] == RHIZOBOX:
        if ex > box[2]:
            dx = -abs(dx)
        if ex < -box[2]:
            dx = abs(dx)
        if ey > box[3]:
            dy = -abs(dy)
        if ey < -box[3]:
            dy = abs(dy)
    elif box[0] == POT:
        rad = math.hypot(ex, ey)
        if rad > box[1]:
            nx = ex / rad if rad > 0 else 0.0
            ny = ey / rad if rad > 0 else 0.0
            outward = max(dx * nx + dy * ny, 0.0)
            dx -= 2 * outward * nx
            dy -= 2 * outward * ny
    return dx, dy, dz


@njit(**JIT)
def _land_on_pot_wall(radius_cm, sx, sy, dx, dy, step_cm):
    """Turn the horizontal part of d (same length) so the end point lies on the pot wall.

    The horizontal displacement of length h = step |d_xy| from q = start_xy must end on the circle
    |p| = R: p is an intersection of that circle with the circle |p - q| = h, the one nearest the
    current heading. Where no intersection exists the direction is left to the clamp.
    """
    h = step_cm * math.hypot(dx, dy)
    dq = math.hypot(sx, sy)
    radius = radius_cm * (1 - 1e-12)
    if not (dq > 1e-12 and h >= radius - dq and h <= radius + dq and h > 0):
        return dx, dy
    qx, qy = sx / dq, sy / dq
    a = (dq * dq + radius * radius - h * h) / (2 * dq)
    b = math.sqrt(max(radius * radius - a * a, 0.0))
    p1x, p1y = a * qx - b * qy, a * qy + b * qx
    p2x, p2y = a * qx + b * qy, a * qy - b * qx
    ax, ay = sx + dx * step_cm, sy + dy * step_cm
    if (p1x - ax) ** 2 + (p1y - ay) ** 2 <= (p2x - ax) ** 2 + (p2y - ay) ** 2:
        return (p1x - sx) / step_cm, (p1y - sy) / step_cm
    return (p2x - sx) / step_cm, (p2y - sy) / step_cm


@njit(**JIT)
def _fill_free_components(d, pinned, target, fallback):
    """Pinned components of the unit direction ``d`` (3,) set to ``target``, the free ones scaled to fill
    the unit length; where the free components vanish, the ``fallback`` vector supplies them (in place)."""
    fixed2 = 0.0
    free2 = 0.0
    for a in range(3):
        if pinned[a]:
            fixed2 += target[a] * target[a]
        else:
            free2 += d[a] * d[a]
    if math.sqrt(free2) < 1e-12:
        free2 = 0.0
        for a in range(3):
            if not pinned[a]:
                d[a] = fallback[a]
                free2 += d[a] * d[a]
    free_norm = math.sqrt(free2)
    scale = math.sqrt(max(1.0 - fixed2, 0.0)) / (free_norm if free_norm > 0 else 1.0)
    for a in range(3):
        d[a] = target[a] if pinned[a] else d[a] * scale


@njit(**JIT)
def constrain(box, sx, sy, sz, dx, dy, dz, step_cm, fallback):
    """Keep a step of ``step_cm`` from s along unit d inside the soil: land on every boundary it would
    cross and slide along it at the full step length.

    The component across a flat wall is cut to just reach the wall and the others take up the rest of the
    unit length; a pot's curved wall is met at the full step length too; a corner may take a second or third
    pass. Pinned in a corner with no sliding direction, the step turns back into the soil; where every
    component is held (surface and two walls) the rest goes down (up from the bottom) along the walls' edge.

    Parameters
    ----------
    box : ndarray, shape (5,)
        From :func:`container_box`.
    fallback : ndarray, shape (3,)
        Random vector used when a direction has no component left along the boundary.

    Returns
    -------
    ex, ey, ez, dx, dy, dz : float
        End point and unit direction after sliding.
    """
    ex, ey, ez = sx + dx * step_cm, sy + dy * step_cm, sz + dz * step_cm
    if contains(box, ex, ey, ez):
        return ex, ey, ez, dx, dy, dz
    d = np.array([dx, dy, dz])
    s = (sx, sy, sz)
    pinned = np.zeros(3, dtype=np.bool_)
    target = np.zeros(3)
    escaped = True
    for _ in range(6):
        ex, ey, ez = sx + d[0] * step_cm, sy + d[1] * step_cm, sz + d[2] * step_cm
        if contains(box, ex, ey, ez):
            escaped = False
            break
        if box[0] == POT and math.hypot(ex, ey) > box[1]:
            d[0], d[1] = _land_on_pot_wall(box[1], sx, sy, d[0], d[1], step_cm)
        e = (ex, ey, ez)
        hit = False
        if ez > 0:
            pinned[2] = True
            target[2] = min(max((0.0 - sz) / step_cm, -1.0), 1.0)
        if ez < -box[4]:
            pinned[2] = True
            target[2] = min(max((-box[4] - sz) / step_cm, -1.0), 1.0)
        if box[0] == RHIZOBOX:
            for axis in range(2):
                half = box[2 + axis]
                if e[axis] > half:
                    pinned[axis] = True
                    target[axis] = min(max((half - s[axis]) / step_cm, -1.0), 1.0)
                if e[axis] < -half:
                    pinned[axis] = True
                    target[axis] = min(max((-half - s[axis]) / step_cm, -1.0), 1.0)
        hit = pinned[0] or pinned[1] or pinned[2]
        if hit:
            _fill_free_components(d, pinned, target, fallback)
    if escaped:
        d[0], d[1], d[2] = _reflect_inward(box, sx + d[0] * step_cm, sy + d[1] * step_cm, sz + d[2] * step_cm,
                                           d[0], d[1], d[2])
    norm2 = d[0] * d[0] + d[1] * d[1] + d[2] * d[2]
    if norm2 < 1.0 - 1e-12:
        vertical = math.sqrt(max(1.0 - d[0] * d[0] - d[1] * d[1], 0.0))
        at_bottom = sz - vertical * step_cm < -box[4]
        d[2] = vertical if at_bottom else -vertical
    ex, ey, ez = clamp(box, sx + d[0] * step_cm, sy + d[1] * step_cm, sz + d[2] * step_cm)
    ex, ey, ez = _snap(box, ex, ey, ez)
    return ex, ey, ez, d[0], d[1], d[2]
