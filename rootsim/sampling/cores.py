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

Beside the exact (washed) length, two field practices are emulated:

* **Washing recovery.** Washing over a sieve loses part of the finest roots (e.g. Pallant,
  Holmgren, Schuler, McCracken & Drinkwater 1993, "Using a fine mesh to recover roots",
  Plant Soil 148:301-306; from memory). ``washing_recovery`` is the recovered fraction of the
  length of roots of diameter at most ``fine_root_diameter_cm`` (default 1 = all recovered,
  today's numbers); ``root_length_washed_cm`` and ``rld_washed_cm_per_cm3`` carry the result.
* **Core-break.** Each increment is broken at mid-depth and the roots seen on the broken
  face are counted (Drew & Saker 1980, "Assessment of a rapid method, using soil cores, for
  estimating the amount and distribution of crop roots in the field", Plant Soil 55:297-305,
  doi:10.1007/BF02181809). Counts ``N`` per face area ``A`` are converted with a ratio ``C``
  fitted to washed cores, ``RLD = C N / A`` (:func:`fit_core_break_ratio`); the default
  ``C = 2`` is the stereological value for isotropic roots (Smith & Guttman 1953, see
  :mod:`rootsim.sampling.wall`). Roots thinner than ``detection_limit_cm`` (diameter) are not
  seen on the face. A root crosses the face when its end points lie on different sides under
  ``depth < face`` versus ``>= face``.
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
from .geometry_strings import parse_placed_numbers
from .spatial_index import MidpointGrid

__all__ = ["Core", "parse_core", "sample_cores", "core_increments", "fit_core_break_ratio", "CORE_COLUMNS",
           "DEFAULT_INCREMENT_CM", "ISOTROPIC_BREAK_RATIO"]

ISOTROPIC_BREAK_RATIO = 2.0

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

    def resolve(self, metadata: Mapping, *, label: str = "core") -> "Core":
        """This core with a stand-relative position (``placement`` set, x and y NaN) turned into coordinates."""
        if not (math.isnan(self.x_cm) or math.isnan(self.y_cm)):
            return self
        from dataclasses import replace

        from .stand_positions import stand_position

        x, y, plant = stand_position(metadata, self.placement, self.plant_id, option=label)
        return replace(self, x_cm=x, y_cm=y, plant_id=plant)

    def footprint(self) -> tuple[float, float, float, float]:
        """Horizontal extent (xmin, xmax, ymin, ymax), cm."""
        r = self.radius_cm
        return (self.x_cm - r, self.x_cm + r, self.y_cm - r, self.y_cm + r)


def parse_core(text: str, *, option: str = "--core", default_increment_cm: float = DEFAULT_INCREMENT_CM) -> Core:
    """Parse ``"X,Y,DIAMETER,DEPTH[,INCREMENT]"`` (cm) into a :class:`Core` (checked as in :func:`validate_core`).

    ``X,Y`` may be a stand position ``KIND[:PLANT]`` (:mod:`rootsim.sampling.stand_positions`),
    resolved against the stand layout when the core is sampled.
    """
    v, place = parse_placed_numbers(text, option=option, names=("diameter", "depth"), optional=("increment",))
    placement, plant = place if place is not None else ("given", -1)
    core = Core(x_cm=v["x"], y_cm=v["y"], diameter_cm=v["diameter"], depth_cm=v["depth"],
                increment_cm=v.get("increment", default_increment_cm), placement=placement, plant_id=plant)
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


def sample_cores(system: Any, *, cores: Iterable[Any], check_container: bool = True, periodic: bool = True,
                 washing_recovery: float = 1.0, fine_root_diameter_cm: float = 0.02,
                 core_break_ratio: float = ISOTROPIC_BREAK_RATIO, detection_limit_cm: float = 0.0):
    """Root length and RLD in each depth increment of each soil core (exact clipping), washed and core-break.

    Parameters
    ----------
    system : RootSystem or pandas.DataFrame
        Segment table (columns ``x0 .. z1``, cm); metadata gives the container, if any.
    cores : iterable of Core, mapping or str
        The cores; strings are ``"X,Y,DIAMETER,DEPTH[,INCREMENT]"`` (cm).
    check_container : bool
        Refuse cores that leave a pot or rhizobox named in the metadata (default).
    periodic : bool
        In a field stand, see the roots of neighbouring cells (:mod:`rootsim.periodic_stand`);
        False for a bordered plot.
    washing_recovery : float
        Recovered fraction (0 to 1) of the length of fine roots when washing (module docstring).
    fine_root_diameter_cm : float
        Roots of at most this diameter are "fine" for ``washing_recovery``, cm.
    core_break_ratio : float
        ``C`` in ``RLD = C × roots per cm² of broken face`` (dimensionless; 2 for isotropic roots).
    detection_limit_cm : float
        Thinnest root diameter seen on a broken face, cm (0 = all).

    Returns
    -------
    pandas.DataFrame
        One row per core increment: ``core_id, x_cm, y_cm, diameter_cm, depth_top_cm,
        depth_bottom_cm, root_length_cm, rld_cm_per_cm3`` (exact) then ``volume_cm3``,
        ``increment_cm``, ``placement``, ``plant_id``, ``root_length_washed_cm``,
        ``rld_washed_cm_per_cm3``, ``break_face_depth_cm``, ``break_face_roots``,
        ``rld_core_break_cm_per_cm3``. Length in cm, RLD in cm cm⁻³.

    Raises
    ------
    SamplingError
        A core with non-positive diameter, depth or increment, a top above the surface, or
        outside the container.
    """
    import pandas as pd

    _check_method_options(washing_recovery, fine_root_diameter_cm, core_break_ratio, detection_limit_cm)
    cores, p0, p1, radius = sampling_inputs(
        system, [_mapping_to_core(c, i) for i, c in enumerate(cores)], kind=Core, noun="core",
        form="X,Y,DIAMETER,DEPTH[,INCREMENT]", parse=parse_core, validate=validate_core,
        describe=lambda c: f"({c.x_cm:g}, {c.y_cm:g})" if not math.isnan(c.x_cm) else c.placement,
        check_container=check_container, periodic=periodic)
    diameter = np.zeros(len(p0)) if radius is None else 2.0 * radius
    candidates = _candidate_lists(p0, p1, cores)
    extra = ("volume_cm3", "increment_cm", "placement", "plant_id", "root_length_washed_cm", "rld_washed_cm_per_cm3",
             "break_face_depth_cm", "break_face_roots", "rld_core_break_cm_per_cm3")
    rows: dict[str, list] = {name: [] for name in CORE_COLUMNS + extra}
    for core_id, (core, idx) in enumerate(zip(cores, candidates)):
        tops, bottoms = core_increments(core)
        a, b, seg_diameter = p0[idx], p1[idx], diameter[idx]
        faces = 0.5 * (tops + bottoms)
        break_counts = _face_counts(a, b, seg_diameter >= detection_limit_cm, core, faces)
        # depth = -z along the segment: s0 + t ds
        s0, ds = -a[:, 2], a[:, 2] - b[:, 2]
        keep = (np.maximum(s0, s0 + ds) >= core.top_cm) & (np.minimum(s0, s0 + ds) <= core.depth_cm)
        a, b, s0, ds, seg_diameter = a[keep], b[keep], s0[keep], ds[keep], seg_diameter[keep]
        r_in, r_out = cylinder_parameters(a, b, axis_point=np.array([core.x_cm, core.y_cm, 0.0]),
                                          axis_direction=_VERTICAL_DOWN, radius_cm=core.radius_cm)
        hit = r_out > r_in
        r_in, r_out, s0, ds = r_in[hit], r_out[hit], s0[hit], ds[hit]
        lengths = np.linalg.norm(b[hit] - a[hit], axis=1)
        z_in, z_out = linear_parameters(s0[:, None], ds[:, None], tops[None, :], bottoms[None, :])
        inside = interval_length(np.maximum(r_in[:, None], z_in), np.minimum(r_out[:, None], z_out), lengths[:, None])
        length_per_increment = inside.sum(axis=0)
        recovered = np.where(seg_diameter[hit] <= fine_root_diameter_cm, washing_recovery, 1.0)
        washed = (inside * recovered[:, None]).sum(axis=0)
        volume = math.pi * core.radius_cm ** 2 * (bottoms - tops)
        face_area = math.pi * core.radius_cm ** 2
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
        rows["root_length_washed_cm"] += washed.tolist()
        rows["rld_washed_cm_per_cm3"] += (washed / volume).tolist()
        rows["break_face_depth_cm"] += faces.tolist()
        rows["break_face_roots"] += break_counts.tolist()
        rows["rld_core_break_cm_per_cm3"] += (core_break_ratio * break_counts / face_area).tolist()
    df = pd.DataFrame(rows)
    df["break_face_roots"] = df["break_face_roots"].astype(np.int64)
    df["core_id"] = df["core_id"].astype(np.int64)
    df["plant_id"] = df["plant_id"].astype(np.int64)
    return df


def _check_method_options(washing_recovery: float, fine_root_diameter_cm: float, core_break_ratio: float,
                          detection_limit_cm: float) -> None:
    if not 0.0 <= washing_recovery <= 1.0:
        raise SamplingError(f"washing recovery (washing_recovery, --core-washing-recovery): {washing_recovery:g} "
                            "(allowed: a fraction from 0 to 1)")
    for name, keyword, option, value in (
            ("fine root diameter", "fine_root_diameter_cm", "--core-fine-diameter-cm", fine_root_diameter_cm),
            ("detection limit", "detection_limit_cm", "--detection-limit-cm", detection_limit_cm)):
        if not (math.isfinite(value) and value >= 0):
            raise SamplingError(f"{name} ({keyword}, {option}): {value:g} (allowed: a number >= 0, cm)")
    if not (math.isfinite(core_break_ratio) and core_break_ratio > 0):
        raise SamplingError(f"core-break ratio (core_break_ratio, --core-break-ratio): {core_break_ratio:g} "
                            "(allowed: a number > 0)")


def _face_counts(a: np.ndarray, b: np.ndarray, visible: np.ndarray, core: Core, faces: np.ndarray) -> np.ndarray:
    """Number of visible roots crossing each horizontal break face (a disc of the core radius), shape (k,)."""
    depth_a, depth_b = -a[:, 2], -b[:, 2]
    counts = np.zeros(len(faces), dtype=np.int64)
    for i, face in enumerate(faces):
        cross = np.flatnonzero(visible & ((depth_a < face) != (depth_b < face)))
        t = (face - depth_a[cross]) / (depth_b[cross] - depth_a[cross])
        point = a[cross] + t[:, None] * (b[cross] - a[cross])
        counts[i] = int(np.count_nonzero(np.hypot(point[:, 0] - core.x_cm, point[:, 1] - core.y_cm) <= core.radius_cm))
    return counts


def fit_core_break_ratio(cores) -> float:
    """Core-break ratio ``C`` fitted to washed cores: least squares through the origin of RLD on roots per cm².

    Parameters
    ----------
    cores : pandas.DataFrame
        Output of :func:`sample_cores` (columns ``rld_washed_cm_per_cm3``, ``break_face_roots``,
        ``diameter_cm``).

    Returns
    -------
    float
        ``C = Σ x y / Σ x²`` with ``x`` = face roots per cm² and ``y`` = washed RLD (the
        calibration of Drew & Saker 1980, a line through the origin).
    """
    x = cores["break_face_roots"].to_numpy(dtype=np.float64) / (math.pi * (cores["diameter_cm"].to_numpy() / 2) ** 2)
    y = cores["rld_washed_cm_per_cm3"].to_numpy(dtype=np.float64)
    denominator = float((x * x).sum())
    if denominator <= 0:
        raise SamplingError("core-break ratio: no roots counted on any broken face, nothing to fit")
    return float((x * y).sum() / denominator)
