"""Metrics measured from the conditioned runs rather than read off the fitted model: the relaxation
lengths (:mod:`dossier.conditioning.relaxation`) and, where a run carries Mx or My, the overturning
and rolling-resistance moments at zero slip, as metric values with their budget."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np

from ..conditioning.relaxation import LATERAL, relaxation_lengths
from ..conditioning.steady_state import OperatingPoint
from ..project.catalogue import METRICS
from ..standards.coverage import Component, combine, interval
from .budget import SCALING, BudgetInputs, _calibration
from .evaluate import MetricValue

MOMENT_HALF_RANGE_DEG = 2.0  # the local cubic of Mx and My over |α| ≤ 2° (as the model-free Fy estimates)
MIN_POINTS_LOCAL = 6

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


def moment_values(
    points: Sequence[OperatingPoint], radius_m_of: Mapping[str, float | None], inputs: BudgetInputs | None = None
) -> list[MetricValue]:
    """Overturning moment (its slope and value at zero slip) and rolling-resistance moment and
    coefficient at zero slip, per specimen, load, camber and pressure, from the forward slip-angle
    runs that carry Mx or My: each point's local cubic over |α| ≤ 2° (least squares, with its
    covariance); several points at one load: their mean, with s/√n (GUM 4.2); the moment's
    calibration from the lab's declared accuracy."""
    groups: dict[tuple, list[OperatingPoint]] = {}
    for p in points:
        if p.sweep == "slip_angle" and p.rolling_direction == "forward":
            key = (p.specimen, round(p.camber_deg, 2), round(p.pressure_kpa), round(p.load_n))
            groups.setdefault(key, []).append(p)
    out = []
    for key in sorted(groups):
        members = groups[key]
        first = members[0]
        per: dict[str, list[tuple[float, float]]] = {}
        for p in members:
            c = p.curve
            for channel in ("mx", "my"):
                local = _local_cubic(c.x, c.mx_nm if channel == "mx" else c.my_nm)
                if local is None:
                    continue
                (a0, u0), (a1, u1) = local
                if channel == "mx":
                    per.setdefault("overturning_moment_stiffness", []).append((a1, u1))
                    per.setdefault("overturning_moment_at_zero_slip", []).append((a0, u0))
                else:
                    per.setdefault("rolling_resistance_moment", []).append((abs(a0), u0))
                    radius = radius_m_of.get(p.specimen)
                    if radius:
                        fz = float(np.mean(c.fz_n))
                        per.setdefault("rolling_resistance_coefficient", []).append(
                            (abs(a0) / (radius * fz), u0 / (radius * fz))
                        )
        stations = sorted({inputs.stations.get(p.run_index, ("", "")) for p in members}) if inputs else []
        for name, found in per.items():
            values = np.array([v for v, _ in found])
            if values.size == 1:
                value, u, dof = float(values[0]), found[0][1], float(max(_dof_local(members), 1))
                basis = "least squares of the local cubic (its covariance); one run"
            else:
                value, u, dof = (
                    float(values.mean()),
                    float(values.std(ddof=1) / np.sqrt(values.size)),
                    values.size - 1.0,
                )
                basis = f"scatter of {values.size} runs at this load (s/√n)"
            parts = [Component("fit", "A", u, dof, basis)]
            if inputs is not None:
                parts.append(_calibration(value, float(first.load_n), SCALING[name], stations, inputs))
            budget = combine(parts)
            out.append(
                MetricValue(
                    name,
                    METRICS[name].unit,
                    first.specimen,
                    float(first.load_n),
                    first.camber_deg,
                    first.pressure_kpa,
                    value,
                    budget.u_combined,
                    interval(value, budget.u_combined, budget.dof_effective),
                    "data",
                    False,
                    "moment arm: the unloaded radius R0" if name == "rolling_resistance_coefficient" else "",
                    None,
                    None,
                    "",
                    budget.dof_effective,
                    budget,
                )
            )
    return out


def _local_cubic(x: np.ndarray, y: np.ndarray | None) -> tuple[tuple[float, float], tuple[float, float]] | None:
    """(value at 0, its standard error), (slope at 0 per deg, its standard error) of a cubic fitted by
    least squares over |x| ≤ MOMENT_HALF_RANGE_DEG (None: too few points, or no such channel)."""
    if y is None:
        return None
    near = np.abs(x) <= MOMENT_HALF_RANGE_DEG
    if np.count_nonzero(near) < MIN_POINTS_LOCAL or np.ptp(x[near]) <= 0:
        return None
    coef, cov = np.polyfit(x[near], y[near], 3, cov=True)
    return (float(coef[3]), float(np.sqrt(max(cov[3, 3], 0.0)))), (float(coef[2]), float(np.sqrt(max(cov[2, 2], 0.0))))


def _dof_local(members: Sequence[OperatingPoint]) -> int:
    """Residual degrees of freedom of one point's local cubic."""
    c = members[0].curve
    return int(np.count_nonzero(np.abs(c.x) <= MOMENT_HALF_RANGE_DEG)) - 4
