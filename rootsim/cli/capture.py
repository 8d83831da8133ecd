"""``rootsim capture``: a season of soil water under a grown root system (Richards + Feddes uptake), or grown
together with it from a parameter file (``--grow``, coupled both ways)."""

from __future__ import annotations

import argparse
import contextlib
import json
from pathlib import Path

COMMAND = "capture"
HELP = "soil water over a season under grown roots, or coupled with growth (--grow) -> daily, layers, traits"
ORDER = 45
DESCRIPTION = """\
Run a season of soil water (Richards equation, van Genuchten-Mualem horizons; a 1D layered column
under a field stand, a 3D voxel column with no-flow walls for a pot or rhizobox run) under a root system,
with root water uptake distributed by the root length in each soil cell on each day (Feddes et al. 1978
stress reduction) and, when the soil-water file has [evaporation], soil evaporation by FAO-56's two
stages. Inputs: a soil-water TOML file and a daily weather CSV (day = days since sowing;
mean_air_temperature_c, or min_air_temperature_c and max_air_temperature_c, in every table; rain_mm,
irrigation_mm, potential_transpiration_mm or reference_evapotranspiration_mm). Two ways to run:

  rootsim capture RESULT_DIR ...      one-way: under the grown roots of RESULT_DIR/segments.parquet
                                      (outputs go to RESULT_DIR, or --out)
  rootsim capture --grow SPEC.toml --out NEW_DIR ...
                                      coupled: the stand grows day by day together with the soil water;
                                      each day the column's water content and matric potential become the
                                      soil fields volumetric_water_content / matric_potential_kpa the roots
                                      respond to (a Busscher pedotransfer resistance rises as the soil dries,
                                      a field_tropism toward water follows it). In a pot or rhizobox the
                                      column is the 3D voxel column: each day's new roots are cut at the
                                      voxel planes and the roots read the water of their own voxels.
                                      NEW_DIR gets segments.parquet and summary.json too, all committed at
                                      once (like `rootsim grow`). --no-coupling grows the roots in the
                                      spec's own soil instead.

Files written:

  capture_daily.csv    one row per day: potential and actual transpiration, soil evaporation,
                       infiltration, runoff, drainage, storage and the daily water-balance error, mm;
                       nitrate uptake, leaching and balance
  capture_layers.csv   one row per day and soil cell: water content, pressure head, uptake, root length
  capture_traits.json  seasonal transpiration, water taken up below a stated depth, stress days, ...
  water_content.png, cumulative_uptake.png, season_summary.png
  --vtk FILE.vti       the soil state as VTK image data: x = day, z = depth (cm, z up), cell data
                       water_content, pressure_head_cm, water_uptake_mm, root_length_cm,
                       nitrate_n_kg_per_ha, nitrate_n_mg_per_l, nitrate_uptake_kg_n_per_ha

Simulated capture is a research aid, not agronomic advice; the shipped soil and weather are invented.

Examples:
  rootsim capture results/demo --soil-water params/capture/soil_water_loam.toml --weather params/capture/weather_drying_season.csv
  rootsim capture --grow params/capture/cereal_drying_topsoil.toml --soil-water params/capture/soil_water_loam_evaporating.toml --weather params/capture/weather_dry_spell_120_days.csv --out results/dry_spell
"""


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("dir", metavar="RESULT_DIR", nargs="?", default=None,
                        help="results directory holding segments.parquet (omit with --grow)")
    parser.add_argument("--grow", metavar="SPEC.toml", default=None,
                        help="grow this parameter file's stand together with the soil water (coupled); needs --out")
    parser.add_argument("--no-coupling", action="store_true",
                        help="with --grow: the roots grow in the spec's own soil, not the column's water")
    parser.add_argument("--days", type=float, metavar="N", default=None,
                        help="with --grow: override run.duration_days (how long the roots grow)")
    parser.add_argument("--seed", type=int, metavar="S", default=None, help="with --grow: override run.seed")
    parser.add_argument("--overwrite", action="store_true",
                        help="with --grow: replace an earlier run in --out and every file derived from it")
    parser.add_argument("--soil-water", metavar="SOIL.toml", required=True, help="soil-water file (TOML)")
    parser.add_argument("--weather", metavar="WEATHER.csv", required=True, help="daily weather table (CSV)")
    parser.add_argument("--out", metavar="DIR", default=None,
                        help="output directory (default: RESULT_DIR; with --grow: a new result folder, required)")
    parser.add_argument("--phosphorus-radius-cm", metavar="R", type=float, default=None,
                        help="also measure the soil within R cm of any root (phosphorus depletion zones) and the "
                             "overlap between roots and plants -> phosphorus_profile.csv, traits")
    parser.add_argument("--phosphorus-voxel-cm", metavar="V", type=float, default=None,
                        help="voxel edge for the depletion volume, cm (default R / 4)")
    parser.add_argument("--vtk", metavar="FILE.vti", default=None,
                        help="also write the soil state by depth and day as VTK image data (.vti)")
    parser.add_argument("--no-figures", action="store_true", help="skip the PNG figures")
    parser.add_argument("--container-cell-cm", metavar="C", type=float, default=None,
                        help="horizontal voxel edge of the 3D column used for a pot or rhizobox run (also with "
                             "--grow), cm (default: the soil file's cell_cm)")


def _check_mode(args) -> None:
    from ..capture.errors import CaptureError

    if args.grow is not None:
        if args.dir is not None:
            raise CaptureError(f"capture: give either RESULT_DIR ({args.dir}) or --grow ({args.grow}), not both")
        if args.out is None:
            raise CaptureError("capture --grow: --out is missing (allowed: a new or empty folder for the grown "
                               "roots and the capture outputs)")
    else:
        if args.dir is None:
            raise CaptureError("capture: RESULT_DIR is missing (allowed: a folder holding segments.parquet, or "
                               "--grow SPEC.toml --out DIR to grow the roots with the soil water)")
        given = [name for name, value in (("--no-coupling", args.no_coupling), ("--days", args.days),
                                          ("--seed", args.seed), ("--overwrite", args.overwrite)) if value]
        if given:
            raise CaptureError(f"capture: {given[0]} applies only with --grow (allowed: --grow SPEC.toml)")
    _check_sizes(args)


def _check_sizes(args) -> None:
    """Sizes in cm given on the command line: finite and > 0, before any work is done."""
    import math

    from ..capture.errors import CaptureError

    for option, value in (("--container-cell-cm", args.container_cell_cm),
                          ("--phosphorus-radius-cm", args.phosphorus_radius_cm),
                          ("--phosphorus-voxel-cm", args.phosphorus_voxel_cm)):
        if value is not None and not (math.isfinite(value) and value > 0):
            raise CaptureError(f"capture: {option} {value:g} (allowed: a number of cm > 0)")
    if args.phosphorus_voxel_cm is not None:
        if args.phosphorus_radius_cm is None:
            raise CaptureError("capture: --phosphorus-voxel-cm applies only with --phosphorus-radius-cm "
                               "(allowed: --phosphorus-radius-cm R --phosphorus-voxel-cm V, V <= R, cm)")
        if args.phosphorus_voxel_cm > args.phosphorus_radius_cm:
            raise CaptureError(f"capture: --phosphorus-voxel-cm {args.phosphorus_voxel_cm:g} is larger than "
                               f"--phosphorus-radius-cm {args.phosphorus_radius_cm:g} (allowed: V <= R, cm)")


def _write_outputs(path_of, result, traits, setup, phosphorus, *, figures: bool) -> None:
    """Write the capture files; ``path_of(name)`` is where file ``name`` goes."""
    from ..capture.figures import plot_cumulative_uptake, plot_season_summary, plot_water_content

    result["daily"].to_csv(path_of("capture_daily.csv"), index=False, float_format="%.10g")
    result["layers"].to_csv(path_of("capture_layers.csv"), index=False, float_format="%.10g")
    path_of("capture_traits.json").write_text(json.dumps(traits, indent=2, allow_nan=False) + "\n", encoding="utf-8")
    if phosphorus is not None:
        phosphorus["profile"].to_csv(path_of("phosphorus_profile.csv"), index=False, float_format="%.10g")
    if figures:
        plot_water_content(result["layers"], title=setup.name).savefig(path_of("water_content.png"), format="png",
                                                                       dpi=120)
        plot_cumulative_uptake({setup.name: result["daily"]}).savefig(path_of("cumulative_uptake.png"),
                                                                      format="png", dpi=120)
        plot_season_summary(result["traits"], title=setup.name).savefig(path_of("season_summary.png"), format="png",
                                                                        dpi=120)


def run(args: argparse.Namespace) -> int:
    from ..atomic import atomic_path, ensure_output_dir
    from ..capture.errors import CaptureError
    from ..capture.soil_file import read_soil_water_file
    from ..rootsystem import RootSystem
    from ..soil.weather import read_weather_table

    _check_mode(args)
    if args.vtk is not None and Path(args.vtk).suffix.lower() != ".vti":
        raise CaptureError(f"--vtk {args.vtk}: the soil state is written as VTK image data (allowed: a .vti file)")
    from ..atomic import check_output_location

    if args.vtk is not None:
        check_output_location(args.vtk)  # before any output is written or committed
    if args.grow is None:
        check_output_location(args.out if args.out is not None else args.dir, folder=True)
    setup = read_soil_water_file(args.soil_water)
    weather = read_weather_table(args.weather)
    if args.grow is not None:
        return _run_coupled(args, setup, weather)
    system = RootSystem.read(args.dir)
    from ..analysis.inputs import ground_area_from_metadata, system_metadata

    if ground_area_from_metadata(system_metadata(system)) is None:  # (the profile's message names options of
        raise CaptureError(f"{args.dir}: no stand layout, so no ground area to turn root length per soil "  # analyze)
                           "cell into uptake in mm (allowed: roots grown by 'rootsim grow', or a table whose "
                           "metadata has stand.ground_area_cm2)")
    from ..capture.season3d import season_for_system

    result = season_for_system(system, setup, weather, cell_cm=args.container_cell_cm)
    phosphorus = _phosphorus(args, system, result)
    traits = dict(result["traits"], soil_water_file=str(args.soil_water), weather_file=str(args.weather),
                  source=str(args.dir), soil_column=result["column"])
    out = ensure_output_dir(args.out if args.out is not None else args.dir)
    names = _output_names(args, phosphorus)
    with contextlib.ExitStack() as stack:
        tmp = {name: stack.enter_context(atomic_path(out / name)) for name in names}
        _write_outputs(tmp.__getitem__, result, traits, setup, phosphorus, figures=not args.no_figures)
        if args.vtk is not None:
            from ..capture.soil_state_vtk import write_soil_state_vti

            write_soil_state_vti(stack.enter_context(atomic_path(args.vtk)), result["layers"])
    _report(args.dir, result, [out / n for n in names] + ([Path(args.vtk)] if args.vtk else []))
    return 0


def _output_names(args, phosphorus) -> list:
    names = ["capture_daily.csv", "capture_layers.csv", "capture_traits.json"]
    if phosphorus is not None:
        names.append("phosphorus_profile.csv")
    if not args.no_figures:
        names += ["water_content.png", "cumulative_uptake.png", "season_summary.png"]
    return names


def _phosphorus(args, system, result):
    if args.phosphorus_radius_cm is None:
        return None
    from ..capture.phosphorus import explored_volume

    radius = args.phosphorus_radius_cm
    voxel = args.phosphorus_voxel_cm if args.phosphorus_voxel_cm is not None else (radius or 1.0) / 4.0
    phosphorus = explored_volume(system, radius_cm=radius, voxel_cm=voxel)
    result["traits"].update({f"phosphorus_{k}": phosphorus[k] for k in
                             ("radius_cm", "voxel_cm", "explored_cm3", "overlap_same_plant_cm3",
                              "overlap_between_plants_cm3")})
    return phosphorus


def _report(source, result, paths) -> None:
    t = result["traits"]
    print(f"{source}: {t['days']} days, transpiration {t['seasonal_transpiration_mm']:.1f} of "
          f"{t['seasonal_potential_transpiration_mm']:.1f} mm potential, {t['water_uptake_below_depth_mm']:.1f} mm "
          f"from below {t['deep_water_below_cm']:g} cm, {t['days_of_water_stress']} stress days, drainage "
          f"{t['drainage_mm']:.1f} mm")
    print(f"wrote {', '.join(str(p) for p in paths)}")


def _run_coupled(args, setup, weather) -> int:
    """``--grow``: grow the stand with the soil water and commit roots and capture outputs as one folder."""
    from ..atomic import atomic_path, atomic_write_text
    from ..capture.coupled import run_coupled_season
    from ..progress import stage
    from ..result_folder import check_new_result_folder, file_sha256, write_result_folder
    from ..spec import load_spec
    from ..stand_layout import layout_from_metadata

    spec = load_spec(args.grow).with_overrides(duration_days=args.days, seed=args.seed)
    out = check_new_result_folder(args.out, overwrite=args.overwrite)  # fail early, create nothing
    coupled = not args.no_coupling
    with stage(f"growing {spec.name} with the soil water ({'coupled' if coupled else 'not coupled'})"):
        result = run_coupled_season(spec, setup, weather, couple=coupled, container_cell_cm=args.container_cell_cm)
    system = result["system"]
    phosphorus = _phosphorus(args, system, result)
    facts = {"spec_name": spec.name, "spec_file": str(args.grow), "duration_days": spec.run.duration_days,
             "time_step_days": spec.run.time_step_days, "seed": spec.run.seed, "coupled": coupled,
             "soil_water_file": str(args.soil_water), "weather_file": str(args.weather)}
    traits = dict(result["traits"], soil_water_file=str(args.soil_water), weather_file=str(args.weather),
                  source=str(args.grow), soil_column=result["column"])
    summary = system.summary()
    summary["stand_layout"] = layout_from_metadata(system.metadata)
    names = ["segments.parquet", "summary.json"] + _output_names(args, phosphorus)

    def write_files(staging: Path) -> dict:
        system.write(staging / "segments.parquet")
        summary.update(facts)
        summary["run_id"] = file_sha256(staging / "segments.parquet")[:16]
        atomic_write_text(staging / "summary.json", json.dumps(summary, indent=2) + "\n")
        _write_outputs(lambda name: staging / name, result, traits, setup, phosphorus, figures=not args.no_figures)
        return facts

    with stage(f"writing {out}"):
        write_result_folder(out, write_files, overwrite=args.overwrite, command="capture --grow")
    paths = [out / n for n in names]
    if args.vtk is not None:
        from ..capture.soil_state_vtk import write_soil_state_vti

        with atomic_path(args.vtk) as tmp:
            write_soil_state_vti(tmp, result["layers"])
        paths.append(Path(args.vtk))
    _report(args.grow, result, paths)
    return 0
