"""The ``capture`` bench stage runs and reports its entries (no speed is asserted: only ``rootsim bench`` measures
speed)."""

from rootsim.bench import capture, stage_names


def test_capture_stage_entries_on_a_short_season():
    assert "capture" in stage_names()
    results = capture.run_capture_stage(days=4, repeat=1)
    assert set(results) == {"capture_coupled", "capture_same_roots", "capture_cereal_stand"}
    for entry in results.values():
        assert entry["segments"] > 0 and entry["seconds"] > 0 and entry["floor_seconds"] > 0
        assert entry["days"] == 4
    # the uncoupled season grows exactly grow()'s table (tests/test_capture_coupled.py checks the bytes)
    assert results["capture_same_roots"]["segments"] == results["capture_same_roots"]["grow_alone_segments"]
    # the cereal stand's layered soil does not depend on water: coupled, it grows the roots it grows alone
    assert results["capture_cereal_stand"]["segments"] == results["capture_cereal_stand"]["grow_alone_segments"]
