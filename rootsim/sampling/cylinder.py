"""Exact clipping of straight segments against circular cylinders of any axis direction.

A segment ``p(t) = p0 + t (p1 - p0)``, ``0 <= t <= 1``, meets an infinite cylinder of radius
``r`` around the axis ``a + s u`` (``|u| = 1``) where the squared distance to the axis,
a quadratic in ``t``, is at most ``r²``. Because a cylinder is convex, the part inside is
one parameter interval; clipping it further to an axial range ``s_min <= s <= s_max`` (a
core increment, a minirhizotron window) is a linear constraint. Lengths inside annuli
(the shell a minirhizotron camera sees) follow as the difference of two coaxial cylinders
clipped to the same axial range, since the inner interval lies inside the outer one.

All functions are vectorized: inputs broadcast like numpy arrays.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "cylinder_parameters",
    "axial_parameters",
    "linear_parameters",
    "interval_length",
    "segment_cylinder_length",
]


def _as_unit(direction) -> np.ndarray:
    u = np.asarray(direction, dtype=np.float64)
    norm = np.linalg.norm(u, axis=-1, keepdims=True)
    return u / norm


def cylinder_parameters(p0: np.ndarray, p1: np.ndarray, *, axis_point, axis_direction, radius_cm) -> tuple[np.ndarray, np.ndarray]:
    """Parameter interval of each segment inside an infinite cylinder.

    Solves ``|w0 + t dw|² = r²`` for ``t``, where ``w0`` and ``dw`` are the start point and the
    direction of the segment with their axial components removed. The roots are taken in the
    cancellation-free form ``q = -(B + sign(B) sqrt(B² - A C))``, ``t = q / A`` and ``t = C / q``
    (common practice for quadratics in floating point).

    Parameters
    ----------
    p0, p1 : ndarray, shape (..., 3)
        Segment end points, cm.
    axis_point : array_like, shape (..., 3)
        A point on the cylinder axis, cm.
    axis_direction : array_like, shape (..., 3)
        Direction of the axis (normalised here).
    radius_cm : float or ndarray, shape (...)
        Cylinder radius, cm (> 0).

    Returns
    -------
    t_enter, t_exit : ndarray, shape (...)
        The segment is inside for ``t_enter <= t <= t_exit`` (clipped to [0, 1]); empty
        intersections have ``t_exit <= t_enter``.
    """
    p0 = np.asarray(p0, dtype=np.float64)
    d = np.asarray(p1, dtype=np.float64) - p0
    u = _as_unit(axis_direction)
    rel = p0 - np.asarray(axis_point, dtype=np.float64)
    w0 = rel - np.sum(rel * u, axis=-1, keepdims=True) * u
    dw = d - np.sum(d * u, axis=-1, keepdims=True) * u
    a = np.sum(dw * dw, axis=-1)
    b = np.sum(w0 * dw, axis=-1)
    c = np.sum(w0 * w0, axis=-1) - np.asarray(radius_cm, dtype=np.float64) ** 2
    disc = b * b - a * c
    with np.errstate(divide="ignore", invalid="ignore"):
        q = -(b + np.copysign(np.sqrt(np.maximum(disc, 0.0)), b))
        r1 = q / a
        r2 = c / q
    lo = np.fmin(r1, r2)
    hi = np.fmax(r1, r2)
    # Degenerate cases: a segment parallel to the axis (a == 0) is inside everywhere or nowhere;
    # q == 0 (b == 0 and c == 0) is a segment starting on the surface and moving tangentially: both roots are 0.
    parallel = a <= 0.0
    lo = np.where(parallel, np.where(c <= 0.0, 0.0, np.inf), np.where(q == 0.0, 0.0, lo))
    hi = np.where(parallel, np.where(c <= 0.0, 1.0, -np.inf), np.where(q == 0.0, 0.0, hi))
    miss = (~parallel) & (disc < 0.0)
    lo = np.where(miss, np.inf, lo)
    hi = np.where(miss, -np.inf, hi)
    return np.maximum(lo, 0.0), np.minimum(hi, 1.0)


def axial_parameters(p0: np.ndarray, p1: np.ndarray, *, axis_point, axis_direction, axial_min_cm, axial_max_cm) -> tuple[np.ndarray, np.ndarray]:
    """Parameter interval of each segment between two planes normal to an axis.

    Parameters
    ----------
    p0, p1 : ndarray, shape (..., 3)
        Segment end points, cm.
    axis_point, axis_direction : array_like, shape (..., 3)
        Axis origin and direction (normalised here); the axial coordinate is
        ``s = (p - axis_point) · u``.
    axial_min_cm, axial_max_cm : float or ndarray, shape (...)
        Axial range, cm.

    Returns
    -------
    t_enter, t_exit : ndarray, shape (...)
        Where ``axial_min_cm <= s(t) <= axial_max_cm``, clipped to [0, 1].
    """
    p0 = np.asarray(p0, dtype=np.float64)
    u = _as_unit(axis_direction)
    s0 = np.sum((p0 - np.asarray(axis_point, dtype=np.float64)) * u, axis=-1)
    ds = np.sum((np.asarray(p1, dtype=np.float64) - p0) * u, axis=-1)
    return linear_parameters(s0, ds, axial_min_cm, axial_max_cm)


def linear_parameters(s0: np.ndarray, ds: np.ndarray, s_min, s_max) -> tuple[np.ndarray, np.ndarray]:
    """Parameter interval where ``s_min <= s0 + t ds <= s_max``, clipped to [0, 1] (arrays broadcast).

    A segment with ``ds == 0`` (lying in a plane ``s = const``) counts as inside for
    ``s_min <= s0 < s_max``: half-open, so a root lying exactly on the boundary between two
    adjacent ranges (core increments, tube windows) is counted in one of them, the deeper one.

    Returns
    -------
    t_enter, t_exit : ndarray
        Empty intervals have ``t_exit <= t_enter``.
    """
    smin = np.asarray(s_min, dtype=np.float64)
    smax = np.asarray(s_max, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        ta = (smin - s0) / ds
        tb = (smax - s0) / ds
    flat = ds == 0.0
    inside = (s0 >= smin) & (s0 < smax)
    lo = np.where(flat, np.where(inside, 0.0, np.inf), np.minimum(ta, tb))
    hi = np.where(flat, np.where(inside, 1.0, -np.inf), np.maximum(ta, tb))
    return np.maximum(lo, 0.0), np.minimum(hi, 1.0)


def interval_length(t_enter: np.ndarray, t_exit: np.ndarray, segment_length_cm: np.ndarray) -> np.ndarray:
    """Length of the parameter interval ``[t_enter, t_exit]`` of segments of the given length, cm (0 if empty)."""
    return np.clip(t_exit - t_enter, 0.0, None) * segment_length_cm


def segment_cylinder_length(p0: np.ndarray, p1: np.ndarray, *, axis_point, axis_direction, radius_cm,
                            axial_min_cm, axial_max_cm) -> np.ndarray:
    """Exact length of each segment inside a finite cylinder, cm.

    Parameters
    ----------
    p0, p1 : ndarray, shape (..., 3)
        Segment end points, cm.
    axis_point, axis_direction : array_like, shape (..., 3)
        Axis origin and direction; the cylinder spans axial coordinates
        ``axial_min_cm .. axial_max_cm`` measured from ``axis_point`` along the direction.
    radius_cm : float or ndarray
        Radius, cm.
    axial_min_cm, axial_max_cm : float or ndarray
        Axial range, cm.

    Returns
    -------
    ndarray, shape (...)
        Length inside, cm.
    """
    p0 = np.asarray(p0, dtype=np.float64)
    p1 = np.asarray(p1, dtype=np.float64)
    r_in, r_out = cylinder_parameters(p0, p1, axis_point=axis_point, axis_direction=axis_direction, radius_cm=radius_cm)
    a_in, a_out = axial_parameters(p0, p1, axis_point=axis_point, axis_direction=axis_direction,
                                   axial_min_cm=axial_min_cm, axial_max_cm=axial_max_cm)
    seg_len = np.linalg.norm(p1 - p0, axis=-1)
    return interval_length(np.maximum(r_in, a_in), np.minimum(r_out, a_out), seg_len)
