"""The shipped cereal-like file lands in published field ranges (its values are illustrative, not arbitrary)."""

from __future__ import annotations

import numpy as np

from rootsim.fitting import interval_rld


def test_rooting_front_advances_at_a_maize_like_rate(cereal_plant):
    # Maize rooting fronts advance about 2.5-3 cm per day after establishment (common practice, extension
    # sources; values from memory). Front = deepest segment end formed by each day; allow 2.2-3.2 cm/day.
    depth = -np.minimum(cereal_plant["z0"], cereal_plant["z1"])
    born = cereal_plant["birth_day"]
    front = {day: depth[born <= day].max() for day in (15.0, 55.0)}
    rate = (front[55.0] - front[15.0]) / 40.0
    assert 2.2 < rate < 3.2


def test_topsoil_rld_is_in_the_low_single_digits(cereal_plant):
    # Mengel & Barber 1974 (Agron. J. 66:341-344, doi:10.2134/agronj1974.00021962006600030002x; from memory)
    # report 4.1 cm/cm3 at 0-15 cm for field maize after 79 days; after 60 days the shipped stand should be in
    # the low single digits: 1-4.5 cm/cm3 at 0-15 cm over one plant's ground area (75 x 20 cm).
    rld = interval_rld(cereal_plant, np.array([0.0]), np.array([15.0]), area_cm2=75.0 * 20.0)[0]
    assert 1.0 < rld < 4.5
