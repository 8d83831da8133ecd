"""Virtual field sampling: soil cores, profile walls, minirhizotron tubes and projection counting.

Each sampler is a pure function over the segment columns that returns a
:class:`pandas.DataFrame`: what the field method would see, the RLD it would estimate by the
published conversion, and the true RLD of the same volume by exact clipping.

* :func:`sample_cores` – exact root length per depth increment of vertical cores
  (:mod:`rootsim.sampling.cores`); :func:`core_grid` places cores across a stand.
* :func:`sample_wall` – intersections on a trench face, ``RLD = 2 × intersections / area``
  (:mod:`rootsim.sampling.wall`).
* :func:`sample_tube` – minirhizotron windows, depth-of-field conversion
  (:mod:`rootsim.sampling.minirhizotron`).
* :func:`sample_projection` – line-intersect length of a 2D projection
  (:mod:`rootsim.sampling.projection`).

In a field stand, cores, walls and tubes see the periodic images of the roots (the stand is one
cell of an infinite field, :mod:`rootsim.periodic_stand`; ``periodic=False`` for a bordered
plot). Positions may be given relative to the stand (:mod:`rootsim.sampling.stand_positions`).
Field artefacts live with their method (prepared wall face, tube image with gap and wall growth,
core-break and washing recovery, detection limits), all off by default;
:func:`rootsim.sampling.bias_table.bias_table` reports estimate ÷ stand RLD by depth with spread.
"""

from .core_grid import core_grid, parse_core_grid
from .cores import Core, parse_core, sample_cores
from .minirhizotron import Tube, parse_tube, sample_tube
from .projection import sample_projection
from .wall import Wall, parse_wall, sample_wall

__all__ = [
    "Core", "Tube", "Wall",
    "parse_core", "parse_core_grid", "parse_tube", "parse_wall",
    "core_grid", "sample_cores", "sample_wall", "sample_tube", "sample_projection",
]
