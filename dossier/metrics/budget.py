"""The uncertainty budget of a metric, in the manner of the GUM (JCGM 100:2008).

Every metric value gets a list of components, each a standard uncertainty in the metric's unit
(already multiplied by its sensitivity coefficient, GUM 5.1.3) with its degrees of freedom:

- **fit** (Type A): the fit's statistical part, the delta method over the fit covariance
  (:mod:`dossier.metrics.evaluate`); ν the fit's residual degrees of freedom.
- **sweep direction** (Type B): the conditioned curve is the mean of the rising and falling halves
  of the sweep, which cancels the relaxation lag to first order; what is left is bounded by half
  the difference between the metric estimated on each half alone, read as a rectangular bound
  (u = a/√3, GUM 4.3.7).
- **drift** (Type A): where the control tire was re-tested on the run's rig, the uncertainty of the
  correction factor at the run's time, from the covariance of the control's line
  (:mod:`dossier.conditioning.drift`), ν = repeats − 2; where it was not, the lab's drift
  allowance as a rectangular bound.
- **repeatability** (Type A): the scatter of the control's repeats about its line (run-to-run
  scatter of the rig's force level), divided by √(runs behind the value), ν = repeats − 2; where
  the rig has no control line, the scatter of a condition the specimen repeated, or else the lab's
  repeatability allowance (rectangular).
- **calibration** (Type B): the lab's declared accuracy of force, moment and normal load (% of
  reading, and a part in % of full scale taken at a reading equal to the normal load) and of the
  angles, each a rectangular bound, unless declared otherwise stated as assumed.
- **model** (Type B): the gap between the model's value and the model-free estimate from the same
  curves (:mod:`dossier.conditioning.estimates`), read as a rectangular bound.

Force-level terms (drift, repeatability, calibration) enter through the metric's scaling: a
metric that goes as Fᵃ·Mᵇ·Fzᶜ moves by (a, b, c) times the relative error of force, moment and
load (:data:`SCALING`); drift and repeatability scale forces and moments together (a + b).
The components are combined as independent (GUM 5.1.2), ν_eff by Welch–Satterthwaite (G.4.1), and
expanded with k = t₀.₉₇₅(ν_eff) (:mod:`dossier.standards.coverage`). For a difference of two
metrics, :func:`difference_uncertainty` treats the parts two values share as correlated.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np

from ..conditioning import estimates
from ..conditioning.drift import DriftEstimate, Station
from ..conditioning.steady_state import OperatingPoint, SlipCurve
from ..project.catalogue import METRICS, PRESSURE_SENSITIVE, PRESSURE_SUFFIXES
from ..project.manifest import LabSettings
from ..standards.coverage import Budget, Component, combine, effective_dof
from .evaluate import MetricValue

RECTANGULAR = math.sqrt(3.0)  # a bound ±a read as a rectangular distribution: u = a/√3 (GUM 4.3.7)

# How a metric moves with a common relative error of force, moment and normal load (exponents of
# F, M and Fz in its dimension), and whether its value is an angle (then the angle accuracy adds).
# Each is read off the metric's definition in the catalogue (common practice of dimensional analysis).
SCALING: dict[str, tuple[float, float, float, bool]] = {
    "cornering_stiffness": (1, 0, 0, False),
    "cornering_coefficient": (1, 0, -1, False),
    "peak_lateral_friction": (1, 0, -1, False),
    "peak_lateral_friction_positive_slip": (1, 0, -1, False),
    "peak_lateral_friction_negative_slip": (1, 0, -1, False),
    "slip_angle_at_peak": (0, 0, 0, True),
    "slip_angle_at_peak_positive_slip": (0, 0, 0, True),
    "slip_angle_at_peak_negative_slip": (0, 0, 0, True),
    "linear_range": (0, 0, 0, True),
    "post_peak_retention": (0, 0, 0, False),
    "aligning_stiffness": (0, 1, 0, False),
    "pneumatic_trail": (-1, 1, 0, False),
    "peak_aligning_moment": (0, 1, 0, False),
    "slip_angle_at_peak_aligning_moment": (0, 0, 0, True),
    "residual_cornering_force": (1, 0, 0, False),
    "residual_aligning_moment": (0, 1, 0, False),
    "camber_stiffness": (1, 0, 0, False),
    "camber_coefficient": (1, 0, -1, False),
    "longitudinal_slip_stiffness": (1, 0, 0, False),
    "peak_driving_friction": (1, 0, -1, False),
    "slip_ratio_at_peak_driving": (0, 0, 0, False),
    "peak_braking_friction": (1, 0, -1, False),
    "slip_ratio_at_peak_braking": (0, 0, 0, False),
    "friction_load_sensitivity": (1, 0, -2, False),
    "load_at_max_cornering_stiffness": (0, 0, 1, False),
}
# A slope against pressure scales as the metric itself; in % of the value no scale enters.
SCALING |= {f"{name}_per_10kpa": SCALING[name] for name in PRESSURE_SENSITIVE}
SCALING |= {f"{name}_pct_per_bar": (0, 0, 0, False) for name in PRESSURE_SENSITIVE}
# Measured from the slip lag and the speed: no force or moment scale enters (its budget is its own).
SCALING |= {"relaxation_length_lateral": (0, 0, 0, False), "relaxation_length_longitudinal": (0, 0, 0, False)}
SCALING |= {
    "overturning_moment_stiffness": (0, 1, 0, False),
    "overturning_moment_at_zero_slip": (0, 1, 0, False),
    "rolling_resistance_moment": (0, 1, 0, False),
    "rolling_resistance_coefficient": (0, 1, -1, False),
}


def _per_load(fn: Callable[[SlipCurve], float | None]) -> Callable[[SlipCurve], float | None]:
    """A model-free estimate divided by the curve's mean normal load."""

    def normalised(curve: SlipCurve) -> float | None:
        v = fn(curve)
        return None if v is None else v / float(np.mean(curve.fz_n))

    return normalised


# The model-free estimate of a metric from one conditioned curve, where the trade has one and the
# conditioned bins resolve it. (Longitudinal slip stiffness has none here: at the usual slip-ratio bin
# of 0.01 the curve bends within the few bins around zero, and a local fit there is biased.)
MODEL_FREE: dict[str, Callable[[SlipCurve], float | None]] = {
    "cornering_stiffness": estimates.cornering_stiffness_n_per_deg,
    "cornering_coefficient": _per_load(estimates.cornering_stiffness_n_per_deg),
    "peak_lateral_friction": estimates.peak_friction,
    "aligning_stiffness": estimates.aligning_stiffness_nm_per_deg,
    "pneumatic_trail": estimates.pneumatic_trail_mm,
    "peak_driving_friction": lambda c: estimates.peak_longitudinal_friction(c, 1.0),
    "peak_braking_friction": lambda c: estimates.peak_longitudinal_friction(c, -1.0),
}

if set(SCALING) != set(METRICS) or not set(MODEL_FREE) <= set(METRICS):
    raise ImportError(f"budget tables out of step with the catalogue: {sorted(set(SCALING) ^ set(METRICS))}")


ORDER = ("fit", "direction", "drift", "repeatability", "calibration", "model")
LABELS = {
    "fit": "Fit",
    "direction": "Sweep direction",
    "drift": "Drift",
    "repeatability": "Repeat­ability",
    "calibration": "Calibration",
    "model": "Model gap",
}


@dataclass(frozen=True)
class BudgetInputs:
    """What the budget of one specimen's metrics is made from, besides the metric values."""

    stations: dict[int, Station]  # run index -> (lab, rig)
    drifts: dict[Station, DriftEstimate]  # the control line of each station that has one (corrected or not)
    corrected: bool  # whether the drift lines were applied to the forces
    labs: Callable[[str], tuple[LabSettings, tuple[str, ...]]]  # lab name -> settings, keys declared


def metric_budget(
    metric: str,
    value: float,
    load_n: float,
    fit_u: float,
    fit_dof: float | None,
    points: Sequence[OperatingPoint],
    inputs: BudgetInputs,
    slope: PressureSlope | None = None,
) -> Budget:
    """The budget of one metric value from the `points` behind it (the specimen's forward runs at the
    value's condition; the nearest measured condition where it was not measured; for a slope against
    pressure, `slope` says what the slope was taken over and the points are those at every pressure)."""
    f_exp, m_exp, l_exp, is_angle = SCALING[metric]
    level_exp = f_exp + m_exp  # drift and repeatability scale forces and moments together
    parts = [Component("fit", "A", fit_u, fit_dof, "delta method over the fit covariance; ν: the fit's residuals")]
    parts += _direction_and_model(metric, value, load_n, points)
    runs = sorted({p.run_index for p in points})
    stations = sorted({inputs.stations.get(r, ("", "")) for r in runs})
    if slope is not None and runs:
        parts.append(_between_pressures(metric, slope, points, inputs))
        parts += _slope_model_gap(metric, value, load_n, slope, points)
    elif level_exp and runs:
        parts += _drift(value, level_exp, points, inputs)
        parts.append(_repeatability(value, level_exp, points, inputs))
    parts.append(_calibration(value, load_n, (f_exp, m_exp, l_exp, is_angle), stations, inputs))
    return combine(sorted((p for p in parts if p is not None), key=lambda c: ORDER.index(c.name)))


@dataclass(frozen=True)
class PressureSlope:
    """What a slope against pressure was taken over: the metric's value at the pressure given and
    the pressures tested at that camber and load."""

    base_value: float
    pressures_kpa: tuple[float, ...]  # one per run behind the slope


def _between_pressures(metric: str, slope: PressureSlope, points: Sequence[OperatingPoint], inputs) -> Component:
    """Run-to-run scatter of the force level between the runs at different pressures, carried into
    the slope: independent relative level errors r per run give u(slope of the relative level) =
    r/√Sxx, Sxx = Σ(p − p̄)² over the runs (the least-squares slope, common practice of regression).
    The drift line's scatter is part of r where a control was repeated; calibration scale errors
    are common to all pressures and leave a relative slope unchanged. A level error common to force
    and moment cancels in a metric whose level exponent is zero (the trail, moment over force); on a
    rig whose drift was not corrected from a control, the lab's drift allowance adds to r, since the
    runs at the different pressures were tested at different times."""
    base = next(n for n in PRESSURE_SENSITIVE if metric.startswith(n + "_"))
    f_exp, m_exp, _, _ = SCALING[base]
    scatter = _repeatability(1.0, 1.0, points, inputs)
    n_runs = len({p.run_index for p in points})
    r = (scatter.relative or 0.0) * math.sqrt(n_runs)  # per run (the part is stated over √runs)
    stations = sorted({inputs.stations.get(p.run_index, ("", "")) for p in points})
    uncorrected = [
        s for s in stations if not (inputs.corrected and s in inputs.drifts and inputs.drifts[s].level_dof > 0)
    ]
    if uncorrected:
        allowance = max(inputs.labs(s[0])[0].drift_allowance_pct for s in uncorrected) / 100.0 / RECTANGULAR
        r = math.hypot(r, allowance)
    r *= abs(f_exp + m_exp)
    p = np.asarray(slope.pressures_kpa, dtype=float)
    sxx = float(np.sum((p - p.mean()) ** 2))
    u_rel_per_kpa = r / math.sqrt(sxx) if sxx > 0 else 0.0
    if metric.endswith("_pct_per_bar"):
        u = 100.0 * 100.0 * u_rel_per_kpa
    else:
        u = 10.0 * u_rel_per_kpa * abs(slope.base_value)
    pressures = ", ".join(f"{v:.0f}" for v in sorted({round(x) for x in p}))
    return Component(
        "repeatability",
        scatter.kind,
        u,
        scatter.dof,
        (
            f"level scatter between runs ({100 * r:.2f} % per run: {scatter.basis.split(' (')[0]}"
            f"{'; with the drift allowance' if uncorrected else ''}) over the {len(p)} runs at {pressures} kPa"
            if f_exp + m_exp
            else "a level common to force and moment cancels in this ratio"
        ),
    )


SLOPE_CHECKED = ("cornering_stiffness", "peak_lateral_friction")


def _slope_model_gap(
    metric: str, value: float, load_n: float, slope: PressureSlope, points: Sequence[OperatingPoint]
) -> list[Component]:
    """The model's slope against pressure against the slope of the model-free estimates over the
    same runs (least squares in pressure), as a rectangular bound: the model gap at each pressure
    does not cancel in a slope."""
    base = next(n for n in PRESSURE_SENSITIVE if metric.startswith(n + "_"))
    # Only where the model-free estimate is steady enough to be the cross-check beside the value
    # (cornering stiffness, peak friction): the trail's is a ratio of two local slopes, and its scatter
    # over a span of a few tens of kPa would pass for a model gap many times the real one.
    estimate = MODEL_FREE.get(base) if base in SLOPE_CHECKED else None
    if estimate is None or not points or not all(p.load_n == load_n for p in points):
        return []
    pairs = [(p.pressure_kpa, estimate(p.curve)) for p in points]
    pairs = [(x, y) for x, y in pairs if y is not None]
    if len({round(x) for x, _ in pairs}) < 2:
        return []
    x, y = np.array([q[0] for q in pairs]), np.array([q[1] for q in pairs])
    per_kpa = float(np.polyfit(x, y, 1)[0])
    data = 100.0 * 100.0 * per_kpa / slope.base_value if metric.endswith("_pct_per_bar") else 10.0 * per_kpa
    gap = value - data
    return [
        Component(
            "model",
            "B",
            abs(gap) / RECTANGULAR,
            None,
            f"model slope against the slope of the model-free estimates over the same runs ({data:+.3g}), rectangular",
        )
    ]


def pressure_slope_of(v: MetricValue, values_here: dict, points: Sequence[OperatingPoint]):
    """The base value and pressures tested behind a slope against pressure `v` (None for any other
    metric): the runs of `v`'s specimen at its camber, at the tested load nearest `v`'s."""
    if not v.metric.endswith(PRESSURE_SUFFIXES):
        return None, []
    base = next(n for n in PRESSURE_SENSITIVE if v.metric.startswith(n + "_"))
    base_value = values_here.get((v.specimen, base, v.load_n, round(v.camber_deg, 2), round(v.pressure_kpa)))
    sweep = "slip_angle"
    here = [
        p
        for p in points
        if p.specimen == v.specimen
        and p.sweep == sweep
        and p.rolling_direction == "forward"
        and round(p.camber_deg, 2) == round(v.camber_deg, 2)
    ]
    if base_value is None or not here:
        return None, []
    nearest = min({p.load_n for p in here}, key=lambda load: (abs(load - v.load_n), load))
    pts = [p for p in here if p.load_n == nearest]
    per_run = {p.run_index: p.pressure_kpa for p in pts}
    return PressureSlope(base_value, tuple(per_run[r] for r in sorted(per_run))), pts


def _direction_and_model(metric: str, value: float, load_n: float, points: Sequence[OperatingPoint]) -> list[Component]:
    """Both parts as fractions of the estimate, applied to `value` (so that points at a neighbouring
    load, where the value's own load was not measured, speak for it in proportion)."""
    estimate = MODEL_FREE.get(metric)
    if estimate is None or not points:
        return []
    out = []
    halves = [(estimate(p.rising), estimate(p.falling)) for p in points if p.rising and p.falling]
    ratios = [abs(r - f) / abs(r + f) for r, f in halves if r is not None and f is not None and r + f]
    if ratios:
        # Each half is off by ±ε (ε = |r − f|/(r + f), the relative half-difference) to first order, and
        # the mean of both directions cancels that; what is left is of second order, bounded by ε².
        eps = float(np.mean(ratios))
        out.append(
            Component(
                "direction",
                "B",
                eps**2 * abs(value) / RECTANGULAR,
                None,
                f"rising and falling halves differ by ±{100 * eps:.2f} % of the model-free estimate;"
                "their mean cancels "
                f"that to first order: the second-order rest ({100 * eps**2:.3f} %) as a rectangular bound",
            )
        )
    whole = [v for v in (estimate(p.curve) for p in points) if v]
    if whole and all(p.load_n == load_n for p in points):  # a load not measured has nothing to compare with
        gap = value / float(np.mean(whole)) - 1.0
        out.append(
            Component(
                "model",
                "B",
                abs(gap) * abs(value) / RECTANGULAR,
                None,
                f"model against the model-free estimate ({100 * gap:+.2f} %), rectangular",
            )
        )
    return out


def _drift(value: float, level_exp: float, points: Sequence[OperatingPoint], inputs: BudgetInputs) -> list[Component]:
    """One drift part per station the value's runs were tested on."""
    out = []
    by_station: dict[Station, list[OperatingPoint]] = {}
    for p in points:
        by_station.setdefault(inputs.stations.get(p.run_index, ("", "")), []).append(p)
    for station, pts in sorted(by_station.items()):
        line = inputs.drifts.get(station)
        timed = [p for p in pts if p.tested_at is not None]
        share = len(pts) / len(points)  # this station's weight in the value
        if line is not None and inputs.corrected and timed and line.level_dof > 0:
            grads = np.array([line.scale_gradient(p.tested_at) for p in timed])  # type: ignore[arg-type]
            g = grads.mean(axis=0) * share
            cov = np.array(line.level_covariance)
            rel = float(np.sqrt(max(g @ cov @ g, 0.0))) * abs(level_exp)
            out.append(
                Component(
                    "drift",
                    "A",
                    rel * abs(value),
                    float(line.level_dof),
                    f"uncertainty of the correction from the control {line.control}'s line at "
                    f"{_station_text(station)} ({len(line.repeats)} repeats)",
                    shared=f"drift:{station[0]}|{station[1]}",
                    relative=rel,
                    line_gradient=(float(g[0]) * level_exp, float(g[1]) * level_exp),
                    line_covariance=line.level_covariance,
                )
            )
            continue
        lab, declared = inputs.labs(station[0])
        a = lab.drift_allowance_pct / 100.0
        rel = a / RECTANGULAR * share * abs(level_exp)
        why = (
            "the control line has no scatter to show (2 repeats)"
            if line is not None and line.level_dof == 0
            else "not corrected"
            if line is not None
            else "no control tested on this rig"
        )
        out.append(
            Component(
                "drift",
                "B",
                rel * abs(value),
                None,
                f"{why}: the lab's drift allowance ±{lab.drift_allowance_pct:g} %"
                f"{_assumed(declared, 'drift_allowance_pct')}, rectangular",
                relative=rel,
            )
        )
    return out


def _repeatability(value: float, level_exp: float, points: Sequence[OperatingPoint], inputs: BudgetInputs) -> Component:
    runs = sorted({p.run_index for p in points})
    stations = sorted({inputs.stations.get(r, ("", "")) for r in runs})
    lines = [inputs.drifts[s] for s in stations if s in inputs.drifts and inputs.drifts[s].level_dof > 0]
    if lines:
        line = min(lines, key=lambda d: d.level_dof)
        rel = line.relative_repeatability / math.sqrt(len(runs)) * abs(level_exp)
        return Component(
            "repeatability",
            "A",
            rel * abs(value),
            float(line.level_dof),
            f"scatter of the control {line.control}'s {len(line.repeats)} repeats about its line "
            f"({100 * line.relative_repeatability:.2f} %), over √{len(runs)} run(s)",
            relative=rel,
        )
    repeated = _own_repeats(points)
    if repeated is not None:
        sd, dof, n = repeated
        rel = sd / math.sqrt(len(runs)) * abs(level_exp)
        return Component(
            "repeatability",
            "A",
            rel * abs(value),
            float(dof),
            f"scatter of {n} repeated conditions of this specimen ({100 * sd:.2f} %), over √{len(runs)} run(s)",
            relative=rel,
        )
    lab, declared = inputs.labs(stations[0][0])
    rel = lab.repeatability_allowance_pct / 100.0 / RECTANGULAR / math.sqrt(len(runs)) * abs(level_exp)
    return Component(
        "repeatability",
        "B",
        rel * abs(value),
        None,
        f"nothing repeated: the lab's allowance ±{lab.repeatability_allowance_pct:g} %"
        f"{_assumed(declared, 'repeatability_allowance_pct')}, rectangular, over √{len(runs)} run(s)",
        relative=rel,
    )


def attach_budgets(
    values: Sequence[MetricValue], points: Sequence[OperatingPoint], inputs: BudgetInputs
) -> list[MetricValue]:
    """Every value with its budget: the interval, standard uncertainty and ν become the budget's."""
    out = []
    here = {(v.specimen, v.metric, v.load_n, round(v.camber_deg, 2), round(v.pressure_kpa)): v.value for v in values}
    for v in values:
        if v.stderr is None:  # a bound (peak not reached): no interval to widen
            out.append(v)
            continue
        slope, across = pressure_slope_of(v, here, points)
        behind_v = across if slope is not None else behind(v, points)
        b = metric_budget(v.metric, v.value, v.load_n, v.stderr, v.dof, behind_v, inputs, slope)
        out.append(
            replace(
                v,
                stderr=b.u_combined,
                dof=b.dof_effective,
                ci95=(v.value - b.expanded, v.value + b.expanded),
                budget=b,
            )
        )
    return out


def behind(v: MetricValue, points: Sequence[OperatingPoint]) -> list[OperatingPoint]:
    """The forward runs of `v`'s specimen at its condition and load; where that load was not
    measured, those at its condition nearest in load. A slope against camber rests on the runs at
    every camber of that pressure (the cambered runs set it, not only the one at the value's camber)."""
    sweep = "slip_ratio" if "fx" in METRICS[v.metric].channels else "slip_angle"
    any_camber = v.metric.startswith("camber_")
    here = [
        p
        for p in points
        if p.specimen == v.specimen
        and p.sweep == sweep
        and p.rolling_direction == "forward"
        and (any_camber or round(p.camber_deg, 2) == round(v.camber_deg, 2))
        and round(p.pressure_kpa) == round(v.pressure_kpa)
    ]
    if not here:
        return []
    nearest = min({p.load_n for p in here}, key=lambda load: (abs(load - v.load_n), load))
    return [p for p in here if p.load_n == nearest]


def _own_repeats(points: Sequence[OperatingPoint]) -> tuple[float, int, int] | None:
    """Pooled relative scatter of the force level over conditions tested in more than one run."""
    groups: dict[tuple, list[float]] = {}
    for p in points:
        level = estimates.peak_friction(p.curve) if p.sweep == "slip_angle" else _fx_level(p.curve)
        if level:
            groups.setdefault((p.load_n, p.camber_deg, round(p.pressure_kpa)), []).append(level)
    ss, dof, n = 0.0, 0, 0
    for vals in groups.values():
        if len(vals) > 1:
            v = np.asarray(vals) / np.mean(vals)
            ss += float(np.sum((v - 1.0) ** 2))
            dof += len(vals) - 1
            n += 1
    return (math.sqrt(ss / dof), dof, n) if dof else None


def _fx_level(curve: SlipCurve) -> float | None:
    return estimates.peak_longitudinal_friction(curve, -1.0)


def _calibration(
    value: float, load_n: float, scaling: tuple[float, float, float, bool], stations, inputs: BudgetInputs
) -> Component:
    f_exp, m_exp, l_exp, is_angle = scaling
    # The runs of one value come from one lab as a rule; where several, the least accurate is taken.
    labs = [inputs.labs(s[0]) for s in stations] or [inputs.labs("")]
    best = None
    for (lab, declared), station in zip(labs, stations or [("", "")]):
        force = math.hypot(
            lab.force_accuracy_pct / 100.0,
            (lab.force_accuracy_pct_of_full_scale / 100.0) * (lab.force_full_scale_n or 0.0) / load_n,
        )
        rel = math.sqrt((f_exp * force) ** 2 + (m_exp * lab.moment_accuracy_pct / 100.0) ** 2)
        rel = math.hypot(rel, l_exp * lab.load_accuracy_pct / 100.0) / RECTANGULAR
        u = rel * abs(value)
        said = []
        if f_exp:
            said.append(f"force ±{lab.force_accuracy_pct:g} %{_assumed(declared, 'force_accuracy_pct')}")
            if lab.force_full_scale_n and lab.force_accuracy_pct_of_full_scale:
                said.append(f"±{lab.force_accuracy_pct_of_full_scale:g} % of {lab.force_full_scale_n:g} N full scale")
        if m_exp:
            said.append(f"moment ±{lab.moment_accuracy_pct:g} %{_assumed(declared, 'moment_accuracy_pct')}")
        if l_exp:
            said.append(f"normal load ±{lab.load_accuracy_pct:g} %{_assumed(declared, 'load_accuracy_pct')}")
        if is_angle:
            u = math.hypot(u, lab.angle_accuracy_deg / RECTANGULAR)
            said.append(f"angle ±{lab.angle_accuracy_deg:g}°{_assumed(declared, 'angle_accuracy_deg')}")
        text = (
            f"{station[0] or 'the lab'}: " + ", ".join(said) + ", rectangular"
            if said
            else "no force, moment, load or angle scale enters this metric"
        )
        if best is None or u > best.u:
            best = Component(
                "calibration",
                "B",
                u,
                None,
                text,
                shared=f"calibration:{station[0]}",
                relative=None if is_angle or not value else u / abs(value),
            )
    assert best is not None
    return best


def _assumed(declared: tuple[str, ...], key: str) -> str:
    return "" if key in declared else " (assumed: not declared for this lab)"


def _station_text(station: Station) -> str:
    lab, rig = station
    return f"{lab or 'the lab'}{', rig ' + rig if rig else ''}"


def difference_uncertainty(a: Budget, a_value: float, b: Budget, b_value: float) -> tuple[float, float | None, str]:
    """Standard uncertainty and ν_eff of `a − b` (two values of one metric), and how shared parts
    were treated.

    Parts the two values share are correlated: the same lab's calibration moves both by the same
    relative error, so it enters as u_rel·|a − b| (largely cancelling within a session); corrections
    from the same control line enter through the line's covariance at both test times. Every other
    part (fit, direction, model, repeatability, a drift allowance) is independent.
    """
    terms: list[tuple[float, float | None]] = []
    notes = []
    shared_a = {c.shared: c for c in a.components if c.shared}
    shared_b = {c.shared: c for c in b.components if c.shared}
    for c in a.components:
        if c.shared and c.shared in shared_b:
            continue
        terms.append((c.u, c.dof))
    for c in b.components:
        if c.shared and c.shared in shared_a:
            continue
        terms.append((c.u, c.dof))
    for key in sorted(set(shared_a) & set(shared_b)):
        ca, cb = shared_a[key], shared_b[key]
        if key.startswith("calibration:") and ca.relative is not None:
            terms.append((ca.relative * abs(a_value - b_value), None))
            notes.append(
                f"the calibration of {key.split(':', 1)[1] or 'the lab'} is common to both and largely cancels"
            )
        elif key.startswith("drift:") and ca.line_gradient and cb.line_gradient and ca.line_covariance:
            cov = np.array(ca.line_covariance)
            ga = np.array(ca.line_gradient) * a_value
            gb = np.array(cb.line_gradient) * b_value
            terms.append((float(np.sqrt(max((ga - gb) @ cov @ (ga - gb), 0.0))), ca.dof))
            notes.append("both drift corrections come from the same control line (correlated)")
        else:  # shared but with nothing to correlate by: independent, the cautious choice
            terms += [(ca.u, ca.dof), (cb.u, cb.dof)]
    u = math.sqrt(sum(t[0] ** 2 for t in terms))
    dof = effective_dof([t for t in terms if t[0] > 0]) if u > 0 else None
    return u, dof, "; ".join(notes)
