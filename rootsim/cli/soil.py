"""``rootsim soil``: show a parameter file's soil fields, biopores and season; write them as a .vti grid."""

from __future__ import annotations

COMMAND = "soil"
ORDER = 6
HELP = "print a spec's soil fields by depth, its biopores and thermal time; write the fields as .vti"
DESCRIPTION = """\
Compile the soil of a parameter file ([[soil.layers]], [soil.fields.*], [soil.biopores]) and print
every field at the centre of the soil (x = y = 0) by depth, the number of biopores (drawn with the
run's seed) and, with a [weather] table, the season's effective days and degree-days.

  --vti FILE.vti      the fields sampled every --voxel-cm over the stand (or container), plus
                      biopore_index (-1 outside biopores), to view next to 'rootsim export --vtk'
                      roots in a VTK viewer.

examples:
  rootsim soil params/field_plough_pan.toml
  rootsim soil params/field_plough_pan.toml --vti results/soil.vti --voxel-cm 2
"""


#: Most depths the printout shows (a page of numbers is for reading; use --vti for fine grids).
MAX_PRINTED_DEPTHS = 10_000


def register(parser) -> None:
    parser.add_argument("spec", metavar="SPEC", help="parameter file (.toml)")
    parser.add_argument("--vti", metavar="FILE.vti", help="write the soil fields as VTK image data")
    parser.add_argument("--voxel-cm", type=float, default=2.0, metavar="V", help="grid spacing for --vti, cm (default 2)")
    parser.add_argument("--depth-cm", type=float, metavar="D", help="deepest depth shown and written, cm (default: "
                        "the container, else the deepest layer or biopore, at least 100)")
    parser.add_argument("--step-cm", type=float, default=10.0, metavar="S", help="depth step of the printout, cm")


def run(args) -> int:
    import numpy as np

    from ..errors import RootsimError
    from ..soil.build import biopores_from_spec, soil_bounds_cm, soil_fields_from_spec
    from ..spec import load_spec

    import math

    for option, value in (("--depth-cm", args.depth_cm), ("--step-cm", args.step_cm), ("--voxel-cm", args.voxel_cm)):
        if value is not None and not (math.isfinite(value) and value > 0):  # also refuses nan and inf
            raise RootsimError(f"{option} {value:g}: not allowed (allowed: a finite number of cm > 0)")
    from ..limits import MAX_EXTENT_CM

    if args.depth_cm is not None and args.depth_cm > MAX_EXTENT_CM:
        raise RootsimError(f"--depth-cm {args.depth_cm:g}: deeper than any soil (allowed: at most {MAX_EXTENT_CM:g} cm)")
    spec = load_spec(args.spec)
    bounds = soil_bounds_cm(spec, depth_cm=args.depth_cm)
    rows = -bounds[4] / args.step_cm
    if rows > MAX_PRINTED_DEPTHS:
        raise RootsimError(f"--step-cm {args.step_cm:g} over {-bounds[4]:g} cm prints {rows:.3g} depths (allowed: at "
                           f"most {MAX_PRINTED_DEPTHS:,}; a larger --step-cm or a smaller --depth-cm)")
    fields = soil_fields_from_spec(spec)
    biopores = biopores_from_spec(spec)
    if args.vti:
        from ..soil.vti import write_soil_vti

        write_soil_vti(args.vti, fields, bounds_cm=bounds, voxel_cm=args.voxel_cm, biopores=biopores)
    print(f"soil of {args.spec}: {len(fields.names)} field(s), "
          f"{0 if biopores is None else biopores.count} biopore(s)")
    if fields.names:
        depth = np.arange(0.0, -bounds[4] + 1e-9, args.step_cm)
        print("depth_cm  " + "  ".join(fields.names))
        columns = [fields.values(name, 0.0, 0.0, -depth) for name in fields.names]
        for i, d in enumerate(depth):
            print(f"{d:8.1f}  " + "  ".join(f"{col[i]:>{len(name)}.4g}" for name, col in zip(fields.names, columns)))
    if spec.weather is not None:
        from ..soil.thermal import daily_effective_days, weather_table_for_spec

        dev = spec.development
        table = weather_table_for_spec(spec)
        daily = daily_effective_days(table, shape=dev.temperature_response, base_c=dev.base_temperature_c,
                                     optimum_c=dev.optimum_temperature_c, maximum_c=dev.maximum_temperature_c,
                                     temperature_column=dev.temperature_column)
        print(f"weather {table.source}: days {table.first_day}..{table.last_day}, {daily.sum():.1f} effective days "
              f"({daily.sum() * (dev.optimum_temperature_c - dev.base_temperature_c):.0f} degree-days above "
              f"{dev.base_temperature_c:g} °C, {dev.temperature_response} response); clock: {dev.clock}")
    if args.vti:
        print(f"wrote {args.vti}")
    return 0
