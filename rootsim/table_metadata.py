"""Schema of the table metadata stored with a segment table (Parquet key ``rootsim``), validated with pydantic.

The metadata are read with the same schema machinery as parameter files (strict pydantic models; the container
and soil layers reuse the parameter file's own models), so a file whose metadata have the wrong shape (a list,
a string, a position that is not two or three numbers) is refused with one line naming the key path, instead of
failing somewhere in an analyzer. Unknown keys are kept (newer writers may add facts).
"""

from __future__ import annotations

import json
from typing import Optional

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from .errors import SegmentTableError
from .spec import Container, SoilLayer

__all__ = ["TableMetadata", "parse_table_metadata"]

#: Most bytes of metadata read from a file (positions of 100,000 plants take about 5 MB).
MAX_METADATA_BYTES = 16 * 1024 * 1024


class _Open(BaseModel):
    model_config = ConfigDict(extra="allow", strict=True, allow_inf_nan=False)


class RunFacts(_Open):
    duration_days: Optional[float] = Field(None, ge=0)
    time_step_days: Optional[float] = Field(None, gt=0)
    seed: Optional[int] = Field(None, ge=0)


class StandFacts(_Open):
    n_plants: Optional[int] = Field(None, ge=0)
    rows: Optional[int] = Field(None, ge=1)
    plants_per_row: Optional[int] = Field(None, ge=1)
    row_spacing_cm: Optional[float] = Field(None, gt=0)
    plant_spacing_cm: Optional[float] = Field(None, gt=0)
    sowing_depth_cm: Optional[float] = Field(None, ge=0)
    ground_area_cm2: Optional[float] = Field(None, gt=0)
    plant_positions_cm: Optional[list[list[float]]] = None


class TableMetadata(_Open):
    """The ``rootsim`` metadata of a segment table; every key optional, known keys of a fixed shape."""

    spec_name: Optional[str] = None
    spec_file: Optional[str] = None
    run: Optional[RunFacts] = None
    stand: Optional[StandFacts] = None
    container: Optional[Container] = None
    soil_layers: Optional[list[SoilLayer]] = None
    root_classes: Optional[list[str]] = None
    run_id: Optional[str] = None


def parse_table_metadata(raw: bytes | str | None, *, source: str) -> dict:
    """Validate the JSON metadata of a segment table and return it as a dict ({} if absent).

    Raises
    ------
    SegmentTableError
        ``SOURCE: metadata: KEY.PATH: problem (allowed: ...)`` for invalid JSON or a wrong shape.
    """
    if raw is None or raw == b"" or raw == "":
        return {}
    if len(raw) > MAX_METADATA_BYTES:
        raise SegmentTableError(f"{source}: metadata: {len(raw):,} bytes (allowed: at most {MAX_METADATA_BYTES:,})")
    try:
        TableMetadata.model_validate_json(raw)
    except ValidationError as exc:
        err = exc.errors(include_url=False)[0]
        loc = "".join(f"[{p}]" if isinstance(p, int) else f".{p}" for p in err.get("loc", ())).lstrip(".")
        msg = " ".join(str(err.get("msg", "invalid value")).split())[:160]
        raise SegmentTableError(f"{source}: metadata: {loc or '<top level>'}: {msg} "
                                "(allowed: the layout written by rootsim grow, see the README)") from None
    data = json.loads(raw)
    if not isinstance(data, dict):  # pragma: no cover - the model only accepts objects
        raise SegmentTableError(f"{source}: metadata: must be a JSON object")
    positions = (data.get("stand") or {}).get("plant_positions_cm")
    if positions is not None and any(len(p) not in (2, 3) for p in positions):
        raise SegmentTableError(f"{source}: metadata: stand.plant_positions_cm: each position must be 2 or 3 numbers "
                                "(x, y[, z] in cm)")
    return data
