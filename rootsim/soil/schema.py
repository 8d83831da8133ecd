"""Parameter-file schema of the soil sections: ``[soil.fields.NAME]``, ``[soil.biopores]``, ``[weather]``,
``[development]`` (validated with pydantic and used by :mod:`rootsim.spec`).

Points in a parameter file are ``[x_cm, y_cm, depth_cm]`` (depth positive downward). Files named here are read and
checked when the spec is loaded (:func:`rootsim.soil.build.check_spec_inputs`).
"""

from __future__ import annotations

from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

__all__ = ["DepthInterval", "SoilFieldLayer", "SoilFieldGrid", "SoilFieldPatch", "SoilPedotransfer", "SoilFieldSpec",
           "BioporeChannel", "BioporeSpec", "Weather", "Development", "FieldTropism", "Proliferation"]


class _Model(BaseModel):
    # the same settings as rootsim.spec's models: no unknown keys, no silent coercion, no NaN
    model_config = ConfigDict(extra="forbid", frozen=True, arbitrary_types_allowed=True, strict=True,
                              allow_inf_nan=False)


def _point3(value, key: str):
    if value is not None and len(value) != 3:
        raise ValueError(f"{key} needs three numbers [x_cm, y_cm, depth_cm] (got {len(value)})")
    return value


class DepthInterval(_Model):
    """A depth range ``depth_top_cm`` .. ``depth_bottom_cm`` (cm, positive downward, bottom below top): the base of
    every layer table in a parameter file (``[[soil.layers]]`` in :mod:`rootsim.spec`, soil-field layers here)."""

    depth_top_cm: float = Field(ge=0)
    depth_bottom_cm: float = Field(gt=0)

    @model_validator(mode="after")
    def _ordered(self):
        if self.depth_bottom_cm <= self.depth_top_cm:
            raise ValueError(
                f"depth_bottom_cm ({self.depth_bottom_cm:g}) must be greater than depth_top_cm ({self.depth_top_cm:g})"
            )
        return self


class SoilFieldLayer(DepthInterval):
    """One depth layer of a soil field."""

    value: float


class SoilFieldGrid(_Model):
    """A regular 3D grid: ``.npy`` (array axes x, y, depth downward; origin and spacing given here) or ``.vti``
    (VTK image data in rootsim's frame, z up; origin and spacing from the file, point or cell data).

    For ``.npy``, ``origin_cm`` is [x, y, depth] of the first node (``values_at = "nodes"``, trilinear) or of the
    first cell's low-x, low-y, top corner (``values_at = "cells"``, constant per cell)."""

    file: str
    array: str | None = None
    origin_cm: list[float] | None = None
    spacing_cm: list[float] | None = None
    values_at: Literal["nodes", "cells"] = "nodes"
    outside: Literal["clamp", "value", "none"] = "clamp"
    outside_value: float = 0.0

    @model_validator(mode="after")
    def _geometry(self):
        _point3(self.origin_cm, "origin_cm")
        _point3(self.spacing_cm, "spacing_cm")
        if self.spacing_cm is not None and min(self.spacing_cm) <= 0:
            raise ValueError("spacing_cm must be > 0 along every axis")
        if self.file.lower().endswith(".npy") and (self.origin_cm is None or self.spacing_cm is None):
            raise ValueError("a .npy grid needs origin_cm = [x, y, depth] and spacing_cm = [dx, dy, ddepth]")
        if self.file.lower().endswith(".vti") and (self.origin_cm is not None or self.spacing_cm is not None):
            raise ValueError("a .vti grid takes its origin and spacing from the file (remove origin_cm/spacing_cm)")
        if not self.file.lower().endswith((".npy", ".vti")):
            raise ValueError(f"grid file {self.file!r} must end in .npy or .vti")
        return self


class SoilFieldPatch(_Model):
    """An analytic patch: ``box`` (center_cm, size_cm), ``sphere`` (center_cm, radius_cm) or ``cylinder``
    (top_cm, bottom_cm, radius_cm); points are [x_cm, y_cm, depth_cm]."""

    shape: Literal["box", "sphere", "cylinder"]
    value: float
    mode: Literal["add", "replace", "multiply"] = "replace"
    center_cm: list[float] | None = None
    size_cm: list[float] | None = None
    radius_cm: float | None = Field(None, gt=0)
    top_cm: list[float] | None = None
    bottom_cm: list[float] | None = None
    edge_width_cm: float = Field(0.0, ge=0)

    @model_validator(mode="after")
    def _geometry(self):
        for key in ("center_cm", "size_cm", "top_cm", "bottom_cm"):
            _point3(getattr(self, key), key)
        need = {"box": ("center_cm", "size_cm"), "sphere": ("center_cm", "radius_cm"),
                "cylinder": ("top_cm", "bottom_cm", "radius_cm")}[self.shape]
        missing = [k for k in need if getattr(self, k) is None]
        if missing:
            raise ValueError(f"a {self.shape} patch needs {', '.join(missing)}")
        extra = [k for k in ("center_cm", "size_cm", "radius_cm", "top_cm", "bottom_cm")
                 if k not in need and getattr(self, k) is not None]
        if extra:
            raise ValueError(f"a {self.shape} patch takes no {', '.join(extra)} (it needs: {', '.join(need)})")
        if self.size_cm is not None and min(self.size_cm) <= 0:
            raise ValueError("size_cm must be > 0 along every axis")
        if self.shape == "cylinder" and self.top_cm == self.bottom_cm:
            raise ValueError("a cylinder patch needs top_cm and bottom_cm to differ")
        return self


class SoilPedotransfer(_Model):
    """Penetration resistance from water content and bulk density, Busscher's (1990) power law
    ``coefficient_mpa * theta ** water_content_exponent * rho ** bulk_density_exponent``."""

    method: Literal["busscher_power_law"] = "busscher_power_law"
    coefficient_mpa: float = Field(gt=0)
    water_content_exponent: float = Field(le=0, ge=-20)
    bulk_density_exponent: float = Field(ge=0, le=20)
    water_content_field: str = "volumetric_water_content"
    bulk_density_field: str = "bulk_density_g_per_cm3"


class SoilFieldSpec(_Model):
    """A named soil field: one base (``value``, ``layers``, ``depth_table_file``, ``grid`` or ``pedotransfer``)
    and optional ``patches`` applied in order."""

    value: float | None = None
    layers: list[SoilFieldLayer] | None = None
    depth_table_file: str | None = None
    grid: SoilFieldGrid | None = None
    pedotransfer: SoilPedotransfer | None = None
    outside_value: float = 0.0
    patches: list[SoilFieldPatch] = Field(default_factory=list)

    @model_validator(mode="after")
    def _one_base(self):
        bases = ("value", "layers", "depth_table_file", "grid", "pedotransfer")
        given = [k for k in bases if getattr(self, k) is not None]
        if len(given) != 1:
            raise ValueError(f"a soil field needs exactly one of value, layers, depth_table_file, grid, pedotransfer "
                             f"(got {', '.join(given) or 'none'})")
        if self.layers is not None:
            spans = sorted((l.depth_top_cm, l.depth_bottom_cm) for l in self.layers)
            for (t0, b0), (t1, b1) in zip(spans, spans[1:]):
                if t1 < b0:
                    raise ValueError(f"layers overlap: {t0:g}-{b0:g} cm and {t1:g}-{b1:g} cm")
        return self


class BioporeChannel(_Model):
    """One biopore: axis from ``top_cm`` to ``bottom_cm`` ([x_cm, y_cm, depth_cm]) and its radius."""

    top_cm: list[float]
    bottom_cm: list[float]
    radius_cm: float = Field(gt=0, le=10)

    @model_validator(mode="after")
    def _down(self):
        _point3(self.top_cm, "top_cm")
        _point3(self.bottom_cm, "bottom_cm")
        if self.bottom_cm[2] <= self.top_cm[2] or self.top_cm[2] < 0:
            raise ValueError("bottom_cm must be deeper than top_cm (third number: depth in cm, >= 0)")
        return self


class BioporeSpec(_Model):
    """Biopores: explicit ``channels`` and/or ``density_per_m2`` pores drawn with the run's seed over the stand
    (field) or container, spanning ``depth_top_cm``..``depth_bottom_cm``; ``radius_cm`` and
    ``inclination_from_vertical_deg`` a number or {low, high} (uniform)."""

    density_per_m2: float = Field(0.0, ge=0, le=100_000)
    radius_cm: float | dict[str, float] = 0.2
    inclination_from_vertical_deg: float | dict[str, float] = 0.0
    depth_top_cm: float = Field(0.0, ge=0)
    depth_bottom_cm: float = Field(100.0, gt=0)
    resistance_mpa: float = Field(0.0, ge=0, le=50)
    # probability that a growing tip meeting a pore enters it (drawn once per tip and pore)
    entry_probability: float = Field(1.0, ge=0, le=1)
    channels: list[BioporeChannel] = Field(default_factory=list)

    @model_validator(mode="after")
    def _ranges(self):
        if self.depth_bottom_cm <= self.depth_top_cm:
            raise ValueError("depth_bottom_cm must be greater than depth_top_cm")
        for key, low_ok, high_ok in (("radius_cm", 0.0, 10.0), ("inclination_from_vertical_deg", 0.0, 80.0)):
            value = getattr(self, key)
            if isinstance(value, dict):
                if set(value) != {"low", "high"} or not value["low"] <= value["high"]:
                    raise ValueError(f"{key} must be a number or {{ low = ..., high = ... }} with low <= high")
                values = (value["low"], value["high"])
            else:
                values = (value,)
            if any(not (low_ok <= v <= high_ok) for v in values) or (key == "radius_cm" and min(values) <= 0):
                raise ValueError(f"{key} must lie in ({low_ok:g}, {high_ok:g}]" if key == "radius_cm"
                                 else f"{key} must lie in [{low_ok:g}, {high_ok:g}]")
        return self


class Weather(_Model):
    """The season's daily weather table (CSV; see :mod:`rootsim.soil.weather`), relative to the parameter file."""

    file: str


class Development(_Model):
    """The clock growth runs on. ``calendar``: days. ``thermal``: effective days from the weather table (a day
    at ``optimum_temperature_c`` counts 1.0), with a cited temperature response (see :mod:`rootsim.soil.thermal`).
    ``time_unit``: times and rates in the file are per day at the optimum, or per degree-day."""

    clock: Literal["calendar", "thermal"] = "calendar"
    time_unit: Literal["day_at_optimum", "degree_day"] = "day_at_optimum"
    temperature_response: Literal["beta", "broken_linear"] = "beta"
    temperature_column: str = "mean_air_temperature_c"
    base_temperature_c: float = Field(8.0, ge=-20, le=40)
    optimum_temperature_c: float = Field(30.0, ge=-10, le=50)
    maximum_temperature_c: float = Field(42.0, ge=0, le=60)

    @model_validator(mode="after")
    def _cardinal(self):
        if not self.base_temperature_c < self.optimum_temperature_c < self.maximum_temperature_c:
            raise ValueError("cardinal temperatures must satisfy base_temperature_c < optimum_temperature_c "
                             "< maximum_temperature_c")
        return self



class FieldTropism(_Model):
    """A root class's turn toward the gradient of a named soil field (``[root_classes.NAME] field_tropism``):
    per cm of growth the heading turns toward the gradient's direction by the sine law at ``strength_per_cm``
    (toward wetter soil with ``volumetric_water_content``, toward a nutrient with ``nitrate_mg_per_kg``, ...)."""

    field: str
    strength_per_cm: float = Field(ge=0, le=10)


class Proliferation(_Model):
    """A root class's response to a named soil field (``[root_classes.NAME] proliferation``): its elongation
    and the density of branch points along its roots are multiplied by the saturating (Michaelis-Menten form)
    curve ``1 + (maximum_factor - 1) * v / (v + half_saturation_value)`` of the field's value ``v`` (negative
    values count as 0) at the tip."""

    field: str
    half_saturation_value: float = Field(gt=0)
    maximum_factor: float = Field(ge=1, le=20)
