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
        return self.factor[np.searchsorted(self.edges_cm, depth_cm, side="right")]

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
        bad = ~self.contains(end)
        if not bad.any():
            return end, direction, bad
        idx = np.flatnonzero(bad)
        d = direction[:, idx].copy()
        e = end[:, idx]
        # Surface and bottom: remove the vertical component.
        above = e[2] > 0
        d[2] = np.where(above, np.minimum(d[2], 0.0), d[2])
        if self.depth is not None:
            below = e[2] < -self.depth
            d[2] = np.where(below, np.maximum(d[2], 0.0), d[2])
        if self.kind == "pot":
            rad = np.hypot(e[0], e[1])
            out = rad > self.radius
            nx = np.where(out, e[0] / np.where(rad > 0, rad, 1.0), 0.0)
            ny = np.where(out, e[1] / np.where(rad > 0, rad, 1.0), 0.0)
            outward = np.maximum(d[0] * nx + d[1] * ny, 0.0)
            d[0] -= outward * nx
            d[1] -= outward * ny
        elif self.kind == "rhizobox":
            for axis, half in ((0, self.half_width), (1, self.half_thickness)):
                over = np.abs(e[axis]) > half
                d[axis] = np.where(over & (d[axis] * np.sign(e[axis]) > 0), 0.0, d[axis])
        norm = np.sqrt(np.einsum("ij,ij->j", d, d))
        degenerate = norm < 1e-9
        if degenerate.any():
            f = fallback[:, idx][:, degenerate].copy()
            f[2] = 0.0
            fn = np.sqrt(np.einsum("ij,ij->j", f, f))
            d[:, degenerate] = f / np.where(fn > 0, fn, 1.0)
            norm = np.sqrt(np.einsum("ij,ij->j", d, d))
        d /= np.where(norm > 0, norm, 1.0)
        e = start[:, idx] + d * step_cm[idx]
        e = self.clamp(e)
        direction = direction.copy()
        direction[:, idx] = d
        end[:, idx] = e
        return end, direction, bad

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
