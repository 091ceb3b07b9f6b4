"""Fit: the Magic Formula pure-slip models (Fy0, Mz0, Fx0) of one specimen, with honest uncertainty;
and, where the specimen was run under combined slip, the combined-slip weighting of Fx and Fy on top.

Strategy (common practice, see DEVELOPERS.md):

1. fit each operating point alone with the general sine form (B, C, D, E, SH, SV) to get
   starting values and a noise estimate per point (Fy and Fx; Mz starts from the measured trail);
2. turn those into starting values for the load-dependent coefficients by small regressions;
3. fit all operating points of the channel together (every load, camber and pressure) with
   ``scipy.optimize.least_squares`` inside physical bounds, with a robust loss, each point
   weighted by its measured noise, restarting from perturbed starts when a fit stalls;
   Mz0 is fitted with the already fitted Fy0 coefficients, as the 2002 form prescribes;
4. recompute the plain (weighted) residual at the solution, take the covariance from the
   Jacobian and the residual variance, and mark every coefficient that is at a bound, held at
   its default because the data cannot identify it, or strongly correlated with another;
5. optionally, leave each load out in turn, refit, and predict it (how the model interpolates).

Combined slip ("fxc", "fyc"): the weighting functions of Pacejka 2006, §4.3.2, fitted by the same
global fit to the combined-slip points with the specimen's pure-slip Fx0 or Fy0 held as fitted.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..common.errors import StageError
from ..conditioning.steady_state import OperatingPoint
from ..model import magic_formula as mf
from ..project.manifest import FitSettings
from ..standards.coverage import coverage_factor

STRONG_CORRELATION = 0.95
CHANNEL_LABEL = {
    "fy": "lateral force Fy0",
    "mz": "aligning moment Mz0",
    "fx": "longitudinal force Fx0",
    "fxc": "longitudinal force Fx under combined slip",
    "fyc": "lateral force Fy under combined slip",
}
CHANNEL_SYMBOL = {"fy": "Fy0", "mz": "Mz0", "fx": "Fx0", "fxc": "Fx (combined)", "fyc": "Fy (combined)"}
CHANNEL_UNIT = {"fy": "N", "mz": "N·m", "fx": "N", "fxc": "N", "fyc": "N"}
COMBINED = ("fxc", "fyc")
BASE_CHANNEL = {"mz": "fy", "fxc": "fx", "fyc": "fy"}  # the fit another one is made with (held as fitted)
SLIP_UNIT = {"fy": "deg", "mz": "deg", "fx": "1", "fxc": "1", "fyc": "1"}  # the unit of a fit's slip range
MODEL_NAME = {
    **{c: f"Magic Formula 2002 pure-slip {CHANNEL_LABEL[c]}" for c in ("fy", "mz", "fx")},
    "fxc": "Magic Formula 2002 combined slip: Fx = Gxα·Fx0",
    "fyc": "Magic Formula 2002 combined slip: Fy = Gyκ·Fy0 + SVyκ",
}
TOLERANCE = 1e-10  # ftol = xtol = gtol of the global fits


@dataclass(frozen=True)
class CoefficientSetting:
    """What was asked of a coefficient: start, bounds, and whether it is held fixed (and why)."""

    name: str
    start: float
    lower: float
    upper: float
    held: bool
    reason: str = ""


@dataclass(frozen=True)
class CoefficientEstimate:
    """What the fit found for a coefficient."""

    name: str
    value: float
    unit: str
    equation: str
    status: str  # "fitted" | "held"
    stderr: float | None
    ci95: tuple[float, float] | None
    at_bound: bool
    note: str  # why no stderr, why held, ...

    @property
    def relative_stderr(self) -> float | None:
        if self.stderr is None or self.value == 0:
            return None
        return abs(self.stderr / self.value)


@dataclass(frozen=True)
class PointFit:
    """General sine-form fit of one operating point (starting values only)."""

    load_n: float
    B: float
    C: float
    D: float
    E: float
    SH: float
    SV: float
    rmse: float


@dataclass(frozen=True)
class FitStatistics:
    n_points: int
    n_params: int
    dof: int
    rmse: float  # in the channel's unit (N or N·m), unweighted
    rmse_pct_of_peak: float
    n_evaluations: int
    restarts: int
    success: bool
    message: str


@dataclass(frozen=True)
class LoadOut:
    """Leave-one-load-out: the RMSE of predicting a load the fit did not see."""

    load_n: float
    rmse: float
    rmse_pct_of_peak: float
    extrapolated: bool  # the left-out load lay outside the remaining loads


@dataclass(frozen=True)
class FitData:
    """The samples one channel's fit uses: conditioned curves of one specimen, stacked."""

    channel: str
    x: np.ndarray  # slip angle, deg (fy, mz) or slip ratio (fx)
    fz_n: np.ndarray
    gamma_deg: np.ndarray
    pressure_kpa: np.ndarray
    y: np.ndarray
    sigma: np.ndarray  # noise σ of the sample's operating point, in the channel's unit

    @property
    def weight(self) -> np.ndarray:
        """1/σ: weighted residuals are in units of each point's own noise."""
        return 1.0 / self.sigma

    load_n: np.ndarray  # nominal load of the sample's operating point
    keys: tuple[tuple, ...]
    # Combined slip: x is the slip ratio and this the slip angle (deg) of every sample; None otherwise.
    other_slip: np.ndarray | None = None
    held_levels: np.ndarray | None = None  # the held slip level of each sample (combined slip)


@dataclass(frozen=True)
class ChannelFit:
    """A fitted Magic Formula channel (Fy0, Mz0 or Fx0) of one specimen."""

    channel: str
    specimen: str
    fz0_n: float
    p0_kpa: float
    r0_m: float
    fy_values: dict | None  # the pure-slip coefficients an Mz0 (lateral) or combined-slip fit was made with
    settings: tuple[CoefficientSetting, ...]
    coefficients: tuple[CoefficientEstimate, ...]
    fitted_names: tuple[str, ...]
    covariance: np.ndarray  # over fitted_names; NaN where not estimable
    correlation: np.ndarray
    statistics: FitStatistics
    point_fits: tuple[PointFit, ...]
    load_range_n: tuple[float, float]
    slip_range: tuple[float, float]  # deg for fy/mz, 1 for fx and the combined-slip fits
    camber_range_deg: tuple[float, float]
    pressure_range_kpa: tuple[float, float]
    t95: float
    warnings: tuple[str, ...]
    source_points: tuple[tuple, ...]  # operating-point keys used
    residual_x: np.ndarray
    residual_load_n: np.ndarray
    residual: np.ndarray
    load_out: tuple[LoadOut, ...] = ()
    # The condition the fit is read at where a caller names none (its metrics are made there): the
    # specimen's nominal camber and pressure, or another tested condition (see `at`).
    at_camber_deg: float = 0.0
    at_pressure_kpa: float | None = None  # None: p0
    other_slip_range: tuple[float, float] | None = None  # combined slip: the slip angles, deg

    @property
    def values(self) -> dict[str, float]:
        return {c.name: c.value for c in self.coefficients}

    @property
    def camber_deg(self) -> float:
        return self.at_camber_deg

    @property
    def pressure_kpa(self) -> float:
        return self.p0_kpa if self.at_pressure_kpa is None else self.at_pressure_kpa

    def at(self, camber_deg: float, pressure_kpa: float) -> ChannelFit:
        """The same fit, read at another camber and pressure by default (the coefficients are shared)."""
        return replace(self, at_camber_deg=float(camber_deg), at_pressure_kpa=float(pressure_kpa))

    @property
    def combined(self) -> bool:
        return self.channel in COMBINED

    def predict(self, x, load_n, camber_deg=None, pressure_kpa=None, values: dict | None = None, other=None):
        """Return the model at slip `x` (deg, or slip ratio for fx and combined slip), load (N), camber
        (deg), pressure (kPa) and, under combined slip, slip angle `other` (deg); camber and pressure not
        given: the condition the fit is read at."""
        p = self.pressure_kpa if pressure_kpa is None else pressure_kpa
        return _model(
            self.channel,
            np.asarray(x, float),
            load_n,
            self.camber_deg if camber_deg is None else camber_deg,
            (np.asarray(p) - self.p0_kpa) / self.p0_kpa,
            values or self.values,
            self.fz0_n,
            self.r0_m,
            self.fy_values,
            other,
        )

    def strongly_correlated_pairs(self) -> list[tuple[str, str, float]]:
        out = []
        names = self.fitted_names
        for i in range(len(names)):
            for j in range(i + 1, len(names)):
                r = self.correlation[i, j]
                if np.isfinite(r) and abs(r) >= STRONG_CORRELATION:
                    out.append((names[i], names[j], float(r)))
        return out


def _model(channel, x, fz, gamma_deg, dpi, values, fz0_n, r0_m, fy_values, other=None):
    g = np.asarray(gamma_deg, float) * mf.DEG
    if channel == "fxc":
        return mf.fx_combined(x, np.asarray(other, float) * mf.DEG, fz, fy_values, values, fz0_n, g, dpi)
    if channel == "fyc":
        return mf.fy_combined(np.asarray(other, float) * mf.DEG, x, fz, fy_values, values, fz0_n, g, dpi)
    if channel == "fy":
        return mf.fy0(x * mf.DEG, fz, values, fz0_n, g, dpi)
    if channel == "mz":
        return mf.mz0(x * mf.DEG, fz, values, fy_values, fz0_n, r0_m, g, dpi)
    return mf.fx0(x, fz, values, fz0_n, g, dpi)


# --- data --------------------------------------------------------------------------------------


def fit_data(points: list[OperatingPoint], channel: str) -> FitData:
    """Stack the conditioned curves of `points` for one channel, weighting each point by its noise.

    Combined slip: x is the slip ratio and `other_slip` the slip angle in deg, whichever was swept."""
    xs, fzs, gs, ps, ys, ws, ls, others, held = [], [], [], [], [], [], [], [], []
    for p in points:
        c = p.curve
        y = {"fy": c.fy_n, "mz": c.mz_nm, "fx": c.fx_n, "fxc": c.fx_n, "fyc": c.fy_n}[channel]
        if y is None:
            continue
        if channel in COMBINED:
            fixed = np.full(c.n_points, p.held_slip_mean if p.held_slip_mean is not None else np.nan)
            kappa, alpha = (c.x, fixed) if p.sweep == "slip_ratio" else (fixed, c.x)
            xs.append(kappa)
            others.append(alpha)
            held.append(np.full(c.n_points, p.held_slip if p.held_slip is not None else np.nan))
        else:
            xs.append(c.x)
        fzs.append(c.fz_n)
        gs.append(np.full(c.n_points, p.camber_deg))
        ps.append(np.full(c.n_points, p.pressure_kpa))
        ys.append(y)
        ws.append(np.full(c.n_points, _point_noise(c.x, y)))
        ls.append(np.full(c.n_points, p.load_n))
    if not xs:
        raise StageError(f"no conditioned {channel} data to fit")
    return FitData(
        channel,
        np.concatenate(xs),
        np.concatenate(fzs),
        np.concatenate(gs),
        np.concatenate(ps),
        np.concatenate(ys),
        np.concatenate(ws),
        np.concatenate(ls),
        tuple(p.key for p in points),
        np.concatenate(others) if others else None,
        np.concatenate(held) if held else None,
    )


def _point_noise(x, y) -> float:
    """Noise of one curve from second differences of neighbouring bins (robust scale)."""
    if y.size < 5:
        return max(np.std(y), 1e-9)
    order = np.argsort(x)
    d2 = np.diff(y[order], 2)
    sigma = 1.4826 * np.median(np.abs(d2 - np.median(d2))) / np.sqrt(6.0)
    return max(sigma, 1e-6 * np.max(np.abs(y)) + 1e-12)


# --- per-point starting fits -------------------------------------------------------------------


def fit_point(x: np.ndarray, y: np.ndarray, load_n: float, angle: bool = True) -> PointFit:
    """Fit the general sine form with shifts to one slip curve (starting values only).

    `x` is the slip angle in deg (`angle`) or the slip ratio; the fitted B is per rad or per unit slip.
    """
    from scipy import optimize  # imported here: not needed when results come from the cache

    xr = np.asarray(x) * (mf.DEG if angle else 1.0)
    y = np.asarray(y)
    half = 1.5 * mf.DEG if angle else 0.02
    near = np.abs(xr) <= max(half, np.sort(np.abs(xr))[min(4, xr.size - 1)])
    slope = np.polyfit(xr[near], y[near], 1)[0] if np.count_nonzero(near) >= 2 else -20.0 * load_n
    d0 = max(np.max(np.abs(y)), 1.0)
    c0 = 1.3 if angle else 1.6
    shift = 0.1 if angle else 0.05
    p0 = np.array([slope / (c0 * d0), c0, d0, 0.0, 0.0, 0.0])
    lo = np.array([-np.inf, 1.0, 0.1 * d0, -10.0, -shift, -0.3 * d0])
    hi = np.array([np.inf, 2.5, 3.0 * d0, 1.0, shift, 0.3 * d0])
    p0[1:] = np.clip(p0[1:], lo[1:] + 1e-9 * (hi[1:] - lo[1:]), hi[1:] - 1e-9 * (hi[1:] - lo[1:]))

    def resid(q):
        B, C, D, E, SH, SV = q
        return mf.sine_form(xr + SH, B, C, D, min(E, 1.0)) + SV - y

    res = optimize.least_squares(resid, p0, bounds=(lo, hi), max_nfev=2000)
    B, C, D, E, SH, SV = res.x
    return PointFit(load_n, B, C, D, E, SH, SV, float(np.sqrt(np.mean(res.fun**2))))


# --- the global fit ---------------------------------------------------------------------------


def fit_channel(
    points: list[OperatingPoint],
    channel: str,
    settings: FitSettings,
    fz0_n: float,
    p0_kpa: float,
    r0_m: float = 0.3,
    fy_values: dict | None = None,
) -> ChannelFit:
    """Fit one Magic Formula channel to every operating point of one specimen.

    Parameters
    ----------
    points : list of OperatingPoint
        Conditioned curves of one specimen (any loads, cambers, pressures) with the channel's data.
    channel : {"fy", "mz", "fx"}
        Which model to fit. "mz" needs `fy_values`, the fitted lateral coefficients.
    settings : FitSettings
        Loss and evaluation budget from the manifest.
    fz0_n, p0_kpa, r0_m : float
        Nominal load (N), nominal pressure (kPa) and unloaded radius (m) of the model.
    """
    if not points:
        raise StageError(f"no operating points to fit for {CHANNEL_LABEL[channel]}")
    specimen = points[0].specimen
    data = fit_data(points, channel)
    angle = channel != "fx"
    point_fits: tuple[PointFit, ...] = ()
    if channel in ("fy", "fx"):
        point_fits = tuple(fit_point(p.curve.x, p.curve.main, p.mean_load_n, angle) for p in points)
    setting_list = _settings(channel, data, point_fits, fz0_n, r0_m, fy_values)
    return _solve(channel, specimen, data, setting_list, point_fits, settings, fz0_n, p0_kpa, r0_m, fy_values)


def _solve(
    channel,
    specimen,
    data: FitData,
    setting_list,
    point_fits,
    settings,
    fz0_n,
    p0_kpa,
    r0_m,
    fy_values,
    start_values: dict | None = None,
    max_restarts: int = 3,
    prune: bool = True,
) -> ChannelFit:
    from scipy import optimize  # imported here: not needed when results come from the cache

    free = [s for s in setting_list if not s.held]
    names = tuple(s.name for s in free)
    fixed = {s.name: s.start for s in setting_list if s.held}
    lo = np.array([s.lower for s in free])
    hi = np.array([s.upper for s in free])
    x0 = np.array([s.start if not start_values else start_values[s.name] for s in free])
    x0 = np.clip(x0, lo + 1e-9 * (hi - lo), hi - 1e-9 * (hi - lo))
    dpi = (data.pressure_kpa - p0_kpa) / p0_kpa

    def model(q):
        return _model(
            channel,
            data.x,
            data.fz_n,
            data.gamma_deg,
            dpi,
            {**fixed, **dict(zip(names, q))},
            fz0_n,
            r0_m,
            fy_values,
            data.other_slip,
        )

    def resid(q):
        return (model(q) - data.y) * data.weight

    budget = settings.max_evaluations
    best = None
    evaluations = restarts = 0
    rng = np.random.default_rng(20261201)  # fixed seed: the same data give the same fit
    start = x0
    peak = float(np.max(np.abs(data.y)))
    for _ in range(1 + max_restarts):
        res = optimize.least_squares(
            resid,
            start,
            bounds=(lo, hi),
            loss=settings.loss,
            f_scale=2.0,
            max_nfev=max(50, budget - evaluations),
            x_scale="jac",
            ftol=TOLERANCE,
            xtol=TOLERANCE,
            gtol=TOLERANCE,
        )
        evaluations += res.nfev
        plain = model(res.x) - data.y
        rmse = float(np.sqrt(np.mean(plain**2)))
        if best is None or rmse < best[1]:
            best = (res, rmse)
        # Stalled: the optimiser gave up, or the fit is far worse than the points' own noise
        # and worse than 1 % of the peak (a smaller model mismatch is no reason to search again).
        noise = float(np.sqrt(np.mean(data.sigma**2)))
        stalled = (not res.success) or (rmse > 3.0 * noise and rmse > 0.01 * peak)
        if not stalled or evaluations >= budget:
            break
        restarts += 1
        span = hi - lo
        start = np.clip(
            x0 + 0.1 * rng.standard_normal(x0.size) * np.minimum(np.abs(x0) + 0.1, span),
            lo + 1e-6 * span,
            hi - 1e-6 * span,
        )
    assert best is not None  # the loop runs at least once (max_restarts >= 0 at every call)
    res, rmse = best
    if evaluations >= budget and not res.success:
        raise StageError(
            f"the {CHANNEL_LABEL[channel]} fit of specimen {specimen!r} did not converge within "
            f"{budget} evaluations (fit.max_evaluations); last state: {res.message}"
        )

    x = res.x
    at_bound = (x - lo <= 1e-6 * (hi - lo)) | (hi - x <= 1e-6 * (hi - lo))
    if prune:
        weak = _inseparable(resid, x, names, ~at_bound)
        if weak is not None:
            # The data cannot separate this coefficient from others: hold it at its default
            # and fit again from here, rather than report a number the data do not determine.
            name, partner = weak
            info = mf.INFO[name]
            reason = (
                f"held at default: not separable from {partner} by these data"
                if partner
                else "held at default: no effect on these data"
            )
            setting_list = [
                replace(st, start=info.default, held=True, reason=reason) if st.name == name else st
                for st in setting_list
            ]
            warm = {**fixed, **dict(zip(names, x))}
            return _solve(
                channel,
                specimen,
                data,
                setting_list,
                point_fits,
                settings,
                fz0_n,
                p0_kpa,
                r0_m,
                fy_values,
                start_values=warm,
                max_restarts=0,
                prune=True,
            )
    r = resid(x)  # recompute the plain (weighted) residual at the solution
    n, k = r.size, x.size
    dof = n - k
    if dof <= 0:
        raise StageError(
            f"specimen {specimen!r}: {n} conditioned points cannot determine {k} {CHANNEL_LABEL[channel]} coefficients"
        )
    cov, note = _covariance(resid, x, r, dof, at_bound)
    sd = np.sqrt(np.diag(cov))
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(sd, sd)
    t95 = coverage_factor(dof)

    estimates = []
    values = {**fixed, **dict(zip(names, x))}
    for s in setting_list:
        info = mf.INFO[s.name]
        if s.held:
            estimates.append(
                CoefficientEstimate(s.name, s.start, info.unit, info.equation, "held", None, None, False, s.reason)
            )
            continue
        i = names.index(s.name)
        ok = bool(np.isfinite(sd[i]))
        why = "at a bound: no standard error" if at_bound[i] else ("" if ok else note)
        estimates.append(
            CoefficientEstimate(
                s.name,
                float(values[s.name]),
                info.unit,
                info.equation,
                "fitted",
                float(sd[i]) if ok else None,
                (float(x[i] - t95 * sd[i]), float(x[i] + t95 * sd[i])) if ok else None,
                bool(at_bound[i]),
                why,
            )
        )

    plain = model(x) - data.y
    stat = FitStatistics(
        n,
        k,
        dof,
        float(np.sqrt(np.mean(plain**2))),
        100.0 * float(np.sqrt(np.mean(plain**2))) / peak,
        evaluations,
        restarts,
        bool(res.success),
        str(res.message),
    )
    fit = ChannelFit(
        channel,
        specimen,
        fz0_n,
        p0_kpa,
        r0_m,
        None if fy_values is None else dict(fy_values),
        tuple(setting_list),
        tuple(estimates),
        names,
        cov,
        corr,
        stat,
        tuple(point_fits),
        (float(data.fz_n.min()), float(data.fz_n.max())),
        (float(data.x.min()), float(data.x.max())),
        (float(data.gamma_deg.min()), float(data.gamma_deg.max())),
        (float(data.pressure_kpa.min()), float(data.pressure_kpa.max())),
        t95,
        (),
        data.keys,
        _frozen(data.x),
        _frozen(data.load_n),
        _frozen(plain),
        other_slip_range=None
        if data.other_slip is None
        else (float(data.other_slip.min()), float(data.other_slip.max())),
    )
    warnings = []
    for e in estimates:
        if e.at_bound:
            warnings.append(f"{e.name} is at a bound of its physical range; its value is not a free estimate")
        elif e.relative_stderr is not None and e.relative_stderr > 0.5 and abs(e.value) > 1e-3:
            warnings.append(
                f"{e.name} is poorly determined (standard error {100 * e.relative_stderr:.0f} % of its value)"
            )
        elif e.status == "fitted" and e.stderr is None:
            warnings.append(f"{e.name}: {e.note}")
    for a, b, rho in fit.strongly_correlated_pairs():
        warnings.append(f"{a} and {b} are strongly correlated (r = {rho:+.3f}); read them together")
    if not res.success:
        warnings.append(f"the optimiser stopped without meeting its tolerance: {res.message}")
    return replace(fit, warnings=tuple(warnings))


def leave_one_load_out(fit: ChannelFit, points: list[OperatingPoint], settings: FitSettings) -> ChannelFit:
    """Refit without each load in turn and predict it; return `fit` with `load_out` filled in.

    Needs three or more loads (with two, the left-out load is a pure extrapolation from one).
    Starts from the full fit's values; coefficients whose identification needs more loads than
    remain are held at the full fit's values.
    """
    data = fit_data(points, fit.channel)
    loads = sorted(set(data.load_n.tolist()))
    if len(loads) < 3:
        return fit
    peak = float(np.max(np.abs(data.y)))
    out = []
    for load in loads:
        keep = [p for p in points if p.load_n != load]
        gone = [p for p in points if p.load_n == load]
        sub = fit_data(keep, fit.channel)
        counts = _counts(sub)
        base = fit.values
        setting_list = []
        for s in fit.settings:
            info = mf.INFO[s.name]
            if not s.held and not _identified(info.needs, counts):
                setting_list.append(replace(s, start=base[s.name], held=True, reason="held at the full fit's value"))
            else:
                setting_list.append(replace(s, start=base[s.name]) if s.held else s)
        part = _solve(
            fit.channel,
            fit.specimen,
            sub,
            setting_list,
            (),
            settings,
            fit.fz0_n,
            fit.p0_kpa,
            fit.r0_m,
            fit.fy_values,
            start_values=base,
            max_restarts=0,
        )
        test = fit_data(gone, fit.channel)
        pred = part.predict(test.x, test.fz_n, test.gamma_deg, test.pressure_kpa)
        rmse = float(np.sqrt(np.mean((pred - test.y) ** 2)))
        out.append(LoadOut(float(load), rmse, 100.0 * rmse / peak, load in (loads[0], loads[-1])))
    return replace(fit, load_out=tuple(out))


# --- starting values and identification -------------------------------------------------------


def _counts(data: FitData) -> dict[str, int]:
    """How many distinct loads, cambers and pressures the data hold, alone and per load."""
    load = np.round(data.load_n)
    camber = np.round(data.gamma_deg, 2)
    pressure = np.round(data.pressure_kpa)

    def loads_with_two(values):
        return sum(1 for L in set(load.tolist()) if len(set(values[load == L].tolist())) >= 2)

    held = set() if data.held_levels is None else set(np.round(data.held_levels, 4).tolist()) - {0.0}
    return {
        "loads": len(set(load.tolist())),
        "camber": len(set(camber.tolist())),
        "pressure": len(set(pressure.tolist())),
        "camber_loads": loads_with_two(camber),
        "pressure_loads": loads_with_two(pressure),
        "held": len(held),
        "held_signs": int(any(v > 0 for v in held) and any(v < 0 for v in held)),
    }


def _identified(needs: str, counts: dict[str, int]) -> bool:
    return {
        "": True,
        "loads": counts["loads"] >= 2,
        "loads3": counts["loads"] >= 3,
        "camber": counts["camber"] >= 2,
        "camber_loads": counts["camber_loads"] >= 2,
        "pressure": counts["pressure"] >= 2,
        "pressure3": counts["pressure"] >= 3,
        "pressure_loads": counts["pressure_loads"] >= 2,
        "held_signs": counts["held_signs"] >= 1,
        "held3": counts["held"] >= 3,
    }[needs]


HOLD_REASON = {
    "loads": "held at default: load dependence needs two or more loads",
    "loads3": "held at default: this load dependence needs three or more loads",
    "camber": "held at default: camber dependence needs two or more inclination angles",
    "camber_loads": "held at default: camber-with-load dependence needs two cambers at two or more loads",
    "pressure": "held at default: pressure dependence needs two or more pressures",
    "pressure3": "held at default: a quadratic pressure term needs three or more pressures",
    "pressure_loads": "held at default: pressure-with-load dependence needs two pressures at two or more loads",
    "held_signs": "held at default: an asymmetry needs held slips of both signs",
    "held3": "held at default: this dependence needs three or more held slips besides zero",
}


def _settings(channel, data: FitData, point_fits, fz0_n, r0_m, fy_values) -> list[CoefficientSetting]:
    """Starting values from the per-point fits; hold what the data cannot identify."""
    counts = _counts(data)
    start = mf.defaults(channel)
    nominal = [pf for pf, key in zip(point_fits, data.keys)]  # every point; camber/pressure start at 0
    if channel in ("fy", "fx") and point_fits:
        fz = np.array([pf.load_n for pf in nominal])
        dfz = (fz - fz0_n) / fz0_n
        mu = np.array([pf.D for pf in nominal]) / fz
        E = np.array([pf.E for pf in nominal])
        K = np.array([pf.B * pf.C * pf.D for pf in nominal])
        SH = np.array([pf.SH for pf in nominal])
        SVn = np.array([pf.SV for pf in nominal]) / fz
        multi = counts["loads"] >= 2 and np.ptp(dfz) > 0

        def line(y):
            if multi:
                b, a = np.polyfit(dfz, y, 1)
                return a, b
            return float(np.mean(y)), 0.0

        if channel == "fy":
            start["pCy1"] = float(np.median([pf.C for pf in nominal]))
            start["pDy1"], start["pDy2"] = line(mu)
            start["pEy1"], start["pEy2"] = line(E)
            start["pHy1"], start["pHy2"] = line(SH)
            start["pVy1"], start["pVy2"] = line(SVn)
            start["pKy1"], start["pKy2"] = _stiffness_start(fz, K, fz0_n)
        else:
            start["pCx1"] = float(np.median([pf.C for pf in nominal]))
            start["pDx1"], start["pDx2"] = line(mu)
            start["pEx1"], start["pEx2"] = line(E)
            start["pHx1"], start["pHx2"] = line(SH)
            start["pVx1"], start["pVx2"] = line(SVn)
            start["pKx1"], start["pKx2"] = line(K / fz)
    elif channel == "mz":
        start.update(_trail_start(data, fz0_n, r0_m, fy_values))

    out = []
    for info in mf.CATALOGUE[channel]:
        held = not _identified(info.needs, counts)
        value = info.default if held else float(start[info.name])
        if not held:
            span = info.upper - info.lower
            value = float(np.clip(value, info.lower + 1e-3 * span, info.upper - 1e-3 * span))
        out.append(
            CoefficientSetting(
                info.name, value, info.lower, info.upper, held, HOLD_REASON.get(info.needs, "") if held else ""
            )
        )
    return out


def _stiffness_start(fz, K, fz0_n):
    from scipy import optimize  # imported here: not needed when results come from the cache

    if fz.size < 2 or np.ptp(fz) == 0:
        return float(np.mean(K) / (fz0_n * np.sin(2 * np.arctan(np.mean(fz) / (2.0 * fz0_n))))), 2.0

    def r(q):
        return q[0] * fz0_n * np.sin(2 * np.arctan(fz / (q[1] * fz0_n))) - K

    k1 = float(np.max(np.abs(K)) / fz0_n) * np.sign(np.mean(K))
    sol = optimize.least_squares(r, [k1, 2.0], bounds=([-200, 0.1], [200, 20]))
    return float(sol.x[0]), float(sol.x[1])


def _trail_start(data: FitData, fz0_n, r0_m, fy_values) -> dict[str, float]:
    """Start Mz0 from the measured trail at zero slip: t0 = −(dMz/dα)/(dFy/dα), qDz1 ≈ t0/R0."""
    near = (np.abs(data.x) <= 2.0) & (np.abs(data.gamma_deg) < 1e-9)
    if np.count_nonzero(near) < 3:
        near = np.abs(data.x) <= 2.0
    if np.count_nonzero(near) < 3:
        return {}
    slope_mz = np.polyfit(data.x[near], data.y[near], 1)[0]
    fy_model = mf.fy0(data.x[near] * mf.DEG, data.fz_n[near], fy_values or {}, fz0_n)
    slope_fy = np.polyfit(data.x[near], fy_model, 1)[0]
    t0 = -slope_mz / slope_fy if slope_fy else 0.03
    return {"qDz1": float(np.clip(t0 / r0_m, 0.01, 0.9)), "qBz1": 10.0, "qCz1": 1.2, "qEz1": -1.0}


RCOND = 1e-7  # relative singular value below which a direction counts as not determined
# When a combination is not determined, hold the most specific coefficient first.
_HOLD_FIRST = {
    "pressure3": 0,
    "pressure_loads": 0,
    "pressure": 1,
    "camber_loads": 1,
    "camber": 2,
    "loads3": 3,
    "loads": 4,
    "held3": 2,
    "held_signs": 3,
    "": 5,
}


def _inseparable(resid, x, names, free) -> tuple[str, str] | None:
    """Return (coefficient to hold, its closest partner) if the Jacobian is (nearly) singular.

    Only coefficients inside their bounds (`free`) take part. Columns are normalised so that
    units do not matter; the weakest right singular vector says which coefficients move
    together without changing the residual.
    """
    idx = np.flatnonzero(free)
    if idx.size == 0:
        return None
    J = _jacobian(resid, x)[:, idx]
    norms = np.linalg.norm(J, axis=0)
    if np.any(norms == 0):
        return names[int(idx[np.argmin(norms)])], ""
    u, sv, vt = np.linalg.svd(J / norms, full_matrices=False)
    if sv[-1] > RCOND * sv[0]:
        return None
    v = np.abs(vt[-1])
    involved = [i for i in np.argsort(-v) if v[i] > 0.1 * v.max()]
    hold = min(involved, key=lambda i: (_HOLD_FIRST[mf.INFO[names[idx[i]]].needs], -v[i]))
    partner = next((names[idx[i]] for i in involved if i != hold), "")
    return names[idx[hold]], partner


def _jacobian(resid, x):
    r0 = resid(x)
    J = np.empty((r0.size, x.size))
    for i in range(x.size):
        h = 1e-6 * max(abs(x[i]), 1e-3)
        xp, xm = x.copy(), x.copy()
        xp[i] += h
        xm[i] -= h
        J[:, i] = (resid(xp) - resid(xm)) / (2 * h)
    return J


def _covariance(resid, x, r, dof, at_bound):
    """Covariance s²(JᵀJ)⁻¹ from a central-difference Jacobian of the plain residual.

    Coefficients at a bound are excluded (their row and column are NaN): the quadratic
    approximation does not hold there.
    """
    k = x.size
    J = _jacobian(resid, x)
    s2 = float(r @ r) / dof
    free = ~at_bound
    cov = np.full((k, k), np.nan)
    note = ""
    Jf = J[:, free]
    if Jf.shape[1]:
        # Normalise the columns so that the units of the coefficients do not decide singularity.
        norms = np.linalg.norm(Jf, axis=0)
        if np.any(norms == 0):
            return cov, "not estimable: a coefficient has no effect on these data"
        u, sv, vt = np.linalg.svd(Jf / norms, full_matrices=False)
        if sv[-1] <= sv[0] * RCOND:
            note = "not estimable: the Jacobian is singular (coefficients not separable by these data)"
            return cov, note
        inv = (vt.T / sv**2) @ vt
        cov[np.ix_(free, free)] = s2 * inv / np.outer(norms, norms)
    return cov, note


def fit_combined(
    points: list[OperatingPoint], channel: str, base: ChannelFit, settings: FitSettings, fz0_n: float, p0_kpa: float
) -> ChannelFit:
    """Fit the combined-slip weighting `channel` ("fxc" or "fyc") on top of the pure-slip fit `base`
    (Fx0 or Fy0, held as fitted), whose uncertainty the result's covariance carries too."""
    data = fit_data(points, channel)
    setting_list = _settings(channel, data, (), fz0_n, base.r0_m, base.values)
    fit = _solve(channel, points[0].specimen, data, setting_list, (), settings, fz0_n, p0_kpa, base.r0_m, base.values)
    return _with_base_uncertainty(fit, base, data)


def _with_base_uncertainty(fit: ChannelFit, base: ChannelFit, data: FitData) -> ChannelFit:
    """Return a combined-slip fit whose covariance also carries the uncertainty of the pure-slip fit
    it weights: the fit's own s²(JᵀJ)⁻¹ plus A·Σ_base·Aᵀ, where A = −(J_rᵀJ_r)⁻¹J_rᵀJ_p is how the
    weighting coefficients r move when the pure-slip coefficients p move (first order, from the
    normal equations at the solution; GUM 5.1.2 law of propagation)."""
    dpi = (data.pressure_kpa - fit.p0_kpa) / fit.p0_kpa
    names = list(fit.fitted_names)
    base_names = [n for i, n in enumerate(base.fitted_names) if np.isfinite(base.covariance[i, i])]
    if not names or not base_names:
        return fit
    keep = [base.fitted_names.index(n) for n in base_names]
    cov_p = base.covariance[np.ix_(keep, keep)]
    r0 = np.array([fit.values[n] for n in names])
    p0 = np.array([base.values[n] for n in base_names])
    base_values = dict(fit.fy_values or {})

    def resid(q_r, q_p):
        values = {**fit.values, **dict(zip(names, q_r))}
        pure = {**base_values, **dict(zip(base_names, q_p))}
        y = _model(
            fit.channel, data.x, data.fz_n, data.gamma_deg, dpi, values, fit.fz0_n, fit.r0_m, pure, data.other_slip
        )
        return (y - data.y) * data.weight

    j_r = _jacobian(lambda q: resid(q, p0), r0)
    j_p = _jacobian(lambda q: resid(r0, q), p0)
    free = np.isfinite(np.diag(fit.covariance))
    if not np.any(free):
        return fit
    jf = j_r[:, free]
    a = -np.linalg.pinv(jf.T @ jf) @ jf.T @ j_p
    cov = np.array(fit.covariance, dtype=float)
    cov[np.ix_(free, free)] = cov[np.ix_(free, free)] + a @ cov_p @ a.T
    sd = np.sqrt(np.diag(cov))
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(sd, sd)
    estimates = []
    for c in fit.coefficients:
        if c.status != "fitted" or c.name not in names or not np.isfinite(sd[names.index(c.name)]):
            estimates.append(c)
            continue
        u = float(sd[names.index(c.name)])
        estimates.append(replace(c, stderr=u, ci95=(c.value - fit.t95 * u, c.value + fit.t95 * u)))
    return replace(fit, coefficients=tuple(estimates), covariance=cov, correlation=corr)


def _frozen(a) -> np.ndarray:
    a = np.array(a, dtype=float)
    a.setflags(write=False)
    return a


def fit_lateral(
    points: list[OperatingPoint], settings: FitSettings, fz0_n: float, p0_kpa: float | None = None
) -> ChannelFit:
    """Fit Fy0 to the slip-angle points of one specimen (convenience wrapper of :func:`fit_channel`)."""
    p0 = p0_kpa if p0_kpa is not None else float(np.median([p.pressure_kpa for p in points]))
    return fit_channel(points, "fy", settings, fz0_n, p0)


@dataclass(frozen=True)
class SpecimenModel:
    """The fitted channels of one specimen (None where the data had none)."""

    specimen: str
    fy: ChannelFit | None
    mz: ChannelFit | None
    fx: ChannelFit | None
    fxc: ChannelFit | None = None  # combined slip, where the specimen was run so
    fyc: ChannelFit | None = None

    def get(self, channel: str) -> ChannelFit | None:
        return getattr(self, channel)

    def at(self, camber_deg: float, pressure_kpa: float) -> SpecimenModel:
        """The same fits, read at another camber and pressure."""
        fits = {c: None if f is None else f.at(camber_deg, pressure_kpa) for c, f in self.channels_by_name()}
        return SpecimenModel(self.specimen, **fits)

    def channels_by_name(self) -> list[tuple[str, ChannelFit | None]]:
        return [("fy", self.fy), ("mz", self.mz), ("fx", self.fx), ("fxc", self.fxc), ("fyc", self.fyc)]

    @property
    def channels(self) -> list[ChannelFit]:
        """Every fit: the pure-slip ones first (Fy0, Mz0, Fx0), then the combined-slip ones."""
        return [f for _, f in self.channels_by_name() if f is not None]
