"""The soil-water file (TOML): a layered column, its van Genuchten-Mualem horizons and the uptake parameters.

Example (``params/capture/soil_water_loam.toml``)::

    name = "invented_loam_field"
    [column]
    depth_cm = 150.0                 # bottom of the simulated column
    cell_cm = 2.0                    # thickness of the solver cells
    bottom = "free_drainage"         # or "water_table" (h = 0 at the bottom)
    initial_pressure_head_cm = -100.0
    [[horizons]]                     # from the surface down; the last reaches depth_cm
    depth_bottom_cm = 30.0
    texture = "loam"                 # Carsel & Parrish (1988) class means, or give the five values below
    # residual_water_content, saturated_water_content, van_genuchten_alpha_per_cm, van_genuchten_n,
    # saturated_conductivity_cm_per_day, pore_connectivity (0.5), air_entry_head_cm (-2.0)
    [uptake]                         # Feddes et al. (1978) heads, cm; see rootsim.capture.uptake
    [transpiration]
    crop_coefficient = 1.0           # potential = coefficient x reference ET (FAO-56) when the weather table
                                     # has no potential_transpiration_mm
    latitude_deg = 45.0              # optional: with first_day_of_year, reference ET by Hargreaves (FAO-56 eq. 52)
    first_day_of_year = 100          # from min/max air temperature when the table has no ET column; calendar
                                     # day of year (1..366) of the weather table's first row
    [nitrate]                        # see rootsim.capture.nitrate (initial_nitrate_n_mg_per_l, dispersivity_cm,
                                     # diffusion_in_water_cm2_per_day, max_uptake_mg_n_per_cm_root_per_day,
                                     # half_saturation_mg_n_per_l)
    [evaporation]                    # optional: soil evaporation by FAO-56's two stages (rootsim.capture.evaporation):
                                     # readily_evaporable_water_mm, total_evaporable_water_mm,
                                     # evaporating_layer_cm, crop_cover_fraction, maximum_crop_coefficient,
                                     # initial_depletion_mm
    [traits]
    deep_water_below_cm = 60.0       # "water taken from below" this depth
    stress_ratio_below = 0.9         # a stress day: actual / potential transpiration below this

A cell takes the horizon holding its centre.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, fields
from pathlib import Path

import numpy as np

from .errors import CaptureError
from .evaporation import SoilEvaporationParameters
from .hydraulics import TEXTURE_CLASSES, VanGenuchtenMualem, check_van_genuchten
from .richards import BOTTOM_CONDITIONS
from .nitrate import NitrateParameters
from .uptake import FeddesParameters

__all__ = ["SoilWaterSetup", "read_soil_water_file", "soil_water_from_mapping"]

_VG_KEYS = {"residual_water_content": "residual", "saturated_water_content": "saturated",
            "van_genuchten_alpha_per_cm": "alpha", "van_genuchten_n": "n",
            "saturated_conductivity_cm_per_day": "ks"}
_HORIZON_KEYS = set(_VG_KEYS) | {"depth_bottom_cm", "texture", "pore_connectivity", "air_entry_head_cm",
                                 "initial_pressure_head_cm"}


@dataclass(frozen=True)
class SoilWaterSetup:
    """A validated soil-water file."""

    source: str
    name: str
    depth_cm: float
    cell_cm: float
    bottom: str
    soil: VanGenuchtenMualem
    initial_head_cm: np.ndarray
    feddes: FeddesParameters
    crop_coefficient: float
    deep_water_below_cm: float
    stress_ratio_below: float
    nitrate: NitrateParameters = NitrateParameters()
    latitude_deg: float | None = None
    first_day_of_year: int | None = None
    evaporation: SoilEvaporationParameters | None = None  # [evaporation]: FAO-56 two-stage; None: none

    @property
    def n_cells(self) -> int:
        """Number of solver cells."""
        return int(self.soil.ks.size)


def _number(table: dict, key: str, where: str, *, low: float, high: float, default=None, strict_low=False):
    value = table.get(key, default)
    if value is None:
        raise CaptureError(f"{where}.{key}: missing (allowed: a number from {low:g} to {high:g})")
    ok = isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)
    ok = ok and (value > low if strict_low else value >= low) and value <= high
    if not ok:
        rel = ">" if strict_low else ">="
        raise CaptureError(f"{where}.{key}: {value!r} is out of range (allowed: a number {rel} {low:g} and <= {high:g})")
    return float(value)


def _unknown(table: dict, allowed: set, where: str) -> None:
    extra = sorted(set(table) - allowed)
    if extra:
        raise CaptureError(f"{where}.{extra[0]}: unknown key (allowed: {', '.join(sorted(allowed))})")


def soil_water_from_mapping(data: dict, *, source: str = "<soil>") -> SoilWaterSetup:
    """Validate a parsed soil-water file (see the module docstring); one-line errors naming file and key."""
    _unknown(data, {"name", "column", "horizons", "uptake", "transpiration", "traits", "nitrate", "evaporation"},
             source)
    column = data.get("column", {})
    if not isinstance(column, dict):
        raise CaptureError(f"{source}: column: must be a table (allowed: [column] with depth_cm, cell_cm, ...)")
    where = f"{source}: column"
    _unknown(column, {"depth_cm", "cell_cm", "bottom", "initial_pressure_head_cm"}, where)
    depth = _number(column, "depth_cm", where, low=1.0, high=1000.0)
    cell = _number(column, "cell_cm", where, low=0.1, high=50.0, default=2.0)
    n_cells = int(round(depth / cell))
    if abs(n_cells * cell - depth) > 1e-9 * depth or n_cells > 5000:
        raise CaptureError(f"{where}.cell_cm: {cell:g} does not divide depth_cm {depth:g} into at most 5000 cells "
                           "(allowed: a divisor of depth_cm)")
    bottom = column.get("bottom", "free_drainage")
    if bottom not in BOTTOM_CONDITIONS:
        raise CaptureError(f"{where}.bottom: {bottom!r} (allowed: {', '.join(BOTTOM_CONDITIONS)})")
    initial = _number(column, "initial_pressure_head_cm", where, low=-1e6, high=0.0, default=-100.0)
    horizons = data.get("horizons")
    if not isinstance(horizons, list) or not horizons:
        raise CaptureError(f"{source}: horizons: missing (allowed: one or more [[horizons]] tables)")
    centres = (np.arange(n_cells) + 0.5) * cell
    arrays = {k: np.empty(n_cells) for k in ("residual", "saturated", "alpha", "n", "ks", "l", "entry", "h0")}
    top = 0.0
    for index, horizon in enumerate(horizons):
        hw = f"{source}: horizons[{index}]"
        if not isinstance(horizon, dict):
            raise CaptureError(f"{hw}: must be a table (allowed: depth_bottom_cm, texture or parameters)")
        _unknown(horizon, _HORIZON_KEYS, hw)
        bottom_cm = _number(horizon, "depth_bottom_cm", hw, low=top, high=1e4, strict_low=True)
        values = {}
        if "texture" in horizon:
            if horizon["texture"] not in TEXTURE_CLASSES:
                raise CaptureError(f"{hw}.texture: {horizon['texture']!r} is unknown "
                                   f"(allowed: {', '.join(TEXTURE_CLASSES)})")
            values.update(TEXTURE_CLASSES[horizon["texture"]])
        for key, short in _VG_KEYS.items():
            if key in horizon:
                values[short] = _number(horizon, key, hw, low=-1e9, high=1e9)
            elif short not in values:
                raise CaptureError(f"{hw}.{key}: missing (allowed: give it, or a texture: "
                                   f"{', '.join(TEXTURE_CLASSES)})")
        pore = _number(horizon, "pore_connectivity", hw, low=-10.0, high=10.0, default=0.5)
        check_van_genuchten(**values, pore_connectivity=pore, where=hw)
        entry = _number(horizon, "air_entry_head_cm", hw, low=-100.0, high=0.0, default=-2.0)
        h0 = _number(horizon, "initial_pressure_head_cm", hw, low=-1e6, high=0.0, default=initial)
        inside = (centres >= top) & (centres < bottom_cm)
        for key, value in zip(("residual", "saturated", "alpha", "n", "ks", "l", "entry", "h0"),
                              (values["residual"], values["saturated"], values["alpha"], values["n"], values["ks"],
                               pore, entry, h0)):
            arrays[key][inside] = value
        top = bottom_cm
    if top < depth:
        raise CaptureError(f"{source}: horizons[{len(horizons) - 1}].depth_bottom_cm: {top:g} is above the column "
                           f"bottom {depth:g} (allowed: the last horizon reaches column.depth_cm)")
    soil = VanGenuchtenMualem(arrays["residual"], arrays["saturated"], arrays["alpha"], arrays["n"], arrays["ks"],
                              arrays["l"], arrays["entry"])
    uptake = data.get("uptake", {})
    allowed = {f.name for f in fields(FeddesParameters)}
    _unknown(uptake, allowed, f"{source}: uptake")
    for key, value in uptake.items():
        _number(uptake, key, f"{source}: uptake", low=-1e6, high=1e6)
    feddes = FeddesParameters(**{k: float(v) for k, v in uptake.items()}).check(f"{source}: uptake")
    transpiration = data.get("transpiration", {})
    _unknown(transpiration, {"crop_coefficient", "latitude_deg", "first_day_of_year"}, f"{source}: transpiration")
    coefficient = _number(transpiration, "crop_coefficient", f"{source}: transpiration", low=0.0, high=3.0,
                          default=1.0)
    latitude = (None if "latitude_deg" not in transpiration else
                _number(transpiration, "latitude_deg", f"{source}: transpiration", low=-90.0, high=90.0))
    first_day_of_year = None
    if "first_day_of_year" in transpiration:
        value = transpiration["first_day_of_year"]
        if isinstance(value, bool) or not isinstance(value, int) or not 1 <= value <= 366:
            raise CaptureError(f"{source}: transpiration.first_day_of_year: {value!r} "
                               "(allowed: a whole calendar day of year 1..366)")
        first_day_of_year = int(value)
    traits = data.get("traits", {})
    _unknown(traits, {"deep_water_below_cm", "stress_ratio_below"}, f"{source}: traits")
    deep = _number(traits, "deep_water_below_cm", f"{source}: traits", low=0.0, high=depth, default=min(60.0, depth))
    stress = _number(traits, "stress_ratio_below", f"{source}: traits", low=0.0, high=1.0, default=0.9)
    nitrate_table = data.get("nitrate", {})
    nitrate_keys = {f.name for f in fields(NitrateParameters)}
    _unknown(nitrate_table, nitrate_keys, f"{source}: nitrate")
    nitrate = NitrateParameters(**{k: _number(nitrate_table, k, f"{source}: nitrate", low=0.0, high=1e6)
                                   for k in nitrate_table})
    evaporation = None
    if "evaporation" in data:
        table = data["evaporation"]
        where = f"{source}: evaporation"
        if not isinstance(table, dict):
            raise CaptureError(f"{where}: must be a table (allowed: [evaporation] with readily_evaporable_water_mm, "
                               "total_evaporable_water_mm, ...)")
        _unknown(table, {f.name for f in fields(SoilEvaporationParameters)}, where)
        evaporation = SoilEvaporationParameters(**{k: _number(table, k, where, low=0.0, high=1000.0)
                                                   for k in table}).check(where)
    name = str(data.get("name", Path(source).stem))
    return SoilWaterSetup(source, name, depth, cell, bottom, soil, arrays["h0"], feddes, coefficient, deep, stress,
                          nitrate, latitude, first_day_of_year, evaporation)


def read_soil_water_file(path: str | os.PathLike) -> SoilWaterSetup:
    """Read and validate a soil-water TOML file (one-line :class:`CaptureError` on any problem)."""
    from ..errors import SpecError
    from ..limits import MAX_TOML_BYTES
    from ..toml_input import parse_toml_text

    path = Path(path)
    try:
        size = path.stat().st_size
        if size > MAX_TOML_BYTES:  # bounded like parameter files: size, nesting, key parts, number length
            raise CaptureError(f"{path}: the file has {size:,} bytes (allowed: at most {MAX_TOML_BYTES:,} bytes)")
        with open(path, "rb") as handle:
            text = handle.read().decode("utf-8")
        data = parse_toml_text(text, source=str(path))
    except FileNotFoundError:
        raise CaptureError(f"{path}: file not found") from None
    except IsADirectoryError:
        raise CaptureError(f"{path}: is a folder (allowed: a soil-water TOML file)") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise CaptureError(f"{path}: cannot read as TOML ({' '.join(str(exc).split())[:120]})") from None
    except SpecError as exc:
        raise CaptureError(" ".join(exc.cli_message().split())[:300]) from None
    return soil_water_from_mapping(data, source=str(path))
