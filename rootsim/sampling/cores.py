"""Virtual soil cores: exact root length in depth increments of vertical cylinders.

A soil core of diameter ``D`` taken from the surface to depth ``H`` and cut into increments
(e.g. 0-10, 10-20 cm) is washed and its root length measured; RLD is that length over the
increment volume ``π D²/4 × thickness`` (common practice). Here the length is exact: every
segment is clipped against the vertical cylinder (quadratic in the segment parameter, see
:mod:`rootsim.sampling.cylinder`) and then against each increment's depth range.

Candidate segments per core come from a uniform grid over segment midpoints (x, y)
(:class:`rootsim.sampling.spatial_index.MidpointGrid`), searched within ``core radius + half
the horizontal extent of the segment``: any point of a segment lies within half its horizontal
extent of its midpoint, so no segment that reaches the core is missed. Increments are
half-open in depth (``top <= depth < bottom``) for roots lying exactly in a boundary plane.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterable, Mapping

import numpy as np

from ..errors import SamplingError
from .columns import sampling_inputs
from .container import check_vertical_cylinder
from .cylinder import cylinder_parameters, interval_length, linear_parameters
from .geometry_strings import parse_numbers
from .spatial_index import MidpointGrid

__all__ = ["Core", "parse_core", "sample_cores", "core_increments", "CORE_COLUMNS", "DEFAULT_INCREMENT_CM"]

DEFAULT_INCREMENT_CM = 10.0
CORE_COLUMNS = ("core_id", "x_cm", "y_cm", "diameter_cm", "depth_top_cm", "depth_bottom_cm", "root_length_cm",
                "rld_cm_per_cm3")
_VERTICAL_DOWN = np.array([0.0, 0.0, -1.0])


@dataclass(frozen=True)
class Core:
    """One soil core: a vertical cylinder from ``top_cm`` (usually the surface) down to ``depth_cm``.

    Parameters
    ----------
    x_cm, y_cm : float
        Position of the core axis, cm.
    diameter_cm : float
        Inner diameter of the corer, cm (> 0).
    depth_cm : float
        Depth of the core bottom, cm, positive downward (> top_cm).
    increment_cm : float
        Thickness of the depth increments the core is cut into, cm (> 0); the last one is
        shorter when the depth is not a multiple of it.
    top_cm : float
        Depth of the core top, cm (>= 0, i.e. not above the soil surface).
    placement : str
        How the core was placed (``"given"`` or a :func:`~rootsim.sampling.core_grid` position).
    plant_id : int
        Plant the placement refers to, or -1.
    """

    x_cm: float
    y_cm: float
    diameter_cm: float
    depth_cm: float
    increment_cm: float = DEFAULT_INCREMENT_CM
    top_cm: float = 0.0
    placement: str = "given"
    plant_id: int = -1

    @property
    def radius_cm(self) -> float:
        return self.diameter_cm / 2.0


def parse_core(text: str, *, option: str = "--core", default_increment_cm: float = DEFAULT_INCREMENT_CM) -> Core:
    """Parse ``"X,Y,DIAMETER,DEPTH[,INCREMENT]"`` (cm) into a :class:`Core` (checked as in :func:`validate_core`)."""
    v = parse_numbers(text, option=option, names=("x", "y", "diameter", "depth"), optional=("increment",))
    core = Core(x_cm=v["x"], y_cm=v["y"], diameter_cm=v["diameter"], depth_cm=v["depth"],
                increment_cm=v.get("increment", default_increment_cm))
    validate_core(core, label=f"{option} {text}")
    return core


def validate_core(core: Core, *, label: str, metadata: Mapping | None = None) -> None:
    """Raise :class:`SamplingError` for impossible cores or cores outside the soil or container."""
    if not core.diameter_cm > 0:
        raise SamplingError(f"{label}: diameter must be > 0 cm, got {core.diameter_cm:g}")
    if not core.increment_cm > 0:
        raise SamplingError(f"{label}: increment must be > 0 cm, got {core.increment_cm:g}")
    if core.top_cm < 0:
        raise SamplingError(f"{label}: top at depth {core.top_cm:g} cm is above the soil surface (allowed: >= 0)")
    if not core.depth_cm > core.top_cm:
        raise SamplingError(f"{label}: depth must be > {core.top_cm:g} cm (the core top), got {core.depth_cm:g}")
    if metadata is not None:
        check_vertical_cylinder(label, x_cm=core.x_cm, y_cm=core.y_cm, radius_cm=core.radius_cm,
                                depth_bottom_cm=core.depth_cm, metadata=metadata)


def core_increments(core: Core) -> tuple[np.ndarray, np.ndarray]:
    """Depth tops and bottoms of a core's increments, cm, shape (k,) each; the last may be shorter."""
    from ..limits import check_cell_count

    check_cell_count((core.depth_cm - core.top_cm) / core.increment_cm,
                     what=f"core depth {core.depth_cm:g} cm cut in {core.increment_cm:g} cm increments", noun="increments")
    k = max(1, math.ceil((core.depth_cm - core.top_cm) / core.increment_cm - 1e-9))
    tops = core.top_cm + core.increment_cm * np.arange(k)
    bottoms = np.minimum(tops + core.increment_cm, core.depth_cm)
    return tops, bottoms


def _mapping_to_core(item: Any, index: int) -> Any:
    if isinstance(item, Mapping):
        try:
            return Core(**dict(item))
        except TypeError as exc:
            raise SamplingError(f"core {index}: {exc} (keys: x_cm, y_cm, diameter_cm, depth_cm, increment_cm, top_cm)") from None
    return item


def _candidate_lists(p0: np.ndarray, p1: np.ndarray, cores: list[Core]) -> list[np.ndarray]:
    """Indices of segments that may reach each core (uniform midpoint grid, see module docstring)."""
    if len(p0) == 0:
        return [np.zeros(0, dtype=np.int64) for _ in cores]
    index = MidpointGrid(p0, p1, query_radius_cm=max(c.radius_cm for c in cores))
    return [index.candidates(c.x_cm, c.y_cm, c.radius_cm) for c in cores]


def sample_cores(system: Any, *, cores: Iterable[Any], check_container: bool = True):
    """Root length and RLD in each depth increment of each soil core (exact clipping).

    Parameters
    ----------
    system : RootSystem or pandas.DataFrame
        Segment table (columns ``x0 .. z1``, cm); metadata gives the container, if any.
    cores : iterable of Core, mapping or str
        The cores; strings are ``"X,Y,DIAMETER,DEPTH[,INCREMENT]"`` (cm).
    check_container : bool
        Refuse cores that leave a pot or rhizobox named in the metadata (default).

    Returns
    -------
    pandas.DataFrame
        One row per core increment: ``core_id, x_cm, y_cm, diameter_cm, depth_top_cm,
        depth_bottom_cm, root_length_cm, rld_cm_per_cm3`` then ``volume_cm3``,
        ``increment_cm``, ``placement``, ``plant_id``. Length in cm, RLD in cm cm⁻³.

    Raises
    ------
    SamplingError
        A core with non-positive diameter, depth or increment, a top above the surface, or
        outside the container.
    """
    import pandas as pd

    cores, p0, p1 = sampling_inputs(
        system, [_mapping_to_core(c, i) for i, c in enumerate(cores)], kind=Core, noun="core",
        form="X,Y,DIAMETER,DEPTH[,INCREMENT]", parse=parse_core, validate=validate_core,
        describe=lambda c: f"({c.x_cm:g}, {c.y_cm:g})", check_container=check_container)
    candidates = _candidate_lists(p0, p1, cores)
    rows: dict[str, list] = {name: [] for name in CORE_COLUMNS + ("volume_cm3", "increment_cm", "placement", "plant_id")}
    for core_id, (core, idx) in enumerate(zip(cores, candidates)):
        tops, bottoms = core_increments(core)
        a, b = p0[idx], p1[idx]
        # depth = -z along the segment: s0 + t ds
        s0, ds = -a[:, 2], a[:, 2] - b[:, 2]
        keep = (np.maximum(s0, s0 + ds) >= core.top_cm) & (np.minimum(s0, s0 + ds) <= core.depth_cm)
        a, b, s0, ds = a[keep], b[keep], s0[keep], ds[keep]
        r_in, r_out = cylinder_parameters(a, b, axis_point=np.array([core.x_cm, core.y_cm, 0.0]),
                                          axis_direction=_VERTICAL_DOWN, radius_cm=core.radius_cm)
        hit = r_out > r_in
        r_in, r_out, s0, ds = r_in[hit], r_out[hit], s0[hit], ds[hit]
        lengths = np.linalg.norm(b[hit] - a[hit], axis=1)
        z_in, z_out = linear_parameters(s0[:, None], ds[:, None], tops[None, :], bottoms[None, :])
        inside = interval_length(np.maximum(r_in[:, None], z_in), np.minimum(r_out[:, None], z_out), lengths[:, None])
        length_per_increment = inside.sum(axis=0)
        volume = math.pi * core.radius_cm ** 2 * (bottoms - tops)
        k = len(tops)
        rows["core_id"] += [core_id] * k
        rows["x_cm"] += [core.x_cm] * k
        rows["y_cm"] += [core.y_cm] * k
        rows["diameter_cm"] += [core.diameter_cm] * k
        rows["depth_top_cm"] += tops.tolist()
        rows["depth_bottom_cm"] += bottoms.tolist()
        rows["root_length_cm"] += length_per_increment.tolist()
        rows["rld_cm_per_cm3"] += (length_per_increment / volume).tolist()
        rows["volume_cm3"] += volume.tolist()
        rows["increment_cm"] += [core.increment_cm] * k
        rows["placement"] += [core.placement] * k
        rows["plant_id"] += [core.plant_id] * k
    df = pd.DataFrame(rows)
    df["core_id"] = df["core_id"].astype(np.int64)
    df["plant_id"] = df["plant_id"].astype(np.int64)
    return df
