"""``rootsim soil`` refuses lengths that are not finite positive numbers with one line naming the option."""

from __future__ import annotations

from pathlib import Path

import pytest

from rootsim.cli import main

PARAMS = Path(__file__).resolve().parents[1] / "params"


@pytest.mark.parametrize("option", ["--step-cm", "--depth-cm", "--voxel-cm"])
@pytest.mark.parametrize("value", ["inf", "-inf", "nan", "0", "-5"])
def test_soil_lengths_must_be_finite_and_positive(tmp_path, capsys, option, value):
    out = tmp_path / "soil.vti"
    assert main(["soil", str(PARAMS / "pot_nutrient_patch.toml"), f"{option}={value}", "--vti", str(out)]) == 2
    captured = capsys.readouterr()
    assert captured.err.startswith(f"error: {option} ") and "finite" in captured.err
    assert captured.err.count("\n") == 1 and captured.out == "" and not out.exists()
