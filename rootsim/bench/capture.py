"""Bench stage ``capture``: a 120-day soil-water season coupled with growth against growing the stand alone.

The stand is the shipped coupled example, ``params/capture/cereal_drying_topsoil.toml`` (the cereal-like
classes of ``cereal_fibrous.toml`` on a loam whose resistance follows its water, two plants), grown for 120 days
with ``soil_water_loam_evaporating.toml`` and the invented ``weather_dry_spell_120_days.csv``. Two entries:

* ``capture_coupled``: the coupled season (growth paused every day, Richards + Feddes + nitrate + evaporation,
  water written into the soil fields). A drying soil grows fewer segments than the spec's static wet soil, so
  the floor is growing the same spec alone (``rootsim.grow``, on the spec's own clock) scaled to the coupled run's segment count: the
  ratio is the cost per segment of the coupled season; the aim is at most 1.5.
* ``capture_same_roots``: the same season with ``couple=False`` (the roots grow in the spec's own soil, exactly
  ``grow``'s table, while the column runs alongside) against ``grow``: the soil model and the daily pauses on
  identical growth, no scaling.
* ``capture_cereal_stand``: the shipped cereal stand (``params/cereal_fibrous.toml``, its thermal clock) over the
  same 120-day season, coupled (its layered soil does not depend on water, so it grows the same roots) against
  growing it alone: the cost of the soil model on a full field stand (the issue's aim: at most 1.5x).
"""

from __future__ import annotations

from pathlib import Path

from . import make_entry, timed

NAME = "capture"
ORDER = 50

_PARAMS = Path(__file__).resolve().parents[2] / "params" / "capture"
SPEC_FILE = _PARAMS / "cereal_drying_topsoil.toml"
SOIL_FILE = _PARAMS / "soil_water_loam_evaporating.toml"
WEATHER_FILE = _PARAMS / "weather_dry_spell_120_days.csv"
CEREAL_FILE = _PARAMS.parent / "cereal_fibrous.toml"


def run_capture_stage(*, days: int = 120, repeat: int = 3, cereal_stand: bool = True) -> dict[str, dict]:
    """Time the coupled season, the uncoupled season and growth alone over ``days`` days (and the shipped
    cereal stand's coupled season against growing it, unless ``cereal_stand`` is False)."""
    from ..capture.coupled import run_coupled_season
    from ..capture.soil_file import read_soil_water_file
    from ..soil.thermal import grow_for_spec
    from ..soil.weather import read_weather_table
    from ..spec import load_spec

    spec = load_spec(SPEC_FILE).with_overrides(duration_days=float(days))
    setup = read_soil_water_file(SOIL_FILE)
    weather = read_weather_table(WEATHER_FILE)
    last_day = days - 1

    def coupled(couple):
        result = run_coupled_season(spec, setup, weather, couple=couple, last_day=last_day, progress=False)
        return len(result["system"]), float(result["traits"]["seasonal_transpiration_mm"])

    grow_seconds, grown = timed(grow_for_spec, spec, progress=False, repeat=repeat)  # on the spec's own clock
    n_grown = len(grown)
    del grown
    coupled_seconds, (n_coupled, transpiration) = timed(coupled, True, repeat=repeat)
    same_seconds, (n_same, _) = timed(coupled, False, repeat=repeat)
    common = {"days": days, "spec_file": SPEC_FILE.name, "grow_alone_segments": n_grown,
              "grow_alone_seconds": grow_seconds}
    results = {}
    if cereal_stand:
        cereal = load_spec(CEREAL_FILE).with_overrides(duration_days=float(days))

        def cereal_season():
            result = run_coupled_season(cereal, setup, weather, couple=True, last_day=last_day, progress=False)
            return len(result["system"])

        cereal_grow_seconds, n_cereal_grown = timed(lambda: len(grow_for_spec(cereal, progress=False)), repeat=repeat)
        cereal_seconds, n_cereal = timed(cereal_season, repeat=repeat)
        results["capture_cereal_stand"] = make_entry(
            segments=n_cereal, seconds=cereal_seconds, floor_seconds=cereal_grow_seconds,
            floor="growing the shipped cereal stand alone (cereal_fibrous.toml, its thermal clock)", days=days,
            spec_file=CEREAL_FILE.name, grow_alone_segments=n_cereal_grown)
    return results | {
        "capture_coupled": make_entry(
            segments=n_coupled, seconds=coupled_seconds, floor_seconds=grow_seconds * n_coupled / max(n_grown, 1),
            floor="growing the same spec alone (its static soil), scaled to the coupled run's segment count",
            seasonal_transpiration_mm=transpiration, ratio_unscaled=coupled_seconds / grow_seconds, **common),
        "capture_same_roots": make_entry(
            segments=n_same, seconds=same_seconds, floor_seconds=grow_seconds,
            floor="growing the same spec alone (the same table: the season runs beside it, not coupled)", **common),
    }


def run(system, *, workdir) -> dict[str, dict]:
    """The stage (``system`` and ``workdir`` are not used: the stage grows its own stand)."""
    return run_capture_stage()
