"""A tiny study (taproot variants, 10 days) shared by the study tests."""

from __future__ import annotations

from pathlib import Path

PARAMS = Path(__file__).resolve().parents[1] / "params"

TINY_STUDY = f'''
name = "tiny_trial"
base = "{PARAMS / 'taproot_laterals.toml'}"
master_seed = 11
replicates = 2
[run]
duration_days = 10
[design]
kind = "factorial"
[[factors]]
name = "angle"
key = "root_classes.lateral_first.insertion_angle_deg"
levels = [45.0, 80.0]
[[factors]]
name = "spacing"
key = "root_classes.taproot.interbranch_distance_cm"
levels = [0.5, 1.5]
[measure]
layer_cm = 5.0
max_depth_cm = 40.0
days = [6.0]
length_below_cm = [10.0]
cores = [{{ x_cm = 0.0, y_cm = 0.0, diameter_cm = 5.0, depth_cm = 30.0, increment_cm = 10.0 }}]
'''


def write_study(folder: Path, text: str = TINY_STUDY, name: str = "study.toml") -> Path:
    path = folder / name
    path.write_text(text)
    return path
