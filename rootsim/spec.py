"""The parameter file: a TOML document validated into a :class:`Spec`.

Schema (all lengths in cm, times in days, angles in degrees, resistances in MPa)::

    name = "..."                      # optional
    description = "..."               # optional
    [run]        duration_days, time_step_days, seed, max_segments
    [stand]      rows, plants_per_row, row_spacing_cm, plant_spacing_cm, sowing_depth_cm
    [soil]       elongation_halving_resistance_mpa, deflection_threshold_mpa,
                 deflection_max_incidence_deg, [[soil.layers]] depth_top_cm, depth_bottom_cm,
                 penetration_resistance_mpa
    [container]  kind = "field" | "pot" (diameter_cm, depth_cm) | "rhizobox" (width_cm, thickness_cm, depth_cm)
    [[emergence]]                     # roots that start at the plant (seed, shoot nodes, basal whorls)
                 root_class, first_day, event_count, roots_per_event, interval_days, depth_cm,
                 depth_step_cm, azimuth_jitter_deg
    [root_classes.NAME]               # see RootClass; numeric values may be distributions
    [[root_classes.NAME.branches]]    root_class, probability
    [soil.fields.NAME]                # 3D soil fields (rootsim.soil): value | layers | depth_table_file | grid |
                                      # pedotransfer, then [[...patches]]
    [soil.biopores]                   density_per_m2, radius_cm, inclination_from_vertical_deg, depth range,
                                      resistance_mpa, [[soil.biopores.channels]]
    [weather]    file                 # daily weather CSV (rootsim.soil.weather)
    [development] clock = "calendar" | "thermal", time_unit, temperature_response, cardinal temperatures

Validation uses pydantic; every problem becomes a :class:`rootsim.errors.SpecError` whose message
names the file, the dotted key path and what is allowed.
"""

from __future__ import annotations

import difflib
import math
import os
import tomllib
import typing
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, PlainSerializer, ValidationError, model_validator

from .distributions import Distribution, Fixed, Normal, ValueRange, parse_distribution
from .errors import SpecError
from .soil.schema import (BioporeChannel, BioporeSpec, DepthInterval, Development, FieldTropism, Proliferation,
                          SoilFieldGrid, SoilFieldLayer, SoilFieldPatch, SoilFieldSpec, SoilPedotransfer, Weather)

__all__ = ["Spec", "RootClass", "Branch", "Emergence", "Stand", "Soil", "SoilLayer", "Container", "Run",
           "load_spec", "load_spec_layers", "merge_layers", "parse_spec", "PARAMETER_RANGES",
           "SoilFieldSpec", "SoilFieldLayer", "SoilFieldGrid", "SoilFieldPatch", "SoilPedotransfer", "BioporeSpec",
           "BioporeChannel", "Weather", "Development"]


def _to_distribution(value):
    return parse_distribution(value)


def _distribution_as_data(dist):
    """The parameter-file form of a distribution: a number, {mean, standard_deviation} or {low, high}."""
    if isinstance(dist, Fixed):
        return dist.value
    if isinstance(dist, Normal):
        return {"mean": dist.mean, "standard_deviation": dist.standard_deviation}
    return {"low": dist.low, "high": dist.high}


Numeric = Annotated[Distribution, BeforeValidator(_to_distribution), PlainSerializer(_distribution_as_data)]


class _Model(BaseModel):
    # strict: no silent coercion ("45" or true for a number); ints are still accepted for floats.
    model_config = ConfigDict(extra="forbid", frozen=True, arbitrary_types_allowed=True, strict=True,
                              allow_inf_nan=False)


class Run(_Model):
    """Run settings."""

    duration_days: float = Field(gt=0, le=3650, description="Length of the simulation, days after sowing.")
    time_step_days: float = Field(0.5, gt=0, le=30, description="Growth time step, days.")
    seed: int = Field(0, ge=0, description="Seed of the run; each plant gets a child seed.")
    max_segments: int = Field(20_000_000, ge=1, description="Segment budget; growth stops with an error beyond it.")


class Stand(_Model):
    """Plants on a rectangular layout: rows along y, spaced in x; plants spaced along each row."""

    rows: int = Field(1, ge=1, le=1000)
    plants_per_row: int = Field(1, ge=1, le=10000)
    row_spacing_cm: float = Field(75.0, gt=0)
    plant_spacing_cm: float = Field(20.0, gt=0)
    sowing_depth_cm: float = Field(3.0, ge=0, le=100)

    @property
    def n_plants(self) -> int:
        return self.rows * self.plants_per_row

    @property
    def ground_area_cm2(self) -> float:
        return self.row_spacing_cm * self.plant_spacing_cm * self.n_plants


class SoilLayer(DepthInterval):
    penetration_resistance_mpa: float = Field(ge=0, le=50)


class Soil(_Model):
    """Soil impedance.

    Elongation is multiplied by ``2 ** (-R / elongation_halving_resistance_mpa)`` where ``R`` is the
    penetration resistance of the layer the tip is in (an exponential decline of elongation with
    resistance, common practice; see Bengough et al. 2011, J. Exp. Bot. 62:59-68,
    doi:10.1093/jxb/erq350). Layers with ``R >= deflection_threshold_mpa`` deflect tips that meet
    their top at less than ``deflection_max_incidence_deg`` from the layer plane: such tips turn to
    grow along the layer surface; steeper tips enter it, slowed by the impedance factor.
    """

    elongation_halving_resistance_mpa: float = Field(1.0, gt=0)
    deflection_threshold_mpa: float = Field(2.5, gt=0)
    deflection_max_incidence_deg: float = Field(45.0, ge=0, le=90)
    # Response of elongation to resistance (rootsim.soil.strength): "exponential" (the halving law above) or
    # "linear_to_limit" (stops at limiting_resistance_mpa); per-class sensitivity: a root of radius r feels
    # R * (resistance_reference_radius_cm / r) ** resistance_radius_exponent.
    elongation_response: Literal["exponential", "linear_to_limit"] = "exponential"
    limiting_resistance_mpa: float = Field(2.5, gt=0, le=100)
    resistance_reference_radius_cm: float = Field(0.05, gt=0, le=10)
    resistance_radius_exponent: float = Field(0.0, ge=0, le=4)
    layers: list[SoilLayer] = Field(default_factory=list)
    # 3D soil fields and biopores (rootsim/soil/; compiled by rootsim.soil.build)
    fields: dict[str, SoilFieldSpec] = Field(default_factory=dict)
    biopores: BioporeSpec | None = None

    @model_validator(mode="after")
    def _no_overlap(self):
        spans = sorted((l.depth_top_cm, l.depth_bottom_cm) for l in self.layers)
        for (t0, b0), (t1, b1) in zip(spans, spans[1:]):
            if t1 < b0:
                raise ValueError(f"layers overlap: {t0:g}-{b0:g} cm and {t1:g}-{b1:g} cm")
        return self


class Container(_Model):
    """Where the roots may grow, centred on x = y = 0 below the soil surface."""

    kind: Literal["field", "pot", "rhizobox"] = "field"
    diameter_cm: float | None = Field(None, gt=0)
    depth_cm: float | None = Field(None, gt=0)
    width_cm: float | None = Field(None, gt=0)
    thickness_cm: float | None = Field(None, gt=0)

    @model_validator(mode="after")
    def _geometry(self):
        need = {"field": (), "pot": ("diameter_cm", "depth_cm"), "rhizobox": ("width_cm", "thickness_cm", "depth_cm")}[self.kind]
        missing = [k for k in need if getattr(self, k) is None]
        if missing:
            raise ValueError(f"a {self.kind} needs {', '.join(missing)}")
        extra = [k for k in ("diameter_cm", "depth_cm", "width_cm", "thickness_cm") if k not in need and getattr(self, k) is not None]
        if extra:
            raise ValueError(f"a {self.kind} takes no {', '.join(extra)} (it needs: {', '.join(need) or 'nothing'})")
        return self


class Emergence(_Model):
    """Roots that start at the plant: seed roots, shoot-borne whorls, basal-root whorls.

    ``event_count`` events (whorls) happen every ``interval_days`` from ``first_day``; each brings
    ``roots_per_event`` roots of ``root_class``, spread evenly in azimuth (whorl turned at random,
    each root jittered by up to ``azimuth_jitter_deg``), at ``depth_cm`` below the surface (default:
    the sowing depth) shifted by ``depth_step_cm`` per event (negative: upward, as shoot nodes are).
    """

    root_class: str
    first_day: float = Field(0.0, ge=0)
    event_count: int = Field(1, ge=1, le=10000)
    roots_per_event: int = Field(1, ge=1, le=10000)
    interval_days: float = Field(0.0, ge=0)
    depth_cm: float | None = Field(None, ge=0)
    depth_step_cm: float = 0.0
    azimuth_jitter_deg: float = Field(10.0, ge=0, le=360)


class Branch(_Model):
    root_class: str
    probability: float = Field(1.0, ge=0, le=1)


#: Valid range of every numeric root-class parameter (used for validation and for truncating draws).
PARAMETER_RANGES: dict[str, ValueRange] = {
    "radius_cm": ValueRange(0, 5, low_strict=True),
    "initial_angle_from_vertical_deg": ValueRange(0, 180),
    "insertion_angle_deg": ValueRange(0, 180),
    "elongation_rate_cm_per_day": ValueRange(0, 100),
    "max_length_cm": ValueRange(0, 10000, low_strict=True),
    "basal_zone_cm": ValueRange(0, 10000),
    "apical_zone_cm": ValueRange(0, 10000),
    "apical_zone_days": ValueRange(0, 10000),
    "interbranch_distance_cm": ValueRange(0.01, 10000),
    "gravitropism_per_cm": ValueRange(0, 100),
    "plagiotropism_per_cm": ValueRange(0, 100),
    "preferred_angle_from_vertical_deg": ValueRange(0, 180),
    "exotropism_per_cm": ValueRange(0, 100),
    "random_turning_deg_per_sqrt_cm": ValueRange(0, 360),
    "lifespan_days": ValueRange(0, math.inf, low_strict=True),
}


class RateMultiplierRow(_Model):
    """One row of a class's ``elongation_rate_multiplier_by_plant_age`` table: at ``plant_age_days`` (time since
    sowing, in the run's clock: days, effective days or degree-days) the elongation rate is multiplied by
    ``multiplier``; linear between rows, the first and last rows' values before and after them."""

    plant_age_days: float = Field(ge=0, le=100_000)
    multiplier: float = Field(ge=0, le=100)


class RootClass(_Model):
    """One root class (a type of axis: primary, seminal, nodal, basal, first-order lateral, ...).

    Growth: ``elongation_law`` ``"linear"`` (rate ``elongation_rate_cm_per_day`` until
    ``max_length_cm``) or ``"negative_exponential"`` (length ``L(t) = L_max (1 - exp(-r t / L_max))``,
    initial rate ``r``: growth slowing in proportion to the length still to grow, the monomolecular growth
    curve; common practice). Direction: roots from the plant start at ``initial_angle_from_vertical_deg``;
    laterals at ``insertion_angle_deg`` from their parent's axis, placed around it at random or on a
    spiral (``radial_placement``, ``spiral_divergence_deg``). Per unit length the heading bends toward
    the vertical by Sachs' sine law (``gravitropism_per_cm``), toward ``preferred_angle_from_vertical_deg``
    (``plagiotropism_per_cm``), back toward the root's initial heading (``exotropism_per_cm``), and
    deviates at random with angular standard deviation ``random_turning_deg_per_sqrt_cm`` times the square
    root of the step length. Branching: no laterals in the first ``basal_zone_cm`` or within
    ``apical_zone_cm`` of the tip (or, with ``apical_zone_days`` instead, until the tip has grown that long past
    the branch point, so the unbranched zone's length scales with the elongation rate); branch points every ``interbranch_distance_cm`` (drawn per interval);
    at each point one of ``branches`` is chosen by its probability (or none). Roots older than
    ``lifespan_days`` die, with their laterals, and are left out of the result. The elongation rate may change
    with the plant's age (``elongation_rate_multiplier_by_plant_age``, rows of ``plant_age_days`` and
    ``multiplier``, linear between rows): a slow establishment phase or an end of deepening; the elongation
    laws are then integrated exactly over the multiplier (:mod:`rootsim.growth.plant_age`).
    """

    radius_cm: Numeric = Fixed(0.02)
    initial_angle_from_vertical_deg: Numeric = Fixed(0.0)
    insertion_angle_deg: Numeric = Fixed(70.0)
    elongation_law: Literal["linear", "negative_exponential"] = "linear"
    elongation_rate_cm_per_day: Numeric = Fixed(1.0)
    max_length_cm: Numeric = Fixed(50.0)
    basal_zone_cm: Numeric = Fixed(1.0)
    apical_zone_cm: Numeric = Fixed(2.0)
    apical_zone_days: Numeric | None = None  # instead of apical_zone_cm: the zone as the tip's time past a point
    interbranch_distance_cm: Numeric = Fixed(1.0)
    gravitropism_per_cm: Numeric = Fixed(0.0)
    plagiotropism_per_cm: Numeric = Fixed(0.0)
    preferred_angle_from_vertical_deg: Numeric = Fixed(90.0)
    exotropism_per_cm: Numeric = Fixed(0.0)
    random_turning_deg_per_sqrt_cm: Numeric = Fixed(5.0)
    lifespan_days: Numeric | None = None
    radial_placement: Literal["random", "spiral"] = "random"
    spiral_divergence_deg: float = Field(137.5, ge=0, le=360)
    branches: list[Branch] = Field(default_factory=list)
    # responses to named soil fields (rootsim.soil.schema; wired in rootsim.growth.step)
    field_tropism: FieldTropism | None = None
    proliferation: Proliferation | None = None
    elongation_rate_multiplier_by_plant_age: list[RateMultiplierRow] | None = Field(None, min_length=1,
                                                                                     max_length=1000)

    @model_validator(mode="after")
    def _ranges(self):
        for name, valid in PARAMETER_RANGES.items():
            value = getattr(self, name)
            if value is None:
                continue
            problem = value.check(valid)
            if problem:
                raise _RangeError(name, f"{problem}", valid.describe())
        total = sum(b.probability for b in self.branches)
        if total > 1 + 1e-9:
            raise _RangeError("branches", f"branch probabilities add up to {total:g}", "a sum <= 1")
        if self.apical_zone_days is not None and "apical_zone_cm" in self.model_fields_set:
            raise _RangeError("apical_zone_days", "apical_zone_cm and apical_zone_days are both given",
                              "exactly one of them: a length behind the tip or the tip's time past a branch point")
        rows = self.elongation_rate_multiplier_by_plant_age or []
        for i in range(1, len(rows)):
            if not rows[i].plant_age_days > rows[i - 1].plant_age_days:
                raise _RangeError(f"elongation_rate_multiplier_by_plant_age[{i}].plant_age_days",
                                  f"{rows[i].plant_age_days:g} does not follow {rows[i - 1].plant_age_days:g}",
                                  "rows sorted by plant_age_days, each age greater than the one before")
        return self


class Spec(_Model):
    """A validated parameter file."""

    name: str = "unnamed"
    description: str = ""
    run: Run
    stand: Stand = Stand()
    soil: Soil = Soil()
    container: Container = Container()
    emergence: list[Emergence] = Field(min_length=1)
    root_classes: dict[str, RootClass] = Field(min_length=1)
    weather: Weather | None = None
    development: Development = Development()
    source: str = Field("<spec>", exclude=True)

    @model_validator(mode="after")
    def _soil_inputs(self):
        """Read and check the files the soil and development sections name (rootsim.soil.build)."""
        responds = any(c.field_tropism is not None or c.proliferation is not None
                       for c in self.root_classes.values())
        if not (self.soil.fields or self.soil.biopores or self.weather or self.development.clock != "calendar"
                or responds):
            return self
        from .soil.build import check_spec_inputs

        problem = check_spec_inputs(self)
        if problem is not None:
            raise _RangeError(*problem)
        return self

    def with_overrides(self, **run_updates) -> "Spec":
        """A copy with run settings replaced (``duration_days``, ``time_step_days``, ``seed``, ``max_segments``);
        ``None`` values are ignored. Raises :class:`SpecError` if a value is invalid."""
        updates = {k: v for k, v in run_updates.items() if v is not None}
        if not updates:
            return self
        data = self.run.model_dump()
        data.update(updates)
        try:
            run = Run(**data)
        except ValidationError as exc:
            raise _spec_error_from_validation(exc, self.source, prefix=("run",)) from None
        _check_run(run, self.source)
        updated = self.model_copy(update={"run": run})
        _check_growable(updated)
        return updated


class _RangeError(ValueError):
    def __init__(self, key: str, problem: str, allowed: str):
        self.key, self.problem, self.allowed = key, problem, allowed
        super().__init__(f"{key}: {problem} (allowed: {allowed})")


# -- loading -------------------------------------------------------------------------------------

def load_spec(path: str | os.PathLike) -> Spec:
    """Read and validate a TOML parameter file (with its ``based_on`` layers, see :func:`load_spec_layers`).

    Raises
    ------
    SpecError
        For a missing or unreadable file, invalid TOML, a missing or cyclic base file, or any invalid key or value.
    """
    data, _ = load_spec_layers(path)
    return parse_spec(data, source=str(path))


def _read_toml_table(path: Path, *, referrer: str | None = None) -> dict:
    where = (referrer, "based_on") if referrer else (str(path), "")
    try:
        text = path.read_bytes().decode("utf-8")
    except FileNotFoundError:
        if referrer:
            raise SpecError(referrer, "based_on", f"base file {str(path)!r} does not exist",
                            "a parameter file path, relative to the file naming it") from None
        raise SpecError(str(path), "", "no such file", "a path to a .toml parameter file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise SpecError(*where, f"cannot read {path} ({exc})") from None
    from .toml_input import parse_toml_text

    return parse_toml_text(text, source=str(path))  # size, nesting and key length bounded before parsing


def merge_layers(base: dict, top: dict, *, origins: dict | None = None, top_name: str = "", prefix: str = ""):
    """Merge parameter table ``top`` over ``base`` (a new dict; inputs untouched).

    Tables merge key by key, recursively; any other value (number, string, array, array of tables such as
    ``soil.layers`` or ``emergence``, a distribution table ``{mean, standard_deviation}`` or ``{low, high}``)
    in ``top`` replaces the base value whole. ``origins`` (dotted key path ->
    file name), if given, is updated with ``top_name`` for every leaf ``top`` sets.
    """
    out = dict(base)
    for key, value in top.items():
        path = f"{prefix}.{key}" if prefix else str(key)
        if isinstance(value, dict) and isinstance(out.get(key), dict) and not _is_distribution(value):
            out[key] = merge_layers(out[key], value, origins=origins, top_name=top_name, prefix=path)
        else:
            out[key] = value
            if origins is not None:
                for stale in [k for k in origins if k == path or k.startswith(path + ".")]:
                    del origins[stale]
                _record_origins(value, path, top_name, origins)
    return out


def _is_distribution(value) -> bool:
    return isinstance(value, dict) and bool({"mean", "low", "high"} & set(value))


def _record_origins(value, path: str, name: str, origins: dict) -> None:
    if isinstance(value, dict) and value and not _is_distribution(value):
        for key, sub in value.items():
            _record_origins(sub, f"{path}.{key}", name, origins)
    else:
        origins[path] = name


def _anchor_input_files(data: dict, folder: Path) -> dict:
    """``data`` with the input files it names (``weather.file``, ``soil.fields.NAME.depth_table_file`` and
    ``.grid.file``) made absolute from ``folder``, so they still resolve when the table is laid under a file in
    another folder (a ``based_on`` base, or the base of a study)."""
    def anchored(name):
        return str(Path(os.path.abspath(folder / name))) if isinstance(name, str) and not Path(name).is_absolute() \
            else name

    out = dict(data)
    weather = out.get("weather")
    if isinstance(weather, dict) and "file" in weather:
        out["weather"] = {**weather, "file": anchored(weather["file"])}
    soil = out.get("soil")
    if isinstance(soil, dict) and isinstance(soil.get("fields"), dict):
        fields = {}
        for name, field in soil["fields"].items():
            if isinstance(field, dict):
                field = dict(field)
                if "depth_table_file" in field:
                    field["depth_table_file"] = anchored(field["depth_table_file"])
                if isinstance(field.get("grid"), dict) and "file" in field["grid"]:
                    field["grid"] = {**field["grid"], "file": anchored(field["grid"]["file"])}
            fields[name] = field
        out["soil"] = {**soil, "fields": fields}
    return out


def load_spec_layers(path: str | os.PathLike, *, anchor_files: bool = False,
                     _chain: tuple = ()) -> tuple[dict, dict]:
    """Read a parameter file and the files it is ``based_on``, merged table by table.

    A file may say ``based_on = "other.toml"`` (a path relative to the file itself) and set only the keys it
    changes; :func:`merge_layers` lays it over its base, which may itself be based on another file.

    Returns
    -------
    data : dict
        The merged parameter table (without ``based_on``), ready for :func:`parse_spec`.
    origins : dict
        Dotted key path of every value set in a file -> the file that set it (for ``rootsim check``).

    Input files named in a base (weather table, soil-field tables and grids) are made absolute from the base's
    folder, and so are the file's own with ``anchor_files=True`` (for tables laid under a file elsewhere).

    Raises
    ------
    SpecError
        A missing base file or a cycle of bases (one line naming the file and ``based_on``), or an invalid file.
    """
    path = Path(path)
    key = os.path.realpath(path)
    if key in _chain:
        names = [str(p) for p in _chain[_chain.index(key):]] + [key]
        raise SpecError(str(_chain[-1]), "based_on", "cycle of base files: " + " -> ".join(Path(n).name for n in names),
                        "a chain of bases that ends in a file without based_on")
    if len(_chain) >= 32:
        raise SpecError(str(path), "based_on", "more than 32 layers of base files", "at most 32")
    data = _read_toml_table(path) if not _chain else _read_toml_table(path, referrer=_chain_source(_chain))
    if _chain or anchor_files:
        data = _anchor_input_files(data, path.parent)
    base_name = data.pop("based_on", None)
    if base_name is None:
        origins: dict = {}
        _record_origins(data, "", str(path), origins)
        return data, {k.lstrip("."): v for k, v in origins.items()}
    if not isinstance(base_name, str) or not base_name.strip():
        raise SpecError(str(path), "based_on", f"must be a file name (got {base_name!r})",
                        "a parameter file path, relative to this file")
    base_path = path.parent / base_name
    if not base_path.is_file() and os.path.realpath(base_path) not in _chain:
        raise SpecError(str(path), "based_on", f"base file {base_name!r} does not exist (looked for {base_path})",
                        "a parameter file path, relative to this file")
    base, origins = load_spec_layers(base_path, _chain=_chain + (key,))
    if base.get("name") is not None and "name" not in data:
        data["name"] = path.stem  # a layer is its own variant: do not inherit the base's name
    return merge_layers(base, data, origins=origins, top_name=str(path)), origins


def _chain_source(chain: tuple) -> str:
    return str(chain[-1])


def parse_spec(data: Any, *, source: str = "<spec>") -> Spec:
    """Validate a parameter dictionary (the parsed TOML) into a :class:`Spec`.

    Raises
    ------
    SpecError
        Naming ``source``, the key path and what is allowed.
    """
    if not isinstance(data, dict):
        raise SpecError(source, "", "the parameter file must be a table of sections")
    try:
        spec = Spec(**{k: v for k, v in data.items() if k != "source"}, source=source) if "source" not in data else None
    except ValidationError as exc:
        raise _spec_error_from_validation(exc, source) from None
    except TypeError as exc:  # non-string keys and similar structural problems
        raise SpecError(source, "", f"malformed parameter file ({exc})") from None
    if spec is None:
        raise SpecError(source, "source", "unknown key", _closest("source", Spec))
    _check_references(spec)
    _check_run(spec.run, source)
    _check_growable(spec)
    return spec


def _check_growable(spec: Spec) -> None:
    from .limits import check_growable

    check_growable(spec)


def _check_run(run: Run, source: str) -> None:
    from .limits import MAX_STEPS

    if run.time_step_days > run.duration_days:
        raise SpecError(source, "run.time_step_days", f"time step {run.time_step_days:g} is longer than the run",
                        f"<= run.duration_days = {run.duration_days:g}")
    steps = run.duration_days / run.time_step_days
    if steps > MAX_STEPS:
        raise SpecError(source, "run.time_step_days", f"time step {run.time_step_days:g} gives {steps:.3g} steps",
                        f"at most {MAX_STEPS:,} steps, i.e. >= {run.duration_days / MAX_STEPS:.3g} days here")


def _check_references(spec: Spec) -> None:
    import networkx as nx

    names = sorted(spec.root_classes)
    allowed = ", ".join(names)
    for i, em in enumerate(spec.emergence):
        if em.root_class not in spec.root_classes:
            raise SpecError(spec.source, f"emergence[{i}].root_class", f"unknown root class {em.root_class!r}",
                            _suggest(em.root_class, names) or allowed)
    graph = nx.DiGraph()
    graph.add_nodes_from(names)
    for cname, rc in spec.root_classes.items():
        for j, br in enumerate(rc.branches):
            if br.root_class not in spec.root_classes:
                raise SpecError(spec.source, f"root_classes.{cname}.branches[{j}].root_class",
                                f"unknown root class {br.root_class!r}", _suggest(br.root_class, names) or allowed)
            if br.probability > 0:
                graph.add_edge(cname, br.root_class)
    try:
        cycle = nx.find_cycle(graph)
    except nx.NetworkXNoCycle:
        return
    path = " -> ".join([e[0] for e in cycle] + [cycle[-1][1]])
    raise SpecError(spec.source, f"root_classes.{cycle[0][0]}.branches",
                    f"branching cycle {path} would branch forever",
                    "branches that lead to classes of higher order only")


def _suggest(word: str, candidates) -> str | None:
    close = difflib.get_close_matches(str(word), list(candidates), n=1, cutoff=0.6)
    return f"did you mean {close[0]!r}?" if close else None


def _unwrap(tp):
    while True:
        origin = typing.get_origin(tp)
        if origin is Annotated:
            tp = typing.get_args(tp)[0]
            continue
        if origin in (typing.Union, getattr(__import__("types"), "UnionType", None)):
            models = [a for a in typing.get_args(tp) if isinstance(a, type) and issubclass(a, BaseModel)]
            if len(models) == 1:
                tp = models[0]
                continue
        return tp


def _model_at(loc: tuple) -> type[BaseModel] | None:
    """The pydantic model found at a location path inside :class:`Spec` (for key suggestions)."""
    tp: Any = Spec
    for part in loc:
        tp = _unwrap(tp)
        if isinstance(tp, type) and issubclass(tp, BaseModel):
            field = tp.model_fields.get(part) if isinstance(part, str) else None
            if field is None:
                return None
            tp = field.annotation
        elif typing.get_origin(tp) is dict:
            tp = typing.get_args(tp)[1]
        elif typing.get_origin(tp) is list:
            tp = typing.get_args(tp)[0]
        else:
            return None
    tp = _unwrap(tp)
    return tp if isinstance(tp, type) and issubclass(tp, BaseModel) else None


def _closest(key: str, model: type[BaseModel] | None) -> str:
    if model is None:
        return "see the documented keys"
    names = [n for n in model.model_fields if n != "source"]
    hint = _suggest(key, names)
    listing = ", ".join(names)
    return f"{hint} valid keys: {listing}" if hint else f"valid keys: {listing}"


def _format_loc(loc) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out


def _spec_error_from_validation(exc: ValidationError, source: str, prefix: tuple = ()) -> SpecError:
    err = exc.errors(include_url=False)[0]
    loc = prefix + tuple(p for p in err.get("loc", ()) if p not in ("function-after",))
    etype = err.get("type", "")
    given = err.get("input")
    ctx = err.get("ctx") or {}
    if etype == "extra_forbidden":
        key = str(loc[-1])
        return SpecError(source, _format_loc(loc), "unknown key", _closest(key, _model_at(loc[:-1])))
    if etype == "missing":
        return SpecError(source, _format_loc(loc), "required key is missing")
    cause = ctx.get("error")
    if isinstance(cause, _RangeError):
        return SpecError(source, _format_loc(loc + (cause.key,)), cause.problem, cause.allowed)
    shown = repr(given)
    if len(shown) > 60:
        shown = shown[:57] + "..."
    bounds = {"gt": ">", "ge": ">=", "lt": "<", "le": "<="}
    allowed = " and ".join(f"{bounds[k]} {ctx[k]}" for k in bounds if k in ctx) or None
    if etype == "literal_error":
        allowed = ctx.get("expected")
    if etype == "value_error":
        msg = str(cause) if cause is not None else err.get("msg", "invalid value")
        return SpecError(source, _format_loc(loc), f"{msg}")
    msg = err.get("msg", "invalid value")
    msg = msg[0].lower() + msg[1:] if msg else "invalid value"
    return SpecError(source, _format_loc(loc), f"{msg} (got {shown})", allowed)
