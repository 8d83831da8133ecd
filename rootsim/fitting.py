"""Fit architecture parameters to an observed RLD profile.

The simulated profile of a candidate parameter set is the mean RLD, over a fixed set of replicate
seeds (common random numbers, so the objective changes only through the parameters), of the root
length inside each observed depth interval, clipped exactly along segments, divided by the
interval's soil volume (thickness x ground area). The objective is the sum over intervals of squared
differences of RLD (cm/cm³)², minimized by Powell's derivative-free method within the given bounds
(Powell 1964, "An efficient method for finding the minimum of a function of several variables without
calculating derivatives", Comput. J. 7:155-162, doi:10.1093/comjnl/7.2.155; scipy.optimize).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable
from pathlib import Path

import numpy as np

from pydantic import BaseModel

from .distributions import Fixed, Normal, Uniform
from .errors import RootsimError, SpecError
from .spec import Spec, parse_spec

__all__ = ["FitParameter", "parse_named_pair", "parse_fit_parameter", "read_observed_profile", "read_observations", "with_parameter", "interval_rld",
           "fit_profile", "FitResult", "fitted_toml"]


@dataclass(frozen=True)
class FitParameter:
    """A parameter to fit: dotted key path into the spec and its bounds (in the parameter's units)."""

    key_path: str
    low: float
    high: float


def parse_named_pair(text: str, *, option: str, form: str, example: str,
                     valid: Callable[[float, float], bool]) -> tuple[str, float, float]:
    """Parse ``NAME=FIRST:SECOND`` (two finite numbers) as given to ``--param`` and ``--target``.

    Parameters
    ----------
    text : str
        The option's value.
    option, form, example : str, keyword-only
        For the one-line error: the option (``--param``), the expected form and an example.
    valid : callable, keyword-only
        ``valid(first, second)`` is True for an allowed pair (e.g. ``low < high``).

    Returns
    -------
    (str, float, float)
        The name (stripped) and the two numbers.

    Raises
    ------
    RootsimError
        ``"{option} 'TEXT': expected {form}, e.g. {example}"``.
    """
    name, sep, pair = text.partition("=")
    first, sep2, second = pair.partition(":")
    try:
        a, b = float(first), float(second)
    except ValueError:
        a = b = math.nan
    if not sep or not sep2 or not name.strip() or not (math.isfinite(a) and math.isfinite(b)) or not valid(a, b):
        raise RootsimError(f"{option} {text!r}: expected {form}, e.g. {example}")
    return name.strip(), a, b


def parse_fit_parameter(text: str) -> FitParameter:
    """Parse ``KEY.PATH=LOW:HIGH`` (e.g. ``root_classes.nodal.initial_angle_from_vertical_deg=40:80``)."""
    key, low, high = parse_named_pair(text, option="--param", form="KEY.PATH=LOW:HIGH with LOW < HIGH",
                                      example="root_classes.primary.elongation_rate_cm_per_day=1:4",
                                      valid=lambda low, high: low < high)
    return FitParameter(key, low, high)


def read_observations(path, *, as_cores: bool = False) -> "pandas.DataFrame":  # noqa: F821
    """Read observed RLD (CSV): ``depth_top_cm``, ``depth_bottom_cm``, ``rld_cm_per_cm3``, and optionally

    * ``day`` – days after sowing of the sampling date (several dates may be given; default: the run's end);
    * ``rld_standard_deviation_cm_per_cm3`` – standard deviation of each observation (> 0), used as a weight 1 / SD²;
    * ``x_cm``, ``y_cm``, ``diameter_cm`` – the core each row was measured in (as in ``rootsim sample``'s
      cores.csv); needed with ``as_cores=True``, when the simulated observation is taken with the same cores.

    Rows of the same date, core position and depth interval (replicate cores) are averaged; their SDs are
    combined as the root mean square divided by the square root of their number (SD of the mean).

    Returns
    -------
    pandas.DataFrame
        Columns ``day`` (NaN where not given), ``x_cm``, ``y_cm``, ``diameter_cm`` (NaN for a whole-stand
        profile), ``depth_top_cm``, ``depth_bottom_cm``, ``rld_cm_per_cm3``, ``rld_standard_deviation_cm_per_cm3`` (NaN where not
        given), sorted by day, core and depth.

    Raises
    ------
    RootsimError
        Missing file or columns, no rows, non-finite or negative values, or overlapping depth intervals within
        one date and core (one line naming the file and the rows).
    """
    import pandas as pd

    path = Path(path)
    try:
        table = pd.read_csv(path, comment="#")  # '#' lines: notes such as where the data came from
    except FileNotFoundError:
        raise RootsimError(f"{path}: no such file (expected a CSV with depth_top_cm, depth_bottom_cm, "
                           "rld_cm_per_cm3)") from None
    except pd.errors.EmptyDataError:
        raise RootsimError(f"{path}: empty file (expected a header depth_top_cm, depth_bottom_cm, rld_cm_per_cm3 "
                           "and at least one row)") from None
    except (OSError, ValueError, pd.errors.ParserError) as exc:
        raise RootsimError(f"{path}: not a readable CSV ({' '.join(str(exc).split())[:120]})") from None
    need = ["depth_top_cm", "depth_bottom_cm", "rld_cm_per_cm3"]
    core_cols = ["x_cm", "y_cm", "diameter_cm"]
    if as_cores:
        need = need + core_cols
    if "rld_sd_cm_per_cm3" in table:  # the name of earlier versions
        raise RootsimError(f"{path}: column rld_sd_cm_per_cm3 is now called rld_standard_deviation_cm_per_cm3 "
                           "(rename it in the header)")
    missing = [c for c in need if c not in table]
    if missing:
        raise RootsimError(f"{path}: missing column(s) {', '.join(missing)} (required: {', '.join(need)})")
    if table.empty:
        raise RootsimError(f"{path}: header but no rows (need at least one observation)")
    optional = [c for c in ("day", "rld_standard_deviation_cm_per_cm3") if c in table]
    table = table[need + optional].apply(pd.to_numeric, errors="coerce").astype(float)
    if table.isna().any().any() or not np.isfinite(table.to_numpy()).all():
        bad = int(np.flatnonzero(~np.isfinite(table.to_numpy()).all(axis=1))[0])
        raise RootsimError(f"{path}: row {bad + 2}: {', '.join(need + optional)} must be finite numbers")
    if (table["depth_bottom_cm"] <= table["depth_top_cm"]).any() or (table["depth_top_cm"] < 0).any():
        raise RootsimError(f"{path}: every row needs 0 <= depth_top_cm < depth_bottom_cm")
    if (table["rld_cm_per_cm3"] < 0).any():
        raise RootsimError(f"{path}: rld_cm_per_cm3 must be >= 0")
    if "day" in table and not (table["day"] > 0).all():
        raise RootsimError(f"{path}: day must be > 0 (days after sowing)")
    if "rld_standard_deviation_cm_per_cm3" in table and not (table["rld_standard_deviation_cm_per_cm3"] > 0).all():
        raise RootsimError(f"{path}: rld_standard_deviation_cm_per_cm3 must be > 0")
    if as_cores and not (table["diameter_cm"] > 0).all():
        raise RootsimError(f"{path}: diameter_cm must be > 0")
    for col in ["day", "rld_standard_deviation_cm_per_cm3"] + core_cols:
        if col not in table:
            table[col] = np.nan
    keys = ["day", "x_cm", "y_cm", "diameter_cm", "depth_top_cm", "depth_bottom_cm"]
    table["_sd2"] = table["rld_standard_deviation_cm_per_cm3"] ** 2
    grouped = table.groupby(keys, as_index=False, dropna=False).agg(
        rld_cm_per_cm3=("rld_cm_per_cm3", "mean"), _sd2=("_sd2", "mean"), _n=("rld_cm_per_cm3", "size"))
    grouped["rld_standard_deviation_cm_per_cm3"] = np.sqrt(grouped["_sd2"] / grouped["_n"])
    grouped = grouped.drop(columns=["_sd2", "_n"]).sort_values(keys, kind="stable").reset_index(drop=True)
    for _, block in grouped.groupby(["day", "x_cm", "y_cm", "diameter_cm"], dropna=False, sort=False):
        top, bottom = block["depth_top_cm"].to_numpy(), block["depth_bottom_cm"].to_numpy()
        clash = np.flatnonzero(top[1:] < bottom[:-1])
        if clash.size:
            i = int(clash[0])
            raise RootsimError(f"{path}: overlapping depth intervals {top[i]:g}-{bottom[i]:g} cm and "
                               f"{top[i + 1]:g}-{bottom[i + 1]:g} cm (allowed: identical intervals, averaged as "
                               "replicates, or intervals that do not overlap)")
    return grouped[["day", "x_cm", "y_cm", "diameter_cm", "depth_top_cm", "depth_bottom_cm", "rld_cm_per_cm3",
                    "rld_standard_deviation_cm_per_cm3"]]


def read_observed_profile(path) -> "pandas.DataFrame":  # noqa: F821
    """Read an observed RLD profile (CSV with ``depth_top_cm``, ``depth_bottom_cm``, ``rld_cm_per_cm3``).

    Any CSV written by ``rootsim analyze`` (profile.csv) or ``rootsim sample`` (cores.csv) has these columns.
    Rows with the same depth interval (e.g. several cores) are averaged. See :func:`read_observations` for
    dates, weights and cores (used by the global fit).
    """
    import pandas as pd

    path = Path(path)
    try:
        head = pd.read_csv(path, nrows=0, comment="#")
    except (OSError, ValueError, pd.errors.ParserError):
        head = None
    table = read_observations(path)
    if head is not None and "day" in head and table["day"].nunique() > 1:
        raise RootsimError(f"{path}: observations on several days; fit them with --method global")
    return (table.groupby(["depth_top_cm", "depth_bottom_cm"], as_index=False)["rld_cm_per_cm3"].mean()
            .sort_values("depth_top_cm", kind="stable").reset_index(drop=True))


def _parameter_value(spec: Spec, key_path: str):
    node = spec
    for part in key_path.split("."):
        if isinstance(node, dict):
            if part not in node:
                raise SpecError(spec.source, key_path, f"no key {part!r} here", ", ".join(map(str, node)) or "none")
            node = node[part]
        elif isinstance(node, BaseModel):
            if part not in type(node).model_fields:
                raise SpecError(spec.source, key_path, f"no key {part!r} here", ", ".join(type(node).model_fields))
            node = getattr(node, part)
        else:
            raise SpecError(spec.source, key_path, "is not a table of parameters")
    return node


def with_parameter(spec: Spec, key_path: str, value: float) -> Spec:
    """A copy of ``spec`` with the numeric parameter at ``key_path`` set to ``value``.

    A fixed value is replaced; a normal distribution gets ``value`` as its mean (same standard deviation);
    a uniform one is shifted to centre on ``value`` (same width). The result is validated.
    """
    from .spec import PARAMETER_RANGES

    parts = key_path.split(".")
    if len(parts) != 3 or parts[0] != "root_classes" or parts[2] not in PARAMETER_RANGES:
        raise SpecError(spec.source, key_path, "only numeric root-class parameters can be fitted",
                        "root_classes.<class>.<parameter> with <parameter> one of " + ", ".join(PARAMETER_RANGES))
    current = _parameter_value(spec, key_path)
    if isinstance(current, Fixed) or (isinstance(current, (int, float)) and not isinstance(current, bool)):
        new = float(value) if isinstance(current, (int, float)) else Fixed(float(value))
        if isinstance(current, int) and not isinstance(current, bool):
            new = int(round(value))
    elif isinstance(current, Normal):
        new = Normal(float(value), current.standard_deviation)
    elif isinstance(current, Uniform):
        half = 0.5 * (current.high - current.low)
        new = Uniform(float(value) - half, float(value) + half)
    else:
        raise SpecError(spec.source, key_path, "is not a numeric parameter", "a number or a distribution")
    data = spec.model_dump()
    node = data
    parts = key_path.split(".")
    for part in parts[:-1]:
        node = node[part]
    node[parts[-1]] = new
    return parse_spec(data, source=spec.source)


def interval_rld(system, top_cm: np.ndarray, bottom_cm: np.ndarray, *, area_cm2: float) -> np.ndarray:
    """RLD (cm/cm³) of ``system`` in arbitrary depth intervals, root length clipped exactly along segments.

    The interval boundaries cut the soil into a few elementary layers; segments inside one layer (most of
    them) are summed with one ``numpy.bincount`` on the layer index, and only segments crossing a boundary are
    split (length shared in proportion to the depth range inside each layer). No sorting of all end points.

    Parameters
    ----------
    system : RootSystem or mapping of columns
    top_cm, bottom_cm : ndarray, shape (k,)
        Interval depths, cm (positive downward); intervals are half-open ``[top, bottom)``.
    area_cm2 : float
        Ground area the profile refers to.
    """
    top, bottom = np.asarray(top_cm, float), np.asarray(bottom_cm, float)
    d0, d1 = -np.asarray(system["z0"], float), -np.asarray(system["z1"], float)
    length = np.asarray(system["length_cm"], float)
    upper, lower = np.minimum(d0, d1), np.maximum(d0, d1)
    edges = np.unique(np.concatenate([top, bottom]))
    # bin j (1..m-1) is [edges[j-1], edges[j]); 0 is above the first edge, m below the last
    first = np.searchsorted(edges, upper, side="right")
    last = np.searchsorted(edges, lower, side="right")
    inside = first == last
    per_bin = np.bincount(first[inside], weights=length[inside], minlength=edges.size + 1).astype(np.float64)
    cross = np.flatnonzero(~inside)
    if cross.size:
        a, b, w = upper[cross, None], lower[cross, None], length[cross, None] / (lower[cross] - upper[cross])[:, None]
        overlap = np.clip(np.minimum(b, edges[None, 1:]) - np.maximum(a, edges[None, :-1]), 0.0, None)
        per_bin[1:edges.size] += (w * overlap).sum(axis=0)
    cumulative = np.concatenate([[0.0], np.cumsum(per_bin[1:edges.size])])  # length between edges[0] and each edge
    at = lambda depth: cumulative[np.searchsorted(edges, depth)]  # noqa: E731 - depth is one of the edges
    return (at(bottom) - at(top)) / ((bottom - top) * area_cm2)


@dataclass
class FitResult:
    """Outcome of :func:`fit_profile`."""

    values: dict[str, float]
    objective: float
    evaluations: int
    history: "pandas.DataFrame"  # noqa: F821
    profile: "pandas.DataFrame"  # noqa: F821
    spec: Spec = field(repr=False)


def fit_profile(spec: Spec, observed, parameters: list[FitParameter], *, replicates: int = 3,
                seed: int | None = None, max_evaluations: int = 60, area_cm2: float | None = None,
                progress: bool | None = None) -> FitResult:
    """Fit ``parameters`` of ``spec`` so its mean simulated RLD profile matches ``observed``.

    Parameters
    ----------
    spec : Spec
        Starting spec (run length, stand and the other parameters are kept).
    observed : pandas.DataFrame
        ``depth_top_cm``, ``depth_bottom_cm``, ``rld_cm_per_cm3`` (see :func:`read_observed_profile`).
    parameters : list of FitParameter
        What to fit, with bounds.
    replicates : int
        Replicate seeds per evaluation (common random numbers: the same seeds every evaluation).
    seed : int, optional
        Base seed of the replicates (default: the spec's run.seed).
    max_evaluations : int
        Budget of objective evaluations (each grows ``replicates`` systems).
    area_cm2 : float, optional
        Ground area for the simulated RLD (default: the stand's or container's).

    Returns
    -------
    FitResult
    """
    import pandas as pd
    from scipy.optimize import minimize, minimize_scalar

    from .batch import replicate_seed
    from .soil.thermal import grow_for_spec as grow
    from .progress import progress_bar

    if not parameters:
        raise RootsimError("give at least one --param KEY.PATH=LOW:HIGH to fit")
    if replicates < 1 or max_evaluations < 1:
        raise RootsimError("--replicates and --max-evaluations must be >= 1")
    for p in parameters:  # fail early on bad key paths or values outside the valid range
        with_parameter(spec, p.key_path, p.low)
        with_parameter(spec, p.key_path, p.high)
    base = spec.run.seed if seed is None else seed
    seeds = [replicate_seed(base, r) for r in range(replicates)]
    top = observed["depth_top_cm"].to_numpy(float)
    bottom = observed["depth_bottom_cm"].to_numpy(float)
    target = observed["rld_cm_per_cm3"].to_numpy(float)
    low = np.array([p.low for p in parameters])
    span = np.array([p.high - p.low for p in parameters])
    rows = []

    def candidate(unit):
        values = low + np.clip(unit, 0.0, 1.0) * span
        s = spec
        for p, v in zip(parameters, values):
            s = with_parameter(s, p.key_path, float(v))
        return s, values

    def mean_profile(s):
        rld = np.zeros(len(top))
        for sd in seeds:
            system = grow(s, seed=sd, progress=False)
            area = area_cm2 or system.ground_area_cm2
            if not area:
                raise RootsimError("no ground area known for the simulated profile; pass --area-cm2")
            rld += interval_rld(system, top, bottom, area_cm2=area)
        return rld / len(seeds)

    with progress_bar(total=max_evaluations, desc="fitting", unit="eval", enabled=progress) as bar:
        def objective(unit):
            unit = np.atleast_1d(unit)
            s, values = candidate(unit)
            sim = mean_profile(s)
            value = float(np.sum((sim - target) ** 2))
            rows.append({**{p.key_path: float(v) for p, v in zip(parameters, values)}, "objective": value})
            bar.update(1)
            return value

        if len(parameters) == 1:
            minimize_scalar(lambda u: objective([u]), bounds=(0.0, 1.0), method="bounded",
                            options={"maxiter": max_evaluations, "xatol": 1e-3})
        else:
            minimize(objective, x0=np.full(len(parameters), 0.5), method="Powell",
                     bounds=[(0.0, 1.0)] * len(parameters),
                     options={"maxfev": max_evaluations, "xtol": 1e-3, "ftol": 1e-6})
    history = pd.DataFrame(rows)
    best = history.loc[history["objective"].idxmin()]
    values = {p.key_path: float(best[p.key_path]) for p in parameters}
    fitted = spec
    for key, v in values.items():
        fitted = with_parameter(fitted, key, v)
    profile = pd.DataFrame({"depth_top_cm": top, "depth_bottom_cm": bottom, "rld_observed_cm_per_cm3": target,
                            "rld_fitted_cm_per_cm3": mean_profile(fitted)})
    return FitResult(values, float(best["objective"]), len(history), history, profile, fitted)


def fitted_toml(spec_path, values: dict[str, float]) -> str:
    """The text of the parameter file at ``spec_path`` with fitted values written in, comments kept.

    Fixed values are replaced, a normal distribution's ``mean`` is set and a uniform one is shifted
    (as in :func:`with_parameter`). Keys set only by default are added.
    """
    import tomlkit

    doc = tomlkit.parse(Path(spec_path).read_text(encoding="utf-8"))
    if isinstance(doc.get("based_on"), str):  # the fitted file is written elsewhere: keep its base reachable
        doc["based_on"] = str((Path(spec_path).parent / str(doc["based_on"])).resolve())
    for key_path, value in values.items():
        parts = key_path.split(".")
        node = doc
        for part in parts[:-1]:
            if part not in node:
                node[part] = tomlkit.table()
            node = node[part]
        current = node.get(parts[-1])
        if isinstance(current, dict) and "mean" in current:
            current["mean"] = round(value, 6)
        elif isinstance(current, dict) and "low" in current and "high" in current:
            half = 0.5 * (float(current["high"]) - float(current["low"]))
            current["low"], current["high"] = round(value - half, 6), round(value + half, 6)
        elif isinstance(current, int) and not isinstance(current, bool):
            node[parts[-1]] = int(round(value))
        else:
            node[parts[-1]] = round(value, 6)
    return tomlkit.dumps(doc)
