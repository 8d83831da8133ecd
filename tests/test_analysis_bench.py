"""Bench stage ``profile`` runs on a small synthetic stand and reports entries in the common form."""

import pytest

from rootsim.bench import profile
from test_analysis_support import random_walk_system


def test_profile_stage_entries(tmp_path):
    system = random_walk_system(20, 100, seed=4, step_cm=0.7)
    results = profile.run(system, workdir=str(tmp_path))
    assert set(results) == {"profile", "voxel_rld"}
    for entry in results.values():
        assert entry["segments"] == len(system)
        assert entry["seconds"] > 0 and entry["floor_seconds"] > 0 and entry["floor"]
        # Exact clipping conserves root length (all roots lie below the surface and inside the grid).
        assert entry["root_length_cm"] == pytest.approx(system["length_cm"].sum(), rel=1e-9)
