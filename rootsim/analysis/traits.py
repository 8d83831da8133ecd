"""Root traits of a root system: the numbers root phenotyping reports.

Definitions (common practice unless cited):

* ``total_length_cm``, ``length_by_order_cm``: sums of segment lengths (by root order).
* ``n_tips``: number of root tips (apical segments; one per root).
* ``max_depth_cm``: deepest point of any segment below the surface.
* ``d50_depth_cm``, ``d95_depth_cm``: depths above which 50 % / 95 % of the root length lies,
  exact from the piecewise-linear cumulative length (:mod:`.depth_distribution`).
* ``width_cm``: root-system width, the largest horizontal distance between two segment end
  points of one plant (the diameter of its horizontal footprint; the 3D form of the
  maximal width measured on root images); the mean over plants.
* ``convex_hull_volume_cm3``: volume of the convex hull of a plant's segment end points
  (scipy.spatial.ConvexHull, Qhull: Barber et al. 1996, ACM TOMS 22:469-483,
  doi:10.1145/235815.235821); 0 for flat systems; the mean over plants.
* ``mean_interbranch_distance_cm``: by order of the laterals, the mean distance along the
  bearing root between consecutive branch points.
* ``mean_insertion_angle_deg``: by order of the laterals, the mean angle between a lateral's
  first segment and the bearing segment it starts on (0-180°).
* ``gale_grigal_beta``: β of ``Y = 1 - β^d`` fitted to the cumulative fraction of root length
  at the bottom of each depth layer (Gale & Grigal 1987, doi:10.1139/x87-131).
* ``plants``: per plant, length, tips, width, hull volume and Fitter's topological indices
  (magnitude, altitude, external path length, topological index; :mod:`.topology`).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..rootsystem import tip_mask
from .depth_distribution import quantile_depths
from .profile import depth_layer_lengths
from .inputs import float_column, ground_area_from_metadata, int_column, positive_number, system_metadata
from .profile import profile_area
from .plant_rows import plant_rows
from .profile_model import fit_gale_grigal
from .topology import branch_points, fitter_indices, insertion_angles_deg, interbranch_distances, mean_by_key, root_chains

__all__ = ["root_traits", "horizontal_diameter", "hull_volume", "plant_hull_measures"]


def horizontal_diameter(xy: np.ndarray) -> float:
    """Largest distance between two of the points ``xy`` (shape (m, 2)), cm; 0 for fewer than 2 points."""
    from scipy.spatial import ConvexHull, QhullError

    if len(xy) < 2:
        return 0.0
    try:
        xy_hull = xy[ConvexHull(xy).vertices]
    except (QhullError, ValueError):  # collinear or coincident: the extremes lie among the axis extremes
        xy_hull = xy[np.unique([xy[:, 0].argmin(), xy[:, 0].argmax(), xy[:, 1].argmin(), xy[:, 1].argmax()])]
    diff = xy_hull[:, None, :] - xy_hull[None, :, :]
    return float(np.sqrt((diff ** 2).sum(axis=2).max()))


def hull_volume(points: np.ndarray) -> float:
    """Volume of the convex hull of ``points`` (shape (m, 3)), cm³; 0 if they span no volume."""
    from scipy.spatial import ConvexHull, QhullError

    if len(points) < 4:
        return 0.0
    try:
        return float(ConvexHull(points).volume)
    except (QhullError, ValueError):
        return 0.0


def _hull_points(system: Any) -> tuple[np.ndarray, np.ndarray]:
    """End points of all segments plus start points of roots starting at the plant, with their plant ids.

    Laterals start on their bearing segments, so their start points add nothing to a hull.
    """
    end = np.column_stack([float_column(system, f"{a}1") for a in "xyz"])
    parent = int_column(system, "parent_id")
    plant = int_column(system, "plant_id")
    base = np.flatnonzero(parent < 0)
    start = np.column_stack([float_column(system, f"{a}0")[base] for a in "xyz"])
    return np.concatenate([end, start]), np.concatenate([plant, plant[base]])


def plant_hull_measures(system: Any, rows) -> tuple[float, float]:
    """Width (cm) and convex hull volume (cm³) of the plant whose segments are ``rows``.

    The points are the end points of its segments and the start points of its roots that start at
    the plant (as :func:`_hull_points`); only those that can lie on the hull
    (:func:`rootsim.analysis.hull_prefilter.hull_candidates`) are passed to Qhull.
    """
    from .hull_prefilter import hull_candidates

    parent = int_column(system, "parent_id")[rows]
    base = np.flatnonzero(parent < 0)
    coordinates = []
    for axis in "xyz":
        end = float_column(system, f"{axis}1")[rows]
        start = float_column(system, f"{axis}0")[rows]
        coordinates.append(np.concatenate([end, start[base]]))
    keep = hull_candidates(*coordinates)
    points = np.column_stack([c[keep] for c in coordinates])
    return horizontal_diameter(points[:, :2]), hull_volume(points)


def root_traits(system: Any, *, layer_cm: float = 5.0, area_cm2: float | None = None, box=None) -> dict:
    """Root traits of a root system (see the module documentation for definitions).

    Parameters
    ----------
    system : RootSystem, DataFrame or mapping
        Segment table.
    layer_cm : float
        Thickness of the depth layers whose cumulative fractions the Gale & Grigal β is fitted to, cm.
    area_cm2 : float, optional
        Ground area, cm², reported and used for ``root_length_per_ground_area_cm_per_cm2``;
        default the stand's ground area (None if unknown).
    box : (xmin, xmax, ymin, ymax), optional
        A sampling box whose area is reported as the area used (as :func:`layer_profile` does).

    Returns
    -------
    dict
        JSON-ready traits: ``n_plants``, ``n_segments``, ``n_roots``, ``ground_area_cm2``,
        ``total_length_cm``, ``root_length_per_ground_area_cm_per_cm2``, ``length_by_order_cm``,
        ``n_tips``, ``max_depth_cm``, ``d50_depth_cm``, ``d95_depth_cm``, ``width_cm``,
        ``convex_hull_volume_cm3``, ``mean_interbranch_distance_cm``, ``mean_insertion_angle_deg``,
        ``gale_grigal_beta``, ``gale_grigal_rms``, ``mean_topological_index`` and ``plants``
        (list of per-plant dicts). Undefined values are None.
    """
    if area_cm2 is not None or box is not None:
        area = profile_area(system, area_cm2=area_cm2, box=box)
    else:
        area = ground_area_from_metadata(system_metadata(system))
    h = positive_number(layer_cm, "layer thickness")
    length = float_column(system, "length_cm")
    order = int_column(system, "order")
    plant = int_column(system, "plant_id")
    parent = int_column(system, "parent_id")
    root_id = int_column(system, "root_id")
    depth0 = -float_column(system, "z0")
    depth1 = -float_column(system, "z1")
    n = len(length)
    tips = tip_mask(parent, root_id)
    total = float(length.sum())

    d50, d95 = quantile_depths(depth0, depth1, length, (0.5, 0.95))
    max_depth = float(max(depth0.max(), depth1.max())) if n else 0.0
    n_layers = max(1, int(np.ceil(max_depth / h))) if max_depth > 0 else 0
    beta, rms = float("nan"), float("nan")
    if total > 0 and n_layers:
        layers = depth_layer_lengths(depth0, depth1, length, layer_cm=h, n_layers=n_layers)[:, 0]
        below = layers.sum() - np.cumsum(layers)  # root length below each layer bottom
        beta, rms = fit_gale_grigal(np.arange(1, n_layers + 1) * h, 1.0 - below / total)

    chains = root_chains(system)
    branches = branch_points(system, chains)
    lateral_order = order[branches.first_segment]
    gaps, gap_lateral = interbranch_distances(branches)
    gap_order = order[chains.first_segment[gap_lateral]]
    angles = insertion_angles_deg(system, branches)
    fitter = fitter_indices(system, chains, branches)

    plants = []
    groups = plant_rows(plant)
    plant_ids = np.array([p for p, _ in groups], dtype=np.int64)
    for p, rows in groups:
        width, volume = plant_hull_measures(system, rows)
        plants.append(plant_trait_record(p, total_length_cm=float(length[rows].sum()),
                                         n_tips=int(np.count_nonzero(tips[rows])), width_cm=width,
                                         convex_hull_volume_cm3=volume, fitter=fitter))
    by_order = np.bincount(order, weights=length) if n else np.zeros(0)
    return stand_trait_record(
        n_plants=int(system.n_plants) if hasattr(system, "n_plants") else int(plant_ids.size), n_segments=int(n),
        n_roots=int(chains.n_roots), ground_area_cm2=area, total_length_cm=total, length_by_order_cm=by_order,
        n_tips=int(tips.sum()), max_depth_cm=max_depth, d50_depth_cm=d50, d95_depth_cm=d95,
        mean_interbranch_distance_cm=mean_by_key(gaps, gap_order),
        mean_insertion_angle_deg=mean_by_key(angles, lateral_order), gale_grigal_beta=beta, gale_grigal_rms=rms,
        plants=plants)


def plant_trait_record(plant_id: int, *, total_length_cm: float, n_tips: int, width_cm: float,
                       convex_hull_volume_cm3: float, fitter: dict) -> dict:
    """One plant's entry of ``root_traits()["plants"]`` (``fitter``: Fitter's indices by plant id)."""
    return {
        "plant_id": plant_id,
        "total_length_cm": total_length_cm,
        "n_tips": n_tips,
        "width_cm": width_cm,
        "convex_hull_volume_cm3": convex_hull_volume_cm3,
        **fitter.get(plant_id, {}),
    }


def stand_trait_record(*, n_plants: int, n_segments: int, n_roots: int, ground_area_cm2, total_length_cm: float,
                       length_by_order_cm: np.ndarray, n_tips: int, max_depth_cm: float, d50_depth_cm: float,
                       d95_depth_cm: float, mean_interbranch_distance_cm: dict, mean_insertion_angle_deg: dict,
                       gale_grigal_beta: float, gale_grigal_rms: float, plants: list) -> dict:
    """The dict returned by :func:`root_traits` (and the chunked form), JSON-ready (NaN and inf as None).

    Stand means of width and hull volume, root length per ground area and the mean topological index are
    derived here from the plants' entries (:func:`plant_trait_record`).
    """
    area = ground_area_cm2
    indices = [q["topological_index"] for q in plants if q.get("topological_index") is not None]
    return _json_ready({
        "n_plants": n_plants,
        "n_segments": n_segments,
        "n_roots": n_roots,
        "ground_area_cm2": area,
        "total_length_cm": total_length_cm,
        "root_length_per_ground_area_cm_per_cm2": total_length_cm / area if area else None,
        "length_by_order_cm": {str(k): float(v) for k, v in enumerate(length_by_order_cm)},
        "n_tips": n_tips,
        "max_depth_cm": max_depth_cm,
        "d50_depth_cm": d50_depth_cm,
        "d95_depth_cm": d95_depth_cm,
        "width_cm": float(np.mean([q["width_cm"] for q in plants])) if plants else 0.0,
        "convex_hull_volume_cm3": float(np.mean([q["convex_hull_volume_cm3"] for q in plants])) if plants else 0.0,
        "mean_interbranch_distance_cm": mean_interbranch_distance_cm,
        "mean_insertion_angle_deg": mean_insertion_angle_deg,
        "gale_grigal_beta": gale_grigal_beta,
        "gale_grigal_rms": gale_grigal_rms,
        "mean_topological_index": float(np.mean(indices)) if indices else None,
        "plants": plants,
    })


def _json_ready(value):
    """Replace NaN/inf floats by None, recursively (JSON has no NaN)."""
    if isinstance(value, dict):
        return {k: _json_ready(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_json_ready(v) for v in value]
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value
