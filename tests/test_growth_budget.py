"""The segment budget bounds every store of a run (segments, roots, pending branch points) and so its memory.

A spec whose branch points pile up (the shortest interbranch distance, an apical zone that is never
passed) used to fill memory while its segments stayed under the budget; it must stop with a one-line
budget error naming the store, and a run's peak memory must stay within the stated bound per budget
segment (measured in a fresh process: the kernel's resident high-water mark, restarted after warm-up through
``/proc/self/clear_refs``, else ``resource.getrusage``; common practice for peak memory).
"""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap

import pytest

import rootsim
from rootsim.cli import main
from rootsim.errors import SegmentBudgetError
from rootsim.growth.engine import MEMORY_BYTES_PER_BUDGET_SEGMENT

from growth_specs import make_spec, root_class

#: Branch points every 0.01 cm (the smallest allowed) that wait for a 1000 cm apical zone: 100 per cm grown.
PILING = {
    "axis": root_class(elongation_rate_cm_per_day=10.0, max_length_cm=5000.0, interbranch_distance_cm=0.01,
                       apical_zone_cm=1000.0, basal_zone_cm=0.0, branches=[{"root_class": "lateral"}]),
    "lateral": root_class(),
}
PILING_EMERGENCE = [{"root_class": "axis", "roots_per_event": 20}]


def _piling_spec(days=30.0):
    return make_spec(PILING, emergence=PILING_EMERGENCE, days=days)


def test_piling_branch_points_stop_at_the_budget_with_a_message_naming_the_store():
    with pytest.raises(SegmentBudgetError) as info:
        rootsim.grow(_piling_spec(), max_segments=20_000, progress=False)
    message = str(info.value)
    assert message.startswith("segment budget of 20,000 exceeded by pending branch points")
    assert "a plant held 20,000 pending branch points on day" in message and "\n" not in message
    assert info.value.store == "pending branch points"
    # 20 axes grow 5 cm per half-day step and leave a branch point every 0.01 cm from their base: 20 x 501 =
    # 10,020 in the first step, 20,000 passed during the second, which starts on day 0.5 (counting argument).
    assert info.value.day == pytest.approx(0.5)


def test_too_many_roots_for_the_budget_stop_with_a_message_naming_roots():
    spec = make_spec({"axis": root_class()}, emergence=[{"root_class": "axis", "roots_per_event": 5000}], days=2.0)
    from rootsim.errors import SpecError
    from rootsim.growth import grow as grow_in_engine

    # the engine's own bound on its root store (the spec is changed without validation, as the check below
    # would refuse it first) ...
    unchecked = spec.model_copy(update={"run": spec.run.model_copy(update={"max_segments": 1000})})
    with pytest.raises(SegmentBudgetError, match=r"^segment budget of 1,000 exceeded by roots: a plant held 1,000 roots"):
        grow_in_engine(unchecked, progress=False)
    # ... which the spec check (rootsim.grow, rootsim check) reaches first, naming the emergence that overflows
    with pytest.raises(SpecError, match=r"emergence: 5,000 roots per plant"):
        rootsim.grow(spec, max_segments=1000, progress=False)


def test_cli_reports_the_piling_store_in_one_line_and_writes_nothing(tmp_path, capsys):
    spec_file = tmp_path / "piling.toml"
    lines = ['[run]', 'duration_days = 30', 'max_segments = 20000', '[[emergence]]', 'root_class = "axis"',
             'roots_per_event = 20']
    for name, values in PILING.items():
        lines.append(f"[root_classes.{name}]")
        for key, value in values.items():
            lines.append(f"{key} = {json.dumps(value).replace(':', ' =').replace('{', '{ ').replace('}', ' }')}"
                         if not isinstance(value, list) else f'{key} = [{{ root_class = "lateral" }}]')
    spec_file.write_text("\n".join(lines) + "\n")
    assert main(["grow", str(spec_file), "--out", str(tmp_path / "run"), "--quiet"]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: segment budget of 20,000 exceeded by pending branch points")
    assert len(err.splitlines()) == 1
    assert not (tmp_path / "run" / "segments.parquet").exists()


_PEAK_SCRIPT = textwrap.dedent("""
    import json, resource, sys
    sys.path[:0] = json.loads(sys.argv[1])
    import rootsim
    from rootsim.errors import SegmentBudgetError
    from growth_specs import make_spec
    from test_growth_budget import PILING, PILING_EMERGENCE
    spec = make_spec(PILING, emergence=PILING_EMERGENCE, days=200.0)
    rootsim.grow(spec, days=1.0, progress=False)  # warm up: load (or compile) every compiled function
    try:
        rootsim.grow(spec, max_segments=1000, progress=False)
    except SegmentBudgetError:
        pass
    def resident():
        with open("/proc/self/statm") as fh:
            return int(fh.read().split()[1]) * resource.getpagesize()
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")  # restart the peak (ru_maxrss) from the current resident size
        reset = True
    except OSError:
        reset = False
    before = resident()
    peak_before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    budget = int(sys.argv[2])
    try:
        rootsim.grow(spec, max_segments=budget, progress=False)
        stopped = False
    except SegmentBudgetError:
        stopped = True
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # kB on Linux; not reset by clear_refs
    if reset:  # the kernel's own high-water mark, restarted above (a warm-up that compiled may have set ru_maxrss)
        with open("/proc/self/status") as fh:
            peak = next(int(line.split()[1]) * 1024 for line in fh if line.startswith("VmHWM:"))
    print(json.dumps({"added": peak - before, "stopped": stopped, "reset": reset, "before": before,
                      "peak_before": peak_before, "peak": peak}))
""")


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="peak resident memory read the Linux way")
def test_a_tiny_budget_bounds_the_peak_memory_of_a_piling_spec(tmp_path):
    from pathlib import Path

    budget = 100_000
    here = str(Path(__file__).resolve().parent)
    root = str(Path(__file__).resolve().parents[1])
    out = subprocess.run([sys.executable, "-c", _PEAK_SCRIPT, json.dumps([root, here]), str(budget)],
                         capture_output=True, text=True, timeout=300, check=True)
    result = json.loads(out.stdout.strip().splitlines()[-1])
    assert result["stopped"], result
    # Without the bound this spec held about 1 kB per pending branch point and grew without limit; with it the
    # run stays within the stated bytes per budget segment (plus 16 MB for the interpreter's own churn).
    assert result["added"] <= MEMORY_BYTES_PER_BUDGET_SEGMENT * budget + 16 * 2**20, result
