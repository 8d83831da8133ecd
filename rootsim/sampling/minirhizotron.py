"""Virtual minirhizotron tubes: root length seen through viewing windows along a buried tube.

A tube of outer radius ``R`` runs from the surface point (X, Y) downward at an angle from the
vertical in the x-z plane. A camera sees roots in the soil shell between the tube wall and
``R + depth of field``; here that visible length is exact, as the length inside the cylinder
of radius ``R + depth of field`` minus the length inside the cylinder of radius ``R``, both
clipped to the window's axial range (:mod:`rootsim.sampling.cylinder`). By default the whole
circumference is seen (a camera turned through all view directions); ``view_angle_deg`` below
360 restricts the view to a sector centred on the upper side of the tube (for a vertical tube:
the +x side). A sector up to 180° is the intersection of two half-spaces bounded by planes
through the axis, a wider one their union (length = both minus the overlap), so the visible
length stays exact.

The depth-of-field conversion to RLD divides the visible length by the observed soil volume
taken as window area × depth of field, with window area = seen arc of the tube circumference
× window length
(common practice; e.g. Itoh 1985, "In situ measurement of rooting density by
micro-rhizotron", Soil Sci. Plant Nutr. 31:653-656, from memory). Beside it are the exact RLD
of the visible shell itself (its volume is ``π((R + f)² - R²) × window length`` times the seen
fraction of the circumference, a little more than area × depth of field) and the true RLD of a thicker coaxial reference shell around the
window, i.e. what a core taken around the tube would show.

**The tube as an image sees it** (columns ``image_length_cm`` and ``rld_image_*``): a camera
records the roots in the seen shell projected onto the tube surface, so the length in the
image is the projected length, not the 3D length: a root element at distance ``ρ`` from the
axis with axial and tangential components ``ds_a`` and ``ds_t`` appears with length
``sqrt(ds_a² + (R ds_t / ρ)²)``; a root pointing straight away from the tube is a dot.
Lengths are integrated exactly per piece by 6-point Gauss-Legendre quadrature (the integrand
is smooth within a piece). Field artefacts (all off by default):

* a **gap or loose contact between tube and soil** in the topsoil (``gap_cm`` down to
  ``gap_depth_cm``): the soil starts ``gap_cm`` from the tube wall, so the camera sees only
  the shell from ``R + gap`` to ``R + depth of field``;
* **roots growing along the tube wall**: where the tube is in contact with the soil (windows
  without a gap), a root meeting the tube is deflected and runs along the interface in full
  view; ``wall_growth_fraction`` of the root length that meets the tube (the length inside
  radius ``R``, where the tube is) is added to the image length of those windows;
* a **detection limit**: roots thinner than ``detection_limit_cm`` (diameter) are not seen.

Both the gap and wall growth are the causes reported for minirhizotrons under-reading the
topsoil and over-reading depth compared with cores (Vos & Groenwold 1987, in "Minirhizotron
observation tubes", ASA Spec. Publ. 50, doi:10.2134/asaspecpub50.c2; Samson & Sinclair 1994,
"Soil core and minirhizotron comparison for the determination of root length density",
Plant Soil 161:225-232, doi:10.1007/BF00046393; from memory).

**Depth-of-field conversions side by side:** the image length per window area ``L_A`` is
converted to RLD as ``L_A / DOF`` with each assumed depth of field of
``conversion_depths_of_field_cm`` (default 0.2 cm, Upchurch & Ritchie 1983, Agron. J.
75:1009-1015, doi:10.2134/agronj1983.00021962007500060033x, and 0.3 cm, Sanders & Brown 1978,
Agron. J. 70:1073-1076; values from memory), in columns ``rld_image_dof_2mm_cm_per_cm3``, ...
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterable

import numpy as np

from ..errors import SamplingError
from .columns import sampling_inputs
from .container import check_point_in_soil
from .cylinder import axial_parameters, cylinder_parameters, interval_length, linear_parameters
from .geometry_strings import parse_placed_numbers
from .wall import cell_edges

__all__ = ["Tube", "parse_tube", "sample_tube", "image_length", "DEFAULT_WINDOW_CM", "DEFAULT_REFERENCE_CM",
           "DEFAULT_CONVERSION_DEPTHS_OF_FIELD_CM"]

DEFAULT_WINDOW_CM = 5.0
DEFAULT_REFERENCE_CM = 2.0
DEFAULT_CONVERSION_DEPTHS_OF_FIELD_CM = (0.2, 0.3)
_GAUSS_NODES, _GAUSS_WEIGHTS = np.polynomial.legendre.leggauss(6)


@dataclass(frozen=True)
class Tube:
    """One minirhizotron tube.

    Parameters
    ----------
    x_cm, y_cm : float
        Surface point where the tube enters the soil, cm.
    angle_from_vertical_deg : float
        Installation angle, degrees from the vertical (0 = vertical, allowed 0 <= angle < 90);
        the tube descends toward +x.
    length_cm : float
        Length of the tube in the soil, cm (> 0).
    outer_diameter_cm : float
        Outer diameter, cm (> 0).
    depth_of_field_cm : float
        Thickness of the soil shell the camera sees beyond the tube wall, cm (> 0).
    window_cm : float
        Length of each viewing window along the tube, cm (> 0); the last one is shorter if needed.
    reference_cm : float
        Thickness of the coaxial reference shell for the true RLD, cm (> 0).
    view_angle_deg : float
        Angle of the tube circumference the camera sees, degrees (0 < angle <= 360), centred
        on the upper side of the tube (the +x side for a vertical tube); the reference shell
        uses the same sector.
    """

    x_cm: float
    y_cm: float
    angle_from_vertical_deg: float
    length_cm: float
    outer_diameter_cm: float
    depth_of_field_cm: float
    window_cm: float = DEFAULT_WINDOW_CM
    reference_cm: float = DEFAULT_REFERENCE_CM
    view_angle_deg: float = 360.0
    gap_cm: float = 0.0
    gap_depth_cm: float = 0.0
    wall_growth_fraction: float = 0.0
    detection_limit_cm: float = 0.0
    conversion_depths_of_field_cm: tuple = DEFAULT_CONVERSION_DEPTHS_OF_FIELD_CM
    placement: str = "given"
    plant_id: int = -1

    @property
    def radius_cm(self) -> float:
        return self.outer_diameter_cm / 2.0

    def resolve(self, metadata, *, label: str = "tube") -> "Tube":
        """This tube with a stand-relative entry point turned into coordinates."""
        if not (math.isnan(self.x_cm) or math.isnan(self.y_cm)):
            return self
        from dataclasses import replace

        from .stand_positions import stand_position

        x, y, plant = stand_position(metadata, self.placement, self.plant_id, option=label)
        return replace(self, x_cm=x, y_cm=y, plant_id=plant)

    def footprint(self) -> tuple[float, float, float, float]:
        """Horizontal extent (xmin, xmax, ymin, ymax) of the tube with its reference shell, cm."""
        reach = self.radius_cm + max(self.reference_cm, self.depth_of_field_cm)
        end = self.start + self.length_cm * self.direction
        return (min(self.x_cm, end[0]) - reach, max(self.x_cm, end[0]) + reach, self.y_cm - reach, self.y_cm + reach)

    @property
    def direction(self) -> np.ndarray:
        """Unit vector along the tube, shape (3,)."""
        a = math.radians(self.angle_from_vertical_deg)
        return np.array([math.sin(a), 0.0, -math.cos(a)])

    @property
    def upper_side(self) -> np.ndarray:
        """Unit vector normal to the axis toward the upper side of the tube (+x when vertical), shape (3,)."""
        a = math.radians(self.angle_from_vertical_deg)
        return np.array([math.cos(a), 0.0, math.sin(a)])

    @property
    def seen_fraction(self) -> float:
        """Fraction of the circumference in view."""
        return self.view_angle_deg / 360.0

    @property
    def start(self) -> np.ndarray:
        """Entry point at the soil surface, shape (3,), cm."""
        return np.array([self.x_cm, self.y_cm, 0.0])


def parse_tube(text: str, *, option: str = "--tube", window_cm: float = DEFAULT_WINDOW_CM,
               reference_cm: float = DEFAULT_REFERENCE_CM, view_angle_deg: float = 360.0) -> Tube:
    """Parse ``"X,Y,ANGLE_FROM_VERTICAL,LENGTH,OUTER_DIAMETER,DEPTH_OF_FIELD"`` (cm, degrees) into a checked :class:`Tube`.

    ``X,Y`` may be a stand position ``KIND[:PLANT]`` (:mod:`rootsim.sampling.stand_positions`).
    """
    v, place = parse_placed_numbers(text, option=option,
                                    names=("angle_from_vertical", "length", "outer_diameter", "depth_of_field"))
    placement, plant = place if place is not None else ("given", -1)
    tube = Tube(x_cm=v["x"], y_cm=v["y"], angle_from_vertical_deg=v["angle_from_vertical"], length_cm=v["length"],
                outer_diameter_cm=v["outer_diameter"], depth_of_field_cm=v["depth_of_field"], window_cm=window_cm,
                reference_cm=reference_cm, view_angle_deg=view_angle_deg, placement=placement, plant_id=plant)
    validate_tube(tube, label=f"{option} {text}")
    return tube


def validate_tube(tube: Tube, *, label: str, metadata=None) -> None:
    """Raise :class:`SamplingError` for impossible tubes or tubes leaving the soil or container."""
    if not 0.0 <= tube.angle_from_vertical_deg < 90.0:
        raise SamplingError(f"{label}: ANGLE_FROM_VERTICAL must be from 0 to below 90 degrees, got {tube.angle_from_vertical_deg:g}")
    for name, value in (("LENGTH", tube.length_cm), ("OUTER_DIAMETER", tube.outer_diameter_cm),
                        ("DEPTH_OF_FIELD", tube.depth_of_field_cm), ("window length", tube.window_cm),
                        ("reference shell thickness", tube.reference_cm)):
        if not value > 0:
            raise SamplingError(f"{label}: {name} must be > 0 cm, got {value:g}")
    if not 0.0 < tube.view_angle_deg <= 360.0:
        raise SamplingError(f"{label}: view angle must be above 0 and at most 360 degrees, got {tube.view_angle_deg:g}")
    for name, value in (("tube-soil gap", tube.gap_cm), ("gap depth", tube.gap_depth_cm),
                        ("detection limit", tube.detection_limit_cm)):
        if not (math.isfinite(value) and value >= 0):
            raise SamplingError(f"{label}: {name} must be >= 0 cm, got {value:g}")
    if not 0.0 <= tube.wall_growth_fraction <= 1.0:
        raise SamplingError(f"{label}: wall growth fraction must be from 0 to 1, got {tube.wall_growth_fraction:g}")
    if not tube.conversion_depths_of_field_cm or not all(math.isfinite(v) and v > 0
                                                         for v in tube.conversion_depths_of_field_cm):
        raise SamplingError(f"{label}: conversion depths of field must be > 0 cm, got {tube.conversion_depths_of_field_cm}")
    if metadata is not None:
        end = tube.start + tube.length_cm * tube.direction
        for point in (tube.start, end):
            check_point_in_soil(label, x_cm=float(point[0]), y_cm=float(point[1]), depth_cm=float(-point[2]),
                                margin_cm=tube.radius_cm, metadata=metadata)


def _near_axis(p0: np.ndarray, p1: np.ndarray, tube: Tube, reach_cm: float) -> np.ndarray:
    """Indices of segments whose midpoint is within ``reach_cm`` + half their length of the tube axis segment."""
    mid = 0.5 * (p0 + p1)
    half = 0.5 * np.linalg.norm(p1 - p0, axis=1)
    rel = mid - tube.start
    s = np.clip(rel @ tube.direction, 0.0, tube.length_cm)
    dist = np.linalg.norm(rel - s[:, None] * tube.direction[None, :], axis=1)
    return np.flatnonzero(dist <= reach_cm + half + 1e-9)


def sample_tube(system: Any, *, tubes: Iterable[Any], check_container: bool = True, periodic: bool = True):
    """Visible root length and RLD per viewing window of minirhizotron tubes.

    Parameters
    ----------
    system : RootSystem or pandas.DataFrame
        Segment table (cm).
    tubes : iterable of Tube or str
        The tubes; strings are ``"X,Y,ANGLE_FROM_VERTICAL,LENGTH,OUTER_DIAMETER,DEPTH_OF_FIELD"``.
    check_container : bool
        Refuse tubes leaving a pot or rhizobox named in the metadata (default).
    periodic : bool
        In a field stand, see the roots of neighbouring cells (:mod:`rootsim.periodic_stand`);
        False for a bordered plot.

    Returns
    -------
    pandas.DataFrame
        One row per window: ``tube_id, window_id, along_tube_start_cm, along_tube_end_cm,
        depth_top_cm, depth_bottom_cm`` (depth of the tube axis at the window ends),
        ``visible_length_cm``, ``window_area_cm2`` (seen arc × window length),
        ``depth_of_field_cm``, ``rld_estimate_cm_per_cm3`` (visible length / (window area ×
        depth of field)), ``rld_shell_true_cm_per_cm3`` (visible length / exact shell volume),
        ``reference_length_cm``, ``reference_thickness_cm``, ``rld_true_cm_per_cm3`` (exact RLD of
        the reference shell).
    """
    import pandas as pd

    tubes, p0, p1, radius = sampling_inputs(
        system, tubes, kind=Tube, noun="tube", form="X,Y,ANGLE_FROM_VERTICAL,LENGTH,OUTER_DIAMETER,DEPTH_OF_FIELD",
        parse=parse_tube, validate=validate_tube,
        describe=lambda t: f"({t.x_cm:g}, {t.y_cm:g})" if not math.isnan(t.x_cm) else t.placement,
        check_container=check_container, periodic=periodic)
    frames = []
    for tube_id, tube in enumerate(tubes):
        r = tube.radius_cm
        radii = np.array([r, r + tube.depth_of_field_cm, r + tube.reference_cm])
        idx = _near_axis(p0, p1, tube, float(radii.max()))
        a, b = p0[idx], p1[idx]
        seen = np.ones(len(idx), dtype=bool) if radius is None else 2.0 * radius[idx] >= tube.detection_limit_cm
        seg_len = np.linalg.norm(b - a, axis=1)
        edges = cell_edges(0.0, tube.length_cm, tube.window_cm)
        inside = _window_lengths(a, b, seg_len, tube, radii, edges)
        reference = inside[:, 2] - inside[:, 0]
        cos_a = -tube.direction[2]
        gap = np.where(0.5 * (edges[:-1] + edges[1:]) * cos_a < tube.gap_depth_cm, tube.gap_cm, 0.0)
        visible, image = image_length(a[seen], b[seen], tube, edges, gap)
        w = np.diff(edges)
        fraction = tube.seen_fraction
        area = math.pi * tube.outer_diameter_cm * w * fraction
        shell_volume = math.pi * ((r + tube.depth_of_field_cm) ** 2 - r ** 2) * w * fraction
        ref_volume = math.pi * ((r + tube.reference_cm) ** 2 - r ** 2) * w * fraction
        k = len(w)
        frames.append(pd.DataFrame({
            "tube_id": np.full(k, tube_id, dtype=np.int64),
            "window_id": np.arange(k, dtype=np.int64),
            "along_tube_start_cm": edges[:-1],
            "along_tube_end_cm": edges[1:],
            "depth_top_cm": edges[:-1] * cos_a,
            "depth_bottom_cm": edges[1:] * cos_a,
            "visible_length_cm": np.maximum(visible, 0.0),
            "window_area_cm2": area,
            "depth_of_field_cm": np.full(k, tube.depth_of_field_cm),
            "rld_estimate_cm_per_cm3": np.maximum(visible, 0.0) / (area * tube.depth_of_field_cm),
            "rld_shell_true_cm_per_cm3": np.maximum(visible, 0.0) / shell_volume,
            "reference_length_cm": np.maximum(reference, 0.0),
            "reference_thickness_cm": np.full(k, tube.reference_cm),
            "rld_true_cm_per_cm3": np.maximum(reference, 0.0) / ref_volume,
            "view_angle_deg": np.full(k, tube.view_angle_deg),
            "image_length_cm": image,
            "rld_image_cm_per_cm3": image / (area * tube.depth_of_field_cm),
            **{f"rld_image_dof_{10 * dof:g}mm_cm_per_cm3".replace(".", "p"): image / (area * dof)
               for dof in tube.conversion_depths_of_field_cm},
            "gap_cm": gap,
            "placement": np.full(k, tube.placement, dtype=object),
        }))
    return pd.concat(frames, ignore_index=True)


def _sector_terms(a: np.ndarray, b: np.ndarray, tube: Tube) -> list[tuple[float, np.ndarray, np.ndarray]]:
    """The seen sector as signed parameter intervals: measure = sum of sign × measure within each, shape (m,)."""
    m = len(a)
    if tube.view_angle_deg >= 360.0:
        return [(1.0, np.zeros(m), np.ones(m))]
    half = math.radians(tube.view_angle_deg / 2)
    n, side = tube.upper_side, np.cross(tube.direction, tube.upper_side)
    halves = []
    for k in (math.sin(half) * n - math.cos(half) * side, math.sin(half) * n + math.cos(half) * side):
        halves.append(linear_parameters((a - tube.start) @ k, (b - a) @ k, 0.0, np.inf))
    (in1, out1), (in2, out2) = halves
    both = (1.0, np.maximum(in1, in2), np.minimum(out1, out2))
    if tube.view_angle_deg <= 180.0:
        return [both]
    return [(1.0, in1, out1), (1.0, in2, out2), (-1.0, both[1], both[2])]


def _projected_length(a: np.ndarray, b: np.ndarray, lo: np.ndarray, hi: np.ndarray, tube: Tube) -> np.ndarray:
    """Length of the pieces ``[lo, hi]`` of segments projected radially onto the tube surface, cm, shape (m, k).

    6-point Gauss-Legendre quadrature of ``|d| sqrt((d̂·u)² + (R d̂·e_t / ρ)²)`` over each piece.
    """
    out = np.zeros(lo.shape)
    rows, cols = np.nonzero(hi > lo)
    if rows.size == 0:
        return out
    d = b[rows] - a[rows]
    u = tube.direction
    half = 0.5 * (hi[rows, cols] - lo[rows, cols])
    centre = 0.5 * (hi[rows, cols] + lo[rows, cols])
    d_axial = d @ u
    total = np.zeros(rows.size)
    for node, weight in zip(_GAUSS_NODES, _GAUSS_WEIGHTS):
        t = centre + half * node
        rel = a[rows] + t[:, None] * d - tube.start
        radial = rel - (rel @ u)[:, None] * u
        rho = np.linalg.norm(radial, axis=1)
        e_t = np.cross(u, radial / np.maximum(rho, 1e-300)[:, None])
        tangential = np.einsum("ij,ij->i", d, e_t) * tube.radius_cm / np.maximum(rho, 1e-300)
        total += weight * np.sqrt(d_axial ** 2 + tangential ** 2)
    out[rows, cols] = total * half
    return out


def image_length(a: np.ndarray, b: np.ndarray, tube: Tube, edges: np.ndarray, gap_cm: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray]:
    """3D length in the seen soil shell and length in the image, per window, cm.

    Parameters
    ----------
    a, b : ndarray, shape (m, 3)
        End points of the segments the camera can see (detection limit applied), cm.
    tube : Tube
    edges : ndarray, shape (k + 1,)
        Window edges along the tube, cm.
    gap_cm : ndarray, shape (k,)
        Tube-soil gap in each window, cm (the soil starts at ``R + gap``).

    Returns
    -------
    visible : ndarray, shape (k,)
        3D root length in the seen shell ``R + gap .. R + depth of field`` (within the sector).
    image : ndarray, shape (k,)
        Projected length in the image plus ``wall_growth_fraction`` × the root length inside
        radius ``R`` (module docstring).
    """
    k = len(edges) - 1
    if len(a) == 0:
        return np.zeros(k), np.zeros(k)
    seg_len = np.linalg.norm(b - a, axis=1)
    r = tube.radius_cm
    outer = r + tube.depth_of_field_cm
    inner = np.minimum(r + gap_cm, outer)
    o_in, o_out = cylinder_parameters(a, b, axis_point=tube.start, axis_direction=tube.direction, radius_cm=outer)
    i_in, i_out = cylinder_parameters(a[:, None, :], b[:, None, :], axis_point=tube.start,
                                      axis_direction=tube.direction, radius_cm=inner[None, :])
    t_in, t_out = cylinder_parameters(a, b, axis_point=tube.start, axis_direction=tube.direction, radius_cm=r)
    s_in, s_out = axial_parameters(a[:, None, :], b[:, None, :], axis_point=tube.start, axis_direction=tube.direction,
                                   axial_min_cm=edges[None, :-1], axial_max_cm=edges[None, 1:])
    o_in, o_out, t_in, t_out = o_in[:, None], o_out[:, None], t_in[:, None], t_out[:, None]
    nonempty = i_out > i_in
    pieces = [(o_in, np.where(nonempty, np.minimum(o_out, i_in), o_out)),
              (np.where(nonempty, np.maximum(o_in, i_out), o_out), o_out)]
    visible = np.zeros(k)
    image = np.zeros(k)
    wall = np.zeros(k)
    for sign, c_in, c_out in _sector_terms(a, b, tube):
        c_in, c_out = c_in[:, None], c_out[:, None]
        for p_in, p_out in pieces:
            lo = np.maximum(np.maximum(p_in, s_in), c_in)
            hi = np.minimum(np.minimum(p_out, s_out), c_out)
            visible += sign * interval_length(lo, hi, seg_len[:, None]).sum(axis=0)
            image += sign * _projected_length(a, b, lo, hi, tube).sum(axis=0)
        if tube.wall_growth_fraction > 0:
            lo = np.maximum(np.maximum(t_in, s_in), c_in)
            hi = np.minimum(np.minimum(t_out, s_out), c_out)
            wall += sign * interval_length(lo, hi, seg_len[:, None]).sum(axis=0)
    wall = np.where(gap_cm > 0, 0.0, wall)  # roots follow the wall only where tube and soil are in contact
    return np.maximum(visible, 0.0), np.maximum(image + tube.wall_growth_fraction * wall, 0.0)


def _window_lengths(a: np.ndarray, b: np.ndarray, seg_len: np.ndarray, tube: Tube, radii: np.ndarray,
                    edges: np.ndarray) -> np.ndarray:
    """Root length inside each coaxial cylinder within each window and the seen sector, cm.

    Parameters
    ----------
    a, b : ndarray, shape (m, 3)
        Candidate segment end points, cm.
    seg_len : ndarray, shape (m,)
    tube : Tube
    radii : ndarray, shape (c,)
        Cylinder radii, cm.
    edges : ndarray, shape (k + 1,)
        Window edges along the tube, cm.

    Returns
    -------
    ndarray, shape (k, c)
    """
    r_in, r_out = cylinder_parameters(a[:, None, :], b[:, None, :], axis_point=tube.start,
                                      axis_direction=tube.direction, radius_cm=radii[None, :])
    s_in, s_out = axial_parameters(a[:, None, :], b[:, None, :], axis_point=tube.start, axis_direction=tube.direction,
                                   axial_min_cm=edges[None, :-1], axial_max_cm=edges[None, 1:])
    # (m, windows, cylinders) interval of cylinder x window
    lo = np.maximum(r_in[:, None, :], s_in[:, :, None])
    hi = np.minimum(r_out[:, None, :], s_out[:, :, None])
    if tube.view_angle_deg >= 360.0:
        return interval_length(lo, hi, seg_len[:, None, None]).sum(axis=0)
    half = math.radians(tube.view_angle_deg / 2)
    n, m = tube.upper_side, np.cross(tube.direction, tube.upper_side)
    halves = []
    for k in (math.sin(half) * n - math.cos(half) * m, math.sin(half) * n + math.cos(half) * m):
        # half-space (p - start) . k >= 0, bounded by a plane through the axis
        t_in, t_out = linear_parameters((a - tube.start) @ k, (b - a) @ k, 0.0, np.inf)
        halves.append((t_in[:, None, None], t_out[:, None, None]))
    (in1, out1), (in2, out2) = halves
    both = interval_length(np.maximum(lo, np.maximum(in1, in2)), np.minimum(hi, np.minimum(out1, out2)),
                           seg_len[:, None, None]).sum(axis=0)
    if tube.view_angle_deg <= 180.0:
        return both
    first = interval_length(np.maximum(lo, in1), np.minimum(hi, out1), seg_len[:, None, None]).sum(axis=0)
    second = interval_length(np.maximum(lo, in2), np.minimum(hi, out2), seg_len[:, None, None]).sum(axis=0)
    return first + second - both
