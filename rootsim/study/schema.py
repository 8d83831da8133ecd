"""The study file: a TOML document (our own schema) validated into a :class:`StudyFile`.

Schema (paths are relative to the study file)::

    name = "..."                         # the study's name
    description = "..."
    base = "cereal_fibrous.toml"         # parameter file every variant starts from (may use based_on)
    master_seed = 2026                   # every (variant, replicate) gets a child seed of this
    replicates = 4                       # stochastic replicate stands per variant
    [run]      duration_days, time_step_days, max_segments     # overrides for every run (optional)
    [design]   kind = "factorial" | "latin_hypercube" | "variants";  samples (latin_hypercube)
    [[factors]]                          # factorial / latin_hypercube
               name, key (dotted key path into the parameter file), levels = [...] | range = [low, high]
               | files = ["soil_a.toml", ...] (parameter-file layers: soils, seasons)
    [[variants]]                         # design kind "variants"
               name, files = [...] (layers over the base), set = { "key.path" = value, ... }
    [measure]  layer_cm, max_depth_cm, days, intervals_cm (instead of layers: [[top, bottom], ...]), traits, length_below_cm, segments,
               cores = [{x_cm, y_cm, diameter_cm, depth_cm, increment_cm}], core_grid = {diameter_cm, depth_cm,
               increment_cm}, walls = ["Y,XMIN,XMAX,DEPTH,CELL"], tubes = ["X,Y,ANGLE,LENGTH,DIAMETER,FIELD"],
    [measure.capture]                    # optional: a season of soil water and nitrate under every run
               soil_water_file, weather_file (paths relative to the study file), phosphorus_radius_cm,
               phosphorus_voxel_cm (see rootsim.study.capture)

Every problem is a :class:`rootsim.errors.SpecError` naming the study file, the key path and what is allowed.
"""

from __future__ import annotations

import os
import tomllib
from pathlib import Path
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_validator

from ..errors import SpecError

__all__ = ["StudyFile", "Factor", "NamedVariant", "Design", "Measure", "CaptureMeasure", "CoreSpec", "CoreGridSpec", "RunOverrides",
           "load_study_file", "parse_study_file", "DEFAULT_TRAITS"]

#: Scalar traits recorded per run unless ``measure.traits`` names others (keys of ``root_traits``).
DEFAULT_TRAITS = ("total_length_cm", "root_length_per_ground_area_cm_per_cm2", "n_tips", "max_depth_cm",
                  "d50_depth_cm", "d95_depth_cm", "width_cm", "gale_grigal_beta")

#: Traits that need the topology pass (slower on large systems); recorded only when asked for.
TOPOLOGY_TRAITS = ("convex_hull_volume_cm3", "mean_topological_index", "n_roots")

Level = float | int | str | bool


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, strict=True, allow_inf_nan=False)


class RunOverrides(_Model):
    duration_days: float | None = Field(None, gt=0, le=3650)
    time_step_days: float | None = Field(None, gt=0, le=30)
    max_segments: int | None = Field(None, ge=1)


class Factor(_Model):
    """One factor: a key path and its levels (or a range), or parameter-file layers as levels."""

    name: str = Field(min_length=1)
    key: str | None = Field(None, min_length=1)
    levels: list[Level] | None = Field(None, min_length=1)
    range: list[float] | None = Field(None, min_length=2, max_length=2)
    files: list[str] | None = Field(None, min_length=1)
    integer: bool = False

    @model_validator(mode="after")
    def _one_form(self):
        forms = [k for k in ("levels", "range", "files") if getattr(self, k) is not None]
        if len(forms) != 1:
            raise ValueError(f"factor {self.name!r} needs exactly one of levels, range, files (got "
                             f"{', '.join(forms) or 'none'})")
        if self.files is None and self.key is None:
            raise ValueError(f"factor {self.name!r} needs a key (a dotted key path into the parameter file)")
        if self.files is not None and self.key is not None:
            raise ValueError(f"factor {self.name!r}: files are layers of a whole parameter file, give no key")
        if self.range is not None and not self.range[0] < self.range[1]:
            raise ValueError(f"factor {self.name!r}: range needs low < high (got {list(self.range)})")
        for values in (self.levels, self.files):
            if values is not None and len(set(map(repr, values))) != len(values):
                raise ValueError(f"factor {self.name!r}: levels must be distinct")
        return self


class NamedVariant(_Model):
    name: str = Field(min_length=1)
    files: list[str] = Field(default_factory=list)
    set: dict[str, object] = Field(default_factory=dict)


class Design(_Model):
    kind: Literal["factorial", "latin_hypercube", "variants"] = "factorial"
    samples: int | None = Field(None, ge=1, le=100_000)
    common_random_numbers: bool = False


class CoreSpec(_Model):
    x_cm: float
    y_cm: float
    diameter_cm: float = Field(gt=0)
    depth_cm: float = Field(gt=0)
    increment_cm: float = Field(10.0, gt=0)


class CoreGridSpec(_Model):
    diameter_cm: float = Field(gt=0)
    depth_cm: float = Field(gt=0)
    increment_cm: float = Field(10.0, gt=0)


class CaptureMeasure(_Model):
    """``[measure.capture]``: the soil-water season run under every run's roots (see :mod:`rootsim.study.capture`)."""

    soil_water_file: str = Field(min_length=1)
    weather_file: str = Field(min_length=1)
    phosphorus_radius_cm: float | None = Field(None, gt=0, le=10)
    phosphorus_voxel_cm: float | None = Field(None, gt=0, le=10)

    @model_validator(mode="after")
    def _voxel(self):
        if self.phosphorus_voxel_cm is not None:
            if self.phosphorus_radius_cm is None:
                raise ValueError("phosphorus_voxel_cm needs phosphorus_radius_cm")
            if self.phosphorus_voxel_cm > self.phosphorus_radius_cm:
                raise ValueError("phosphorus_voxel_cm must be at most phosphorus_radius_cm")
        return self


class Measure(_Model):
    """What each run measures."""

    layer_cm: float = Field(10.0, gt=0)
    max_depth_cm: float = Field(120.0, gt=0, le=10_000)
    days: list[float] = Field(default_factory=list)
    intervals_cm: list[list[float]] | None = None
    traits: list[str] | None = None
    length_below_cm: list[float] = Field(default_factory=list)
    segments: bool = False
    cores: list[CoreSpec] = Field(default_factory=list)
    core_grid: CoreGridSpec | None = None
    walls: list[str] = Field(default_factory=list)
    tubes: list[str] = Field(default_factory=list)
    capture: CaptureMeasure | None = None

    @field_validator("capture", mode="before")
    @classmethod
    def _capture_table(cls, value):
        if value is False:
            return None
        if value is True:
            raise ValueError("capture needs a table (allowed: [measure.capture] with soil_water_file and "
                             "weather_file, paths relative to the study file)")
        return value

    @model_validator(mode="after")
    def _check(self):
        for pair in self.intervals_cm or []:
            if len(pair) != 2 or not 0 <= pair[0] < pair[1]:
                raise ValueError(f"intervals_cm entries must be [top, bottom] with 0 <= top < bottom (got {pair})")
        if any(d <= 0 for d in self.days):
            raise ValueError("days must be > 0")
        if any(d <= 0 for d in self.length_below_cm):
            raise ValueError("length_below_cm depths must be > 0")
        return self


class StudyFile(_Model):
    """A validated study file (paths still relative to it)."""

    name: str = Field(min_length=1)
    description: str = ""
    base: str = Field(min_length=1)
    master_seed: int = Field(0, ge=0)
    replicates: int = Field(1, ge=1, le=10_000)
    run: RunOverrides = RunOverrides()
    design: Design = Design()
    factors: list[Factor] = Field(default_factory=list)
    variants: list[NamedVariant] = Field(default_factory=list)
    measure: Measure = Measure()

    @model_validator(mode="after")
    def _design(self):
        kind = self.design.kind
        if kind == "variants":
            if not self.variants:
                raise ValueError('design kind "variants" needs at least one [[variants]] entry')
            if self.factors:
                raise ValueError('design kind "variants" takes no [[factors]] (use factorial or latin_hypercube)')
        else:
            if not self.factors:
                raise ValueError(f'design kind "{kind}" needs at least one [[factors]] entry')
            if self.variants:
                raise ValueError(f'design kind "{kind}" takes no [[variants]] (use kind = "variants")')
        if kind == "factorial" and any(f.range is not None for f in self.factors):
            raise ValueError("a factorial design needs levels or files for every factor (range is for "
                             "latin_hypercube)")
        if kind == "latin_hypercube":
            if self.design.samples is None:
                raise ValueError("a latin_hypercube design needs design.samples")
            if any(f.range is None for f in self.factors):
                raise ValueError("a latin_hypercube design needs range = [low, high] for every factor")
        names = [f.name for f in self.factors] + [v.name for v in self.variants]
        dup = sorted({n for n in names if names.count(n) > 1})
        if dup:
            raise ValueError(f"names must be distinct: {', '.join(dup)} appears more than once")
        return self


def _loc_text(loc) -> str:
    out = ""
    for part in loc:
        out += f"[{part}]" if isinstance(part, int) else ("." if out else "") + str(part)
    return out


def parse_study_file(data, *, source: str = "<study>") -> StudyFile:
    """Validate a parsed study table. Raises :class:`SpecError` naming ``source`` and the key path."""
    if not isinstance(data, dict):
        raise SpecError(source, "", "a study file must be a table")
    try:
        return StudyFile(**data)
    except ValidationError as exc:
        err = exc.errors(include_url=False)[0]
        loc = tuple(p for p in err.get("loc", ()) if p not in ("function-after",))
        etype = err.get("type", "")
        if etype == "extra_forbidden":
            model = _model_for(loc[:-1])
            allowed = ", ".join(model.model_fields) if model else None
            return _raise(SpecError(source, _loc_text(loc), "unknown key", f"valid keys: {allowed}" if allowed else None))
        if etype == "missing":
            raise SpecError(source, _loc_text(loc), "required key is missing") from None
        ctx = err.get("ctx") or {}
        msg = str(ctx["error"]) if etype == "value_error" and "error" in ctx else err.get("msg", "invalid value")
        given = repr(err.get("input"))
        extra = "" if etype == "value_error" else f" (got {given[:40]})"
        raise SpecError(source, _loc_text(loc), f"{msg}{extra}") from None
    except TypeError as exc:
        raise SpecError(source, "", f"malformed study file ({exc})") from None


def _raise(error):
    raise error from None


def _model_for(loc):
    model = StudyFile
    for part in loc:
        if isinstance(part, int):
            continue
        field = model.model_fields.get(part)
        if field is None:
            return None
        ann = field.annotation
        for cand in (Factor, NamedVariant, Design, Measure, CoreSpec, CoreGridSpec, RunOverrides, CaptureMeasure):
            if cand is ann or cand in getattr(ann, "__args__", ()) or any(
                    cand in getattr(a, "__args__", ()) for a in getattr(ann, "__args__", ())):
                model = cand
                break
        else:
            return None
    return model


def load_study_file(path: str | os.PathLike) -> StudyFile:
    """Read and validate a study file. Raises :class:`SpecError` (one line: file, key path, what is allowed)."""
    path = Path(path)
    try:
        data = tomllib.loads(path.read_bytes().decode("utf-8"))
    except FileNotFoundError:
        raise SpecError(str(path), "", "no such file", "a path to a study .toml file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise SpecError(str(path), "", f"cannot read the file ({exc})") from None
    except tomllib.TOMLDecodeError as exc:
        raise SpecError(str(path), "", f"not valid TOML: {exc}") from None
    except (RecursionError, ValueError) as exc:
        raise SpecError(str(path), "", f"not a usable TOML document ({str(exc)[:80]})") from None
    return parse_study_file(data, source=str(path))
