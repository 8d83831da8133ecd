"""Batches: many architecture variants x stochastic replicates, serially or on Dask.

Replicate ``r`` of a variant is grown with the seed
``SeedSequence(run_seed).spawn(r + 1)[r].generate_state(1)[0]``, where ``run_seed`` is the variant's
``run.seed`` (or the batch seed). A run's result therefore depends on its spec, the seed and ``r`` alone:
never on which other variants are in the batch, on the number of workers or on the order they finish.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .atomic import atomic_write_text, ensure_output_dir
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
    from .errors import RootsimError

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


def _grow_one(run: BatchRun, out_dir: str | None) -> dict:
    from .growth import grow

    system = grow(run.spec, seed=run.seed, progress=False)
    row = {"variant": run.variant, "replicate": run.replicate, "seed": run.seed}
    summary = system.summary()
    row.update({k: v for k, v in summary.items() if k != "length_by_order_cm"})
    for order, length in summary["length_by_order_cm"].items():
        row[f"length_order_{order}_cm"] = length
    try:
        from .analysis import root_traits

        traits = root_traits(system)
        for key in ("d50_depth_cm", "d95_depth_cm", "width_cm", "convex_hull_volume_cm3", "gale_grigal_beta"):
            if key in traits and np.isscalar(traits[key]):
                row[key] = float(traits[key])
    except Exception:  # noqa: BLE001 - traits are a bonus here; the segment table is the result
        pass
    if out_dir is not None:
        run_dir = Path(out_dir) / run.variant / f"replicate_{run.replicate:03d}"
        run_dir.mkdir(parents=True, exist_ok=True)
        system.write(run_dir / "segments.parquet")
        atomic_write_text(run_dir / "summary.json", json.dumps({**summary, "seed": run.seed,
                                                                "variant": run.variant}, indent=2) + "\n")
        row["directory"] = str(run_dir)
    return row


def _dask_client(workers: int, scheduler: str | None):
    """A Dask client on a new local cluster of ``workers`` processes, or on the scheduler at ``scheduler``."""
    from dask.distributed import Client, LocalCluster

    from .errors import RootsimError

    if scheduler is None:
        cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None)
        return Client(cluster), cluster
    try:
        return Client(scheduler, timeout="10s"), None
    except (OSError, TimeoutError, ValueError, TypeError) as exc:
        raise RootsimError(f"cannot connect to the Dask scheduler at {scheduler} "
                           f"({' '.join(str(exc).split())[:120]})") from None


def run_batch(runs: list[BatchRun], *, out_dir: str | os.PathLike | None = None, workers: int = 1,
              scheduler: str | None = None, progress: bool | None = None):
    """Grow every run; return a :class:`pandas.DataFrame` with one row per run (sorted by variant, replicate).

    Parameters
    ----------
    runs : list of BatchRun
        From :func:`plan_batch`.
    out_dir : path-like, optional
        Write ``OUT/<variant>/replicate_<r>/segments.parquet`` and ``summary.json`` per run, and
        ``OUT/batch.csv``.
    workers : int
        1: serial in this process. More: a local Dask cluster with that many worker processes.
    scheduler : str, optional
        Address of a running Dask scheduler (e.g. ``tcp://10.0.0.5:8786``) to run on instead.
    progress : bool, optional
        Progress bar on stderr (default: when stderr is a terminal).
    """
    import pandas as pd

    from .progress import progress_bar

    rows = []
    client = cluster = None
    if workers > 1 or scheduler is not None:
        client, cluster = _dask_client(workers, scheduler)
    out = None if out_dir is None else str(ensure_output_dir(out_dir))  # only once the workers are there
    with progress_bar(total=len(runs), desc="batch", unit="run", enabled=progress) as bar:
        if client is None:
            for run in runs:
                rows.append(_grow_one(run, out))
                bar.update(1)
        else:
            from dask.distributed import as_completed

            try:
                futures = [client.submit(_grow_one, run, out, pure=False) for run in runs]
                for fut in as_completed(futures):
                    rows.append(fut.result())
                    bar.update(1)
            finally:
                client.close()
                if cluster is not None:
                    cluster.close()
    table = pd.DataFrame(rows).sort_values(["variant", "replicate"], kind="stable").reset_index(drop=True)
    if out is not None:
        atomic_write_text(Path(out) / "batch.csv", table.to_csv(index=False))
    return table
