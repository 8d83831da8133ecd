"""Heading updates over one step of arc length: tropisms and random deviation.

Headings are unit vectors stored as arrays of shape (3, n) (x, y, z; z up). All maps are
exact for their own law over the step, so results converge as the step shrinks.

Gravitropism follows Sachs' sine law: the angle θ from the downward vertical obeys
dθ/ds = -k_g sin θ, whose solution is tan(θ/2) = tan(θ0/2) exp(-k_g s) (e.g. Bastien et al.
2013, "Unifying model of shoot gravitropism reveals proprioception as a central feature of
posture control in plants", PNAS 110:755-760, doi:10.1073/pnas.1214301109, for the sine law).
Plagiotropism bends toward a preferred angle θ_p by the same law: dθ/ds = -k_p sin(θ - θ_p).
The two add to a single sine law, -A sin(θ - φ), with A cos φ = k_g + k_p cos θ_p and
A sin φ = k_p sin θ_p, which is solved exactly per step.
Exotropism pulls the heading back toward the root's initial heading by the same sine law in the
plane of the two vectors. Random deviation is a step of spherical Brownian motion: a tangent
Gaussian with per-axis standard deviation σ √Δs applied through the exponential map, so the
heading variance grows with arc length, not with the number of steps.

The maps are written once, as scalar functions compiled with numba (``njit``), and called per tip
by the compiled growth step (:mod:`rootsim.growth.step`); the array functions below are thin loops
over the same kernels for analysis and tests.
"""

from __future__ import annotations

import functools
import math

import numpy as np
from numba import njit

__all__ = ["combined_sine_law", "vertical_sine_law_step", "toward_direction_step", "random_deviation_step",
           "heading_from_angles", "lateral_heading", "tangent_variance", "tangent_variance_table",
           "TANGENT_SERIES_LIMIT"]

#: Options of every compiled kernel: cached on disk; IEEE division (x/0 gives inf or nan, as in numpy).
JIT = {"cache": True, "error_model": "numpy", "nogil": True}
#: The same for small kernels called per tip: inlined into the caller (no call or array reference counting).
JIT_INLINE = {**JIT, "inline": "always"}
#: For kernels that read arrays and allocate nothing: no reference counting of their array arguments (a
#: counted reference per call would cost more than the work itself).
JIT_BORROW = {**JIT, "_nrt": False}


# -- scalar kernels (compiled) ------------------------------------------------------------------

@njit(**JIT_INLINE)
def tan_half_angle(sin_a, cos_a):
    """tan(a/2) from sin a and cos a, well conditioned for every a: sin/(1 + cos) where cos >= 0, else
    (1 - cos)/sin; capped at ±1e150 at a = ±π (the unstable equilibrium of a sine law stays put, and its
    square stays finite)."""
    if cos_a >= 0:
        num = sin_a
        den = 1.0 + cos_a
    else:
        num = 1.0 - cos_a
        den = sin_a
    if abs(den) < 1e-150:
        den = -1e-150 if math.copysign(1.0, den) < 0 else 1e-150
    return min(max(num / den, -1e150), 1e150)


@njit(**JIT)
def combined_sine_law_scalar(gravitropism_per_cm, plagiotropism_per_cm, preferred_angle_rad):
    """Strength A (1/cm), cos φ and sin φ of the combined sine law -A sin(θ - φ) (see the module text)."""
    c = gravitropism_per_cm + plagiotropism_per_cm * math.cos(preferred_angle_rad)
    s = plagiotropism_per_cm * math.sin(preferred_angle_rad)
    strength = math.hypot(c, s)
    if strength > 0:
        return strength, c / strength, s / strength
    return strength, 1.0, 0.0


@njit(**JIT_INLINE)
def sine_law_turn(hx, hy, hz, step_cm, strength_per_cm, cos_phi, sin_phi):
    """Exact step of dθ/ds = -A sin(θ - φ) for the angle θ from the downward vertical; azimuth kept.

    Returns the new unit heading (x, y, z). ψ = θ - φ is solved in the half-angle form
    tan(ψ/2) -> tan(ψ/2) exp(-A s); tan(atan2/2) stays finite at the unstable equilibrium ψ = ±π.
    """
    cos_t = min(max(-hz, -1.0), 1.0)
    horiz = math.sqrt(hx * hx + hy * hy)  # components of a unit vector: no overflow to guard against
    sin_t = horiz
    cos_p = cos_t * cos_phi + sin_t * sin_phi
    sin_p = sin_t * cos_phi - cos_t * sin_phi
    half = tan_half_angle(sin_p, cos_p) * math.exp(-strength_per_cm * step_cm)
    h2 = half * half
    cos_p = (1.0 - h2) / (1.0 + h2)
    sin_p = 2.0 * half / (1.0 + h2)
    cos_new = cos_p * cos_phi - sin_p * sin_phi
    sin_new = max(sin_p * cos_phi + cos_p * sin_phi, 0.0)
    if horiz > 1e-12:
        scale = sin_new / horiz
        return hx * scale, hy * scale, -cos_new
    return sin_new, 0.0, -cos_new  # a vertical root bending away leans toward +x


@njit(**JIT_INLINE)
def toward_direction_turn(hx, hy, hz, tx, ty, tz, step_cm, strength_per_cm):
    """Exact sine-law step rotating heading h toward target t in their common plane:
    dβ/ds = -k sin β, tan(β/2) -> tan(β/2) exp(-k s). Returns the new heading (x, y, z)."""
    return toward_by_factor(hx, hy, hz, tx, ty, tz, math.exp(-strength_per_cm * step_cm))


@njit(**JIT_INLINE)
def toward_by_factor(hx, hy, hz, tx, ty, tz, shrink):
    """:func:`toward_direction_turn` with ``shrink = exp(-k s)`` given (computed once by the caller, which
    knows the arc): tan(β/2) -> tan(β/2) * shrink.

    Computed in the stereographic projection from -t onto the plane through the origin normal to t, where the
    heading is ``w = p / q`` with ``p = h - (h·t) t``, ``q = 1 + h·t`` and ``|w| = tan(β/2)``: the turn is
    ``w -> shrink * w`` and the new heading ``((1 - |w|²) t + 2 w) / (1 + |w|²)``, that is
    ``((q² - shrink² |p|²) t + 2 shrink q p) / (q² + shrink² |p|²)`` (one division, no square root). q is
    taken as ``|h + t|² / 2``, exact to rounding also for headings nearly opposite to t; a heading exactly
    opposite (the unstable equilibrium) stays put.
    """
    cos_b = hx * tx + hy * ty + hz * tz
    px = hx - cos_b * tx
    py = hy - cos_b * ty
    pz = hz - cos_b * tz
    sx = hx + tx
    sy = hy + ty
    sz = hz + tz
    q = 0.5 * (sx * sx + sy * sy + sz * sz)
    q2 = q * q
    turned2 = shrink * shrink * (px * px + py * py + pz * pz)
    denominator = q2 + turned2
    if not denominator > 0.0:
        return hx, hy, hz
    inverse = 1.0 / denominator
    along = (q2 - turned2) * inverse
    across = 2.0 * shrink * q * inverse
    return along * tx + across * px, along * ty + across * py, along * tz + across * pz


#: Below this x, exp(-x) comes from its Taylor series (:func:`shrink_factor`).
SHRINK_SERIES_LIMIT = 0.01


@njit(**JIT_INLINE)
def shrink_factor(x):
    """exp(-x) for x >= 0, the factor of an exact sine-law turn over an arc (x = strength * arc).

    Below :data:`SHRINK_SERIES_LIMIT` from the Taylor series through x⁶ (truncation error under x⁷/7! < 2e-18,
    a fiftieth of an ulp near 1), computed inline; above it ``math.exp`` (a library call, which costs the
    step's loop more than the series).
    """
    if x < SHRINK_SERIES_LIMIT:
        return 1.0 - x * (1.0 - x * (0.5 - x * (1.0 / 6.0 - x * (1.0 / 24.0 - x * (1.0 / 120.0 - x * (1.0 / 720.0))))))
    return math.exp(-x)


#: Below this σ² Δs the tangent variance comes from its series (:func:`tangent_variance_series`).
TANGENT_SERIES_LIMIT = 0.05


@njit(**JIT_INLINE)
def tangent_variance_series(x):
    """τ = x - x²/6 - x³/90, the series inversion of 1 - τ + τ²/3 - τ³/15 = exp(-x) (relative error under
    1e-6 below x = :data:`TANGENT_SERIES_LIMIT`; see :func:`tangent_variance_scalar`)."""
    return x * (1.0 - x * (1.0 / 6.0 + x / 90.0))


@njit(**JIT_BORROW)
def tangent_variance_scalar(x, log_x_table, ratio_table):
    """Per-axis variance τ of the tangent Gaussian for a spherical Brownian step of variance x = σ² Δs.

    Series inversion of 1 - τ + τ²/3 - τ³/15 = exp(-x), τ = x - x²/6 - x³/90 + O(x⁴), below x = 0.05
    (relative error under 1e-6); above, the table of :func:`tangent_variance_table` (τ/x against log x,
    interpolated linearly, constant beyond its end).
    """
    if x < TANGENT_SERIES_LIMIT:
        return tangent_variance_series(x)
    n = log_x_table.size
    lx = math.log(x)
    if lx >= log_x_table[n - 1]:
        return x * ratio_table[n - 1]
    if lx <= log_x_table[0]:
        return x * ratio_table[0]
    spacing = (log_x_table[n - 1] - log_x_table[0]) / (n - 1)
    i = min(max(int((lx - log_x_table[0]) / spacing), 0), n - 2)
    while i > 0 and log_x_table[i] > lx:
        i -= 1
    while i < n - 2 and log_x_table[i + 1] < lx:
        i += 1
    w = (lx - log_x_table[i]) / (log_x_table[i + 1] - log_x_table[i])
    return x * (ratio_table[i] + w * (ratio_table[i + 1] - ratio_table[i]))


# Taylor coefficients in b = a² of cos a, (-1)^k / (2k)!, and of sin(a)/a, (-1)^k / (2k + 1)!, k = 0..8.
_COS_COEFFICIENTS = tuple((-1) ** k / math.factorial(2 * k) for k in range(9))
_SINC_COEFFICIENTS = tuple((-1) ** k / math.factorial(2 * k + 1) for k in range(9))


@njit(**JIT_INLINE)
def _series_from_one(b, b2, b4, c):
    """1 + c[1] b + c[2] b² + ... + c[8] b⁸ (c[0] = 1): the tail by Estrin's scheme (pairs, then powers b², b⁴:
    a short dependency chain instead of Horner's multiply-adds in a row; Estrin 1960, from memory), and the
    leading 1 added last, so the sum is rounded once near 1."""
    low = (c[1] + c[2] * b) + (c[3] + c[4] * b) * b2
    high = (c[5] + c[6] * b) + (c[7] + c[8] * b) * b2
    return 1.0 + b * (low + high * b4)


@njit(**JIT_INLINE)
def cos_and_sinc_of_square(b):
    """cos a and sin(a)/a from b = a² >= 0 (no square root on the series side).

    Up to b = 0.25 (a = 0.5, the usual size of one step's Brownian turn) by their Taylor series to the a¹⁶
    term: the first omitted terms, a¹⁸/18! and a¹⁸/19!, are below 1e-21, under double precision (common
    practice); beyond, from the library's sine and cosine.
    """
    if b > 0.25:
        a = math.sqrt(b)
        return math.cos(a), math.sin(a) / a
    b2 = b * b
    b4 = b2 * b2
    return _series_from_one(b, b2, b4, _COS_COEFFICIENTS), _series_from_one(b, b2, b4, _SINC_COEFFICIENTS)


@njit(**JIT_INLINE)
def cos_and_sinc(angle):
    """cos a and sin(a)/a for an angle a >= 0 (rad): :func:`cos_and_sinc_of_square` of a², or the library's
    sine and cosine beyond a = 0.5."""
    if angle > 0.5:
        return math.cos(angle), math.sin(angle) / angle
    return cos_and_sinc_of_square(angle * angle)


@njit(**JIT_INLINE)
def brownian_turn(hx, hy, hz, nx, ny, nz, tangent_variance_rad2):
    """Spherical Brownian step: rotate h by a tangent Gaussian (exponential map).

    (nx, ny, nz) are independent standard normals; their projection on the plane normal to h, scaled by the
    square root of ``tangent_variance_rad2`` (:func:`tangent_variance_scalar` of σ² Δs), is the tangent
    Gaussian, so the mean cosine between the headings before and after is exp(-σ² Δs) for any step, as for
    spherical Brownian motion with per-axis angular variance σ² per cm. Scalars only (no arrays), so that
    inlining into the growth step counts no references.
    """
    along = nx * hx + ny * hy + nz * hz
    wx = nx - along * hx
    wy = ny - along * hy
    wz = nz - along * hz
    # v = sqrt(τ) w; the series need only |v|² = τ |w|², so the square root runs beside them
    c, sinc = cos_and_sinc_of_square(tangent_variance_rad2 * (wx * wx + wy * wy + wz * wz))  # angle |v|
    scale = sinc * math.sqrt(tangent_variance_rad2)
    ox = c * hx + scale * wx
    oy = c * hy + scale * wy
    oz = c * hz + scale * wz
    # A unit vector up to rounding (cos² + sin² = 1): renormalized by one Newton step for 1/sqrt(q) at q = 1,
    # 1.5 - q/2, whose error 3(q - 1)²/8 is below 4e-19 for |q - 1| < 1e-9 (else exactly).
    q = ox * ox + oy * oy + oz * oz
    inverse_norm = 1.5 - 0.5 * q if abs(q - 1.0) < 1e-9 else 1.0 / math.sqrt(q)
    return ox * inverse_norm, oy * inverse_norm, oz * inverse_norm


@njit(**JIT)
def heading_from_angles_scalar(angle_from_vertical_rad, azimuth_rad):
    """Unit heading (x, y, z) from the angle to the downward vertical and the azimuth."""
    s = math.sin(angle_from_vertical_rad)
    return s * math.cos(azimuth_rad), s * math.sin(azimuth_rad), -math.cos(angle_from_vertical_rad)


@njit(**JIT)
def lateral_heading_scalar(px, py, pz, insertion_angle_rad, azimuth_rad):
    """Heading at ``insertion_angle_rad`` from the parent axis p, turned by ``azimuth_rad`` around it
    (azimuth 0 points along the horizontal perpendicular to the parent, p × up)."""
    e1x, e1y, e1z = py, -px, 0.0  # p × (0, 0, 1)
    norm = math.sqrt(e1x * e1x + e1y * e1y)
    if norm < 1e-9:
        e1x, e1y, norm = 1.0, 0.0, 1.0
    e1x /= norm
    e1y /= norm
    e2x = py * e1z - pz * e1y
    e2y = pz * e1x - px * e1z
    e2z = px * e1y - py * e1x
    ca, sa = math.cos(azimuth_rad), math.sin(azimuth_rad)
    ci, si = math.cos(insertion_angle_rad), math.sin(insertion_angle_rad)
    return (ci * px + si * (ca * e1x + sa * e2x), ci * py + si * (ca * e1y + sa * e2y),
            ci * pz + si * (ca * e1z + sa * e2z))


# -- the Brownian step's variance table ----------------------------------------------------------

@functools.lru_cache(maxsize=1)
def tangent_variance_table():
    """Per-axis variance τ of the tangent Gaussian whose exponential-map step has the mean cosine of
    spherical Brownian motion over the same arc: E[cos |v|] = exp(-x), x = σ² Δs.

    For a 2-D Gaussian of per-axis variance τ, |v| is Rayleigh and E[cos |v|] = 1 - sqrt(2τ) F(sqrt(τ/2))
    with F Dawson's integral (term-by-term from the series 1 - τ + τ²/3 - τ³/15 + ..., whose coefficients
    are 1/(2n-1)!!). Inverting it gives τ = x - x²/6 + O(x³); tabulated as τ/x against log x.

    Returns
    -------
    log_x, ratio : ndarray, shape (3000,)
        Evenly spaced log x (x from 0.01 to 20) and τ/x there.
    """
    from scipy.special import dawsn

    x = np.geomspace(0.01, 20.0, 3000)
    target = np.exp(-x)
    low, high = np.log(x * 1e-3), np.full(x.shape, np.log(1e12))  # bracket of log τ; E[cos] falls as τ grows
    for _ in range(60):  # vectorized bisection on log τ
        mid = 0.5 * (low + high)
        tau = np.exp(mid)
        too_straight = 1.0 - np.sqrt(2 * tau) * dawsn(np.sqrt(tau / 2)) > target
        low = np.where(too_straight, mid, low)
        high = np.where(too_straight, high, mid)
    ratio = np.exp(0.5 * (low + high)) / x
    return np.log(x), ratio


# -- array forms (loops over the kernels) ----------------------------------------------------------

@njit(**JIT)
def _tangent_variance_loop(x, log_x, ratio, out):
    for j in range(x.size):
        out[j] = tangent_variance_scalar(x[j], log_x, ratio)


def tangent_variance(brownian_variance: np.ndarray) -> np.ndarray:
    """Per-axis variance of the tangent Gaussian for a spherical Brownian step of per-axis variance x = σ² Δs.

    Parameters
    ----------
    brownian_variance : ndarray, shape (n,)
        σ² Δs (rad²).

    Returns
    -------
    ndarray, shape (n,)
        τ with E[cos |v|] = exp(-σ² Δs) for v ~ N(0, τ I₂) (see :func:`tangent_variance_table`).
    """
    x = np.ascontiguousarray(brownian_variance, dtype=np.float64).ravel()
    out = np.empty_like(x)
    _tangent_variance_loop(x, *tangent_variance_table(), out)
    return out.reshape(np.shape(brownian_variance))


def combined_sine_law(gravitropism_per_cm, plagiotropism_per_cm, preferred_angle_rad):
    """Strength A (1/cm) and equilibrium angle φ (rad) of the combined vertical-plane sine law.

    Parameters
    ----------
    gravitropism_per_cm, plagiotropism_per_cm, preferred_angle_rad : array_like, shape (n,)

    Returns
    -------
    strength_per_cm, cos_phi, sin_phi : ndarray, shape (n,)
    """
    a, b, c = np.broadcast_arrays(*(np.asarray(v, dtype=np.float64) for v in
                                    (gravitropism_per_cm, plagiotropism_per_cm, preferred_angle_rad)))
    out = np.array([combined_sine_law_scalar(*v) for v in zip(a.ravel(), b.ravel(), c.ravel())]).reshape(-1, 3)
    return out[:, 0].reshape(a.shape), out[:, 1].reshape(a.shape), out[:, 2].reshape(a.shape)


@njit(**JIT)
def _sine_law_loop(heading, step_cm, strength, cos_phi, sin_phi, out):
    for j in range(heading.shape[1]):
        out[0, j], out[1, j], out[2, j] = sine_law_turn(heading[0, j], heading[1, j], heading[2, j], step_cm[j],
                                                        strength[j], cos_phi[j], sin_phi[j])


def vertical_sine_law_step(heading, step_cm, strength_per_cm, cos_phi, sin_phi):
    """Exact step of dθ/ds = -A sin(θ - φ) for the angle θ from the downward vertical; azimuth kept.

    Parameters
    ----------
    heading : ndarray, shape (3, n)
        Unit headings (a new array is returned).
    step_cm : ndarray, shape (n,)
        Arc length of the step.
    strength_per_cm, cos_phi, sin_phi : ndarray, shape (n,)
        From :func:`combined_sine_law`.

    Returns
    -------
    ndarray, shape (3, n)
    """
    h = np.ascontiguousarray(heading, dtype=np.float64)
    n = h.shape[1]
    args = [np.ascontiguousarray(np.broadcast_to(v, (n,)), dtype=np.float64)
            for v in (step_cm, strength_per_cm, cos_phi, sin_phi)]
    out = np.empty_like(h)
    _sine_law_loop(h, *args, out)
    return out


@njit(**JIT)
def _toward_loop(heading, target, step_cm, strength, out):
    for j in range(heading.shape[1]):
        out[0, j], out[1, j], out[2, j] = toward_direction_turn(heading[0, j], heading[1, j], heading[2, j],
                                                                target[0, j], target[1, j], target[2, j],
                                                                step_cm[j], strength[j])


def toward_direction_step(heading, target, step_cm, strength_per_cm):
    """Exact sine-law step rotating ``heading`` toward ``target`` in their common plane.

    Parameters
    ----------
    heading, target : ndarray, shape (3, n)
        Unit vectors.
    step_cm, strength_per_cm : ndarray, shape (n,)
    """
    h = np.ascontiguousarray(heading, dtype=np.float64)
    n = h.shape[1]
    out = np.empty_like(h)
    _toward_loop(h, np.ascontiguousarray(target, dtype=np.float64),
                 *[np.ascontiguousarray(np.broadcast_to(v, (n,)), dtype=np.float64)
                   for v in (step_cm, strength_per_cm)],
                 out)
    return out


@njit(**JIT)
def _brownian_loop(heading, normals, step_cm, sigma, log_x, ratio, out):
    for j in range(heading.shape[1]):
        tau = tangent_variance_scalar(sigma[j] * sigma[j] * step_cm[j], log_x, ratio)
        out[0, j], out[1, j], out[2, j] = brownian_turn(heading[0, j], heading[1, j], heading[2, j], normals[0, j],
                                                        normals[1, j], normals[2, j], tau)


def random_deviation_step(heading, normals, step_cm, sigma_rad_per_sqrt_cm):
    """Spherical Brownian step over ``step_cm`` (see :func:`brownian_turn`).

    Parameters
    ----------
    heading : ndarray, shape (3, n)
    normals : ndarray, shape (3, n)
        Independent standard normal draws.
    step_cm, sigma_rad_per_sqrt_cm : ndarray, shape (n,)
    """
    h = np.ascontiguousarray(heading, dtype=np.float64)
    n = h.shape[1]
    out = np.empty_like(h)
    _brownian_loop(h, np.ascontiguousarray(normals, dtype=np.float64),
                   *[np.ascontiguousarray(np.broadcast_to(v, (n,)), dtype=np.float64)
                     for v in (step_cm, sigma_rad_per_sqrt_cm)], *tangent_variance_table(), out)
    return out


def heading_from_angles(angle_from_vertical_rad, azimuth_rad):
    """Unit headings, shape (3, n), from the angle to the downward vertical and the azimuth."""
    a, z = np.broadcast_arrays(np.asarray(angle_from_vertical_rad, float), np.asarray(azimuth_rad, float))
    return np.array([heading_from_angles_scalar(u, v) for u, v in zip(a.ravel(), z.ravel())]).reshape(-1, 3).T


def lateral_heading(parent_direction, insertion_angle_rad, azimuth_rad):
    """Headings, shape (3, n), at ``insertion_angle_rad`` from the parent axis (3, n), turned by
    ``azimuth_rad`` around it (azimuth 0 points along the horizontal perpendicular to the parent)."""
    p = np.asarray(parent_direction, dtype=np.float64)
    n = p.shape[1]
    ins, az = (np.broadcast_to(np.asarray(v, float), (n,)) for v in (insertion_angle_rad, azimuth_rad))
    out = [lateral_heading_scalar(p[0, j], p[1, j], p[2, j], ins[j], az[j]) for j in range(n)]
    return np.array(out).reshape(-1, 3).T
