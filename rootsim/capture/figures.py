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
