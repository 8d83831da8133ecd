"""Project naming rule: options and table columns are descriptive words with units, no 1-3 letter
abbreviations (common practice of this project: units such as cm, trade terms such as RLD, format names)."""

from __future__ import annotations

import argparse

import numpy as np

from rootsim.cli import build_parser
from rootsim.study.sensitivity import sensitivity_indices
from rootsim.study.statistics import describe, differences, measure_unit

#: Short words allowed in option names: English words, units, file formats and the trade term RLD.
ALLOWED_SHORT_WORDS = {"as", "by", "of", "no", "per", "out", "dir", "box", "gap", "max", "min", "cm", "cm2", "deg",
                       "csv", "png", "vti", "vtk", "rld"}


def _options(parser, path=""):
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                yield from _options(sub, f"{path} {name}")
        else:
            for option in action.option_strings:
                if option.startswith("--"):
                    yield path.strip(), option


def test_no_command_option_is_an_abbreviation():
    found = {(path, option, word) for path, option in _options(build_parser())
             for word in option[2:].split("-") if len(word) <= 3 and word not in ALLOWED_SHORT_WORDS}
    assert not found
    assert ("sample", "--tube-depth-of-field-cm") in set(_options(build_parser()))


def test_statistics_columns_are_words():
    summary = describe([1.0, 2.0, 4.0])
    assert list(summary) == ["replicates", "mean", "standard_deviation", "ci95_low", "ci95_high"]
    assert summary["replicates"] == 3
    import pandas as pd

    table = pd.DataFrame({"variant": ["a"] * 3 + ["b"] * 3, "x_cm": [1.0, 2.0, 3.0, 2.0, 3.0, 5.0]})
    diff = differences(table, ["x_cm"], reference="a")
    assert {"ci95_low", "ci95_high"} <= set(diff.columns) and not {"ci_low", "ci_high"} & set(diff.columns)
    # units from the name suffixes (project naming convention)
    assert [measure_unit(n) for n in ("total_length_cm", "root_length_per_ground_area_cm_per_cm2", "n_tips",
                                      "convex_hull_volume_cm3", "mean_insertion_angle_deg", "gale_grigal_beta")] \
        == ["cm", "cm cm-2", "count", "cm3", "deg", "dimensionless"]


def test_sensitivity_columns_name_the_interval():
    names, bounds = ["first", "second"], [[0.0, 1.0], [0.0, 1.0]]
    from rootsim.study.sensitivity import sensitivity_design

    points = sensitivity_design(names, bounds, method="morris", samples=4, seed=2)
    table = sensitivity_indices(names, bounds, points, points @ np.array([2.0, 0.0]), method="morris", seed=2)
    assert list(table.columns) == ["factor", "mu_star", "mu_star_ci95", "sigma"]


def test_observed_profiles_use_the_spelled_out_standard_deviation_column(tmp_path):
    import pytest

    from rootsim.errors import RootsimError
    from rootsim.fitting import read_observations

    new = tmp_path / "new.csv"
    new.write_text("depth_top_cm,depth_bottom_cm,rld_cm_per_cm3,rld_standard_deviation_cm_per_cm3\n0,10,1.5,0.3\n")
    assert read_observations(new)["rld_standard_deviation_cm_per_cm3"].tolist() == [0.3]
    old = tmp_path / "old.csv"
    old.write_text("depth_top_cm,depth_bottom_cm,rld_cm_per_cm3,rld_sd_cm_per_cm3\n0,10,1.5,0.3\n")
    with pytest.raises(RootsimError, match="rld_standard_deviation_cm_per_cm3"):
        read_observations(old)
