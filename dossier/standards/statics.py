"""Static axle loads of a vehicle at rest on level ground (rigid-body statics)."""

from __future__ import annotations

from .units import STANDARD_GRAVITY_M_PER_S2


def static_axle_loads_n(mass_kg: float, wheelbase_m: float, cg_to_front_axle_m: float) -> tuple[float, float]:
    """Front and rear axle loads in N of a vehicle of `mass_kg` whose centre of gravity lies
    `cg_to_front_axle_m` behind the front axle (moments about each axle; Gillespie 1992, ch. 2)."""
    weight_n = mass_kg * STANDARD_GRAVITY_M_PER_S2
    b = cg_to_front_axle_m
    return weight_n * (wheelbase_m - b) / wheelbase_m, weight_n * b / wheelbase_m
