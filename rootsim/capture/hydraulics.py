"""Soil hydraulic functions: van Genuchten-Mualem (per cell) and the exponential Gardner soil.

van Genuchten (1980), doi:10.2136/sssaj1980.03615995004400050002x, with Mualem's (1976) pore-size model
(doi:10.1029/WR012i003p00513) and m = 1 - 1/n:

* effective saturation  Se(h) = [1 + (alpha |h|)^n]^(-m)  for h < 0, 1 for h >= 0
* water content         theta(h) = theta_r + (theta_s - theta_r) Se
* conductivity          K(Se) = K_s Se^l [1 - (1 - Se^(1/m))^m]^2, pore connectivity l = 0.5 (Mualem 1976)
* capacity              C(h) = d theta / d h

Pressure head h in cm of water (negative when unsaturated), conductivity in cm/day. Texture-class defaults of
Carsel & Parrish (1988), doi:10.1029/WR024i005p00755 (class means; values from memory) may be used by name.

:class:`GardnerSoil` is the exponential soil of Gardner (1958), doi:10.1097/00010694-195804000-00006, with
theta linear in K (as used by Srivastava & Yeh 1991, doi:10.1029/90WR02772); for it Richards' equation becomes
linear in K, which gives analytic solutions to check the solver against.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import CaptureError

__all__ = ["TEXTURE_CLASSES", "VanGenuchtenMualem", "GardnerSoil", "check_van_genuchten"]

#: Carsel & Parrish (1988) class means (from memory): residual and saturated water content (cm³/cm³),
#: alpha (1/cm), n (-), saturated conductivity (cm/day).
TEXTURE_CLASSES: dict[str, dict[str, float]] = {
    "sand": dict(residual=0.045, saturated=0.43, alpha=0.145, n=2.68, ks=712.8),
    "loamy_sand": dict(residual=0.057, saturated=0.41, alpha=0.124, n=2.28, ks=350.2),
    "sandy_loam": dict(residual=0.065, saturated=0.41, alpha=0.075, n=1.89, ks=106.1),
    "loam": dict(residual=0.078, saturated=0.43, alpha=0.036, n=1.56, ks=24.96),
    "silt": dict(residual=0.034, saturated=0.46, alpha=0.016, n=1.37, ks=6.0),
    "silt_loam": dict(residual=0.067, saturated=0.45, alpha=0.020, n=1.41, ks=10.8),
    "sandy_clay_loam": dict(residual=0.100, saturated=0.39, alpha=0.059, n=1.48, ks=31.44),
    "clay_loam": dict(residual=0.095, saturated=0.41, alpha=0.019, n=1.31, ks=6.24),
    "silty_clay_loam": dict(residual=0.089, saturated=0.43, alpha=0.010, n=1.23, ks=1.68),
    "sandy_clay": dict(residual=0.100, saturated=0.38, alpha=0.027, n=1.23, ks=2.88),
    "silty_clay": dict(residual=0.070, saturated=0.36, alpha=0.005, n=1.09, ks=0.48),
    "clay": dict(residual=0.068, saturated=0.38, alpha=0.008, n=1.09, ks=4.8),
}


def check_van_genuchten(*, residual: float, saturated: float, alpha: float, n: float, ks: float,
                        pore_connectivity: float = 0.5, where: str = "soil") -> None:
    """Raise a one-line :class:`CaptureError` if van Genuchten-Mualem parameters are out of range.

    Allowed: 0 <= theta_r < theta_s <= 0.9 (cm³/cm³), 0 < alpha <= 10 /cm, 1 < n <= 10, 0 < K_s <= 1e5 cm/day,
    -10 <= l <= 10.
    """
    checks = [
        ("residual_water_content", residual, 0.0 <= residual < 0.9, "0 <= value < saturated_water_content"),
        ("saturated_water_content", saturated, residual < saturated <= 0.9,
         "residual_water_content < value <= 0.9"),
        ("van_genuchten_alpha_per_cm", alpha, 0.0 < alpha <= 10.0, "0 < value <= 10 (1/cm)"),
        ("van_genuchten_n", n, 1.0 < n <= 10.0, "1 < value <= 10"),
        ("saturated_conductivity_cm_per_day", ks, 0.0 < ks <= 1e5, "0 < value <= 100000 (cm/day)"),
        ("pore_connectivity", pore_connectivity, -10.0 <= pore_connectivity <= 10.0, "-10 <= value <= 10"),
    ]
    for name, value, ok, allowed in checks:
        if not (np.isfinite(value) and ok):
            raise CaptureError(f"{where}.{name}: {value!r} is out of range (allowed: {allowed})")


@dataclass(frozen=True)
class VanGenuchtenMualem:
    """van Genuchten-Mualem properties of each cell of a soil column (arrays of shape (n_cells,)).

    With ``air_entry`` h_s < 0 the retention curve is that of Vogel, van Genuchten & Cislerova (2001),
    doi:10.1016/S0309-1708(00)00037-3: the curve is scaled to a fictitious theta_m slightly above theta_s so
    that theta = theta_s at h_s, which removes the unphysical drop of K just below saturation for n < 2 and keeps
    the solver stable; h_s = 0 is the original model.

    Attributes
    ----------
    residual, saturated : ndarray
        Residual and saturated volumetric water content, cm³/cm³.
    alpha : ndarray
        Inverse air-entry scale, 1/cm.
    n : ndarray
        Shape parameter (> 1); m = 1 - 1/n.
    ks : ndarray
        Saturated conductivity, cm/day.
    pore_connectivity : ndarray
        Mualem's l (0.5 in Mualem 1976).
    air_entry : ndarray
        Air-entry head h_s <= 0, cm (Vogel et al. 2001 suggest -2 cm); default 0.
    """

    residual: np.ndarray
    saturated: np.ndarray
    alpha: np.ndarray
    n: np.ndarray
    ks: np.ndarray
    pore_connectivity: np.ndarray
    air_entry: np.ndarray | float = 0.0

    @classmethod
    def uniform(cls, n_cells: int, *, residual, saturated, alpha, n, ks, pore_connectivity=0.5, air_entry=0.0):
        """Same parameters in every cell (validated)."""
        check_van_genuchten(residual=residual, saturated=saturated, alpha=alpha, n=n, ks=ks,
                            pore_connectivity=pore_connectivity)
        full = lambda v: np.full(int(n_cells), float(v))  # noqa: E731
        return cls(full(residual), full(saturated), full(alpha), full(n), full(ks), full(pore_connectivity),
                   full(air_entry))

    @classmethod
    def texture(cls, name: str, n_cells: int, *, air_entry: float = 0.0) -> "VanGenuchtenMualem":
        """Carsel & Parrish (1988) class means for texture ``name`` (e.g. ``"silt_loam"``) in every cell."""
        if name not in TEXTURE_CLASSES:
            raise CaptureError(f"texture {name!r} is unknown (allowed: {', '.join(TEXTURE_CLASSES)})")
        return cls.uniform(n_cells, **TEXTURE_CLASSES[name], air_entry=air_entry)

    @property
    def m(self) -> np.ndarray:
        """m = 1 - 1/n."""
        return 1.0 - 1.0 / self.n

    def _scaled(self, head_cm):
        """Se* of the (scaled) curve at min(h, h_s), and theta_m - theta_r."""
        h = np.minimum(np.asarray(head_cm, dtype=np.float64), self.air_entry)
        star = (1.0 + (self.alpha * -h) ** self.n) ** -self.m
        at_entry = (1.0 + (self.alpha * -np.asarray(self.air_entry, dtype=np.float64)) ** self.n) ** -self.m
        return star, at_entry, (self.saturated - self.residual) / at_entry

    def effective_saturation(self, head_cm: np.ndarray) -> np.ndarray:
        """Se(h) = (theta - theta_r) / (theta_s - theta_r), shape (n_cells,), 1 for h >= h_s."""
        star, at_entry, _ = self._scaled(head_cm)
        return star / at_entry

    def water_content(self, head_cm: np.ndarray) -> np.ndarray:
        """Volumetric water content theta(h), cm³/cm³."""
        return self.residual + (self.saturated - self.residual) * self.effective_saturation(head_cm)

    def head_from_water_content(self, theta: np.ndarray) -> np.ndarray:
        """Inverse of :meth:`water_content` for theta_r < theta <= theta_s (h_s at saturation)."""
        _, at_entry, _ = self._scaled(0.0)
        se = np.clip((np.asarray(theta, dtype=np.float64) - self.residual) / (self.saturated - self.residual),
                     1e-12, 1.0)
        star = se * at_entry
        return -((star ** (-1.0 / self.m) - 1.0) ** (1.0 / self.n)) / self.alpha

    def conductivity(self, head_cm: np.ndarray) -> np.ndarray:
        """Unsaturated conductivity K(h), cm/day (Mualem 1976 with m = 1 - 1/n; Vogel et al. 2001 scaling)."""
        star, at_entry, _ = self._scaled(head_cm)
        m = self.m
        inner = (1.0 - (1.0 - star ** (1.0 / m)) ** m) / (1.0 - (1.0 - at_entry ** (1.0 / m)) ** m)
        return self.ks * (star / at_entry) ** self.pore_connectivity * inner * inner

    def capacity(self, head_cm: np.ndarray) -> np.ndarray:
        """Specific moisture capacity C(h) = d theta / d h, 1/cm (0 for h >= h_s)."""
        h = np.asarray(head_cm, dtype=np.float64)
        _, _, span = self._scaled(h)
        suction = np.maximum(-h, 0.0)
        x = (self.alpha * suction) ** self.n
        dstar = self.m * self.n * self.alpha * (self.alpha * suction) ** (self.n - 1.0) * (1.0 + x) ** (-self.m - 1.0)
        return np.where(h < self.air_entry, span * dstar, 0.0)


@dataclass(frozen=True)
class GardnerSoil:
    """Exponential soil: K = K_s exp(alpha h), theta = theta_r + (theta_s - theta_r) exp(alpha h), h <= 0.

    Gardner (1958), doi:10.1097/00010694-195804000-00006; theta linear in K as in Srivastava & Yeh (1991),
    doi:10.1029/90WR02772. Arrays of shape (n_cells,) or scalars.
    """

    residual: np.ndarray
    saturated: np.ndarray
    alpha: np.ndarray
    ks: np.ndarray

    def water_content(self, head_cm):
        """theta(h), cm³/cm³."""
        return self.residual + (self.saturated - self.residual) * np.exp(self.alpha * np.minimum(head_cm, 0.0))

    def conductivity(self, head_cm):
        """K(h), cm/day."""
        return self.ks * np.exp(self.alpha * np.minimum(head_cm, 0.0))

    def capacity(self, head_cm):
        """d theta / d h, 1/cm."""
        h = np.asarray(head_cm, dtype=np.float64)
        return np.where(h < 0.0, (self.saturated - self.residual) * self.alpha * np.exp(self.alpha * np.minimum(h, 0.0)),
                        0.0)
