"""Trait studies end to end: study files, resumable runs on 1..N workers or Dask, comparisons, power, sensitivity.

* :mod:`~rootsim.study.schema` – the study file (TOML) and its validation.
* :mod:`~rootsim.study.design` – variants (factorial, Latin hypercube, named), key-path settings, child seeds.
* :mod:`~rootsim.study.measure` – what a run measures (traits, profiles by order and date, virtual samples).
* :mod:`~rootsim.study.runner` – serial / process pool / Dask execution, per-run atomic commit, resume.

Typical use::

    from rootsim.study import plan_study, run_plan
    results = run_plan(plan_study("params/studies/eastmoor_pan_trial.toml"), "results/study", workers=2)
    results.runs        # one row per run
"""

from .design import StudyPlan, Task, plan_study, run_seed
from .runner import StudyResults, read_results, run_plan

__all__ = ["StudyPlan", "Task", "plan_study", "run_seed", "run_plan", "read_results", "StudyResults"]
