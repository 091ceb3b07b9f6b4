"""Metrics: the numbers the trade reads, from the fitted models, each with a 95 % interval.

Every metric is declared once in :data:`METRICS`: name, label, unit, definition, how it is
computed, the source that defines it, which fitted channels it needs, and the function that
computes it. The glossary, the tables and ``results.json`` all read this registry; adding a
metric is one entry here.

Intervals come from the fit covariance by the delta method: the metric's gradient with
respect to the fitted coefficients, ``var = gᵀ Σ g``, summed over the channels it uses (the
channels are treated as independent: Mz0 is fitted given Fy0), times the Student-t quantile
of the fit. Metrics are evaluated at the condition the model is read at (`SpecimenModel.at`: the
specimen's nominal camber and pressure, or any other tested one), at any load: a load, camber or
pressure outside the fitted ranges is labelled extrapolation.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..conditioning import estimates
from ..conditioning.steady_state import OperatingPoint
from ..model.fit import ChannelFit, SpecimenModel
from ..project.catalogue import (
    LINEAR_RANGE_FRACTION,
    METRICS,
    MIN_PRESSURE_SPAN_KPA,
    PRESSURE_SENSITIVE,
    MetricDefinition,
)
from ..standards.coverage import Budget, interval

SLIP_STEP_DEG = 1e-3  # central-difference step for slopes at zero slip
SLIP_STEP_RATIO = 1e-5
GRID_DEG = 0.05
GRID_RATIO = 0.001


Values = dict[str, dict[str, float]]  # channel -> coefficient values


@dataclass(frozen=True)
class MetricValue:
    """One metric of one specimen at one operating condition."""

    metric: str
    unit: str
    specimen: str
    load_n: float
    camber_deg: float
    pressure_kpa: float
    value: float
    stderr: float | None
    ci95: tuple[float, float] | None
    basis: str  # "model"
    extrapolated: bool
    note: str = ""
    crosscheck: float | None = None  # model-free estimate from the conditioned data
    crosscheck_diff_pct: float | None = None
    finding: str = ""
    dof: float | None = None  # degrees of freedom of the interval (dossier.standards.coverage)
    budget: Budget | None = None  # the uncertainty budget the interval comes from (dossier.metrics.budget)


# --- evaluation helpers -----------------------------------------------------------------------


def _fitted(m: SpecimenModel, channel: str) -> ChannelFit:
    """Return the fit of `channel`; a metric is computed only where its channels were fitted."""
    fit = m.get(channel)
    assert fit is not None, channel  # _evaluate skips every metric with a channel missing
    return fit


def _fy(m: SpecimenModel, x, load, v: Values):
    return _fitted(m, "fy").predict(x, load, values=v["fy"])


def _mz(m: SpecimenModel, x, load, v: Values):
    return _fitted(m, "mz").predict(x, load, values=v["mz"])


def _fx(m: SpecimenModel, x, load, v: Values):
    return _fitted(m, "fx").predict(x, load, values=v["fx"])


def _one_or_each(value):
    """A float, or the array as it is when the model was read with a batch of coefficient sets
    (one value per set, see :func:`_delta_stderr`)."""
    return float(value) if np.ndim(value) == 0 else value


def _slope(f, h):
    """Central-difference slope at zero (one per coefficient set for a batch)."""
    return _one_or_each(_slopes(f, h))


def _slopes(f, h):
    """Central-difference slope at zero of `f`; element-wise when `f` returns an array."""
    return (f(h) - f(-h)) / (2 * h)


def _value_at(f, x: float) -> float:
    """A vectorised `f` at one point."""
    return float(np.asarray(f(np.array([x])), dtype=float)[0])


def _side_peak(f, edge: float, sign: float, step: float) -> tuple[float, float, bool]:
    """Return (|y|max, |x| at it, reached inside the range) of f on one side of zero, up to `edge`."""
    grid = np.arange(0.0, edge + step / 2, step)
    y = np.abs(f(sign * grid))
    i = int(np.argmax(y))
    if i == 0 or i == grid.size - 1:
        return float(y[i]), float(grid[i]), False
    x, top = _refine_max(lambda a: np.abs(f(sign * a)), grid[i - 1], grid[i + 1])
    return top, x, True


REFINE_POINTS = 129  # points of the fine grid inside a bracket (searches refine in one vectorised call)


def _refine_max(f, lo: float, hi: float) -> tuple[float, float]:
    """Where the smooth, vectorised `f` is largest between `lo` and `hi` (a bracket of its maximum),
    and its value there: the best point of a fine grid, a finer grid around it, then the vertex of
    the parabola through the best point and its neighbours."""
    for _ in range(2):
        x = np.linspace(lo, hi, REFINE_POINTS)
        y = np.asarray(f(x), dtype=float)
        j = int(np.clip(np.argmax(y), 1, x.size - 2))
        lo, hi = float(x[j - 1]), float(x[j + 1])
    curvature = y[j - 1] - 2.0 * y[j] + y[j + 1]
    best_x, best_y = float(x[j]), float(y[j])
    if curvature < 0.0:
        vertex = best_x + 0.5 * (y[j - 1] - y[j + 1]) / curvature * (x[1] - x[0])
        at_vertex = _value_at(f, vertex)
        if at_vertex >= best_y:
            return vertex, at_vertex
    return best_x, best_y


def _refine_root(f, lo: float, hi: float) -> float:
    """The root of the smooth, vectorised `f` between `lo` and `hi` (where it changes sign): the
    sign change on a fine grid, again on a finer grid inside it, then two secant steps."""
    for _ in range(2):
        x = np.linspace(lo, hi, REFINE_POINTS)
        y = np.asarray(f(x), dtype=float)
        if y[0] == 0.0:
            return float(x[0])
        change = np.flatnonzero(np.sign(y[:-1]) != np.sign(y[1:]))
        j = int(change[0]) if change.size else x.size - 2
        lo, hi = float(x[j]), float(x[j + 1])
    a, b, fa, fb = lo, hi, float(y[j]), float(y[j + 1])
    for _ in range(2):
        if fb == fa:
            break
        c = b - fb * (b - a) / (fb - fa)
        fc = _value_at(f, c)
        if fc == 0.0:
            return c
        if np.sign(fc) == np.sign(fa):
            a, fa = c, fc
        else:
            b, fb = c, fc
    return a - fa * (b - a) / (fb - fa) if fb != fa else 0.5 * (a + b)


_PEAK_MEMO: dict = {}
_AT_MEMO: dict = {}


def _read_at(m: SpecimenModel, camber_deg: float, pressure_kpa: float) -> SpecimenModel:
    """`m` read at another camber and pressure, made once per evaluation: the same fit objects for
    every metric and coefficient step there, so that the peak memo serves them all. The memo holds
    the model it was made from (so that its id cannot be reused) and is emptied with the peak memo."""
    key = (id(m), float(camber_deg), float(pressure_kpa))
    hit = _AT_MEMO.get(key)
    if hit is None:
        hit = (m, m.at(camber_deg, pressure_kpa))
        _AT_MEMO[key] = hit
    return hit[1]


def _memo_peak(channel: str, m: SpecimenModel, load, v: Values, sign: float, step: float):
    """One side's peak of a channel, remembered for the evaluation under way.

    Several metrics read the same peak (friction, where it occurs, retention), and the interval
    of each perturbs the same coefficients by the same steps: the search runs once per distinct
    set of coefficient values. The memo holds the fit it was computed for (so that its id cannot be
    reused) and is emptied at the start of every evaluation.
    """
    fit = _fitted(m, channel)
    key = (channel, id(fit), float(load), sign, tuple(v[channel].values()))
    hit = _PEAK_MEMO.get(key)
    if hit is None:
        lo, hi = fit.slip_range
        hit = (fit, _side_peak(lambda x: fit.predict(x, load, values=v[channel]), hi if sign > 0 else -lo, sign, step))
        _PEAK_MEMO[key] = hit
    return hit[1]


def _lateral_peak(m, load, v, sign):
    return _memo_peak("fy", m, load, v, sign, GRID_DEG)


def _mz_peak(m, load, v, sign):
    return _memo_peak("mz", m, load, v, sign, GRID_DEG)


def _fx_peak(m, load, v, sign):
    return _memo_peak("fx", m, load, v, sign, GRID_RATIO)


def cornering_stiffness(m, load, v):
    return -_slope(lambda a: _fy(m, a, load, v), SLIP_STEP_DEG)


def _linear_range_side(m, load, v, sign):
    k = -cornering_stiffness(m, load, v)  # dFy/dα, N/deg (negative in ISO 8855)
    f0 = float(_fy(m, 0.0, load, v))
    lo, hi = m.fy.slip_range
    edge = hi if sign > 0 else -lo

    def excess(a):
        lin = k * sign * a
        return np.abs(_fy(m, sign * a, load, v) - f0 - lin) - LINEAR_RANGE_FRACTION * np.abs(lin)

    grid = np.arange(0.05, edge, 0.05)
    vals = excess(grid)
    above = np.flatnonzero(vals > 0)
    if above.size == 0:
        return None
    i = above[0]
    if i == 0:
        return float(grid[0])
    return _refine_root(excess, grid[i - 1], grid[i])


def _both(fn):
    def mean(m, load, v):
        a, b = fn(m, load, v, 1.0), fn(m, load, v, -1.0)
        return None if a is None or b is None else 0.5 * (a + b)

    return mean


def _retention_side(m, load, v, sign):
    peak, _, _ = _lateral_peak(m, load, v, sign)
    lo, hi = m.fy.slip_range
    edge = hi if sign > 0 else lo
    return float(abs(_fy(m, edge, load, v)) / peak)


def aligning_stiffness(m, load, v):
    return _slope(lambda a: _mz(m, a, load, v), SLIP_STEP_DEG)


def pneumatic_trail_mm(m, load, v):
    dfy = -cornering_stiffness(m, load, v)
    return 1000.0 * -aligning_stiffness(m, load, v) / dfy if np.all(dfy) else None


def _root_near_zero(f, half=3.0):
    grid = np.linspace(-half, half, 121)
    y = np.asarray(f(grid), dtype=float)
    s = np.flatnonzero(np.sign(y[:-1]) != np.sign(y[1:]))
    if s.size == 0:
        return None
    i = s[np.argmin(np.abs(grid[s]))]
    return _refine_root(f, grid[i], grid[i + 1])


def residual_cornering_force(m, load, v):
    a = _root_near_zero(lambda x: _mz(m, x, load, v))
    return None if a is None else float(_fy(m, a, load, v))


def residual_aligning_moment(m, load, v):
    a = _root_near_zero(lambda x: _fy(m, x, load, v))
    return None if a is None else float(_mz(m, a, load, v))


def camber_stiffness(m, load, v):
    if not any(c.status == "fitted" and c.name in ("pVy3", "pVy4", "pHy3", "pKy3") for c in m.fy.coefficients):
        return None  # no cambered data: camber dependence held at its default
    h, at = 1e-3, m.fy.camber_deg
    return _one_or_each(
        (m.fy.predict(0.0, load, at + h, values=v["fy"]) - m.fy.predict(0.0, load, at - h, values=v["fy"])) / (2 * h)
    )


def slip_stiffness(m, load, v):
    return _slope(lambda k: _fx(m, k, load, v), SLIP_STEP_RATIO)


def _peak_mu_at(m, load, v):
    return 0.5 * (_lateral_peak(m, load, v, 1.0)[0] + _lateral_peak(m, load, v, -1.0)[0]) / load


def friction_load_sensitivity(m, load, v):
    if not any(c.status == "fitted" and c.name == "pDy2" for c in m.fy.coefficients):
        return None  # one load only: the load dependence of friction is held at its default
    fz0 = m.fy.fz0_n
    h = 0.05 * fz0
    return float((_peak_mu_at(m, fz0 + h, v) - _peak_mu_at(m, fz0 - h, v)) / (2 * h / 1000.0))


def load_at_max_cornering_stiffness(m, load, v):
    fz0 = m.fy.fz0_n

    def stiffness(fz):  # the cornering stiffness for an array of loads
        return -_slopes(lambda a: _fy(m, a, np.asarray(fz, dtype=float), v), SLIP_STEP_DEG)

    grid = np.linspace(0.2 * fz0, 4.0 * fz0, 381)
    i = int(np.argmax(stiffness(grid)))
    if i == 0 or i == grid.size - 1:
        return float(grid[i])  # the stiffness still rises at the end of the searched range
    return _refine_max(stiffness, grid[i - 1], grid[i + 1])[0]


# Which fitted coefficients carry a metric's pressure dependence (Besselink, Schmeitz & Pacejka 2010):
# with none of them fitted the model has no pressure effect to report.
PRESSURE_TERMS = {
    "cornering_stiffness": ("ppy1", "ppy2"),
    "peak_lateral_friction": ("ppy3", "ppy4"),
    "pneumatic_trail": ("ppy1", "ppy2", "ppz1"),
}


def _pressure_slope(name: str, relative: bool):
    """The change of a metric with inflation pressure over the tested pressures, at the camber and
    load the model is read at: the model's secant between the lowest and highest pressure the
    channels were fitted over, per 10 kPa, or in % per bar of the value at the pressure given.

    A secant over the tested span, not the tangent at one pressure: with two pressures the data fix
    only the secant (the quadratic terms are held at zero), and with more it is still what they
    speak for.
    """

    def slope(m: SpecimenModel, load, v):
        fitted = {c.name for f in m.channels for c in f.coefficients if c.status == "fitted"}
        if not fitted & set(PRESSURE_TERMS[name]):
            return None  # one pressure only: the pressure terms are held at their defaults
        fits = [_fitted(m, c) for c in METRICS[name].channels]
        lo = max(f.pressure_range_kpa[0] for f in fits)
        hi = min(f.pressure_range_kpa[1] for f in fits)
        if hi - lo < MIN_PRESSURE_SPAN_KPA:
            return None
        at = fits[0]
        high = COMPUTE[name](_read_at(m, at.camber_deg, hi), load, v)
        low = COMPUTE[name](_read_at(m, at.camber_deg, lo), load, v)
        if high is None or low is None:
            return None
        per_kpa = (high - low) / (hi - lo)
        if not relative:
            return 10.0 * per_kpa
        here = COMPUTE[name](m, load, v)
        return None if here is None or not np.all(here) else 100.0 * 100.0 * per_kpa / here

    return slope


# How each metric of the catalogue (:mod:`dossier.project.catalogue`) is computed: metric name ->
# f(models, load_n, coefficient values) -> value or None.
COMPUTE: dict[str, Callable[[SpecimenModel, float, Values], float | None]] = {
    "cornering_stiffness": cornering_stiffness,
    "cornering_coefficient": lambda m, L, v: cornering_stiffness(m, L, v) / L,
    "peak_lateral_friction": lambda m, L, v: _peak_mu_at(m, L, v),
    "peak_lateral_friction_positive_slip": lambda m, L, v: _lateral_peak(m, L, v, 1.0)[0] / L,
    "peak_lateral_friction_negative_slip": lambda m, L, v: _lateral_peak(m, L, v, -1.0)[0] / L,
    "slip_angle_at_peak": lambda m, L, v: 0.5 * (_lateral_peak(m, L, v, 1.0)[1] + _lateral_peak(m, L, v, -1.0)[1]),
    "slip_angle_at_peak_positive_slip": lambda m, L, v: _lateral_peak(m, L, v, 1.0)[1],
    "slip_angle_at_peak_negative_slip": lambda m, L, v: _lateral_peak(m, L, v, -1.0)[1],
    "linear_range": _both(_linear_range_side),
    "post_peak_retention": _both(_retention_side),
    "aligning_stiffness": aligning_stiffness,
    "pneumatic_trail": pneumatic_trail_mm,
    "peak_aligning_moment": lambda m, L, v: 0.5 * (_mz_peak(m, L, v, 1.0)[0] + _mz_peak(m, L, v, -1.0)[0]),
    "slip_angle_at_peak_aligning_moment": lambda m, L, v: (
        0.5 * (_mz_peak(m, L, v, 1.0)[1] + _mz_peak(m, L, v, -1.0)[1])
    ),
    "residual_cornering_force": residual_cornering_force,
    "residual_aligning_moment": residual_aligning_moment,
    "camber_stiffness": camber_stiffness,
    "camber_coefficient": lambda m, L, v: None if camber_stiffness(m, L, v) is None else camber_stiffness(m, L, v) / L,
    "longitudinal_slip_stiffness": slip_stiffness,
    "peak_driving_friction": lambda m, L, v: _fx_peak(m, L, v, 1.0)[0] / L,
    "slip_ratio_at_peak_driving": lambda m, L, v: _fx_peak(m, L, v, 1.0)[1],
    "peak_braking_friction": lambda m, L, v: _fx_peak(m, L, v, -1.0)[0] / L,
    "slip_ratio_at_peak_braking": lambda m, L, v: _fx_peak(m, L, v, -1.0)[1],
    "friction_load_sensitivity": friction_load_sensitivity,
    "load_at_max_cornering_stiffness": load_at_max_cornering_stiffness,
}
COMPUTE.update(
    {f"{name}_per_10kpa": _pressure_slope(name, relative=False) for name in PRESSURE_SENSITIVE}
    | {f"{name}_pct_per_bar": _pressure_slope(name, relative=True) for name in PRESSURE_SENSITIVE}
)
MODELLED = {name for name, d in METRICS.items() if d.basis == "model"}
if set(COMPUTE) != MODELLED:  # the catalogue and the functions must name the same metrics
    raise ImportError(f"metrics without a function or functions without a metric: {sorted(set(COMPUTE) ^ MODELLED)}")


# --- evaluation ----------------------------------------------------------------------------

# Metrics whose value is a bound when the sweep does not pass the peak: channel and sides checked.
_BOTH = (1.0, -1.0)
PEAK_BOUND: dict[str, tuple[str, tuple[float, ...]]] = {
    **{
        n: ("fy", _BOTH)
        for n in (
            "peak_lateral_friction",
            "peak_lateral_friction_positive_slip",
            "peak_lateral_friction_negative_slip",
            "slip_angle_at_peak",
            "slip_angle_at_peak_positive_slip",
            "slip_angle_at_peak_negative_slip",
            "post_peak_retention",
        )
    },
    "peak_driving_friction": ("fx", (1.0,)),
    "slip_ratio_at_peak_driving": ("fx", (1.0,)),
    "peak_braking_friction": ("fx", (-1.0,)),
    "slip_ratio_at_peak_braking": ("fx", (-1.0,)),
}


def metric_values(
    models: SpecimenModel, load_n: float, points: Sequence[OperatingPoint] = (), crosscheck_threshold_pct: float = 5.0
) -> list[MetricValue]:
    """Return every per-load metric the specimen's models support at `load_n`, with intervals.

    `points` are the specimen's conditioned operating points; where one was measured at this
    load at the nominal condition, model-free estimates are attached to the cornering stiffness
    and peak friction, and a difference above `crosscheck_threshold_pct` becomes a finding.
    """
    per_load = [m for m in METRICS.values() if m.per_load and m.basis == "model"]
    return _evaluate(models, load_n, per_load, points, crosscheck_threshold_pct)


def specimen_metrics(models: SpecimenModel) -> list[MetricValue]:
    """Return the per-specimen metrics (load sensitivity) at the nominal load."""
    if models.fy is None:
        return []
    once = [m for m in METRICS.values() if not m.per_load and m.basis == "model"]
    return _evaluate(models, models.fy.fz0_n, once, (), 5.0)


def _evaluate(models, load_n, definitions, points, threshold) -> list[MetricValue]:
    _PEAK_MEMO.clear()
    _AT_MEMO.clear()
    base: Values = {c: models.get(c).values for c in ("fy", "mz", "fx") if models.get(c) is not None}
    ref = models.fy or models.fx
    out = []
    found: dict[tuple[str, float], bool] = {}

    def reached(kind: str, sign: float) -> bool:
        """Whether the model's peak lies inside the measured range on that side (computed once)."""
        if (kind, sign) not in found:
            side = _lateral_peak if kind == "fy" else _fx_peak
            found[(kind, sign)] = side(models, load_n, base, sign)[2]
        return found[(kind, sign)]

    nominal_pts = [
        p
        for p in points
        if p.load_n == load_n
        and p.sweep == "slip_angle"
        and p.rolling_direction == "forward"
        and ref is not None
        and p.at_condition(ref.camber_deg, ref.pressure_kpa)
    ]
    for d in definitions:
        if any(models.get(c) is None for c in d.channels):
            continue
        value = COMPUTE[d.name](models, load_n, base)
        if value is None:
            continue
        fits = [models.get(c) for c in d.channels]
        at = value if d.name == "load_at_max_cornering_stiffness" else load_n
        outside = _outside(fits, at)
        if d.group == "pressure" and not _pressures_tested(points, load_n, fits[0].camber_deg, d.channels):
            outside.append("pressure (fewer than two pressures at this load and camber)")
        extrapolated = bool(outside)
        sd = _delta_stderr(models, d, load_n, base)
        notes = []
        if d.name in PEAK_BOUND:
            kind, signs = PEAK_BOUND[d.name]
            if not all(reached(kind, sgn) for sgn in signs):
                notes.append("peak not reached inside the measured slip range: value is a bound")
                if d.name.startswith(("slip_angle", "slip_ratio")) or d.name == "post_peak_retention":
                    sd = None  # the location of a peak that was not reached has no interval
        if extrapolated:
            notes.append(f"outside the measured {' and '.join(outside)} range: extrapolated")
        dof = min(f.statistics.dof for f in fits)  # see dossier.standards.coverage
        ci = None if sd is None else interval(value, sd, dof)
        cc = diff = None
        finding = ""
        if nominal_pts and d.name in ("cornering_stiffness", "peak_lateral_friction"):
            fn = estimates.cornering_stiffness_n_per_deg if d.name == "cornering_stiffness" else estimates.peak_friction
            estimated = [fn(p.curve) for p in nominal_pts]
            vals = [x for x in estimated if x is not None]
            if vals:
                cc = float(np.mean(vals))
                diff = 100.0 * (value / cc - 1.0)
                if abs(diff) > threshold:
                    finding = (
                        f"model and data disagree by {diff:+.1f} % (threshold {threshold:g} %): "
                        "check the fit near zero slip / at the peak"
                    )
        ref_fit = fits[0]
        out.append(
            MetricValue(
                d.name,
                d.unit,
                models.specimen,
                float(load_n),
                ref_fit.camber_deg,
                ref_fit.pressure_kpa,
                float(value),
                sd,
                ci,
                "model",
                extrapolated,
                "; ".join(notes),
                cc,
                diff,
                finding,
                dof,
            )
        )
    return out


def _pressures_tested(points: Sequence[OperatingPoint], load_n: float, camber_deg: float, channels) -> bool:
    """Whether two or more pressures at least MIN_PRESSURE_SPAN_KPA apart were tested at this load
    and camber, in the sweeps the channels come from."""
    sweep = "slip_ratio" if "fx" in channels else "slip_angle"
    found = [
        p.pressure_kpa
        for p in points
        if p.load_n == load_n and p.sweep == sweep and round(p.camber_deg, 2) == round(camber_deg, 2)
    ]
    return bool(found) and max(found) - min(found) >= MIN_PRESSURE_SPAN_KPA


def _outside(fits: list[ChannelFit], load_n: float) -> list[str]:
    """Which of load, camber and pressure lie outside every fit's measured range (load within 2 %,
    camber within 0.01°, pressure within 1 kPa)."""
    out = []
    lo, hi = max(f.load_range_n[0] for f in fits), min(f.load_range_n[1] for f in fits)
    if not lo * 0.98 <= load_n <= hi * 1.02:
        out.append("load")
    camber, pressure = fits[0].camber_deg, fits[0].pressure_kpa
    if not all(f.camber_range_deg[0] - 0.01 <= camber <= f.camber_range_deg[1] + 0.01 for f in fits):
        out.append("camber")
    if not all(f.pressure_range_kpa[0] - 1.0 <= pressure <= f.pressure_range_kpa[1] + 1.0 for f in fits):
        out.append("pressure")
    return out


# Metrics whose function reads the model only at scalar slips, so that it can be given every
# coefficient step of an interval at once (each coefficient an array, one element per step): one
# vectorised model call instead of two per coefficient.
BATCHED = frozenset(
    {
        "cornering_stiffness",
        "cornering_coefficient",
        "aligning_stiffness",
        "pneumatic_trail",
        "longitudinal_slip_stiffness",
        "camber_stiffness",
        "camber_coefficient",
        *(
            f"{name}{suffix}"
            for name in ("cornering_stiffness", "pneumatic_trail")
            for suffix in ("_per_10kpa", "_pct_per_bar")
        ),
    }
)


def _delta_stderr(models: SpecimenModel, d: MetricDefinition, load_n: float, base: Values) -> float | None:
    """The metric's standard uncertainty from the fit's covariance (delta method, central
    differences of the metric in each coefficient with a finite variance)."""
    var = 0.0
    any_finite = False
    for channel in d.channels:
        fit = _fitted(models, channel)
        names = fit.fitted_names
        cov = fit.covariance
        finite = np.array([np.isfinite(cov[i, i]) for i in range(len(names))], dtype=bool)
        if not np.any(finite):
            continue
        any_finite = True
        cv = base[channel]
        steps = [
            (i, max(0.05 * np.sqrt(cov[i, i]), 1e-9 * max(abs(cv[names[i]]), 1.0))) for i in np.flatnonzero(finite)
        ]
        g = np.zeros(len(names))
        if d.name in BATCHED:
            changed = _steps_batch(models, d, load_n, base, channel, names, steps)
            if changed is None:
                return None
            for (i, h), (up, dn) in zip(steps, changed):
                g[i] = (up - dn) / (2 * h)
        else:
            for i, h in steps:
                name = names[i]
                up = COMPUTE[d.name](models, load_n, {**base, channel: {**cv, name: cv[name] + h}})
                dn = COMPUTE[d.name](models, load_n, {**base, channel: {**cv, name: cv[name] - h}})
                if up is None or dn is None:
                    return None
                g[i] = (up - dn) / (2 * h)
        sub = np.ix_(finite, finite)
        var += float(g[finite] @ cov[sub] @ g[finite])
    return float(np.sqrt(max(var, 0.0))) if any_finite else None


def _steps_batch(models, d, load_n, base, channel, names, steps):
    """The metric at every step up and down of `steps` in one call; [(up, down)] or None."""
    k = len(steps)
    cv = base[channel]
    batch: Any = {name: np.full(2 * k, value, dtype=float) for name, value in cv.items()}
    for j, (i, h) in enumerate(steps):
        batch[names[i]][j] = cv[names[i]] + h
        batch[names[i]][k + j] = cv[names[i]] - h
    found = COMPUTE[d.name](models, load_n, {**base, channel: batch})
    if found is None:
        return None
    each = np.broadcast_to(np.asarray(found, dtype=float), (2 * k,))
    return [(float(each[j]), float(each[k + j])) for j in range(k)]


def single_metric(models: SpecimenModel, name: str, load_n: float) -> MetricValue | None:
    """Return one metric at one load (for vehicle balance), or None if the models cannot give it."""
    d = METRICS[name]
    if any(models.get(c) is None for c in d.channels):
        return None
    found = _evaluate(models, load_n, [d], (), 5.0)
    return found[0] if found else None
