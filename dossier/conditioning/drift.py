"""Drift: how a rig's force level moved through the session, seen on the control tire.

The control specimen is re-tested at intervals. For each repeat we take model-free metrics at
its load (:mod:`dossier.conditioning.estimates`); a straight line in time through them is the drift. The
force level is tracked by the control's peak friction: the correction factor for a run tested at
time t is level(t_ref)/level(t), with t_ref the first control repeat, applied to the forces and
moments (not the load) of every run on the same rig — the control's own repeats included, so that
every value refers to the level at t_ref — when the manifest asks for it (``[drift] correct =
true``). The drift found is always reported. This is the usual control-tire practice of test labs
(common practice); its form (linear in time, one factor per run) is stated on the page.

Drift belongs to a rig: each station (lab and rig) where the control was tested twice or more gets
its own line, and only the runs of that station are corrected by it. The scatter of the repeats
about the line is the rig's repeatability, and the line's covariance gives the uncertainty of each
correction factor (:mod:`dossier.metrics.budget`).
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, replace

import numpy as np

from ..common.errors import StageError
from ..conditioning import estimates
from ..conditioning.steady_state import OperatingPoint

TRACKED = ("cornering_stiffness_n_per_deg", "peak_friction")


@dataclass(frozen=True)
class ControlRepeat:
    run_index: int
    tested_at: dt.datetime
    load_n: float
    cornering_stiffness_n_per_deg: float | None
    peak_friction: float | None


@dataclass(frozen=True)
class MetricDrift:
    metric: str
    per_hour_pct: float  # slope of the line, % of the reference value per hour
    over_session_pct: float  # change from the first to the last repeat, by the line


@dataclass(frozen=True)
class RunCorrection:
    run_index: int
    specimen: str
    tested_at: dt.datetime
    force_scale: float


Station = tuple[str, str]  # (lab, rig) of a run, as the manifest gives them


@dataclass(frozen=True)
class DriftEstimate:
    control: str
    load_n: float
    repeats: tuple[ControlRepeat, ...]
    metrics: tuple[MetricDrift, ...]
    reference_time: dt.datetime
    level_intercept: float  # peak friction at reference time, by the line
    level_slope_per_hour: float
    corrected: bool
    corrections: tuple[RunCorrection, ...] = ()
    station: Station = ("", "")
    # The line's covariance over (intercept, slope per hour) from the scatter of the repeats about it,
    # s²·(XᵀX)⁻¹ (ordinary least squares), and that scatter's degrees of freedom (repeats − 2). With two
    # repeats the line has no scatter to show: level_dof is 0 and the covariance is left to the budget.
    level_covariance: tuple[tuple[float, float], tuple[float, float]] = ((0.0, 0.0), (0.0, 0.0))
    level_dof: int = 0
    level_residual_sd: float = 0.0  # of the repeats about the line, in the level's unit

    def force_scale_at(self, when: dt.datetime) -> float:
        """Return level(t_ref)/level(when) from the straight line through the repeats."""
        level = self.level_intercept + self.level_slope_per_hour * self.hours(when)
        return float(self.level_intercept / level)

    def hours(self, when: dt.datetime) -> float:
        return (when - self.reference_time).total_seconds() / 3600.0

    def scale_gradient(self, when: dt.datetime) -> tuple[float, float]:
        """∂ ln(force scale at `when`) / ∂(intercept, slope): how an error of the line moves the factor."""
        a, b, h = self.level_intercept, self.level_slope_per_hour, self.hours(when)
        level = a + b * h
        return (1.0 / a - 1.0 / level, -h / level)

    @property
    def relative_repeatability(self) -> float:
        """The scatter of the repeats about the line, as a fraction of the level at t_ref."""
        return self.level_residual_sd / self.level_intercept


def estimate_drifts(
    points: list[OperatingPoint], control: str, nominal_load_n: float, stations: dict[int, Station]
) -> tuple[DriftEstimate, ...]:
    """One drift line per station (run index -> lab and rig in `stations`) where the control was
    tested at two times or more, in the order of the stations' names."""
    found = []
    for station in sorted(set(stations.values())):
        here = [p for p in points if stations.get(p.run_index) == station]
        est = estimate_drift(here, control, nominal_load_n)
        if est is not None:
            found.append(replace(est, station=station))
    return tuple(found)


def estimate_drift(points: list[OperatingPoint], control: str, nominal_load_n: float) -> DriftEstimate | None:
    """Estimate drift from the control specimen's repeats (all on one rig); None if it was tested
    fewer than twice."""
    ctl = [
        p
        for p in points
        if p.specimen == control
        and p.sweep == "slip_angle"
        and p.camber_deg == 0.0
        and p.rolling_direction == "forward"
        and p.tested_at is not None
    ]
    if not ctl:
        return None
    loads = sorted({p.load_n for p in ctl}, key=lambda v: (abs(v - nominal_load_n), v))
    load = loads[0]
    at_load = sorted((p for p in ctl if p.load_n == load), key=_tested_at)
    repeats = tuple(
        ControlRepeat(
            p.run_index,
            _tested_at(p),
            load,
            estimates.cornering_stiffness_n_per_deg(p.curve),
            estimates.peak_friction(p.curve),
        )
        for p in at_load
    )
    if len({r.tested_at for r in repeats}) < 2:
        return None
    t_ref = repeats[0].tested_at
    hours = np.array([(r.tested_at - t_ref).total_seconds() / 3600.0 for r in repeats])
    span = hours.max() - hours.min()
    drifts = []
    line = {}
    for name in TRACKED:
        y = np.array([getattr(r, name) for r in repeats], dtype=float)
        if np.any(~np.isfinite(y)):
            raise StageError(f"drift: the control {control!r} has a repeat where {name} cannot be estimated")
        slope, intercept = np.polyfit(hours, y, 1)
        line[name] = (intercept, slope)
        drifts.append(MetricDrift(name, 100.0 * slope / intercept, 100.0 * slope * span / intercept))
    intercept, slope = line["peak_friction"]
    level = np.array([r.peak_friction for r in repeats], dtype=float)
    dof = len(repeats) - 2
    cov = ((0.0, 0.0), (0.0, 0.0))
    sd = 0.0
    if dof > 0:
        resid = level - (intercept + slope * hours)
        sd = float(np.sqrt(np.sum(resid**2) / dof))
        design = np.column_stack([np.ones_like(hours), hours])
        c = sd**2 * np.linalg.inv(design.T @ design)
        cov = ((float(c[0, 0]), float(c[0, 1])), (float(c[1, 0]), float(c[1, 1])))
    return DriftEstimate(
        control,
        load,
        repeats,
        tuple(drifts),
        t_ref,
        float(intercept),
        float(slope),
        False,
        level_covariance=cov,
        level_dof=max(dof, 0),
        level_residual_sd=sd,
    )


def _tested_at(p: OperatingPoint) -> dt.datetime:
    """Return the test time of a control repeat (estimate_drift keeps only points that have one)."""
    assert p.tested_at is not None  # ctl in estimate_drift holds only points with a test time
    return p.tested_at


def correct_points(
    points: list[OperatingPoint], estimate: DriftEstimate, stations: dict[int, Station] | None = None
) -> tuple[list[OperatingPoint], DriftEstimate]:
    """Scale forces and moments of every run of the estimate's station (run index -> station in
    `stations`; None: every run), the control's own included, by the drift factor at its test time."""
    out = []
    corrections: dict[int, RunCorrection] = {}
    for p in points:
        elsewhere = stations is not None and stations.get(p.run_index) != estimate.station
        if elsewhere or p.tested_at is None:
            out.append(p)
            continue
        k = estimate.force_scale_at(p.tested_at)
        corrections[p.run_index] = RunCorrection(p.run_index, p.specimen, p.tested_at, k)
        out.append(
            replace(
                p,
                curve=p.curve.scaled(k),
                rising=None if p.rising is None else p.rising.scaled(k),
                falling=None if p.falling is None else p.falling.scaled(k),
                raw_main=p.raw_main * k,
                force_scale=k,
            )
        )
    ordered = tuple(sorted(corrections.values(), key=lambda c: c.tested_at))
    return out, replace(estimate, corrected=True, corrections=ordered)
