"""Bench stage ``phosphorus``: phosphorus exploration (depletion-zone volume and overlap) of the bench stand
against the voxel RLD stage on the same stand.

The work: :func:`rootsim.capture.phosphorus.explored_volume` at a depletion radius of 0.2 cm (a typical
phosphate depletion zone, a millimetre or two; Barber 1995, *Soil Nutrient Bioavailability*, Wiley; from
memory) on a stated grid of 0.1 cm voxels (radius / 2) aligned with the soil surface: explored soil volume, its
overlap between roots of one plant and between plants, by 10 cm depth layer. Floor: the voxel RLD grid of the
``profile`` stage (:func:`rootsim.analysis.rld_voxel_grid`, exact clipping into 2 cm voxels) timed in the same
run, so the ratio is "P exploration costs this many voxel RLD grids"; the aim is at most 5. Both in CPU time,
medians of three.
"""

from __future__ import annotations

from . import make_entry, timed

NAME = "phosphorus"
ORDER = 32

RADIUS_CM = 0.2
VOXEL_CM = 0.1


def run(system, *, workdir) -> dict[str, dict]:
    """Time :func:`rootsim.capture.phosphorus.explored_volume` against :func:`rootsim.analysis.rld_voxel_grid`."""
    from ..analysis import rld_voxel_grid
    from ..capture.phosphorus import explored_volume
    from .profile import VOXEL_CM as RLD_VOXEL_CM

    n = len(system["x0"])
    explored_volume(system, radius_cm=RADIUS_CM, voxel_cm=RADIUS_CM)  # load the compiled kernel before timing
    seconds, result = timed(explored_volume, system, radius_cm=RADIUS_CM, voxel_cm=VOXEL_CM, repeat=3)
    floor_seconds, _ = timed(rld_voxel_grid, system, voxel_cm=RLD_VOXEL_CM, repeat=3)
    return {NAME: make_entry(
        segments=n, seconds=seconds, floor_seconds=floor_seconds,
        floor=f"the voxel RLD stage: rld_voxel_grid of the same stand ({RLD_VOXEL_CM:g} cm voxels, exact clipping)",
        radius_cm=RADIUS_CM, voxel_cm=VOXEL_CM,
        explored_cm3=result["explored_cm3"],
        overlap_same_plant_cm3=result["overlap_same_plant_cm3"],
        overlap_between_plants_cm3=result["overlap_between_plants_cm3"],
        explored_voxels_per_second=result["explored_cm3"] / VOXEL_CM ** 3 / seconds if seconds > 0 else None,
    )}
