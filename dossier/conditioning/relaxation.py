"""Relaxation length: how far the tire rolls while its force builds up after the slip changes.

The single-contact-point transient model (first-order relaxation, Pacejka 2006 §7.2): the
deflection of the contact patch, and with it the force, follows the slip with
``σ dF/ds + F = F_ss(slip)``, s the distance rolled and σ the relaxation length. At a rolling
speed V that is a first-order lag in time with time constant τ = σ / V. Two ways to measure τ:

* **Hysteresis lag** (the value): a slip that ramps at rate r is followed, once the lag has built
  up, r·τ behind, so the rising and falling halves of a continuous sweep sit a slip lag
  Δ = r·τ either side of the steady curve; σ = V·Δ / r. Measured by :func:`fit_lag` from the
  moving samples near zero slip (:class:`LagSamples`): one cubic for the steady curve, shifted
  by +Δ for the rising and −Δ for the falling half, fitted to both halves at once.
* **Settling after a stop** (the cross-check): when the slip stops and holds, the force settles
  as ``c + A·exp(−t/τ)``; a least-squares fit of that exponential gives τ, σ = V·τ.

Lateral lengths come from slip-angle sweeps, longitudinal ones from slip-ratio sweeps. Pure
functions of conditioned operating points (:class:`OperatingPoint`), returning frozen dataclasses.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, replace

import numpy as np

from ..standards.coverage import effective_dof
from .steady_state import LagSamples, OperatingPoint, SlipCurve, SlipHold

LATERAL, LONGITUDINAL = "lateral", "longitudinal"
DIRECTIONS = {"slip_angle": LATERAL, "slip_ratio": LONGITUDINAL}
KMH_PER_M_PER_S = 3.6  # 1 km/h = 1/3.6 m/s (exact)

# A hold's time constant is used only where the hold shows it (common practice for an
# exponential fit): the hold lasts at least three time constants, the fit's relative standard
# error is at most 30 %, and the estimate is not at the edge of the searched range.
HOLD_MIN_TIME_CONSTANTS = 3.0
HOLD_MAX_RELATIVE_U = 0.3
# After a start from a hold the lag still falls short by Δ·exp(−s/Δ) at a travel s, after a
# reversal by 2Δ·exp(−s/Δ) (first-order response to a ramp): beyond six lags of travel that is
# under 0.5 % of Δ, so samples closer to a start or a reversal are left out of the lag fit.
TRAVEL_LAGS = 6.0
# The sweep-direction label spans ±2 samples, so a sample or two where the slip has just stopped
# (or not yet started) still counts as moving; only samples moving at their half's rate to within
# 40 % are on the steady ramp the model describes.
RATE_TOLERANCE = 0.4
CURVE_DEGREE = 3  # the steady curve near zero slip: a cubic (a quintic gave no better coverage)
LAG_FIT_PARAMS = CURVE_DEGREE + 2  # its coefficients and the time constant
LAG_MIN_SAMPLES_PER_HALF = 4


@dataclass(frozen=True)
class LagFit:
    """The first-order time constant of a sweep from its two halves near zero slip (:func:`fit_lag`)."""

    tau_s: float | None
    tau_u_s: float | None  # standard uncertainty (Type A)
    dof: float | None
    n_samples: int  # samples fitted
    n_excluded: int  # samples left out: near a start or a reversal, or off their half's rate
    rate_per_s: float  # mean of the halves' rates (:func:`ramp_rate`): deg/s, or 1/s
    slip_lag: float | None  # τ · rate: deg, or slip ratio
    slip_lag_u: float | None
    rmse_n: float | None
    autocorrelation: float | None  # lag-one correlation of the residuals of consecutive samples
    reason: str = ""  # why there is no time constant ("" when there is)


@dataclass(frozen=True)
class HoldFit:
    """A first-order time constant fitted to the settling in one hold (:class:`SlipHold`).

    The force is mapped through the steady curve to the slip it corresponds to (:func:`fit_hold`),
    so `amplitude` and `rmse` are in the unit of the slip: deg, or slip ratio.
    """

    first_line: int
    slip: float  # the held slip: deg, or slip ratio
    n_samples: int
    tau_s: float | None
    tau_u_s: float | None  # standard error from the fit's covariance
    amplitude: float | None  # A: the slip lag still to recover at the first held sample
    rmse: float | None
    reason: str = ""  # why the hold gives no time constant ("" when it does)


@dataclass(frozen=True)
class PointRelaxation:
    """The relaxation length of one operating point from its hysteresis lag, and its holds' fits."""

    run_index: int
    load_n: float
    camber_deg: float
    pressure_kpa: float
    direction: str  # "lateral" or "longitudinal"
    speed_kmh: float | None
    lag: LagFit | None
    value_m: float | None
    u_m: float | None
    dof: float | None
    holds: tuple[HoldFit, ...] = ()
    reason: str = ""  # why there is no value ("" when there is)


@dataclass(frozen=True)
class RelaxationLength:
    """The relaxation length of one specimen at one load, camber, pressure and direction.

    `value_m` ± `u_m` (standard uncertainty, `dof` degrees of freedom) from the hysteresis lag of
    `n_points` operating points; `crosscheck_m` ± `crosscheck_u_m` from the settling after the
    sweep stopped, None where no hold showed it. `reason` says why `value_m` is None.
    """

    specimen: str
    load_n: float
    camber_deg: float
    pressure_kpa: float
    direction: str  # "lateral" or "longitudinal"
    value_m: float | None
    u_m: float | None
    dof: float | None
    n_points: int
    method: str
    crosscheck_m: float | None
    crosscheck_u_m: float | None
    crosscheck_method: str
    reason: str = ""
    speed_kmh: float | None = None  # mean over the points that gave a value
    points: tuple[PointRelaxation, ...] = ()


def fit_hold(hold: SlipHold, curve: SlipCurve, force_scale: float = 1.0) -> HoldFit:
    """Fit ``δ(t) = c + A·exp(−(t − t₀)/τ)`` to a hold by least squares and return τ with its error.

    In the first-order model it is the slip the contact patch feels (its deflection), not the
    force, that relaxes exponentially (Pacejka 2006 §7.2); where the steady curve bends, the force
    does not. So each force is first mapped to the slip δ it stands for about the held slip x_h,
    by inverting the steady curve's quadratic Taylor expansion there, ½F″δ² + F′δ = F − F(x_h)
    (F′, F″ from a quadratic through the `curve` points nearby; F(x_h) the hold's final force).
    For a given τ the model is linear in c and A, so τ alone is searched (variable projection): a
    grid over log τ from a quarter of the sampling interval to the hold's length, refined by a
    bounded scalar minimisation. The standard errors come from the Jacobian at the solution and the
    residual variance (n − 3 dof). `force_scale` is the point's drift correction, applied to the
    hold's recorded forces so that they match the curve.
    """
    from scipy.optimize import minimize_scalar

    t = hold.time_s - hold.time_s[0]
    n = int(t.size)

    def fail(reason: str, tau=None, u=None, a=None, rmse=None) -> HoldFit:
        return HoldFit(hold.first_line, hold.slip, n, tau, u, a, rmse, reason)

    if n < 4 or t[-1] <= 0:
        return fail("too few held samples for an exponential")
    local = _local_quadratic(curve, hold.slip)
    if local is None:
        return fail("too few steady-curve points near the held slip")
    slope, curvature = local
    force = force_scale * hold.main
    df = force - float(np.median(force[-max(n // 3, 1) :]))
    disc = slope**2 + 2.0 * curvature * df
    if slope == 0 or np.any(disc <= 0):
        return fail("the steady curve is flat or turns over at the held slip")
    f = 2.0 * df / (slope + np.sign(slope) * np.sqrt(disc))  # the root of the quadratic nearer zero
    step_s = float(np.median(np.diff(t)))
    lo, hi = math.log(0.25 * step_s), math.log(float(t[-1]))

    def solve(log_tau: float) -> tuple[float, np.ndarray, np.ndarray]:
        e = np.exp(-t / math.exp(log_tau))
        design = np.stack([np.ones(n), e], axis=1)
        coef, *_ = np.linalg.lstsq(design, f, rcond=None)
        resid = f - design @ coef
        return float(resid @ resid), coef, e

    grid = np.linspace(lo, hi, 48)
    rss = [solve(g)[0] for g in grid]
    best = int(np.argmin(rss))
    if best in (0, grid.size - 1):
        return fail("no settling seen (the best time constant is at the edge of what the hold can show)")
    found = minimize_scalar(
        lambda g: solve(g)[0], bounds=(grid[best - 1], grid[best + 1]), method="bounded", options={"xatol": 1e-6}
    )
    tau = math.exp(float(found.x))
    rss_min, (c, a), e = solve(float(found.x))
    dof = n - 3
    if dof <= 0:
        return fail("too few held samples for an exponential", tau)
    s2 = rss_min / dof
    jac = np.stack([np.ones(n), e, a * e * t / tau**2], axis=1)  # ∂δ/∂c, ∂δ/∂A, ∂δ/∂τ
    try:
        cov = s2 * np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError:
        return fail("time constant not determined (singular fit)", tau, None, float(a), math.sqrt(s2))
    u = math.sqrt(max(float(cov[2, 2]), 0.0))
    rmse = math.sqrt(s2)
    if t[-1] < HOLD_MIN_TIME_CONSTANTS * tau:
        return fail(f"hold shorter than {HOLD_MIN_TIME_CONSTANTS:g} time constants", tau, u, float(a), rmse)
    if not u <= HOLD_MAX_RELATIVE_U * tau:
        return fail(
            f"time constant poorly determined (standard error above {100 * HOLD_MAX_RELATIVE_U:.0f} %)",
            tau,
            u,
            float(a),
            rmse,
        )
    return HoldFit(hold.first_line, hold.slip, n, tau, u, float(a), rmse)


def _local_quadratic(curve: SlipCurve, x0: float) -> tuple[float, float] | None:
    """Return (dF/dx, d²F/dx²) of the curve's main force at `x0` from a quadratic through nearby points.

    Nearby: within two and a half of the curve's typical point spacing (up to five points); at
    least three.
    """
    x, y = curve.x, curve.main
    if x.size < 3:
        return None
    near = np.abs(x - x0) <= 2.5 * float(np.median(np.diff(x)))
    if np.count_nonzero(near) < 3:
        return None
    c2, c1, _ = np.polyfit(x[near] - x0, y[near], 2)
    return float(c1), float(2.0 * c2)


def fit_lag(samples: LagSamples, tau_start_s: float = 0.0) -> LagFit:
    """Fit the first-order time constant τ to the moving samples of both halves near zero slip.

    Model (first-order relaxation on a steady ramp, Pacejka 2006 §7.2): a sample moving at rate r
    in direction d (+1 rising, −1 falling) carries the steady force at the slip it had τ earlier,
    ``F = P(x − d·r·τ)``, with P a cubic through the steady curve near zero (so its bending over
    the window does not bias τ, as it does a straight line's value at zero) and r the rate of the
    sample's half (:func:`ramp_rate`). Least squares in P's four coefficients and τ (Levenberg–Marquardt,
    analytic Jacobian); samples within :data:`TRAVEL_LAGS` lags of a start or reversal are left
    out, the exclusion re-made from each new τ until it settles, and so are samples not moving at
    their half's rate (:data:`RATE_TOLERANCE`). Standard uncertainty from the
    Jacobian and the residual variance (n − 5 dof); where consecutive residuals correlate
    (filtered channels, misfit), variance and dof are scaled by (1 + ρ)/(1 − ρ) (AR(1)
    approximation, common practice). The rates' own standard errors are added (τ ∝ 1/r̄; GUM
    5.1.2), with the degrees of freedom by Welch–Satterthwaite.
    """
    from scipy.optimize import least_squares

    d = np.asarray(samples.direction)
    x, f = samples.x, samples.main
    # Only samples moving at about their half's (median) rate are on the steady ramp.
    median = np.where(d > 0, samples.rate_rising_per_s, samples.rate_falling_per_s)
    with np.errstate(invalid="ignore"):
        steady = np.abs(np.abs(samples.rate_per_s) - median) <= RATE_TOLERANCE * median
    rising = ramp_rate(samples.time_s, x, steady & (d > 0))
    falling = ramp_rate(samples.time_s, x, steady & (d < 0))
    if rising is None or falling is None:
        mean = 0.5 * (samples.rate_rising_per_s + samples.rate_falling_per_s)
        reason = "no steady ramp in one of the halves near zero slip"
        return LagFit(None, None, None, 0, int(d.size), mean, None, None, None, None, reason)
    rates = {1: abs(rising[0]), -1: abs(falling[0])}
    rate_mean = 0.5 * (rates[1] + rates[-1])
    # τ = 2Δ̄/(r_rising + r_falling): the rates' errors give τ a relative error of √(u_r² + u_f²)/(r_r + r_f).
    rate_rel_u = math.hypot(rising[1], falling[1]) / (2.0 * rate_mean)
    rate_dof = min(rising[2], falling[2])
    shift = np.where(d > 0, rates[1], -rates[-1])  # d·r: slip lag per second of τ
    w = samples.window

    def fail(reason: str, n_used=0, n_out=0) -> LagFit:
        return LagFit(None, None, None, n_used, n_out, rate_mean, None, None, None, None, reason)

    def design(tau: float, m: np.ndarray) -> np.ndarray:
        u = (x[m] - tau * shift[m]) / w
        return np.vander(u, CURVE_DEGREE + 1, increasing=True)

    def solve(m: np.ndarray, tau0: float):
        coef0, *_ = np.linalg.lstsq(design(tau0, m), f[m], rcond=None)

        def residual(theta):
            return design(theta[-1], m) @ theta[:-1] - f[m]

        def jacobian(theta):
            a = design(theta[-1], m)
            powers = np.arange(1, CURVE_DEGREE + 1)
            slope = a[:, :-1] @ (powers * theta[1:-1])  # dP/du
            return np.column_stack([a, -slope * shift[m] / w])

        return least_squares(residual, np.r_[coef0, tau0], jac=jacobian, method="lm", x_scale="jac")

    tau = float(tau_start_s) if math.isfinite(tau_start_s) else 0.0
    used = np.zeros(0, dtype=bool)  # the samples of the last fit (none yet)
    for _ in range(6):
        m = steady & (samples.travel >= TRAVEL_LAGS * abs(tau) * max(rates.values()))
        if np.array_equal(m, used):
            break
        counts = [int(np.count_nonzero(m & (d == sign))) for sign in (1, -1)]
        if min(counts) < LAG_MIN_SAMPLES_PER_HALF or int(np.count_nonzero(m)) <= LAG_FIT_PARAMS + 1:
            return fail(
                f"too few samples with the lag built up near zero slip "
                f"({counts[0]} rising, {counts[1]} falling; at least {LAG_MIN_SAMPLES_PER_HALF} each)",
                int(np.count_nonzero(m)),
                int(np.count_nonzero(~m)),
            )
        found = solve(m, tau)
        used, tau = m, float(found.x[-1])
    n = int(np.count_nonzero(used))
    resid = found.fun
    dof = n - LAG_FIT_PARAMS
    s2 = float(resid @ resid) / dof
    jac = found.jac
    try:
        cov = s2 * np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError:
        return fail("lag not determined (singular fit)", n, int(np.count_nonzero(~used)))
    rho = _lag_one_correlation(samples.time_s[used], resid)
    inflation = (1.0 + rho) / (1.0 - rho) if rho > 0 else 1.0
    u_fit = math.sqrt(max(float(cov[-1, -1]), 0.0) * inflation)
    u_rate = abs(tau) * rate_rel_u
    tau_u = math.hypot(u_fit, u_rate)
    return LagFit(
        tau_s=tau,
        tau_u_s=tau_u,
        dof=effective_dof([(u_fit, dof / inflation), (u_rate, rate_dof)]) if tau_u > 0 else None,
        n_samples=n,
        n_excluded=int(np.count_nonzero(~used)),
        rate_per_s=rate_mean,
        slip_lag=tau * rate_mean,
        slip_lag_u=tau_u * rate_mean,
        rmse_n=math.sqrt(s2),
        autocorrelation=rho,
    )


def ramp_rate(t: np.ndarray, x: np.ndarray, m: np.ndarray) -> tuple[float, float, float] | None:
    """Return (dx/dt, its standard error, dof) of the samples `m`, one slope for all their stretches.

    A stretch is a run of consecutive samples (time steps within 1.5 typical); each has its own
    intercept, all share the slope (least squares with one offset per stretch), so a half that
    passes the window twice gives one rate. None with fewer than three samples beyond the offsets.
    """
    idx = np.flatnonzero(m)
    if idx.size < 3:
        return None
    tt, xx = t[idx], x[idx]
    step = np.diff(tt)
    typical = float(np.median(step)) if step.size else 0.0
    new = np.r_[True, (np.diff(idx) != 1) | (step > 1.5 * typical)]
    stretch = np.cumsum(new) - 1
    n_stretch = int(stretch[-1]) + 1
    counts = np.bincount(stretch)
    tc = tt - (np.bincount(stretch, tt) / counts)[stretch]
    xc = xx - (np.bincount(stretch, xx) / counts)[stretch]
    sxx = float(tc @ tc)
    dof = idx.size - n_stretch - 1
    if sxx <= 0 or dof < 1:
        return None
    slope = float(tc @ xc) / sxx
    resid = xc - slope * tc
    return slope, math.sqrt(float(resid @ resid) / dof / sxx), float(dof)


def _lag_one_correlation(t: np.ndarray, resid: np.ndarray) -> float:
    """Return the correlation of residuals one sample apart (consecutive samples only; 0: none)."""
    if t.size < 3:
        return 0.0
    step = np.diff(t)
    typical = float(np.median(step))
    pair = step <= 1.5 * typical
    den = float(resid @ resid)
    if not np.any(pair) or den == 0:
        return 0.0
    num = float(np.sum(resid[:-1][pair] * resid[1:][pair]))
    return min(max(num / den * resid.size / np.count_nonzero(pair), -0.99), 0.99)


def point_relaxation(p: OperatingPoint) -> PointRelaxation:
    """Return the relaxation length of one operating point: σ = V·τ = V·lag / rate (first-order model)."""
    direction = DIRECTIONS[p.sweep]
    holds = tuple(fit_hold(hold, p.curve, p.force_scale) for hold in p.holds)
    speed = p.mean_speed_kmh
    where = f"run {p.run_index} ({p.source_file}) at {p.load_n:.0f} N"

    def none(reason: str, lag: LagFit | None = None) -> PointRelaxation:
        return PointRelaxation(
            p.run_index, p.load_n, p.camber_deg, p.pressure_kpa, direction, speed, lag, None, None, None, holds, reason
        )

    if p.lag_samples is None:
        return none(f"{where}: no moving samples in both directions near zero slip (a continuous sweep is needed)")
    h = p.hysteresis
    start = 0.0
    if h is not None and h.slip_lag is not None and h.sweep_rate_per_s:
        start = h.slip_lag / h.sweep_rate_per_s
    lag = fit_lag(p.lag_samples, start)
    if lag.tau_s is None:
        return none(f"{where}: {lag.reason}", lag)
    if speed is None:
        return none(
            f"{where}: no speed channel, so the lag cannot be turned into a length "
            f"(map the rig's speed column as columns.speed in the manifest)",
            lag,
        )
    if speed == 0:
        return none(f"{where}: mean speed is zero, so the lag cannot be turned into a length", lag)
    v_m_per_s = abs(speed) / KMH_PER_M_PER_S
    u = None if lag.tau_u_s is None else v_m_per_s * lag.tau_u_s
    return PointRelaxation(
        p.run_index,
        p.load_n,
        p.camber_deg,
        p.pressure_kpa,
        direction,
        speed,
        lag,
        v_m_per_s * lag.tau_s,
        u,
        lag.dof,
        holds,
    )


def relaxation_lengths(points: Iterable[OperatingPoint]) -> tuple[RelaxationLength, ...]:
    """Return the relaxation length per specimen, direction, camber, pressure and load.

    Points at the same load (to 1 N), camber (to 0.01°) and pressure (to 1 kPa) are combined: with
    one point its own uncertainty carries over (:func:`fit_lag`); with several,
    the mean and a Type A standard uncertainty from their scatter, s/√n with n − 1 degrees of
    freedom (GUM 4.2). Sorted by specimen, direction, camber, pressure and load.
    """
    groups: dict[tuple, list[OperatingPoint]] = {}
    for p in points:
        key = (p.specimen, DIRECTIONS[p.sweep], round(p.camber_deg, 2), round(p.pressure_kpa), round(p.load_n))
        groups.setdefault(key, []).append(p)
    out = []
    for key in sorted(groups):
        members = sorted(groups[key], key=lambda p: (p.run_index, p.load_n))
        out.append(_combine(key[0], key[1], members))
    return tuple(out)


def _combine(specimen: str, direction: str, members: list[OperatingPoint]) -> RelaxationLength:
    """Combine the points of one specimen at one load, camber, pressure and direction."""
    per_point = tuple(point_relaxation(p) for p in members)
    used = [r for r in per_point if r.value_m is not None]
    first = members[0]
    load_n = float(np.mean([p.load_n for p in members]))
    cross_m, cross_u, cross_method = _crosscheck(members, per_point)
    none = RelaxationLength(
        specimen=specimen,
        load_n=load_n,
        camber_deg=first.camber_deg,
        pressure_kpa=first.pressure_kpa,
        direction=direction,
        value_m=None,
        u_m=None,
        dof=None,
        n_points=0,
        method=_method(first, 0),
        crosscheck_m=cross_m,
        crosscheck_u_m=cross_u,
        crosscheck_method=cross_method,
        reason="; ".join(dict.fromkeys(r.reason for r in per_point)),
        points=per_point,
    )
    if not used:
        return none
    values = np.array([r.value_m for r in used], dtype=float)
    speed = float(np.mean([abs(r.speed_kmh) for r in used if r.speed_kmh is not None]))
    if len(used) == 1:
        value, u, dof = float(values[0]), used[0].u_m, used[0].dof
    else:
        value = float(np.mean(values))
        u = float(np.std(values, ddof=1) / math.sqrt(values.size))
        dof = float(values.size - 1)
    return replace(
        none,
        value_m=value,
        u_m=u,
        dof=dof,
        n_points=len(used),
        method=_method(first, len(used)),
        reason="",
        speed_kmh=speed,
    )


def _crosscheck(
    members: list[OperatingPoint], per_point: tuple[PointRelaxation, ...]
) -> tuple[float | None, float | None, str]:
    """Return σ = V·τ from the holds' time constants (weighted mean), its standard error, and the method."""
    lengths: list[float] = []
    errors: list[float] = []
    n_holds = n_clear = 0
    for p, r in zip(members, per_point):
        n_holds += len(r.holds)
        clear = [(fit.tau_s, fit.tau_u_s) for fit in r.holds if not fit.reason]
        taus = [(tau, u) for tau, u in clear if tau is not None and u is not None]
        n_clear += len(taus)
        if p.mean_speed_kmh is None or p.mean_speed_kmh == 0:
            continue
        v = abs(p.mean_speed_kmh) / KMH_PER_M_PER_S
        lengths += [v * tau for tau, _ in taus]
        errors += [v * u for _, u in taus]
    if not lengths:
        if n_holds == 0:
            why = "no hold after the sweep stopped"
        elif n_clear == 0:
            why = "no hold showed the settling clearly"
        else:
            why = "no speed measured where the holds were"
        return None, None, f"not available: {why}"
    x, s = np.array(lengths), np.array(errors)
    w = 1.0 / s**2
    mean = float(np.sum(w * x) / np.sum(w))
    u = float(1.0 / math.sqrt(np.sum(w)))
    if x.size >= 2:
        # Holds that scatter more than their fits say widen the error (Birge ratio, common practice).
        u = max(u, float(math.sqrt(np.sum(w * (x - mean) ** 2) / ((x.size - 1) * np.sum(w)))))
    method = (
        f"first-order time constant τ fitted to the settling after the slip stopped (each force mapped "
        f"through the steady curve to the slip it stands for, δ = c + A·exp(−t/τ), least squares) "
        f"in {x.size} of {n_holds} holds, σ = V·τ; "
        f"weighted mean, standard error from the fits"
        + (" or their scatter, whichever is larger" if x.size >= 2 else "")
    )
    return mean, u, method


def _method(p: OperatingPoint, n_used: int) -> str:
    """Describe how the value was obtained, in words for the method page."""
    unit = "°" if p.sweep == "slip_angle" else ""
    span = f"±{p.lag_samples.window:g}{unit}" if p.lag_samples is not None else "about zero slip"
    words = (
        "σ = V·Δ/r = V·τ (first-order relaxation, Pacejka 2006 §7.2): the moving samples of both halves of the "
        f"sweep within {span} are fitted at once with one cubic steady curve shifted by the slip lag Δ = r·τ "
        "(+ for the rising, − for the falling half), r each half's rate (a straight line through slip against "
        f"time stamps), V the mean speed; samples within {TRAVEL_LAGS:g} lags of a start or a reversal are "
        "left out (the lag is still building there). "
    )
    if n_used >= 2:
        return words + (
            f"Mean of {n_used} operating points; standard uncertainty Type A from their scatter, s/√n, "
            f"with n − 1 = {n_used - 1} degrees of freedom."
        )
    return words + (
        "Standard uncertainty Type A from the fit (Jacobian and residual variance, n − 5 degrees of freedom, "
        "widened where consecutive residuals correlate) combined with the rates' standard errors "
        "(Welch–Satterthwaite); the speed is taken as exact."
    )
