"""Bench stage ``study_runner``: the study runner on the shipped invented study (8 runs of one to two seconds
each: its four variants, two replicates, grown for :data:`RUN_DAYS` days).

Entries (wall-clock seconds, one run each; timings vary with machine load):

* ``study_serial`` – ``run_plan`` with one worker against the floor of the same runs grown and measured in a
  plain loop with nothing written; ``overhead_per_run_fraction`` is the runner's cost (scheduling, committing run
  folders, combining tables) per run, relative to the run itself.
* ``study_two_workers`` – a process pool of two workers against half the serial study (a perfect speed-up);
  ``speedup`` is serial / two workers.
* ``study_resume`` – ``--resume`` of the finished study against reading its ``runs.parquet``.
"""

from __future__ import annotations

import time
from pathlib import Path

from . import make_entry

NAME = "study_runner"
ORDER = 90

STUDY = Path(__file__).resolve().parents[2] / "params" / "studies" / "eastmoor_pan_trial.toml"
#: Season length of the bench's runs (days): long enough that one run costs one to two seconds.
RUN_DAYS = 80.0


def run(system, *, workdir) -> dict[str, dict]:
    """Time the study runner serially, on two workers and on resume (the bench stand is not used)."""
    import pandas as pd

    from ..study import plan_study, run_plan
    from ..study.runner import execute_task

    plan = plan_study(STUDY, overrides={"replicates": 2, "run": {"duration_days": RUN_DAYS}})
    t = time.perf_counter()
    segments = 0
    for task in plan.tasks:
        segments += int(execute_task(task, plan.measure)["row"].get("n_segments", 0))
    direct = time.perf_counter() - t
    t = time.perf_counter()
    run_plan(plan, Path(workdir) / "study_one", progress=False)
    serial = time.perf_counter() - t
    t = time.perf_counter()
    run_plan(plan, Path(workdir) / "study_two", workers=2, progress=False)
    two = time.perf_counter() - t
    t = time.perf_counter()
    run_plan(plan, Path(workdir) / "study_one", resume=True, progress=False)
    resume = time.perf_counter() - t
    t = time.perf_counter()
    pd.read_parquet(Path(workdir) / "study_one" / "runs.parquet")
    read = time.perf_counter() - t
    n = len(plan.tasks)
    return {
        "study_serial": make_entry(segments=segments, seconds=serial, floor_seconds=direct,
                                   floor="the same runs grown and measured in a loop, nothing written",
                                   runs=n, mean_run_seconds=direct / n,
                                   overhead_per_run_fraction=(serial - direct) / direct),
        "study_two_workers": make_entry(segments=segments, seconds=two, floor_seconds=serial / 2,
                                        floor="half the serial study (a perfect speed-up on two workers)",
                                        runs=n, speedup=serial / two),
        "study_resume": make_entry(segments=segments, seconds=resume, floor_seconds=read,
                                   floor="reading the finished study's runs.parquet", runs=n),
    }
