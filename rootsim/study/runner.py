"""Run a study plan: serially, on a process pool or on a Dask scheduler; commit each run; resume; combine.

Layout of a study folder::

    study.json                      manifest: kind, name, fingerprint of the plan, run folders (written first)
    runs/<variant>/replicate_<r>/   one folder per finished run, committed whole (built in .partial/, renamed)
        run.json                    the run's row: ids, factor values, seed, status, error, traits
        profile.parquet             RLD by depth layer, all orders (order = -1) and each order, per date
        samples.parquet             virtual cores / walls / tubes (when the study asks for them)
        segments.parquet, summary.json   only with measure.segments = true
    runs.parquet, profiles.parquet, samples.parquet   all runs combined in design order (written last)

Workers compute and return a run's tables; only this process writes, so a Dask cluster needs no shared file
system and a killed study leaves whole run folders or none (stale ``.partial`` folders are removed on the next
start). A folder holding another study (a different fingerprint) is refused, so the combined tables never
disagree with the run folders beside them.
"""

from __future__ import annotations

import json
import math
import os
import shutil
import uuid
from pathlib import Path

import numpy as np

from ..atomic import atomic_path, atomic_write_text, ensure_output_dir
from ..errors import RootsimError
from .design import StudyPlan, Task

__all__ = ["run_plan", "execute_task", "read_results", "StudyResults"]

MANIFEST = "study.json"
PARTIAL = ".partial"


def execute_task(task: Task, measure, keep_segments: bool = False, capture=None) -> dict:
    """Grow and measure one run (in a worker). Returns its row and tables; user errors become a failed row.

    ``capture`` (a :class:`rootsim.study.capture.StudyCapture`) adds the soil-water season's traits to the row
    and its daily table to the payload (``capture_daily``).
    """
    import time

    start = time.perf_counter()
    row = {"run_id": task.run_id, "variant": task.variant, "replicate": task.replicate, **task.factors,
           "seed": task.seed, "folder": task.folder, "status": "ok", "error": ""}
    # "seconds" (the run's wall time in its worker) is for progress lines only, never in the run's tables
    payload = {"row": row, "profile": None, "samples": None, "segments": None, "seconds": 0.0,
               "capture_daily": None}
    if task.error is not None:
        row.update(status="failed", error=task.error)
        return payload
    from ..soil.thermal import grow_for_spec as grow
    from .measure import measure_run

    try:
        if capture is None:
            system = grow(task.spec, seed=task.seed, progress=False)
        else:  # roots that die during the run are kept for the season (counted while alive)
            from .capture import capture_outcomes, grow_for_capture

            season_system, system = grow_for_capture(task.spec, seed=task.seed)
        traits, profile, samples = measure_run(system, measure, final_day=task.spec.run.duration_days)
        if capture is not None:
            captured, payload["capture_daily"] = capture_outcomes(season_system, capture)
            traits = {**traits, **captured}
    except RootsimError as exc:  # segment budget, a sampler outside a pot, ...: recorded, the study goes on
        row.update(status="failed", error=exc.cli_message())
        payload["seconds"] = time.perf_counter() - start
        return payload
    except MemoryError:
        row.update(status="failed", error="out of memory (lower run.max_segments or the run length)")
        payload["seconds"] = time.perf_counter() - start
        return payload
    row["n_segments"] = int(system.n_segments)
    row["n_plants"] = int(system.n_plants)
    row.update(traits)
    payload.update(profile=profile, samples=samples)
    if keep_segments:
        payload["segments"] = system
    payload["seconds"] = time.perf_counter() - start
    return payload


def run_line(task: Task, payload: dict) -> tuple[str, str]:
    """Label and detail of a finished run's progress line: ``("steep_dense r002", "ok, 12,345 segments, 2.10 s")``."""
    from ..progress import format_seconds

    row = payload["row"]
    seconds = format_seconds(float(payload.get("seconds") or 0.0))
    label = f"{task.variant} r{task.replicate:03d}"
    if row["status"] == "ok":
        return label, f"ok, {int(row.get('n_segments', 0)):,} segments, {seconds}"
    return label, f"failed, {seconds}: {row['error']}"


def _warm_worker() -> None:
    import rootsim.analysis  # noqa: F401  - workers import rootsim once, not per task
    import rootsim.growth  # noqa: F401
    import rootsim.sampling  # noqa: F401


def _json_row(row: dict) -> dict:
    out = {}
    for k, v in row.items():
        if isinstance(v, (np.floating, float)):
            v = None if not math.isfinite(float(v)) else float(v)
        elif isinstance(v, np.integer):
            v = int(v)
        out[k] = v
    return out


def _commit(out: Path, task: Task, payload: dict, kind: str) -> None:
    """Write one run's folder under ``.partial`` and rename it into place (all or nothing)."""
    tmp = out / PARTIAL / f"{task.run_id}.{os.getpid()}.{uuid.uuid4().hex[:8]}"
    tmp.mkdir(parents=True)
    try:
        if payload["profile"] is not None:
            payload["profile"].to_parquet(tmp / "profile.parquet", index=False)
        if payload["samples"] is not None:
            payload["samples"].to_parquet(tmp / "samples.parquet", index=False)
        if payload.get("capture_daily") is not None:
            payload["capture_daily"].to_parquet(tmp / "capture_daily.parquet", index=False)
        system = payload["segments"]
        if system is not None:
            system.write(tmp / "segments.parquet")
            summary = {**system.summary(), "seed": task.seed, "variant": task.variant}
            (tmp / "summary.json").write_text(json.dumps(summary, indent=2) + "\n", encoding="utf-8")
        (tmp / "run.json").write_text(json.dumps(_json_row(payload["row"]), indent=2) + "\n", encoding="utf-8")
        target = out / task.folder
        target.parent.mkdir(parents=True, exist_ok=True)
        os.rename(tmp, target)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


def _is_done(out: Path, task: Task) -> bool:
    return (out / task.folder / "run.json").is_file()


def _manifest(plan: StudyPlan) -> dict:
    return {"kind": plan.kind, "name": plan.name, "fingerprint": plan.fingerprint(), "source": plan.source,
            "runs": len(plan.tasks), "variants": plan.variants, "factors": plan.factor_names, **plan.extra}


def _prepare(out: Path, plan: StudyPlan, resume: bool) -> None:
    manifest_path = out / MANIFEST
    mine = _manifest(plan)
    if manifest_path.is_file():
        try:
            theirs = json.loads(manifest_path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            theirs = {}
        if not isinstance(theirs, dict) or theirs.get("fingerprint") != mine["fingerprint"]:
            name = theirs.get("name", "?") if isinstance(theirs, dict) else "?"
            raise RootsimError(f"{out}: holds the results of another {theirs.get('kind', 'study') if isinstance(theirs, dict) else 'study'} "
                               f"({name!r}, different settings); choose a new --out folder or delete this one")
        done = sum(_is_done(out, t) for t in plan.tasks)
        if done and not resume:
            raise RootsimError(f"{out}: already holds {done} of {len(plan.tasks)} finished run(s) of this "
                               f"{plan.kind}; pass --resume to finish it, or choose a new --out folder")
    else:
        leftovers = [p.name for p in out.iterdir() if p.name != PARTIAL]
        if leftovers:
            raise RootsimError(f"{out}: is not empty and holds no {MANIFEST} ({', '.join(sorted(leftovers)[:3])}"
                               f"{', ...' if len(leftovers) > 3 else ''}); choose a new or empty --out folder")
        atomic_write_text(manifest_path, json.dumps(mine, indent=2) + "\n")
    shutil.rmtree(out / PARTIAL, ignore_errors=True)  # stale half-built run folders of a killed study


def _pool_runner(workers: int):
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed

    # fork where available: workers start from this process with rootsim already imported (no re-import of
    # the caller's script, which spawn would need to be guarded by ``if __name__ == "__main__"``)
    method = "fork" if "fork" in multiprocessing.get_all_start_methods() else "spawn"
    executor = ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context(method),
                                   initializer=_warm_worker)

    def submit(tasks, measure, keep, capture=None):
        futures = {executor.submit(execute_task, t, measure, keep, capture): t for t in tasks}
        for fut in as_completed(futures):
            yield futures[fut], fut.result()

    return submit, executor.shutdown


def _dask_runner(address: str):
    from dask.distributed import Client, as_completed

    try:
        client = Client(address, timeout="10s")
    except (OSError, TimeoutError, ValueError, TypeError) as exc:
        raise RootsimError(f"cannot connect to the Dask scheduler at {address} "
                           f"({' '.join(str(exc).split())[:120]})") from None
    client.run(_warm_worker)

    def submit(tasks, measure, keep, capture=None):
        futures = {client.submit(execute_task, t, measure, keep, capture, pure=False, key=f"rootsim-{t.run_id}-{uuid.uuid4().hex[:6]}"): t
                   for t in tasks}
        for fut in as_completed(list(futures)):
            yield futures[fut], fut.result()

    return submit, client.close


def open_runner(workers: int = 1, scheduler: str | None = None):
    """A process pool (``workers`` > 1) or Dask connection kept open across many :func:`run_plan` calls (many
    small batches, e.g. a global fit's profiles); ``(runner, close)``, both None for serial runs. Pass ``runner``
    to :func:`run_plan` and call ``close()`` when done."""
    if scheduler is not None:
        return _dask_runner(scheduler)
    if workers > 1:
        return _pool_runner(workers)
    return None, None


def run_plan(plan: StudyPlan, out_dir: str | os.PathLike | None = None, *, workers: int = 1,
             scheduler: str | None = None, resume: bool = False, progress: bool | None = None,
             run_lines: bool = True, runner=None):
    """Run every task of ``plan`` not yet finished in ``out_dir``; return the combined :class:`StudyResults`.

    Parameters
    ----------
    plan : StudyPlan
        From :func:`rootsim.study.plan_study` (or :func:`rootsim.study.design.plan_from_specs`).
    out_dir : path-like, optional
        Study folder (see the module documentation). None: run in memory and write nothing.
    workers : int
        1: serially in this process; more: a process pool of that many workers (each imports rootsim once).
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://host:8786``) to run on instead.
    resume : bool
        Continue a study already started in ``out_dir`` (finished runs are kept, not rerun).
    progress : bool, optional
        Progress bar with counts and time left on stderr (default: when stderr is a terminal); off a terminal
        one line per finished run (``run 3/16 steep_dense r002: ok, 12,345 segments, 2.10 s``). False: silent.
    run_lines : bool
        False: no line per run off a terminal (callers with many short runs, e.g. a global fit).
    runner : optional
        From :func:`open_runner`: run on it (instead of ``workers``/``scheduler``) and leave it open.
    """
    from ..progress import count_progress

    if workers < 1:
        raise RootsimError(f"--workers must be >= 1 (got {workers})")
    keep = plan.measure.segments
    out = None
    pending = list(plan.tasks)
    close = None
    if scheduler is not None and runner is None:  # connect first: an unreachable scheduler leaves no folder behind
        runner, close = _dask_runner(scheduler)
    try:
        if out_dir is not None:
            out = ensure_output_dir(out_dir)
            _prepare(out, plan, resume)
            pending = [t for t in plan.tasks if not _is_done(out, t)]
    except BaseException:
        if close is not None:
            close()
        raise
    payloads: dict[str, dict] = {}
    if pending and runner is None and workers > 1:
        runner, close = _pool_runner(min(workers, len(pending)))
    bar = count_progress(total=len(plan.tasks), desc=plan.kind, unit="run", enabled=progress, lines=run_lines)
    try:
        with bar:
            bar.skip(len(plan.tasks) - len(pending))
            results = ((t, execute_task(t, plan.measure, keep, plan.capture)) for t in pending) if runner is None \
                else runner(pending, plan.measure, keep, plan.capture)
            for task, payload in results:
                if out is not None:
                    _commit(out, task, payload, plan.kind)
                else:
                    payloads[task.run_id] = payload
                bar.done(*run_line(task, payload))
    finally:
        if close is not None:
            close()
    if out is None:
        return _combine_payloads(plan, payloads)
    shutil.rmtree(out / PARTIAL, ignore_errors=True)
    results = read_results(out, plan=plan)
    results.write(out, kind=plan.kind)
    return results


class StudyResults:
    """The combined tables of a study: ``runs``, ``profiles`` and ``samples`` (None without samplers)."""

    def __init__(self, runs, profiles, samples, factor_names=(), manifest=None, capture_daily=None):
        self.runs, self.profiles, self.samples = runs, profiles, samples
        self.factor_names = list(factor_names)
        self.manifest = manifest or {}
        self.capture_daily = capture_daily  # soil-water season by run and day ([measure.capture]), or None

    def write(self, out: Path, *, kind: str = "study") -> None:
        """Write runs.parquet, profiles.parquet, samples.parquet (and batch.csv for batches), each atomically."""
        with atomic_path(out / "runs.parquet") as tmp:
            self.runs.to_parquet(tmp, index=False)
        with atomic_path(out / "profiles.parquet") as tmp:
            self.profiles.to_parquet(tmp, index=False)
        if self.samples is not None:
            with atomic_path(out / "samples.parquet") as tmp:
                self.samples.to_parquet(tmp, index=False)
        if self.capture_daily is not None:
            with atomic_path(out / "capture_daily.parquet") as tmp:
                self.capture_daily.to_parquet(tmp, index=False)
        if kind == "batch":
            atomic_write_text(out / "batch.csv", self.runs.to_csv(index=False))


def _tables(plan_rows, profiles, samples, factor_names):
    import pandas as pd

    runs = pd.DataFrame(plan_rows)
    for name in factor_names:
        if name in runs and runs[name].dtype == object and not runs[name].map(lambda v: isinstance(v, str)).all():
            runs[name] = runs[name].astype(str)
    for col in ("replicate", "seed"):
        runs[col] = runs[col].astype(np.int64)
    ids = ["run_id", "variant", "replicate"]

    def cat(frames):
        frames = [f for f in frames if f is not None]
        return pd.concat(frames, ignore_index=True, sort=False) if frames else None

    prof = cat(profiles)
    if prof is None:
        prof = pd.DataFrame({c: pd.Series(dtype=t) for c, t in [("run_id", object), ("variant", object),
                             ("replicate", np.int64), ("day", float), ("order", np.int64), ("depth_top_cm", float),
                             ("depth_bottom_cm", float), ("root_length_cm", float), ("rld_cm_per_cm3", float)]})
    return runs, prof, cat(samples), ids


def _with_ids(frame, row):
    if frame is None:
        return None
    frame = frame.copy()
    for i, col in enumerate(("run_id", "variant", "replicate")):
        frame.insert(i, col, row[col])
    return frame


def _combine_payloads(plan: StudyPlan, payloads: dict) -> StudyResults:
    rows, profiles, samples, daily = [], [], [], []
    for t in plan.tasks:
        p = payloads[t.run_id]
        rows.append(p["row"])
        profiles.append(_with_ids(p["profile"], p["row"]))
        samples.append(_with_ids(p["samples"], p["row"]))
        daily.append(_with_ids(p.get("capture_daily"), p["row"]))
    runs, prof, samp, _ = _tables(rows, profiles, samples, plan.factor_names)
    return StudyResults(runs, prof, samp, plan.factor_names, capture_daily=_concat(daily))


def read_results(out_dir: str | os.PathLike, *, plan: StudyPlan | None = None) -> StudyResults:
    """Combine the finished run folders of a study folder (in design order when ``plan`` is given).

    Raises
    ------
    RootsimError
        ``out_dir`` is not a study folder, or a run folder is unreadable.
    """
    import pandas as pd

    out = Path(out_dir)
    try:
        manifest = json.loads((out / MANIFEST).read_text(encoding="utf-8"))
        if not isinstance(manifest, dict):
            raise ValueError("not a table")
    except FileNotFoundError:
        raise RootsimError(f"{out}: not a study folder (no {MANIFEST}; run 'rootsim study run' first)") from None
    except (OSError, ValueError) as exc:
        raise RootsimError(f"{out}/{MANIFEST}: unreadable manifest ({exc})") from None
    folders = [t.folder for t in plan.tasks] if plan is not None else sorted(
        str(p.parent.relative_to(out)) for p in out.glob("runs/*/replicate_*/run.json"))
    rows, profiles, samples, daily = [], [], [], []
    for folder in folders:
        run_dir = out / folder
        if not (run_dir / "run.json").is_file():
            continue
        try:
            row = json.loads((run_dir / "run.json").read_text(encoding="utf-8"))
            prof = pd.read_parquet(run_dir / "profile.parquet") if (run_dir / "profile.parquet").is_file() else None
            samp = pd.read_parquet(run_dir / "samples.parquet") if (run_dir / "samples.parquet").is_file() else None
            season = (pd.read_parquet(run_dir / "capture_daily.parquet")
                      if (run_dir / "capture_daily.parquet").is_file() else None)
        except (OSError, ValueError) as exc:
            raise RootsimError(f"{run_dir}: unreadable run folder ({' '.join(str(exc).split())[:100]})") from None
        row = {k: (np.nan if v is None else v) for k, v in row.items()}
        rows.append(row)
        profiles.append(_with_ids(prof, row))
        samples.append(_with_ids(samp, row))
        daily.append(_with_ids(season, row))
    if not rows:
        raise RootsimError(f"{out}: no finished runs yet")
    factor_names = manifest.get("factors", []) if plan is None else plan.factor_names
    runs, prof, samp, _ = _tables(rows, profiles, samples, factor_names)
    if plan is None:
        order = {v: i for i, v in enumerate(manifest.get("variants", []))}
        runs = runs.sort_values(["variant", "replicate"], key=lambda s: s.map(order) if s.name == "variant" else s,
                                kind="stable").reset_index(drop=True)
    return StudyResults(runs, prof, samp, factor_names, manifest, capture_daily=_concat(daily))


def _concat(frames):
    """The non-empty frames stacked (design order), or None."""
    import pandas as pd

    frames = [f for f in frames if f is not None]
    return pd.concat(frames, ignore_index=True, sort=False) if frames else None
