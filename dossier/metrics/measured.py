"""Metrics measured from the conditioned runs rather than read off the fitted model: the relaxation
lengths (:mod:`dossier.conditioning.relaxation`), as metric values with their budget."""

from __future__ import annotations

import math
from collections.abc import Sequence

from ..conditioning.relaxation import LATERAL, relaxation_lengths
from ..conditioning.steady_state import OperatingPoint
from ..project.catalogue import METRICS
from ..standards.coverage import Component, combine, interval
from .evaluate import MetricValue

RELAXATION_METRIC = {LATERAL: "relaxation_length_lateral"}


def measured_values(points: Sequence[OperatingPoint]) -> list[MetricValue]:
    """The relaxation length of every specimen at every load, camber and pressure its forward runs
    give one at, with a 95 % interval from the lag fit's Type A uncertainty (and the cross-check
    from the holds, where a run has them)."""
    out = []
    forward = [p for p in points if p.rolling_direction == "forward"]
    for r in relaxation_lengths(forward):
        if r.value_m is None or r.u_m is None:
            continue
        name = RELAXATION_METRIC.get(r.direction, "relaxation_length_longitudinal")
        part = Component("fit", "A", r.u_m, r.dof, r.method)
        budget = combine([part])
        diff = None if r.crosscheck_m is None else 100.0 * (r.value_m / r.crosscheck_m - 1.0)
        finding = ""
        # two estimates of one σ: apart by more than twice their combined standard uncertainty
        if (
            r.crosscheck_m is not None
            and r.crosscheck_u_m is not None
            and abs(r.value_m - r.crosscheck_m) > 2.0 * math.hypot(r.u_m, r.crosscheck_u_m)
        ):
            finding = (
                f"the slip lag and the settling after the holds disagree ({r.value_m:.3f} m against "
                f"{r.crosscheck_m:.3f} m): the tire may not follow the first-order model here"
            )
        out.append(
            MetricValue(
                name,
                METRICS[name].unit,
                r.specimen,
                float(r.load_n),
                r.camber_deg,
                r.pressure_kpa,
                float(r.value_m),
                budget.u_combined,
                interval(r.value_m, budget.u_combined, budget.dof_effective),
                "data",
                False,
                "",
                r.crosscheck_m,
                diff,
                finding,
                budget.dof_effective,
                budget,
            )
        )
    return out
