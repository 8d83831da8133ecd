"""Soil evaporation: the two-stage method of FAO-56 (Allen, Pereira, Raes & Smith 1998, ch. 7).

Allen R.G., Pereira L.S., Raes D., Smith M. (1998) *Crop evapotranspiration*, FAO Irrigation and Drainage
Paper 56, Rome, chapter 7 ("dual crop coefficient"). Day by day, with the cumulative depletion ``D_e`` (mm) of
the evaporating surface layer at the end of the previous day:

* evaporation reduction (eq. 74): ``K_r = 1`` while ``D_e <= REW`` (stage 1, energy limited), else
  ``K_r = (TEW - D_e) / (TEW - REW)`` (stage 2, falling rate);
* upper limit of the crop coefficient (eq. 72, its lower bound): ``K_c,max >= K_cb + 0.05``;
* evaporation coefficient (eq. 71): ``K_e = min(K_r (K_c,max - K_cb), f_ew K_c,max)``, with ``f_ew = 1 - f_c``
  the fraction of soil not covered by the crop (eq. 75 with the whole surface wetted, ``f_w = 1``), kept in
  ``[0.01, 1]`` as FAO-56 does;
* evaporation demand ``E = K_e ET_o``;
* depletion (eq. 77 without transpiration from the surface layer and without deep percolation from it):
  ``D_e <- min(max(D_e - infiltration + E / f_ew, 0), TEW)``.

``K_cb`` is the soil-water file's crop coefficient (the one that scales reference ET to transpiration). The
demand is taken from the cells of the top ``evaporating_layer_cm`` of the Richards column (as a sink spread by
thickness, limited like root uptake at the wilting water content); the water actually removed updates ``D_e``.
With a constant ``ET_o`` stage 2 is a geometric decline: ``TEW - D_e`` shrinks by the factor
``1 - K_max ET_o / (f_ew (TEW - REW))`` per day (checked in the tests).

Default values are illustrative (REW and TEW of a loam with a 10 cm evaporating layer, in the ranges of FAO-56
Table 19; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import CaptureError

__all__ = ["SoilEvaporationParameters", "evaporation_reduction", "evaporation_coefficient", "depletion_after_day",
           "evaporation_weights", "exposed_fraction"]

#: FAO-56 keeps the exposed soil fraction within these bounds.
_MIN_EXPOSED, _MAX_EXPOSED = 0.01, 1.0


@dataclass(frozen=True)
class SoilEvaporationParameters:
    """``[evaporation]`` of the soil-water file (illustrative defaults; see the module docstring)."""

    readily_evaporable_water_mm: float = 9.0
    total_evaporable_water_mm: float = 22.0
    evaporating_layer_cm: float = 10.0
    crop_cover_fraction: float = 0.3
    maximum_crop_coefficient: float = 1.2
    initial_depletion_mm: float = 0.0

    def check(self, where: str = "evaporation") -> "SoilEvaporationParameters":
        """One-line :class:`CaptureError` unless 0 <= REW < TEW, 0 <= D_e0 <= TEW, 0 <= f_c < 1, layer > 0."""
        if not (0.0 <= self.readily_evaporable_water_mm < self.total_evaporable_water_mm <= 1000.0):
            raise CaptureError(f"{where}: readily_evaporable_water_mm {self.readily_evaporable_water_mm:g} and "
                               f"total_evaporable_water_mm {self.total_evaporable_water_mm:g} (allowed: "
                               "0 <= readily < total <= 1000, mm)")
        if not 0.0 <= self.initial_depletion_mm <= self.total_evaporable_water_mm:
            raise CaptureError(f"{where}.initial_depletion_mm: {self.initial_depletion_mm:g} (allowed: 0 to "
                               "total_evaporable_water_mm)")
        if not 0.0 <= self.crop_cover_fraction < 1.0:
            raise CaptureError(f"{where}.crop_cover_fraction: {self.crop_cover_fraction:g} (allowed: 0 <= f < 1)")
        if not 0.0 < self.evaporating_layer_cm <= 100.0:
            raise CaptureError(f"{where}.evaporating_layer_cm: {self.evaporating_layer_cm:g} (allowed: > 0 and "
                               "<= 100 cm)")
        if not 0.0 < self.maximum_crop_coefficient <= 3.0:
            raise CaptureError(f"{where}.maximum_crop_coefficient: {self.maximum_crop_coefficient:g} (allowed: > 0 "
                               "and <= 3)")
        return self


def evaporation_reduction(depletion_mm, *, readily_mm: float, total_mm: float):
    """FAO-56 eq. 74: ``K_r`` for the depletion at the end of the previous day (array or scalar)."""
    depletion = np.asarray(depletion_mm, dtype=np.float64)
    falling = (total_mm - depletion) / (total_mm - readily_mm)
    return np.clip(np.where(depletion <= readily_mm, 1.0, falling), 0.0, 1.0)


def evaporation_coefficient(reduction, *, basal_crop_coefficient: float, maximum_crop_coefficient: float,
                            cover_fraction: float):
    """FAO-56 eq. 71 with eq. 72's lower bound and ``f_ew = 1 - f_c``: ``K_e``."""
    kc_max = max(float(maximum_crop_coefficient), float(basal_crop_coefficient) + 0.05)
    exposed = min(max(1.0 - float(cover_fraction), _MIN_EXPOSED), _MAX_EXPOSED)
    return np.minimum(np.asarray(reduction, dtype=np.float64) * (kc_max - basal_crop_coefficient),
                      exposed * kc_max)


def exposed_fraction(cover_fraction: float) -> float:
    """``f_ew = 1 - f_c`` within FAO-56's bounds [0.01, 1]."""
    return min(max(1.0 - float(cover_fraction), _MIN_EXPOSED), _MAX_EXPOSED)


def depletion_after_day(depletion_mm: float, *, infiltration_mm: float, evaporation_mm: float,
                        cover_fraction: float, total_mm: float) -> float:
    """FAO-56 eq. 77 (no surface-layer transpiration or percolation term): the depletion at the end of a day."""
    value = depletion_mm - infiltration_mm + evaporation_mm / exposed_fraction(cover_fraction)
    return float(min(max(value, 0.0), total_mm))


def evaporation_weights(*, cell_cm: float, n_cells: int, layer_cm: float) -> np.ndarray:
    """Share of the evaporation taken from each cell: its overlap with ``[0, layer_cm]`` / ``layer_cm``;
    shape (n_cells,), sums to 1 when the column is at least ``layer_cm`` deep."""
    top = np.arange(n_cells) * cell_cm
    overlap = np.clip(np.minimum(top + cell_cm, layer_cm) - top, 0.0, None)
    total = overlap.sum()
    return overlap / total if total > 0 else overlap
