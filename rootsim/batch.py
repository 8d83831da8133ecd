"""Batches: many architecture variants x stochastic replicates, serially, on a process pool or on Dask.

A batch is a thin form of a study: :func:`run_batch` runs its (variant, replicate) tasks through
:func:`rootsim.study.runner.run_plan`, so a killed batch resumes (``resume=True``) and a folder of another batch
is refused.

Replicate ``r`` of a variant is grown with the seed
``SeedSequence(run_seed).spawn(r + 1)[r].generate_state(1)[0]``, where ``run_seed`` is the variant's
``run.seed`` (or the batch seed). A run's result therefore depends on its spec, the seed and ``r`` alone:
never on which other variants are in the batch, on the number of workers or on the order they finish.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .errors import RootsimError
from .spec import Spec

__all__ = ["replicate_seed", "BatchRun", "plan_batch", "run_batch"]


def replicate_seed(run_seed: int, replicate: int) -> int:
    """Seed of replicate ``replicate`` (0, 1, ...) of a run with seed ``run_seed``."""
    child = np.random.SeedSequence(int(run_seed)).spawn(replicate + 1)[replicate]
    return int(child.generate_state(1, dtype=np.uint32)[0])


@dataclass(frozen=True)
class BatchRun:
    """One run of a batch: a variant (spec) and a replicate number."""

    variant: str
    replicate: int
    seed: int
    spec: Spec


def plan_batch(specs: list[Spec], *, replicates: int = 1, seed: int | None = None) -> list[BatchRun]:
    """All (variant, replicate) runs of a batch, with their seeds.

    Parameters
    ----------
    specs : list of Spec
        The variants; their ``name`` must be distinct.
    replicates : int
        Stochastic replicates per variant.
    seed : int, optional
        Batch seed replacing each variant's ``run.seed``.
    """
    names = [s.name for s in specs]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise RootsimError(f"variant names must be distinct, {', '.join(dup)} appears more than once "
                           "(set name = \"...\" in each parameter file)")
    if replicates < 1:
        raise RootsimError(f"--replicates must be >= 1 (got {replicates})")
    runs = []
    for spec in specs:
        base = spec.run.seed if seed is None else seed
        for r in range(replicates):
            runs.append(BatchRun(spec.name, r, replicate_seed(base, r), spec))
    return runs


def run_batch(runs: list[BatchRun], *, out_dir: str | os.PathLike | None = None, workers: int = 1,
              scheduler: str | None = None, progress: bool | None = None, resume: bool = False,
              keep_segments: bool = True):
    """Grow every run; return a :class:`pandas.DataFrame` with one row per run (sorted by variant, replicate).

    A batch is a thin form of a study (:mod:`rootsim.study.runner`): the same execution, per-run atomic commit,
    resume and refusal of a folder holding another batch or study.

    Parameters
    ----------
    runs : list of BatchRun
        From :func:`plan_batch`.
    out_dir : path-like, optional
        Write ``OUT/<variant>/replicate_<r>/`` per run (``segments.parquet``, ``summary.json``, ``run.json``,
        ``profile.parquet``), then ``OUT/batch.csv`` and ``OUT/runs.parquet``. Variant names become folder names
        through :func:`rootsim.path_names.safe_path_component`.
    workers : int
        1: serial in this process. More: a process pool with that many workers.
    scheduler : str, optional
        Address of a running Dask scheduler (e.g. ``tcp://10.0.0.5:8786``) to run on instead.
    progress : bool, optional
        Progress bar on stderr (default: when stderr is a terminal).
    resume : bool
        Finish a killed batch in ``out_dir`` (finished runs are kept).
    keep_segments : bool
        Write each run's segment table (default).
    """
    from .study.design import StudyPlan, Task
    from .study.runner import run_plan
    from .study.schema import Measure
    from .path_names import safe_path_component

    measure = Measure(traits=["n_plants", "n_tips", "total_length_cm", "max_depth_cm", "d50_depth_cm",
                              "d95_depth_cm", "width_cm", "convex_hull_volume_cm3", "gale_grigal_beta"],
                      segments=keep_segments)
    tasks, seen = [], {}
    for run in runs:
        folder = safe_path_component(run.variant, what=f"{run.spec.source}: name")
        if seen.setdefault(folder, run.variant) != run.variant:
            raise RootsimError(f"{run.spec.source}: name: variants {seen[folder]!r} and {run.variant!r} give the same "
                               f"folder name {folder!r} (allowed: names that differ in letters, digits or . _ + -)")
        tasks.append(Task(f"{folder}__r{run.replicate:03d}", run.variant, 0, run.replicate, run.seed, {}, run.spec,
                          None, folder=f"{folder}/replicate_{run.replicate:03d}"))
    tasks.sort(key=lambda t: (t.variant, t.replicate))
    plan = StudyPlan("batch", tasks, measure, [], kind="batch")
    table = run_plan(plan, out_dir, workers=workers, scheduler=scheduler, resume=resume, progress=progress).runs
    if out_dir is not None:
        table["directory"] = [str(Path(out_dir) / f) for f in table["folder"]]
    return table.drop(columns=["folder"])
