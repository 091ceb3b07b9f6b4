"""Metrics: the numbers the trade reads, from the fitted model, each with a 95 % interval.

Every metric is declared once in :data:`METRICS` (name, unit, definition, how it is computed,
the source that defines it, and the function that computes it from a fitted model at a
load). Intervals come from the fit covariance by the delta method: the metric's gradient with
respect to the fitted coefficients, ``var = gᵀ Σ g``, times the fit's Student-t quantile.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import optimize

from .fit import LateralFit

SLIP_STEP_DEG = 1e-3  # central-difference step for slopes at zero slip
PEAK_GRID_DEG = 0.05


@dataclass(frozen=True)
class MetricDefinition:
    """What a metric is, for the glossary and for ``results.json``."""

    name: str
    label: str
    unit: str
    definition: str
    computed: str
    source: str
    compute: Callable[[LateralFit, float, dict[str, float]], float]


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


def _cornering_stiffness(fit: LateralFit, load_n: float, values: dict[str, float]) -> float:
    h = SLIP_STEP_DEG
    fy = fit.predict_fy_n(np.array([-h, h]), load_n, values)
    return float(-(fy[1] - fy[0]) / (2 * h))


def _cornering_coefficient(fit, load_n, values):
    return _cornering_stiffness(fit, load_n, values) / load_n


def _side_peak(fit: LateralFit, load_n: float, values: dict[str, float], sign: float) -> tuple[float, float, bool]:
    """Return (|Fy|max, |slip angle| at it in deg, reached inside the range) on one side of zero slip."""
    lo, hi = fit.slip_range_deg
    edge = hi if sign > 0 else -lo
    grid = np.arange(0.0, edge + PEAK_GRID_DEG / 2, PEAK_GRID_DEG)
    fy = np.abs(fit.predict_fy_n(sign * grid, load_n, values))
    i = int(np.argmax(fy))
    if i == grid.size - 1 or i == 0:
        return float(fy[i]), float(grid[i]), False
    res = optimize.minimize_scalar(lambda a: -abs(float(fit.predict_fy_n(sign * a, load_n, values))),
                                   bounds=(grid[i - 1], grid[i + 1]), method="bounded",
                                   options={"xatol": 1e-6})
    return float(-res.fun), float(res.x), True


def _peak(fit: LateralFit, load_n: float, values: dict[str, float]) -> tuple[float, float, bool]:
    """Return (mean |Fy|max of both slip directions, mean |slip| at them, both reached in range).

    Averaging the positive- and negative-slip peaks cancels the offset that ply-steer and
    conicity add to one side and take from the other (common practice).
    """
    fp, ap, okp = _side_peak(fit, load_n, values, +1.0)
    fn, an, okn = _side_peak(fit, load_n, values, -1.0)
    return 0.5 * (fp + fn), 0.5 * (ap + an), okp and okn


def _peak_friction(fit, load_n, values):
    return _peak(fit, load_n, values)[0] / load_n


def _slip_at_peak(fit, load_n, values):
    return _peak(fit, load_n, values)[1]


METRICS: dict[str, MetricDefinition] = {m.name: m for m in (
    MetricDefinition(
        "cornering_stiffness", "Cornering stiffness", "N/deg",
        "Negative slope of lateral force against slip angle at zero slip angle.",
        "Central difference of the fitted Fy0 model at zero slip (±0.001°).",
        "SAE J670 (cornering stiffness); Pacejka 2006 §4.3.2", _cornering_stiffness),
    MetricDefinition(
        "cornering_coefficient", "Cornering coefficient", "1/deg",
        "Cornering stiffness divided by the normal load.",
        "Model cornering stiffness divided by the nominal load of the operating point.",
        "SAE J670; Gillespie 1992, ch. 6", _cornering_coefficient),
    MetricDefinition(
        "peak_lateral_friction", "Peak lateral friction", "1",
        "Largest |Fy| divided by the normal load, averaged over the positive and negative slip "
        "directions, within the measured slip-angle range.",
        "Maximum of |Fy0| of the fitted model on each side of zero slip within the measured range, "
        "refined by a bounded scalar search; the two sides averaged and divided by the nominal load.",
        "common practice", _peak_friction),
    MetricDefinition(
        "slip_angle_at_peak", "Slip angle at peak", "deg",
        "Magnitude of the slip angle at which |Fy| is largest, averaged over both slip directions.",
        "Arguments of the two maxima found for peak lateral friction, as magnitudes, averaged.",
        "common practice", _slip_at_peak),
)}


def metric_values(fit: LateralFit, load_n: float) -> list[MetricValue]:
    """Return every registered metric of `fit` at `load_n`, with delta-method intervals."""
    lo, hi = fit.load_range_n
    extrapolated = not (lo * 0.98 <= load_n <= hi * 1.02)
    base = fit.values
    _, _, peak_inside = _peak(fit, load_n, base)
    out = []
    for m in METRICS.values():
        value = m.compute(fit, load_n, base)
        sd = _delta_stderr(fit, m.compute, load_n, base)
        note = ""
        if m.name in ("peak_lateral_friction", "slip_angle_at_peak") and not peak_inside:
            note = "peak not reached inside the measured slip range: value is a lower bound"
            if m.name == "slip_angle_at_peak":
                sd = None
        if extrapolated:
            note = (note + "; " if note else "") + "load outside the measured range: extrapolated"
        ci = None if sd is None else (value - fit.t95 * sd, value + fit.t95 * sd)
        out.append(MetricValue(m.name, m.unit, fit.specimen, load_n, fit.camber_deg, fit.pressure_kpa,
                               value, sd, ci, "model", extrapolated, note))
    return out


def _delta_stderr(fit: LateralFit, f, load_n: float, base: dict[str, float]) -> float | None:
    names = fit.fitted_names
    cov = fit.covariance
    finite = np.array([np.isfinite(cov[i, i]) for i in range(len(names))], dtype=bool)
    if not np.any(finite):
        return None
    g = np.zeros(len(names))
    for i, name in enumerate(names):
        if not finite[i]:
            continue
        h = max(0.05 * np.sqrt(cov[i, i]), 1e-9 * max(abs(base[name]), 1.0))
        up = f(fit, load_n, {**base, name: base[name] + h})
        dn = f(fit, load_n, {**base, name: base[name] - h})
        g[i] = (up - dn) / (2 * h)
    sub = np.ix_(finite, finite)
    var = float(g[finite] @ cov[sub] @ g[finite])
    return float(np.sqrt(max(var, 0.0)))
