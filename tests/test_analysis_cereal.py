"""The shipped cereal-like architecture gives a crop-like vertical root distribution."""

import numpy as np
import pytest

from rootsim.analysis import layer_profile, root_traits


def test_gale_grigal_beta_is_crop_like(cereal_plant):
    # Jackson et al. 1996 (Oecologia 108:389-411, doi:10.1007/BF00333714) give beta of about 0.961 for crops,
    # with biome values between about 0.91 (tundra) and 0.98 (deserts, temperate coniferous forest); values
    # from memory. A 60-day cereal stand should lie in the crop/grassland part of that range.
    traits = root_traits(cereal_plant)
    assert 0.94 < traits["gale_grigal_beta"] < 0.98
    assert traits["d50_depth_cm"] < traits["d95_depth_cm"] < traits["max_depth_cm"]


def test_profile_of_grown_plant_conserves_length(cereal_plant):
    # Exact clipping: the layers (surface down to the deepest root) hold all root length below the surface;
    # the length above it (if any) comes independently from Liang-Barsky clipping (rootsim.geometry).
    from rootsim.geometry import segment_box_length

    profile = layer_profile(cereal_plant, layer_cm=10)
    p0 = np.column_stack([cereal_plant[f"{a}0"] for a in "xyz"])
    p1 = np.column_stack([cereal_plant[f"{a}1"] for a in "xyz"])
    big = 1e7
    # "Above the surface" is z > 0: roots lying exactly on the surface (z = 0, where tips that meet it slide)
    # are in the top layer, so the reference box starts just above z = 0 (closed boxes would count them).
    above = segment_box_length(p0, p1, np.array([-big, -big, 1e-9]), np.array([big, big, big])).sum()
    total = cereal_plant["length_cm"].sum()
    assert profile["root_length_cm"].sum() == pytest.approx(total - above, rel=1e-9)
    assert np.all(profile["rld_cm_per_cm3"] >= 0)
