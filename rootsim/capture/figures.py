"""Season figures: water content over depth and time (heat map) and cumulative transpiration."""

from __future__ import annotations

import numpy as np

__all__ = ["plot_water_content", "plot_cumulative_uptake"]


def _figure(size):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=size, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def plot_water_content(layers, *, title: str = ""):
    """Heat map of volumetric water content, depth downward against day; returns a matplotlib Figure."""
    days = np.unique(layers["day"].to_numpy())
    tops = np.unique(layers["depth_top_cm"].to_numpy())
    grid = layers["water_content"].to_numpy().reshape(days.size, tops.size).T
    cell = float(layers["depth_bottom_cm"].iloc[0] - layers["depth_top_cm"].iloc[0])
    fig = _figure((7.0, 4.0))
    ax = fig.add_subplot()
    image = ax.imshow(grid, aspect="auto", cmap="YlGnBu", origin="upper",
                      extent=(days[0] - 0.5, days[-1] + 0.5, tops[-1] + cell, tops[0]))
    fig.colorbar(image, ax=ax, label="water content (cm³/cm³)")
    ax.set_xlabel("day")
    ax.set_ylabel("depth (cm)")
    ax.set_title(title or "soil water content")
    return fig


def plot_cumulative_uptake(dailies: dict, *, title: str = ""):
    """Cumulative actual (solid) and potential (dashed) transpiration, mm, for one or more runs by name."""
    fig = _figure((6.0, 4.0))
    ax = fig.add_subplot()
    for name, daily in dailies.items():
        line, = ax.plot(daily["day"], np.cumsum(daily["actual_transpiration_mm"]), label=f"{name} actual")
        ax.plot(daily["day"], np.cumsum(daily["potential_transpiration_mm"]), linestyle="--", color=line.get_color(),
                label=f"{name} potential")
    ax.set_xlabel("day")
    ax.set_ylabel("cumulative transpiration (mm)")
    ax.legend(frameon=False)
    ax.set_title(title or "cumulative root water uptake")
    return fig


def plot_season_summary(traits: dict, *, title: str = ""):
    """Bar chart of the season's water (mm) and nitrate (kg N/ha) terms from the capture traits."""
    fig = _figure((8.0, 3.8))
    water, nitrogen = fig.subplots(1, 2, gridspec_kw={"width_ratios": [3, 2]})
    names = ["potential\ntranspiration", "transpiration", f"uptake below\n{traits['deep_water_below_cm']:g} cm",
             "drainage", "runoff"]
    values = [traits["seasonal_potential_transpiration_mm"], traits["seasonal_transpiration_mm"],
              traits["water_uptake_below_depth_mm"], traits["drainage_mm"], traits["runoff_mm"]]
    water.bar(names, values, color=["#9ecae1", "#3182bd", "#08519c", "#bdbdbd", "#969696"])
    water.set_ylabel("mm")
    water.set_title(f"water ({traits['days_of_water_stress']} stress days)")
    water.tick_params(axis="x", labelsize=8)
    n_names = ["applied", "uptake", "leached"]
    n_values = [traits.get("nitrate_applied_kg_n_per_ha", 0.0), traits.get("nitrate_uptake_kg_n_per_ha", 0.0),
                traits.get("nitrate_leached_kg_n_per_ha", 0.0)]
    nitrogen.bar(n_names, n_values, color=["#fdae6b", "#31a354", "#de2d26"])
    nitrogen.set_ylabel("kg N/ha")
    nitrogen.set_title("nitrate")
    if title:
        fig.suptitle(title)
    return fig
