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
"""

from __future__ import annotations

import functools

import numpy as np

__all__ = ["combined_sine_law", "vertical_sine_law_step", "toward_direction_step", "random_deviation_step",
           "heading_from_angles"]


def _tan_half_angle(sin_a, cos_a):
    """tan(a/2) from sin a and cos a, well conditioned for every a: sin/(1 + cos) where cos >= 0, else
    (1 - cos)/sin; capped at ±1e150 at a = ±π (the unstable equilibrium of a sine law stays put, and its
    square stays finite)."""
    upper = cos_a >= 0
    num = np.where(upper, sin_a, 1.0 - cos_a)
    den = np.where(upper, 1.0 + cos_a, sin_a)
    tiny = np.abs(den) < 1e-150
    den = np.where(tiny, np.where(np.signbit(den), -1e-150, 1e-150), den)
    return np.clip(num / den, -1e150, 1e150)


def combined_sine_law(gravitropism_per_cm, plagiotropism_per_cm, preferred_angle_rad):
    """Strength A (1/cm) and equilibrium angle φ (rad) of the combined vertical-plane sine law.

    Parameters
    ----------
    gravitropism_per_cm, plagiotropism_per_cm, preferred_angle_rad : array_like, shape (n,)

    Returns
    -------
    strength_per_cm, cos_phi, sin_phi : ndarray, shape (n,)
    """
    a = np.asarray(gravitropism_per_cm, dtype=np.float64)
    b = np.asarray(plagiotropism_per_cm, dtype=np.float64)
    c = a + b * np.cos(preferred_angle_rad)
    s = b * np.sin(preferred_angle_rad)
    strength = np.hypot(c, s)
    safe = np.where(strength > 0, strength, 1.0)
    cos_phi = np.where(strength > 0, c / safe, 1.0)
    sin_phi = np.where(strength > 0, s / safe, 0.0)
    return strength, cos_phi, sin_phi


def vertical_sine_law_step(heading, step_cm, strength_per_cm, cos_phi, sin_phi):
    """Exact step of dθ/ds = -A sin(θ - φ) for the angle θ from the downward vertical; azimuth kept.

    Parameters
    ----------
    heading : ndarray, shape (3, n)
        Unit headings (modified copy returned).
    step_cm : ndarray, shape (n,)
        Arc length of the step.
    strength_per_cm, cos_phi, sin_phi : ndarray, shape (n,)
        From :func:`combined_sine_law`.

    Returns
    -------
    ndarray, shape (3, n)
    """
    hx, hy, hz = heading
    cos_t = np.clip(-hz, -1.0, 1.0)
    horiz = np.hypot(hx, hy)
    sin_t = horiz
    # ψ = θ - φ, solved in the half-angle form tan(ψ/2) -> tan(ψ/2) exp(-A s). tan(atan2/2) stays finite
    # at the unstable equilibrium ψ = ±π (a root pointing straight up keeps pointing up until turned).
    cos_p = cos_t * cos_phi + sin_t * sin_phi
    sin_p = sin_t * cos_phi - cos_t * sin_phi
    half = _tan_half_angle(sin_p, cos_p) * np.exp(-strength_per_cm * step_cm)
    h2 = half * half
    cos_p = (1.0 - h2) / (1.0 + h2)
    sin_p = 2.0 * half / (1.0 + h2)
    cos_new = cos_p * cos_phi - sin_p * sin_phi
    sin_new = sin_p * cos_phi + cos_p * sin_phi
    sin_new = np.maximum(sin_new, 0.0)
    has_azimuth = horiz > 1e-12
    scale = np.where(has_azimuth, sin_new / np.where(has_azimuth, horiz, 1.0), 0.0)
    out = np.empty_like(heading)
    out[0] = np.where(has_azimuth, hx * scale, sin_new)  # a vertical root bending away leans toward +x
    out[1] = hy * scale
    out[2] = -cos_new
    return out


def toward_direction_step(heading, target, step_cm, strength_per_cm):
    """Exact sine-law step rotating ``heading`` toward ``target`` in their common plane.

    The angle β between them obeys dβ/ds = -k sin β: tan(β/2) -> tan(β/2) exp(-k s).

    Parameters
    ----------
    heading, target : ndarray, shape (3, n)
        Unit vectors.
    step_cm, strength_per_cm : ndarray, shape (n,)
    """
    cos_b = np.clip(np.einsum("ij,ij->j", heading, target), -1.0, 1.0)
    perp = heading - cos_b * target
    sin_b = np.sqrt(np.einsum("ij,ij->j", perp, perp))
    half = _tan_half_angle(sin_b, cos_b) * np.exp(-strength_per_cm * step_cm)
    h2 = half * half
    cos_n = (1.0 - h2) / (1.0 + h2)
    sin_n = 2.0 * half / (1.0 + h2)
    ok = sin_b > 1e-12
    unit_perp = perp / np.where(ok, sin_b, 1.0)
    out = cos_n * target + sin_n * unit_perp
    return np.where(ok, out, heading)


@functools.lru_cache(maxsize=1)
def _tangent_variance_table():
    """Per-axis variance τ of the tangent Gaussian whose exponential-map step has the mean cosine of
    spherical Brownian motion over the same arc: E[cos |v|] = exp(-x), x = σ² Δs.

    For a 2-D Gaussian of per-axis variance τ, |v| is Rayleigh and E[cos |v|] = 1 - sqrt(2τ) F(sqrt(τ/2))
    with F Dawson's integral (term-by-term from the series 1 - τ + τ²/3 - τ³/15 + ..., whose coefficients
    are 1/(2n-1)!!). Inverting it gives τ = x - x²/6 + O(x³); tabulated as τ/x against x.
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



def tangent_variance(brownian_variance: np.ndarray) -> np.ndarray:
    """Per-axis variance of the tangent Gaussian for a spherical Brownian step of per-axis variance x = σ² Δs.

    Parameters
    ----------
    brownian_variance : ndarray, shape (n,)
        σ² Δs (rad²).

    Returns
    -------
    ndarray, shape (n,)
        τ with E[cos |v|] = exp(-σ² Δs) for v ~ N(0, τ I₂) (see :func:`_tangent_variance_table`).
    """
    x = np.asarray(brownian_variance, dtype=np.float64)
    # Series inversion of 1 - τ + τ²/3 - τ³/15 = exp(-x): τ = x - x²/6 - x³/90 + O(x⁴), used below x = 0.05
    # (relative error under 1e-6); the table (interpolated in log x) above.
    out = x * (1.0 - x * (1.0 / 6.0 + x / 90.0))
    big = np.flatnonzero(x >= 0.05)
    if big.size:
        log_x, ratio = _tangent_variance_table()
        out[big] = x[big] * np.interp(np.log(x[big]), log_x, ratio, right=ratio[-1])
    return out


def random_deviation_step(heading, normals, step_cm, sigma_rad_per_sqrt_cm):
    """Spherical Brownian step over ``step_cm``: rotate by a tangent Gaussian (exponential map).

    The tangent Gaussian's per-axis variance is :func:`tangent_variance` of σ² Δs, so the mean cosine
    between the headings before and after is exp(-σ² Δs) for any step, as for spherical Brownian motion
    with per-axis angular variance σ² per cm (generator (σ²/2) Δ_S). Consecutive steps are independent
    isotropic turns, so headings k steps apart have mean cosine exp(-σ² Σ Δs) as well.

    Parameters
    ----------
    heading : ndarray, shape (3, n)
    normals : ndarray, shape (3, n)
        Independent standard normal draws.
    step_cm, sigma_rad_per_sqrt_cm : ndarray, shape (n,)
    """
    along = np.einsum("ij,ij->j", normals, heading)
    scale = np.sqrt(tangent_variance(sigma_rad_per_sqrt_cm * sigma_rad_per_sqrt_cm * step_cm))
    tangent = (normals - along * heading) * scale
    angle = np.sqrt(np.einsum("ij,ij->j", tangent, tangent))
    ok = angle > 1e-15
    sinc = np.where(ok, np.sin(angle) / np.where(ok, angle, 1.0), 1.0)
    out = np.cos(angle) * heading + sinc * tangent
    out /= np.sqrt(np.einsum("ij,ij->j", out, out))
    return out


def heading_from_angles(angle_from_vertical_rad, azimuth_rad):
    """Unit headings, shape (3, n), from the angle to the downward vertical and the azimuth."""
    s = np.sin(angle_from_vertical_rad)
    return np.stack([s * np.cos(azimuth_rad), s * np.sin(azimuth_rad), -np.cos(angle_from_vertical_rad)])


def lateral_heading(parent_direction, insertion_angle_rad, azimuth_rad):
    """Headings, shape (3, n), at ``insertion_angle_rad`` from the parent axis, turned by ``azimuth_rad``
    around it (azimuth 0 points along the horizontal perpendicular to the parent)."""
    p = parent_direction
    up = np.zeros_like(p)
    up[2] = 1.0
    e1 = np.cross(p, up, axis=0)
    norm = np.sqrt(np.einsum("ij,ij->j", e1, e1))
    vertical = norm < 1e-9
    e1[:, vertical] = np.array([[1.0], [0.0], [0.0]])
    norm = np.where(vertical, 1.0, norm)
    e1 /= norm
    e2 = np.cross(p, e1, axis=0)
    radial = np.cos(azimuth_rad) * e1 + np.sin(azimuth_rad) * e2
    return np.cos(insertion_angle_rad) * p + np.sin(insertion_angle_rad) * radial
