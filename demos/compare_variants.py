"""Demo: compare three root architectures the way a field trial would.

Invented scenario: at the Harrowgate research farm, trial block F2, a breeder compares a fibrous cereal-like
variant, a taproot variant and a shallow basal-root variant for topsoil foraging. For each variant we grow a
few stochastic replicate stands, take the true RLD profile, sample soil cores as the field team would
(cores at the plants, between plants and mid-row), and plot the profiles side by side.

Two kinds of RLD appear and are labelled as such everywhere: the *stand mean* (all root length in a
layer over the whole ground area of the stand, what a simulation knows exactly) and the *cores*
(the mean of the virtual cores, each over its own small area). Cores taken in the row at a plant
read well above the stand mean in the topsoil, so compare like with like.

Run from the repository root:

    python demos/compare_variants.py --days 30 --replicates 2 --out results/compare

All values are illustrative; simulated profiles are research aids, not agronomic advice.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import pandas as pd

import rootsim
from rootsim.batch import replicate_seed
from rootsim.palette import category_colours
from rootsim.plots import save_figure
from rootsim.sampling import core_grid, sample_cores

PARAMS = Path(__file__).resolve().parents[1] / "params"
VARIANTS = ("cereal_fibrous", "taproot_laterals", "shallow_basal")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--days", type=float, default=30.0, help="days after sowing at sampling")
    parser.add_argument("--replicates", type=int, default=2, help="replicate stands per variant")
    parser.add_argument("--layer-cm", type=float, default=10.0, help="profile layer thickness, cm")
    parser.add_argument("--out", default="results/compare", help="output directory")
    args = parser.parse_args(argv)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)

    profiles, core_profiles, rows = {}, {}, []
    for name in VARIANTS:
        spec = rootsim.load_spec(PARAMS / f"{name}.toml").with_overrides(duration_days=args.days)
        for r in range(args.replicates):
            system = rootsim.grow(spec, seed=replicate_seed(spec.run.seed, r))
            profile = system.profile(layer_cm=args.layer_cm)
            profiles[(name, r)] = profile
            cores = sample_cores(system, cores=core_grid(system, diameter_cm=4.0, depth_cm=60.0,
                                                         increment_cm=args.layer_cm))
            core_profiles[(name, r)] = (cores.groupby(["depth_top_cm", "depth_bottom_cm"], as_index=False)
                                        ["rld_cm_per_cm3"].mean())
            traits = system.traits()
            rows.append({"variant": name, "replicate": r, "total_length_m": traits["total_length_cm"] / 100,
                         "d50_depth_cm": traits["d50_depth_cm"], "d95_depth_cm": traits["d95_depth_cm"],
                         "n_cores": int(cores["core_id"].nunique()),
                         "topsoil_rld_stand_mean": profile["rld_cm_per_cm3"].iloc[0],
                         "topsoil_rld_cores_mean": cores[cores["depth_top_cm"] == 0]["rld_cm_per_cm3"].mean()})
    table = pd.DataFrame(rows)
    table.to_csv(out / "comparison.csv", index=False)
    n_cores = table.groupby("variant")["n_cores"].first().to_dict()
    save_figure(stand_mean_and_cores_figure(profiles, core_profiles, days=args.days, n_cores=n_cores),
                out / "rld_profiles.png")
    print(table.to_string(index=False, float_format=lambda v: f"{v:.2f}"))
    print(f"wrote {out / 'comparison.csv'} and {out / 'rld_profiles.png'}")
    return 0


def stand_mean_and_cores_figure(profiles: dict, core_profiles: dict, *, days: float, n_cores: dict):
    """One panel per variant: the stand-mean RLD of each replicate stand (solid lines, gid
    ``"stand_mean"``) and the mean of its virtual cores (dashed, square markers, gid ``"cores"``),
    depth downward, in the variant's palette colour."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(4.0 * len(VARIANTS), 5.2), layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(1, len(VARIANTS), sharey=True, squeeze=False)[0]
    colours = category_colours(len(VARIANTS))
    for ax, colour, name in zip(axes, colours, VARIANTS):
        for (variant, r), profile in profiles.items():
            if variant != name:
                continue
            mid = 0.5 * (profile["depth_top_cm"] + profile["depth_bottom_cm"])
            ax.plot(profile["rld_cm_per_cm3"], mid, color=colour, linewidth=1.8, marker="o", markersize=3,
                    label="stand mean" if r == 0 else "_stand mean", gid="stand_mean")
            cores = core_profiles[(variant, r)]
            mid = 0.5 * (cores["depth_top_cm"] + cores["depth_bottom_cm"])
            ax.plot(cores["rld_cm_per_cm3"], mid, color=colour, linewidth=1.2, linestyle="--", marker="s",
                    markersize=4, label=f"cores (mean of {n_cores[name]})" if r == 0 else "_cores", gid="cores")
        ax.set_title(name, fontsize="medium")
        ax.set_xlabel("RLD (cm cm⁻³)")
        ax.set_xlim(left=0)
        ax.grid(True, color="0.88", linewidth=0.6)
        ax.legend(fontsize="small", loc="lower right", frameon=False)
    axes[0].set_ylabel("depth (cm)")
    deepest = max([float(p["depth_bottom_cm"].max()) for p in list(profiles.values()) + list(core_profiles.values())]
                  + [1.0])
    axes[0].set_ylim(deepest, 0.0)  # depth downward from the soil surface
    fig.suptitle(f"RLD after {days:g} days: stand mean (whole ground area) vs virtual cores "
                 "(at plants, between plants, mid-row)", fontsize="medium")
    return fig


if __name__ == "__main__":
    raise SystemExit(main())
