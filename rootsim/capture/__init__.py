"""Water and nutrient capture over a season under a grown root system.

Soil water by Richards' equation with van Genuchten-Mualem horizons (:mod:`.richards`, :mod:`.hydraulics`),
root water uptake by Feddes et al. (1978) from the root length per cell and day (:mod:`.uptake`), nitrate
transport and Michaelis-Menten uptake (:mod:`.nitrate`), phosphorus depletion zones (:mod:`.phosphorus`), the
season loop and traits (:mod:`.season`), soil evaporation by FAO-56 (:mod:`.evaporation`), the season coupled
both ways with growth (:mod:`.coupled`) and the soil-water file (:mod:`.soil_file`).
"""

from .coupled import run_coupled_season
from .errors import CaptureError
from .phosphorus import explored_volume
from .season import run_water_season
from .soil_file import read_soil_water_file, soil_water_from_mapping

__all__ = ["CaptureError", "explored_volume", "read_soil_water_file", "run_coupled_season", "run_water_season",
           "soil_water_from_mapping"]
