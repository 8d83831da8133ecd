"""Reference evapotranspiration from air temperature: Hargreaves & Samani (1985) as given in FAO-56.

Used when a weather table has neither ``potential_transpiration_mm`` nor ``reference_evapotranspiration_mm`` but has
daily minimum and maximum air temperature. References:

- Allen, R.G., Pereira, L.S., Raes, D., Smith, M. (1998). Crop evapotranspiration: guidelines for computing crop
  water requirements. FAO Irrigation and Drainage Paper 56, Rome (FAO-56). Eqs. 21-25 (extraterrestrial
  radiation), eq. 52 (Hargreaves), eq. 20 (MJ m-2 to mm of water: x 0.408).
- Hargreaves, G.H., Samani, Z.A. (1985). Reference crop evapotranspiration from temperature. Applied Engineering
  in Agriculture 1(2), 96-99. https://doi.org/10.13031/2013.26773
"""

from __future__ import annotations

import numpy as np

__all__ = ["extraterrestrial_radiation_mj_per_m2", "hargreaves_reference_evapotranspiration_mm",
           "SOLAR_CONSTANT_MJ_PER_M2_PER_MIN", "MJ_PER_M2_TO_MM_WATER"]

#: Solar constant, MJ m-2 min-1 (FAO-56, eq. 21).
SOLAR_CONSTANT_MJ_PER_M2_PER_MIN = 0.0820
#: Radiation to equivalent evaporation, mm per MJ m-2 (FAO-56, eq. 20: 1 / latent heat 2.45 MJ kg-1).
MJ_PER_M2_TO_MM_WATER = 0.408


def extraterrestrial_radiation_mj_per_m2(latitude_deg, day_of_year) -> np.ndarray:
    """Daily extraterrestrial radiation, MJ m-2 day-1 (FAO-56 eqs. 21-25; Allen et al. 1998).

    Parameters
    ----------
    latitude_deg : float or array_like
        Latitude in degrees, north positive, south negative (-90..90).
    day_of_year : int or array_like of int, shape (n,)
        Calendar day of the year, 1 (1 January) .. 365 or 366.

    Returns
    -------
    ndarray of float64, shape broadcast of the inputs
        Ra = 24 * 60 / pi * Gsc * dr * (ws sin(phi) sin(delta) + cos(phi) cos(delta) sin(ws)), with the inverse
        relative Earth-Sun distance dr (eq. 23), solar declination delta (eq. 24) and sunset hour angle ws (eq. 25);
        ws is clipped to 0..pi for polar night and midnight sun.
    """
    phi = np.radians(np.asarray(latitude_deg, dtype=np.float64))
    day = np.asarray(day_of_year, dtype=np.float64)
    relative_distance = 1.0 + 0.033 * np.cos(2.0 * np.pi / 365.0 * day)            # eq. 23
    declination = 0.409 * np.sin(2.0 * np.pi / 365.0 * day - 1.39)                 # eq. 24
    sunset_angle = np.arccos(np.clip(-np.tan(phi) * np.tan(declination), -1.0, 1.0))  # eq. 25
    return (24.0 * 60.0 / np.pi * SOLAR_CONSTANT_MJ_PER_M2_PER_MIN * relative_distance
            * (sunset_angle * np.sin(phi) * np.sin(declination)
               + np.cos(phi) * np.cos(declination) * np.sin(sunset_angle)))          # eq. 21


def hargreaves_reference_evapotranspiration_mm(min_air_temperature_c, max_air_temperature_c, *, latitude_deg,
                                               day_of_year) -> np.ndarray:
    """Daily reference evapotranspiration by Hargreaves & Samani (1985), mm day-1 (FAO-56 eq. 52).

    ET0 = 0.0023 (Tmean + 17.8) sqrt(Tmax - Tmin) * 0.408 Ra, with Tmean = (Tmax + Tmin) / 2 (FAO-56 eq. 9) and Ra
    from :func:`extraterrestrial_radiation_mj_per_m2`. A day with Tmax < Tmin or a negative result gives 0.

    Parameters
    ----------
    min_air_temperature_c, max_air_temperature_c : array_like, shape (n,)
        Daily minimum and maximum air temperature, deg C.
    latitude_deg : float, keyword-only
        Latitude, degrees (south negative).
    day_of_year : array_like of int, shape (n,), keyword-only
        Calendar day of the year of each row (1..366).

    Returns
    -------
    ndarray of float64, shape (n,)
        ET0, mm day-1.
    """
    low = np.asarray(min_air_temperature_c, dtype=np.float64)
    high = np.asarray(max_air_temperature_c, dtype=np.float64)
    mean = 0.5 * (low + high)
    radiation_mm = MJ_PER_M2_TO_MM_WATER * extraterrestrial_radiation_mj_per_m2(latitude_deg, day_of_year)
    reference = 0.0023 * (mean + 17.8) * np.sqrt(np.clip(high - low, 0.0, None)) * radiation_mm
    return np.clip(reference, 0.0, None)
