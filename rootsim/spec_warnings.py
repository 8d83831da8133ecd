"""Warnings about valid parameter files that probably do not say what their author meant.

``rootsim check`` prints them; none stops a run. Soil layers: a gap between two layers and the
soil below the last layer have no penetration resistance (0 MPa) in the growth engine, so a gap,
or layers that stop above the deepest roots the run can grow, change the result silently.
"""

from __future__ import annotations

import math

__all__ = ["spec_warnings", "reachable_depth_cm"]

def _mean(dist) -> float:
    """Mean of a per-root parameter (fixed value, normal mean, or the uniform's midpoint)."""
    from .distributions import Fixed, Normal, Uniform

    if isinstance(dist, Fixed):
        return float(dist.value)
    if isinstance(dist, Uniform):
        return 0.5 * float(dist.low + dist.high)
    if isinstance(dist, Normal):
        return float(dist.mean)
    return math.inf


def reachable_depth_cm(spec) -> tuple[float, str]:
    """Depth (cm) the roots of ``spec`` reach if they grow straight down, and the root class that sets it.

    Every root emerging from the plant grows from its emergence depth for the rest of the run at
    its mean elongation rate, up to its mean ``max_length_cm``, in unimpeded soil (roots at an
    angle or in strong layers stay shallower); limited by the container depth for pots and
    rhizoboxes. Laterals are left out: they branch behind the tip's apical zone.
    """
    duration = _engine_duration(spec)
    best, which = 0.0, ""
    for em in spec.emergence:
        rc = spec.root_classes[em.root_class]
        start = spec.stand.sowing_depth_cm if em.depth_cm is None else em.depth_cm
        growing = max(duration - em.first_day, 0.0)
        rows = rc.elongation_rate_multiplier_by_plant_age
        if rows and growing > 0:  # the rate changes with plant age: its integral over the run
            from .growth.plant_age import multiplier_integral

            ages, factors = [r.plant_age_days for r in rows], [r.multiplier for r in rows]
            growing = float(multiplier_integral(ages, factors, duration) - multiplier_integral(ages, factors,
                                                                                                em.first_day))
        length = min(_mean(rc.max_length_cm), _mean(rc.elongation_rate_cm_per_day) * growing)
        if max(start, 0.0) + length > best:
            best, which = max(start, 0.0) + length, em.root_class
    if spec.container.kind != "field" and spec.container.depth_cm is not None:
        best = min(best, float(spec.container.depth_cm))
    return best, which


def _engine_duration(spec) -> float:
    """The run's length in the file's time unit: calendar days, or on a thermal clock the season's effective days
    (degree-days) from the weather table (calendar days if the table cannot be read here)."""
    dev = getattr(spec, "development", None)
    if dev is None or dev.clock == "calendar":
        return spec.run.duration_days
    from .errors import RootsimError
    from .soil.thermal import cumulative_effective_days, daily_effective_days, weather_table_for_spec

    try:
        weather = weather_table_for_spec(spec)
        daily = daily_effective_days(weather, shape=dev.temperature_response, base_c=dev.base_temperature_c,
                                     optimum_c=dev.optimum_temperature_c, maximum_c=dev.maximum_temperature_c,
                                     temperature_column=dev.temperature_column)[-weather.first_day:]
    except RootsimError:
        return spec.run.duration_days
    unit = dev.optimum_temperature_c - dev.base_temperature_c if dev.time_unit == "degree_day" else 1.0
    return float(cumulative_effective_days(daily, spec.run.duration_days)) * unit


def spec_warnings(spec) -> list[str]:
    """One-line warnings about a validated spec: gaps between soil layers, layers stopping above
    the deepest roots the run can grow, layers below the bottom of a pot or rhizobox.

    Returns
    -------
    list of str
        Messages without the ``warning:`` prefix (empty when nothing looks wrong).
    """
    out = []
    where = spec.source or "<spec>"
    layers = sorted(spec.soil.layers, key=lambda layer: layer.depth_top_cm)
    if layers and layers[0].depth_top_cm > 0:
        out.append(f"{where}: soil.layers: no layer from 0 to {layers[0].depth_top_cm:g} cm; the soil there has "
                   "no penetration resistance (0 MPa)")
    for above, below in zip(layers, layers[1:]):
        if below.depth_top_cm > above.depth_bottom_cm:
            out.append(f"{where}: soil.layers: gap between {above.depth_bottom_cm:g} and {below.depth_top_cm:g} cm "
                       "(layers end at "
                       f"{above.depth_bottom_cm:g} cm and start again at {below.depth_top_cm:g} cm); the gap has no "
                       "penetration resistance (0 MPa)")
    if layers:
        bottom = max(layer.depth_bottom_cm for layer in layers)
        reach, which = reachable_depth_cm(spec)
        if reach > bottom:
            out.append(f"{where}: soil.layers: the last layer ends at {bottom:g} cm but {which} roots growing straight "
                       f"down reach about {reach:.0f} cm in {spec.run.duration_days:g} days; below "
                       f"{bottom:g} cm the soil has no penetration resistance (0 MPa); extend the last layer")
        container = spec.container
        if container.kind != "field" and container.depth_cm is not None and bottom > container.depth_cm:
            out.append(f"{where}: soil.layers: layers reach {bottom:g} cm but the {container.kind} is only "
                       f"{container.depth_cm:g} cm deep; the soil below its bottom is never used")
    return out
