"""``rootsim capture``: a season of soil water under a grown root system (Richards + Feddes uptake)."""

from __future__ import annotations

import argparse
import contextlib
import json
from pathlib import Path

COMMAND = "capture"
HELP = "soil water over a season under a grown root system -> capture_daily.csv, capture_layers.csv, traits"
ORDER = 45
DESCRIPTION = """\
Run a season of soil water (Richards equation, van Genuchten-Mualem horizons; a 1D layered column
under a field stand, a 3D voxel column with no-flow walls for a pot or rhizobox run) under a grown root
system, with root water uptake distributed by the root length in each soil cell on each day (Feddes
et al. 1978 stress reduction). Reads DIR/segments.parquet, a soil-water TOML file and a daily weather
CSV (rain_mm, irrigation_mm, potential_transpiration_mm or reference_evapotranspiration_mm), and writes:

  capture_daily.csv    one row per day: potential and actual transpiration, infiltration, runoff,
                       drainage, storage and the daily water-balance error, mm
  capture_layers.csv   one row per day and soil cell: water content, pressure head, uptake, root length
  capture_traits.json  seasonal transpiration, water taken up below a stated depth, stress days, ...
  water_content.png, cumulative_uptake.png, season_summary.png
  --vtk FILE.vti       the soil state as VTK image data: x = day, z = depth (cm, z up), cell data
                       water_content, pressure_head_cm, water_uptake_mm, root_length_cm,
                       nitrate_n_kg_per_ha, nitrate_n_mg_per_l, nitrate_uptake_kg_n_per_ha

Simulated capture is a research aid, not agronomic advice; the shipped soil and weather are invented.

Examples:
  rootsim capture results/demo --soil-water params/capture/soil_water_loam.toml --weather params/capture/weather_drying_season.csv
"""


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("dir", metavar="RESULT_DIR", help="results directory holding segments.parquet")
    parser.add_argument("--soil-water", metavar="SOIL.toml", required=True, help="soil-water file (TOML)")
    parser.add_argument("--weather", metavar="WEATHER.csv", required=True, help="daily weather table (CSV)")
    parser.add_argument("--out", metavar="DIR", default=None, help="output directory (default: RESULT_DIR)")
    parser.add_argument("--phosphorus-radius-cm", metavar="R", type=float, default=None,
                        help="also measure the soil within R cm of any root (phosphorus depletion zones) and the "
                             "overlap between roots and plants -> phosphorus_profile.csv, traits")
    parser.add_argument("--phosphorus-voxel-cm", metavar="V", type=float, default=None,
                        help="voxel edge for the depletion volume, cm (default R / 4)")
    parser.add_argument("--vtk", metavar="FILE.vti", default=None,
                        help="also write the soil state by depth and day as VTK image data (.vti)")
    parser.add_argument("--no-figures", action="store_true", help="skip the PNG figures")
    parser.add_argument("--container-cell-cm", metavar="C", type=float, default=None,
                        help="horizontal voxel edge of the 3D column used for a pot or rhizobox run, cm (default: "
                             "the soil file's cell_cm)")


def run(args: argparse.Namespace) -> int:
    from ..atomic import atomic_path, ensure_output_dir
    from ..capture.errors import CaptureError
    from ..capture.figures import plot_cumulative_uptake, plot_season_summary, plot_water_content
    from ..capture.soil_file import read_soil_water_file
    from ..rootsystem import RootSystem
    from ..soil.weather import read_weather_table

    if args.vtk is not None and Path(args.vtk).suffix.lower() != ".vti":
        raise CaptureError(f"--vtk {args.vtk}: the soil state is written as VTK image data (allowed: a .vti file)")
    setup = read_soil_water_file(args.soil_water)
    weather = read_weather_table(args.weather)
    system = RootSystem.read(args.dir)
    from ..capture.season3d import season_for_system

    result = season_for_system(system, setup, weather, cell_cm=args.container_cell_cm)
    phosphorus = None
    if args.phosphorus_radius_cm is not None:
        from ..capture.phosphorus import explored_volume

        radius = args.phosphorus_radius_cm
        voxel = args.phosphorus_voxel_cm if args.phosphorus_voxel_cm is not None else (radius or 1.0) / 4.0
        phosphorus = explored_volume(system, radius_cm=radius, voxel_cm=voxel)
        result["traits"].update({f"phosphorus_{k}": phosphorus[k] for k in
                                 ("radius_cm", "voxel_cm", "explored_cm3", "overlap_same_plant_cm3",
                                  "overlap_between_plants_cm3")})
    traits = dict(result["traits"], soil_water_file=str(args.soil_water), weather_file=str(args.weather),
                  source=str(args.dir), soil_column=result["column"])
    out = ensure_output_dir(args.out if args.out is not None else args.dir)
    names = ["capture_daily.csv", "capture_layers.csv", "capture_traits.json"]
    if phosphorus is not None:
        names.append("phosphorus_profile.csv")
    if not args.no_figures:
        names += ["water_content.png", "cumulative_uptake.png", "season_summary.png"]
    with contextlib.ExitStack() as stack:
        tmp = {name: stack.enter_context(atomic_path(out / name)) for name in names}
        result["daily"].to_csv(tmp["capture_daily.csv"], index=False, float_format="%.10g")
        result["layers"].to_csv(tmp["capture_layers.csv"], index=False, float_format="%.10g")
        tmp["capture_traits.json"].write_text(json.dumps(traits, indent=2, allow_nan=False) + "\n", encoding="utf-8")
        if args.vtk is not None:
            from ..capture.soil_state_vtk import write_soil_state_vti

            write_soil_state_vti(stack.enter_context(atomic_path(args.vtk)), result["layers"])
        if phosphorus is not None:
            phosphorus["profile"].to_csv(tmp["phosphorus_profile.csv"], index=False, float_format="%.10g")
        if not args.no_figures:
            plot_water_content(result["layers"], title=setup.name).savefig(tmp["water_content.png"], format="png",
                                                                           dpi=120)
            plot_cumulative_uptake({setup.name: result["daily"]}).savefig(tmp["cumulative_uptake.png"], format="png",
                                                                          dpi=120)
            plot_season_summary(result["traits"], title=setup.name).savefig(tmp["season_summary.png"], format="png",
                                                                            dpi=120)
    t = result["traits"]
    print(f"{args.dir}: {t['days']} days, transpiration {t['seasonal_transpiration_mm']:.1f} of "
          f"{t['seasonal_potential_transpiration_mm']:.1f} mm potential, {t['water_uptake_below_depth_mm']:.1f} mm "
          f"from below {t['deep_water_below_cm']:g} cm, {t['days_of_water_stress']} stress days, drainage "
          f"{t['drainage_mm']:.1f} mm")
    print(f"wrote {', '.join([str(out / n) for n in names] + ([str(args.vtk)] if args.vtk else []))}")
    return 0
