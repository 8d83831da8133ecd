"""Bench stage ``periodic_sampling``: cores and a tube in the periodic field stand against the same in a bordered plot.

The bench stand is a field stand, so samplers add the periodic images of the roots that reach
past the cell (:mod:`rootsim.periodic_stand`). Floor: the same sampling with ``periodic=False``
(only the table's roots, as before periodic stands), so the ratio is the cost of the images;
the aim is at most 1.5.
"""

from __future__ import annotations

from . import make_entry, timed

NAME = "periodic_sampling"
ORDER = 41


def run(system, *, workdir) -> dict[str, dict]:
    """Time periodic against bordered sampling for the ``cores`` grid and one inclined tube."""
    from ..sampling import Tube, sample_cores, sample_tube
    from .sampling import bench_cores

    cores = bench_cores(system)
    periodic, _ = timed(sample_cores, system, cores=cores, check_container=False, repeat=2)
    bordered, _ = timed(sample_cores, system, cores=cores, check_container=False, periodic=False, repeat=2)
    centre = cores[len(cores) // 2]
    tube = Tube(x_cm=centre.x_cm, y_cm=centre.y_cm, angle_from_vertical_deg=45.0, length_cm=centre.depth_cm,
                outer_diameter_cm=5.6, depth_of_field_cm=0.2, window_cm=5.0)
    tube_periodic, _ = timed(sample_tube, system, tubes=[tube], check_container=False, repeat=2)
    tube_bordered, _ = timed(sample_tube, system, tubes=[tube], check_container=False, periodic=False, repeat=2)
    n = len(system["x0"])
    return {
        "cores_periodic": make_entry(segments=n, seconds=periodic, floor_seconds=bordered, cores=len(cores),
                                     floor="the same cores in a bordered plot (periodic=False)"),
        "tube_periodic": make_entry(segments=n, seconds=tube_periodic, floor_seconds=tube_bordered,
                                    floor="the same tube in a bordered plot (periodic=False)"),
    }
