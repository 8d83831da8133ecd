"""``rootsim check``: validate a parameter file and summarise it."""

from __future__ import annotations

COMMAND = "check"
ORDER = 5
HELP = "validate a parameter file and print a short summary"
DESCRIPTION = """\
Validate a parameter file without growing it. On success a short summary of the run, the stand
layout (where the plants are: rows along y at their x, plants along each row, the stand's cell and
ground area, and where a field team would take cores), the container's size for pots and
rhizoboxes, soil and root classes is printed, followed by warnings on stderr about gaps between
soil layers and layers that stop above the deepest roots the run can grow. On error one line
names the file, the key and what is allowed:

  error: params/x.toml: root_classes.primary.radus_cm: unknown key (allowed: did you mean 'radius_cm'? ...)

A file that says based_on = "other.toml" is merged over its base table by table; check then also
lists every merged value and the file that set it.

example:
  rootsim check params/cereal_fibrous.toml
"""


def register(parser) -> None:
    parser.add_argument("spec", metavar="SPEC", help="parameter file (.toml)")


def describe_spec(spec) -> str:
    """A short human summary of a validated spec."""
    from ..distributions import Fixed, Normal, Uniform

    def show(d):
        if isinstance(d, Fixed):
            return f"{d.value:g}"
        if isinstance(d, Normal):
            return f"{d.mean:g}±{d.standard_deviation:g}"
        if isinstance(d, Uniform):
            return f"{d.low:g}..{d.high:g}"
        return "-"

    from ..stand_layout import describe_layout, layout_from_spec

    st, run = spec.stand, spec.run
    lines = [
        f"{spec.name}: {spec.description}".rstrip(": "),
        f"  run: {run.duration_days:g} days, step {run.time_step_days:g} days, seed {run.seed}, "
        f"budget {run.max_segments:,} segments",
    ]
    if spec.container.kind == "field":
        lines.append(f"  stand: {st.n_plants} plant(s) ({st.rows} row(s) x {st.plants_per_row}, rows "
                     f"{st.row_spacing_cm:g} cm, plants {st.plant_spacing_cm:g} cm apart), sown at "
                     f"{st.sowing_depth_cm:g} cm")
    else:  # the container, not row spacing, sets the soil the roots share
        lines.append(f"  stand: {st.n_plants} plant(s) in one {spec.container.kind}, sown at {st.sowing_depth_cm:g} cm")
    lines += describe_layout(layout_from_spec(spec))
    for layer in spec.soil.layers:
        lines.append(f"  soil layer {layer.depth_top_cm:g}-{layer.depth_bottom_cm:g} cm: "
                     f"{layer.penetration_resistance_mpa:g} MPa")
    for em in spec.emergence:
        lines.append(f"  emergence: {em.event_count} x {em.roots_per_event} {em.root_class} from day {em.first_day:g}"
                     + (f" every {em.interval_days:g} days" if em.event_count > 1 else ""))
    for name, rc in spec.root_classes.items():
        branches = ", ".join(f"{b.root_class} ({b.probability:g})" for b in rc.branches) or "none"
        lines.append(f"  class {name}: {rc.elongation_law} {show(rc.elongation_rate_cm_per_day)} cm/day up to "
                     f"{show(rc.max_length_cm)} cm, radius {show(rc.radius_cm)} cm, branches: {branches}")
    return "\n".join(lines)


def describe_layers(data: dict, origins: dict) -> str:
    """The merged values of a layered parameter file, each with the file that set it."""
    lines = ["merged values (file that set each value):"]
    for key_path in sorted(origins):
        node = data
        for part in key_path.split("."):
            node = node.get(part) if isinstance(node, dict) else None
        shown = repr(node) if isinstance(node, str) else str(node)
        shown = shown if len(shown) <= 60 else shown[:57] + "..."
        lines.append(f"  {key_path} = {shown}   [{origins[key_path]}]")
    return "\n".join(lines)


def run(args) -> int:
    import sys

    from ..spec import load_spec_layers, parse_spec
    from ..spec_warnings import spec_warnings

    data, origins = load_spec_layers(args.spec)
    spec = parse_spec(data, source=str(args.spec))
    print(f"ok: {args.spec}")
    print(describe_spec(spec))
    if len(set(origins.values())) > 1:
        print(describe_layers(data, origins))
    sys.stdout.flush()  # keep the summary before the warnings when both go to one terminal or log
    for text in spec_warnings(spec):
        print(f"warning: {text}", file=sys.stderr)
    return 0
