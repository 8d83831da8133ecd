"""Soil impedance, deflection by strong layers, the soil surface and container walls.

Positions and directions are arrays of shape (3, n); depth is -z.
"""

from __future__ import annotations

import math

import numpy as np

from ..spec import Container, Soil

__all__ = ["SoilField", "ContainerWalls"]


class SoilField:
    """Penetration resistance by depth and the elongation factor it implies.

    The elongation factor is ``2 ** (-R / R_half)`` (exponential decline of elongation with
    penetration resistance, common practice; Bengough et al. 2011, J. Exp. Bot. 62:59-68,
    doi:10.1093/jxb/erq350). Depths outside every layer have R = 0.
    """

    def __init__(self, soil: Soil):
        self.soil = soil
        layers = sorted(soil.layers, key=lambda l: l.depth_top_cm)
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
        self.edges_cm = np.asarray(edges[1:], dtype=np.float64)  # interval i is [edges[i-1], edges[i])
        self.resistance_mpa = np.asarray(resist, dtype=np.float64)
        factor = np.exp2(-self.resistance_mpa / soil.elongation_halving_resistance_mpa)
        self.factor = factor
        self.uniform = bool(np.all(factor == 1.0))
        self.deflecting_tops_cm = np.asarray(
            [l.depth_top_cm for l in layers if l.penetration_resistance_mpa >= soil.deflection_threshold_mpa and l.depth_top_cm > 0],
            dtype=np.float64,
        )
        self.sin_max_incidence = math.sin(math.radians(soil.deflection_max_incidence_deg))

    def elongation_factor(self, depth_cm: np.ndarray) -> np.ndarray:
        """Multiplier of elongation, shape (n,), at the given depths (cm)."""
        if self.uniform:
            return np.ones_like(depth_cm)
        # side="left": a tip lying exactly on a layer's top is still above it (as in :meth:`deflect`).
        return self.factor[np.searchsorted(self.edges_cm, depth_cm, side="left")]

    def deflect(self, start: np.ndarray, direction: np.ndarray, step_cm: np.ndarray) -> np.ndarray:
        """Turn shallow-angled directions that would enter a strong layer to run along its top.

        Parameters
        ----------
        start, direction : ndarray, shape (3, n)
        step_cm : ndarray, shape (n,)

        Returns
        -------
        ndarray, shape (3, n)
            Directions, horizontal where deflected.
        """
        if self.deflecting_tops_cm.size == 0:
            return direction
        depth0 = -start[2]
        depth1 = depth0 - direction[2] * step_cm
        shallow = -direction[2] < self.sin_max_incidence
        hit = np.zeros(depth0.shape, dtype=bool)
        for top in self.deflecting_tops_cm:
            hit |= (depth0 <= top) & (depth1 > top)
        hit &= shallow
        if not hit.any():
            return direction
        out = direction.copy()
        horiz = np.hypot(out[0, hit], out[1, hit])
        ok = horiz > 1e-12
        out[0, hit] = np.where(ok, out[0, hit] / np.where(ok, horiz, 1.0), 1.0)
        out[1, hit] = np.where(ok, out[1, hit] / np.where(ok, horiz, 1.0), 0.0)
        out[2, hit] = 0.0
        return out


class ContainerWalls:
    """The soil surface (z = 0) and the walls of a pot or rhizobox: tips slide along them, never cross."""

    def __init__(self, container: Container):
        self.container = container
        self.kind = container.kind
        self.radius = (container.diameter_cm or 0.0) / 2.0
        self.half_width = (container.width_cm or 0.0) / 2.0
        self.half_thickness = (container.thickness_cm or 0.0) / 2.0
        self.depth = container.depth_cm

    def contains(self, points: np.ndarray, *, tolerance: float = 1e-9) -> np.ndarray:
        """Boolean mask, shape (n,): points (3, n) inside the soil volume."""
        x, y, z = points
        ok = z <= tolerance
        if self.depth is not None:
            ok &= z >= -self.depth - tolerance
        if self.kind == "pot":
            ok &= np.hypot(x, y) <= self.radius + tolerance
        elif self.kind == "rhizobox":
            ok &= (np.abs(x) <= self.half_width + tolerance) & (np.abs(y) <= self.half_thickness + tolerance)
        return ok

    def constrain(self, start: np.ndarray, direction: np.ndarray, step_cm: np.ndarray, fallback: np.ndarray):
        """Project directions off the boundaries they would cross, then clamp the end points inside.

        Parameters
        ----------
        start, direction : ndarray, shape (3, n)
        step_cm : ndarray, shape (n,)
        fallback : ndarray, shape (3, n)
            Random vectors used when a direction has no component left along the boundary.

        Returns
        -------
        end : ndarray, shape (3, n)
        direction : ndarray, shape (3, n)
            Unit directions after sliding along boundaries.
        touched : ndarray of bool, shape (n,)
        """
        end = start + direction * step_cm
        touched = ~self.contains(end)
        if not touched.any():
            return end, direction, touched
        idx = np.flatnonzero(touched)
        s0, step = start[:, idx], step_cm[idx]
        d = direction[:, idx].copy()
        # Land on every boundary crossed and slide along it: the component across a flat wall is cut to just
        # reach the wall and the others take up the rest of the unit length, so the step keeps its length; a
        # pot's curved wall is met at the full step length too. A corner may take a second or third pass
        # (e.g. the surface, then a side wall).
        pinned = np.zeros(d.shape, dtype=bool)  # components held so the step ends on a flat boundary
        target = np.zeros(d.shape)
        for _ in range(6):
            e = s0 + d * step
            out = ~self.contains(e)
            if not out.any():
                break
            if self.kind == "pot":
                d = self._land_on_pot_wall(s0, d, step, out & (np.hypot(e[0], e[1]) > self.radius))
            planes = [(2, e[2] > 0, 0.0)]
            if self.depth is not None:
                planes.append((2, e[2] < -self.depth, -self.depth))
            if self.kind == "rhizobox":
                for axis, half in ((0, self.half_width), (1, self.half_thickness)):
                    planes += [(axis, e[axis] > half, half), (axis, e[axis] < -half, -half)]
            for axis, hit, plane in planes:
                hit = hit & out
                pinned[axis] |= hit
                target[axis] = np.where(hit, np.clip((plane - s0[axis]) / step, -1.0, 1.0), target[axis])
            rows = pinned.any(axis=0)
            if rows.any():
                d = _fill_free_components(d, pinned, target, rows, fallback[:, idx])
        else:
            # Pinned in a corner where no sliding direction keeps the full step: turn back into the soil
            # off the boundaries still crossed.
            d = self._reflect_inward(s0 + d * step, d)
        # In a corner where every component is held (surface and two walls), the step that lands on the corner
        # is shorter than the growth: the rest goes down (up from the bottom) along the walls' edge.
        norm2 = np.einsum("ij,ij->j", d, d)
        short = norm2 < 1.0 - 1e-12
        if short.any():
            vertical = np.sqrt(np.maximum(1.0 - d[0, short] ** 2 - d[1, short] ** 2, 0.0))
            at_bottom = (self.depth is not None) & (s0[2, short] - vertical * step[short] < -self.depth)
            d[2, short] = np.where(at_bottom, vertical, -vertical)
        direction = direction.copy()
        direction[:, idx] = d
        end[:, idx] = self._snap(self.clamp(s0 + d * step))  # only rounding (or a step longer than the box) is left
        return end, direction, touched

    def _snap(self, points: np.ndarray, tolerance: float = 1e-9) -> np.ndarray:
        """Put points (3, n) within ``tolerance`` cm of a flat boundary exactly on it (rounding of landings)."""
        p = points
        p[2] = np.where(p[2] > -tolerance, 0.0, p[2])
        if self.depth is not None:
            p[2] = np.where(np.abs(p[2] + self.depth) < tolerance, -self.depth, p[2])
        if self.kind == "rhizobox":
            for axis, half in ((0, self.half_width), (1, self.half_thickness)):
                p[axis] = np.where(np.abs(p[axis] - half) < tolerance, half, p[axis])
                p[axis] = np.where(np.abs(p[axis] + half) < tolerance, -half, p[axis])
        return p

    def _reflect_inward(self, end: np.ndarray, d: np.ndarray) -> np.ndarray:
        """Flip the components of ``d`` (3, n) that point out through a boundary ``end`` (3, n) crosses."""
        d = d.copy()
        d[2] = np.where(end[2] > 0, -np.abs(d[2]), d[2])
        if self.depth is not None:
            d[2] = np.where(end[2] < -self.depth, np.abs(d[2]), d[2])
        if self.kind == "rhizobox":
            for axis, half in ((0, self.half_width), (1, self.half_thickness)):
                d[axis] = np.where(end[axis] > half, -np.abs(d[axis]), d[axis])
                d[axis] = np.where(end[axis] < -half, np.abs(d[axis]), d[axis])
        elif self.kind == "pot":
            rad = np.hypot(end[0], end[1])
            out = rad > self.radius
            nx = np.where(out, end[0] / np.where(rad > 0, rad, 1.0), 0.0)
            ny = np.where(out, end[1] / np.where(rad > 0, rad, 1.0), 0.0)
            outward = np.maximum(d[0] * nx + d[1] * ny, 0.0)
            d[0] -= 2 * outward * nx
            d[1] -= 2 * outward * ny
        return d

    def _land_on_pot_wall(self, start, d, step, mask):
        """Turn the horizontal part of ``d`` (same length) so the end point lies on the pot wall.

        The horizontal displacement of length h = step |d_xy| from q = start_xy must end on the circle
        |p| = R: p is an intersection of that circle with the circle |p - q| = h, the one nearest the
        current heading. Where no intersection exists (h > R + |q|) the direction is left to the clamp.
        """
        if not mask.any():
            return d
        k = np.flatnonzero(mask)
        q = start[:2, k]
        h = step[k] * np.hypot(d[0, k], d[1, k])
        dq = np.hypot(q[0], q[1])
        radius = self.radius * (1 - 1e-12)
        ok = (dq > 1e-12) & (h >= radius - dq) & (h <= radius + dq) & (h > 0)
        if not ok.any():
            return d
        k, q, h, dq = k[ok], q[:, ok], h[ok], dq[ok]
        qhat = q / dq
        perp = np.stack([-qhat[1], qhat[0]])
        a = (dq * dq + radius * radius - h * h) / (2 * dq)
        b = np.sqrt(np.maximum(radius * radius - a * a, 0.0))
        p1 = a * qhat + b * perp
        p2 = a * qhat - b * perp
        aim = q + d[:2, k] * step[k]
        pick = np.einsum("ij,ij->j", p1 - aim, p1 - aim) <= np.einsum("ij,ij->j", p2 - aim, p2 - aim)
        p = np.where(pick, p1, p2)
        d = d.copy()
        d[:2, k] = (p - q) / step[k]
        return d

    def clamp(self, points: np.ndarray) -> np.ndarray:
        """Move points (3, n) onto the nearest point inside the soil volume."""
        p = points.copy()
        p[2] = np.minimum(p[2], 0.0)
        if self.depth is not None:
            p[2] = np.maximum(p[2], -self.depth)
        if self.kind == "pot":
            rad = np.hypot(p[0], p[1])
            scale = np.where(rad > self.radius, self.radius * (1 - 1e-12) / np.where(rad > 0, rad, 1.0), 1.0)
            p[0] *= scale
            p[1] *= scale
        elif self.kind == "rhizobox":
            p[0] = np.clip(p[0], -self.half_width, self.half_width)
            p[1] = np.clip(p[1], -self.half_thickness, self.half_thickness)
        return p



def _fill_free_components(d, pinned, target, rows, fallback):
    """Unit directions (3, n): pinned components set to ``target``, the free ones scaled to fill the length.

    Used so that a step ends exactly on each flat boundary it would cross (the components across them) while
    keeping its length (the components along them). Where the free components vanish, a random fallback
    direction supplies them.
    """
    d = d.copy()
    k = np.flatnonzero(rows)
    p = pinned[:, k]
    fixed = np.where(p, target[:, k], 0.0)
    free = np.where(p, 0.0, d[:, k])
    free_norm = np.sqrt(np.einsum("ij,ij->j", free, free))
    tiny = free_norm < 1e-12
    if tiny.any():
        free[:, tiny] = np.where(p[:, tiny], 0.0, fallback[:, k][:, tiny])
        free_norm = np.sqrt(np.einsum("ij,ij->j", free, free))
    want = np.sqrt(np.maximum(1.0 - np.einsum("ij,ij->j", fixed, fixed), 0.0))
    d[:, k] = fixed + free * (want / np.where(free_norm > 0, free_norm, 1.0))
    return d
