"""Checks that sampling geometries lie in the soil: below the surface and inside a pot or rhizobox.

The container comes from the table metadata (``container.kind`` ``"field"``, ``"pot"`` with
``diameter_cm`` and ``depth_cm``, or ``"rhizobox"`` with ``width_cm`` along x, ``thickness_cm``
along y and ``depth_cm``; centred on x = y = 0). Missing keys mean no limit on that side.
"""

from __future__ import annotations

import math
from typing import Mapping

from ..errors import SamplingError

__all__ = ["check_vertical_cylinder", "check_point_in_soil"]

_TOL = 1e-9


def _container(meta: Mapping) -> tuple[str, dict]:
    cont = dict(meta.get("container") or {})
    return str(cont.get("kind", "field")), cont


def check_vertical_cylinder(label: str, *, x_cm: float, y_cm: float, radius_cm: float, depth_bottom_cm: float,
                            metadata: Mapping) -> None:
    """Raise :class:`SamplingError` unless a vertical cylinder from the surface down fits in the container.

    Parameters
    ----------
    label : str
        What is checked, for the message (e.g. ``"--core 0,0,5,60: core 1"``).
    x_cm, y_cm, radius_cm, depth_bottom_cm : float
        Axis position, radius and bottom depth (positive downward), cm.
    metadata : mapping
        Table metadata holding ``container``.
    """
    kind, cont = _container(metadata)
    depth = cont.get("depth_cm")
    if kind in ("pot", "rhizobox") and depth is not None and depth_bottom_cm > float(depth) + _TOL:
        raise SamplingError(f"{label}: reaches {depth_bottom_cm:g} cm deep, below the {kind} bottom at {float(depth):g} cm")
    if kind == "pot" and cont.get("diameter_cm") is not None:
        reach = math.hypot(x_cm, y_cm) + radius_cm
        if reach > float(cont["diameter_cm"]) / 2 + _TOL:
            raise SamplingError(
                f"{label}: extends {reach:g} cm from the pot axis, outside the pot of diameter {float(cont['diameter_cm']):g} cm"
            )
    if kind == "rhizobox":
        for coord, size_key, axis in ((x_cm, "width_cm", "x"), (y_cm, "thickness_cm", "y")):
            if cont.get(size_key) is not None:
                half = float(cont[size_key]) / 2
                if abs(coord) + radius_cm > half + _TOL:
                    raise SamplingError(
                        f"{label}: extends to {axis} = {math.copysign(abs(coord) + radius_cm, coord):g} cm, outside the "
                        f"rhizobox ({axis} from {-half:g} to {half:g} cm)"
                    )


def check_point_in_soil(label: str, *, x_cm: float, y_cm: float, depth_cm: float, margin_cm: float,
                        metadata: Mapping) -> None:
    """Raise :class:`SamplingError` unless a point (with a lateral margin) lies in the soil and the container.

    Parameters
    ----------
    label : str
        What is checked, for the message.
    x_cm, y_cm : float
        Horizontal position, cm.
    depth_cm : float
        Depth, cm, positive downward (must be >= 0).
    margin_cm : float
        Lateral clearance needed around the point (e.g. a tube radius), cm.
    metadata : mapping
        Table metadata holding ``container``.
    """
    if depth_cm < -_TOL:
        raise SamplingError(f"{label}: lies {-depth_cm:g} cm above the soil surface")
    check_vertical_cylinder(label, x_cm=x_cm, y_cm=y_cm, radius_cm=margin_cm, depth_bottom_cm=depth_cm, metadata=metadata)
