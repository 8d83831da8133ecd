"""From a study file to runs: variants (factorial, Latin hypercube, named), settings at key paths, child seeds.

A run is one (variant, replicate). Its seed is a child of the master seed keyed by the variant's name and the
replicate number, ``SeedSequence(master_seed, spawn_key=(crc32(name), replicate))`` (numpy's documented
spawning: children are independent streams that depend only on the parent entropy and the key), so a run's
result depends on the study file alone: not on worker count, on the order runs finish, or on which other
variants are in the design. With ``design.common_random_numbers`` the key is the replicate only (every
variant sees the same random streams; used for sensitivity analysis, where noise would blur small effects).
"""

from __future__ import annotations

import hashlib
import itertools
import json
import os
import zlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import RootsimError, SpecError
from ..path_names import safe_path_component
from ..spec import Spec, load_spec_layers, merge_layers, parse_spec
from .schema import Measure, StudyFile, load_study_file

__all__ = ["Task", "StudyPlan", "plan_study", "run_seed", "set_key_path", "check_key_path", "plan_from_specs"]


@dataclass(frozen=True)
class Task:
    """One run: a variant's spec (or the error that makes it ungrowable) and a replicate with its seed."""

    run_id: str
    variant: str
    variant_index: int
    replicate: int
    seed: int
    factors: dict
    spec: Spec | None
    error: str | None = None
    folder: str = ""  # path of the run folder relative to the study folder


@dataclass
class StudyPlan:
    """Everything a study runs: name, tasks in design order, what to measure and the factor names."""

    name: str
    tasks: list[Task]
    measure: Measure
    factor_names: list[str]
    kind: str = "study"
    source: str = "<study>"
    extra: dict = field(default_factory=dict)
    capture: Any = None  # rootsim.study.capture.StudyCapture of [measure.capture], sent to workers

    @property
    def variants(self) -> list[str]:
        seen = dict.fromkeys(t.variant for t in self.tasks)
        return list(seen)

    def fingerprint(self) -> str:
        """SHA-256 of everything that determines the results (specs, seeds, measurements, rootsim version).

        Input files a spec names (weather tables, soil-field tables and grids: absolute paths once laid under a
        study) count by their content, not their path, so a study folder still resumes after the project is
        moved, and a changed input file makes a different study.
        """
        from .. import __version__

        digests: dict = {}
        payload = {"version": __version__, "kind": self.kind, "measure": self.measure.model_dump(mode="json"),
                   "tasks": [{"run_id": t.run_id, "variant": t.variant, "replicate": t.replicate, "seed": t.seed,
                              "factors": t.factors, "error": t.error,
                              "spec": None if t.spec is None else _files_by_content(t.spec.model_dump(mode="json"),
                                                                                    digests)}
                             for t in self.tasks]}
        if self.capture is not None:  # the soil-water and weather files' contents
            payload["capture_inputs"] = self.capture.digest
        text = json.dumps(payload, sort_keys=True, default=str)
        return hashlib.sha256(text.encode()).hexdigest()


def _files_by_content(value, digests: dict):
    """``value`` (a spec's JSON dump) with every absolute path of an existing file replaced by the SHA-256 of the
    file's bytes (``digests``: a cache by path)."""
    if isinstance(value, dict):
        return {key: _files_by_content(item, digests) for key, item in value.items()}
    if isinstance(value, list):
        return [_files_by_content(item, digests) for item in value]
    if isinstance(value, str) and os.path.isabs(value) and os.path.isfile(value):
        if value not in digests:
            digests[value] = "sha256:" + hashlib.sha256(Path(value).read_bytes()).hexdigest()
        return digests[value]
    return value


def run_seed(master_seed: int, variant: str, replicate: int, *, common_random_numbers: bool = False) -> int:
    """Seed of replicate ``replicate`` of ``variant``: a ``SeedSequence`` child of ``master_seed``."""
    key = (replicate,) if common_random_numbers else (zlib.crc32(variant.encode("utf-8")), replicate)
    child = np.random.SeedSequence(int(master_seed), spawn_key=key)
    return int(child.generate_state(1, dtype=np.uint32)[0])


def _walk(node, parts):
    for part in parts:
        if isinstance(node, dict) and part in node:
            node = node[part]
        elif isinstance(node, list) and part.isdigit() and int(part) < len(node):
            node = node[int(part)]
        else:
            return False, node
    return True, node


def check_key_path(spec: Spec, key_path: str, *, source: str, where: str) -> None:
    """Raise :class:`SpecError` naming ``source`` and ``where`` if ``key_path`` is not a key of ``spec``."""
    full = spec.model_dump(mode="json")
    parts = key_path.split(".")
    node = full
    for i, part in enumerate(parts):
        ok, nxt = _walk(node, [part])
        if not ok:
            here = ".".join(parts[:i]) or "the top level"
            if isinstance(node, dict):
                import difflib

                close = difflib.get_close_matches(part, list(node), n=1)
                hint = f"did you mean {close[0]!r}? " if close else ""
                allowed = hint + "keys at " + here + ": " + ", ".join(map(str, node))
            elif isinstance(node, list):
                allowed = f"an index 0..{len(node) - 1} at {here}"
            else:
                allowed = f"{here} is a value, not a table"
            raise SpecError(source, where, f"unknown key path {key_path!r}", allowed[:300])
        node = nxt


def set_key_path(data: dict, key_path: str, value: Any) -> dict:
    """A copy of the parameter table ``data`` with ``key_path`` set to ``value``.

    A number given for a distribution sets its centre: the ``mean`` of ``{mean, standard_deviation}``, or shifts
    ``{low, high}`` to centre on it (same width). Lists are indexed by number (``soil.layers.1.depth_top_cm``).
    """
    import copy

    out = copy.deepcopy(data)
    parts = key_path.split(".")
    node = out
    for part in parts[:-1]:
        if isinstance(node, list):
            node = node[int(part)]
        else:
            node = node.setdefault(part, {})
    last = parts[-1]
    current = node[int(last)] if isinstance(node, list) else node.get(last)
    number = isinstance(value, (int, float)) and not isinstance(value, bool)
    if number and isinstance(current, dict) and "mean" in current:
        current = dict(current, mean=value)
        value = current
    elif number and isinstance(current, dict) and "low" in current and "high" in current:
        half = 0.5 * (float(current["high"]) - float(current["low"]))
        value = {"low": value - half, "high": value + half}
    if isinstance(node, list):
        node[int(last)] = value
    else:
        node[last] = value
    return out


def _layer(data: dict, path: Path) -> dict:
    top, _ = load_spec_layers(path, anchor_files=True)
    top.pop("name", None)
    return merge_layers(data, top)


def _label(value) -> str:
    if isinstance(value, float):
        return f"{value:g}"
    return str(value)


def _build(base: dict, settings: list[tuple[str, Any]], layers: list[Path], source: str, *, variant: str,
           where_of: dict[str, str]) -> Spec:
    """The spec of one variant; an invalid one stops the plan with the study file and key named.

    ``where_of`` maps each set key path to where the study file sets it (``factors[1].levels``,
    ``variants[2].set.root_classes.taproot.radius_cm``), so the message points at the line to change.
    """
    data = base
    for path in layers:
        data = _layer(data, path)
    for key, value in settings:
        data = set_key_path(data, key, value)
    try:
        return parse_spec(data, source=f"{source}: variant {variant}")
    except SpecError as exc:
        where = next((w for key, w in where_of.items()
                      if exc.key_path == key or exc.key_path.startswith(key + ".")), None)
        problem = f"variant {variant!r} sets {exc.key_path}: {exc.problem}" if where else \
            f"variant {variant!r}: {exc.key_path or '<top level>'}: {exc.problem}"
        raise SpecError(source, where or f"variant {variant!r}", problem, exc.allowed) from None
    except RootsimError as exc:
        raise RootsimError(f"{source}: variant {variant!r}: {exc}") from None


def _variants(study: StudyFile, root: Path, source: str, base_spec: Spec):
    """(name, factor values, settings, layer files) of every variant, in design order."""
    design = study.design
    out = []
    if design.kind == "variants":
        for i, v in enumerate(study.variants):
            for key in v.set:
                check_key_path(base_spec, key, source=source, where=f"variants[{i}].set.{key}")
            files = [root / f for f in v.files]
            for j, f in enumerate(files):
                if not f.is_file():
                    raise SpecError(source, f"variants[{i}].files[{j}]", f"file {v.files[j]!r} does not exist",
                                    "a parameter file path, relative to the study file")
            out.append((v.name, {"variant": v.name}, list(v.set.items()), files,
                        {key: f"variants[{i}].set.{key}" for key in v.set}))
        return out
    for i, f in enumerate(study.factors):
        if f.key is not None:
            check_key_path(base_spec, f.key, source=source, where=f"factors[{i}].key")
        for j, name in enumerate(f.files or []):
            if not (root / name).is_file():
                raise SpecError(source, f"factors[{i}].files[{j}]", f"file {name!r} does not exist",
                                "a parameter file path, relative to the study file")
    if design.kind == "factorial":
        choices = [f.levels if f.levels is not None else f.files for f in study.factors]
        for combo in itertools.product(*choices):
            name = "_".join(f"{f.name}-{Path(v).stem if f.files else _label(v)}" for f, v in zip(study.factors, combo))
            settings = [(f.key, v) for f, v in zip(study.factors, combo) if f.key is not None]
            layers = [root / v for f, v in zip(study.factors, combo) if f.files is not None]
            values = {f.name: (Path(v).stem if f.files else v) for f, v in zip(study.factors, combo)}
            where_of = {f.key: f"factors[{i}].levels" for i, f in enumerate(study.factors) if f.key is not None}
            out.append((name, values, settings, layers, where_of))
        return out
    # Latin hypercube (McKay, Beckman & Conover 1979, doi:10.1080/00401706.1979.10489755) via scipy.stats.qmc
    from scipy.stats import qmc

    rng = np.random.default_rng(np.random.SeedSequence(study.master_seed, spawn_key=(0x1A7,)))
    unit = qmc.LatinHypercube(d=len(study.factors), seed=rng).random(design.samples)
    width = len(str(design.samples))
    for k, row in enumerate(unit):
        values = {}
        for f, u in zip(study.factors, row):
            v = f.range[0] + u * (f.range[1] - f.range[0])
            values[f.name] = int(round(v)) if f.integer else float(v)
        out.append((f"sample_{k + 1:0{width}d}", values, [(f.key, values[f.name]) for f in study.factors], [],
                    {f.key: f"factors[{i}].range" for i, f in enumerate(study.factors)}))
    return out


def plan_study(path: str | os.PathLike, *, overrides: dict | None = None) -> StudyPlan:
    """Read a study file and list its runs.

    Parameters
    ----------
    path : path-like
        The study file (TOML; see :mod:`rootsim.study.schema`).
    overrides : dict, optional
        Replaces top-level study keys (e.g. ``{"replicates": 2}``), for quick tries and tests.

    Raises
    ------
    SpecError
        Unknown key paths, empty levels, missing files, an invalid base file: one line naming the file and key.
    """
    path = Path(path)
    study = load_study_file(path)
    if overrides:
        from .schema import parse_study_file

        study = parse_study_file({**study.model_dump(exclude_none=True), **overrides}, source=str(path))
    return _plan(study, path.parent, str(path))


def _plan(study: StudyFile, root: Path, source: str, *, kind: str = "study") -> StudyPlan:
    base_path = root / study.base
    if not base_path.is_file():
        raise SpecError(source, "base", f"parameter file {study.base!r} does not exist",
                        "a parameter file path, relative to the study file")
    base, _ = load_spec_layers(base_path, anchor_files=True)
    run_over = {k: v for k, v in study.run.model_dump().items() if v is not None}
    if run_over:
        base = merge_layers(base, {"run": run_over})
    base_spec = parse_spec(base, source=str(base_path))
    tasks = []
    seen = {}
    # every variant's spec is built and validated here, before any run: a wrongly typed or out-of-range
    # setting stops the plan with one line naming the study file and key; only failures that show while
    # growing (a segment budget passed) are recorded as failed runs
    for index, (name, values, settings, layers, where_of) in enumerate(_variants(study, root, source, base_spec)):
        folder_name = safe_path_component(name, what=f"{source}: variant name")
        if folder_name in seen:
            raise SpecError(source, "variants", f"variants {seen[folder_name]!r} and {name!r} give the same folder "
                            f"name {folder_name!r}", "names that differ in letters, digits or . _ + -")
        seen[folder_name] = name
        spec = _build(base, settings, layers, source, variant=name, where_of=where_of)
        spec = spec.model_copy(update={"name": name})
        error = None
        for r in range(study.replicates):
            seed = run_seed(study.master_seed, name, r, common_random_numbers=study.design.common_random_numbers)
            tasks.append(Task(f"{folder_name}__r{r:03d}", name, index, r, seed, values, spec, error,
                              folder=f"runs/{folder_name}/replicate_{r:03d}"))
    factor_names = [f.name for f in study.factors] if study.design.kind != "variants" else []
    capture = None
    if study.measure.capture is not None:
        from .capture import load_study_capture

        capture = load_study_capture(study.measure.capture, root, source)
    return StudyPlan(study.name, tasks, study.measure, factor_names, kind=kind, source=source,
                     extra={"description": study.description, "replicates": study.replicates,
                            "master_seed": study.master_seed, "design": study.design.kind}, capture=capture)


def plan_from_specs(specs: list[Spec], *, replicates: int, seeds, measure: Measure, kind: str = "batch",
                    folder_format: str = "{variant}/replicate_{replicate:03d}") -> StudyPlan:
    """A plan from ready specs (the ``rootsim batch`` form): ``seeds(spec, replicate)`` gives each run's seed."""
    tasks, seen = [], {}
    for index, spec in enumerate(specs):
        folder_name = safe_path_component(spec.name, what=f"{spec.source}: name")
        if folder_name in seen:
            raise RootsimError(f"{spec.source}: name: variants {seen[folder_name]!r} and {spec.name!r} give the "
                               f"same folder name {folder_name!r} (allowed: distinct names)")
        seen[folder_name] = spec.name
        for r in range(replicates):
            tasks.append(Task(f"{folder_name}__r{r:03d}", spec.name, index, r, int(seeds(spec, r)), {}, spec, None,
                              folder=folder_format.format(variant=folder_name, replicate=r)))
    return StudyPlan(kind, tasks, measure, [], kind=kind)
