"""Fit: the Magic Formula lateral force Fy0 of one specimen, with honest uncertainty.

Strategy (common practice, see DEVELOPERS.md):

1. fit each operating point alone with the general sine form (B, C, D, E, SH, SV) to get
   starting values and a noise estimate;
2. turn those into starting values for the load-dependent coefficients by small regressions;
3. fit all operating points together with ``scipy.optimize.least_squares`` inside physical
   bounds and with a robust loss, restarting from perturbed starts when a fit stalls;
4. recompute the plain residual at the solution, take the covariance from the Jacobian and
   the residual variance, and mark every coefficient that is at a bound, held at its default
   because the data cannot identify it, or strongly correlated with another.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy import optimize, stats

from . import magic_formula as mf
from .condition import OperatingPoint
from .errors import StageError
from .manifest import FitSettings

STRONG_CORRELATION = 0.95
LOAD_TERMS = ("pDy2", "pEy2", "pHy2", "pVy2")


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
    rmse_n: float


@dataclass(frozen=True)
class FitStatistics:
    n_points: int
    n_params: int
    dof: int
    rmse_n: float
    rmse_pct_of_peak: float
    n_evaluations: int
    restarts: int
    success: bool
    message: str


@dataclass(frozen=True)
class LateralFit:
    """The fitted Fy0 model of one specimen at one pressure and camber."""

    specimen: str
    pressure_kpa: float
    camber_deg: float
    fz0_n: float
    settings: tuple[CoefficientSetting, ...]
    coefficients: tuple[CoefficientEstimate, ...]
    fitted_names: tuple[str, ...]
    covariance: np.ndarray  # over fitted_names; NaN where not estimable
    correlation: np.ndarray
    statistics: FitStatistics
    point_fits: tuple[PointFit, ...]
    load_range_n: tuple[float, float]
    slip_range_deg: tuple[float, float]
    t95: float  # Student-t quantile used for the 95 % intervals
    warnings: tuple[str, ...]
    source_points: tuple[tuple[str, float, float, float], ...]  # operating-point keys used

    @property
    def values(self) -> dict[str, float]:
        return {c.name: c.value for c in self.coefficients}

    def predict_fy_n(self, slip_angle_deg, load_n, values: dict[str, float] | None = None):
        """Return the model's Fy in N at the given slip angles (deg) and loads (N)."""
        return mf.fy0(np.asarray(slip_angle_deg) * mf.DEG, load_n, values or self.values, self.fz0_n,
                      self.camber_deg * mf.DEG)

    def strongly_correlated_pairs(self) -> list[tuple[str, str, float]]:
        out = []
        names = self.fitted_names
        for i in range(len(names)):
            for j in range(i + 1, len(names)):
                r = self.correlation[i, j]
                if np.isfinite(r) and abs(r) >= STRONG_CORRELATION:
                    out.append((names[i], names[j], float(r)))
        return out


def fit_point(slip_angle_deg: np.ndarray, fy_n: np.ndarray, load_n: float) -> PointFit:
    """Fit the general sine form with shifts to one slip curve (starting values only)."""
    x = np.asarray(slip_angle_deg) * mf.DEG
    y = np.asarray(fy_n)
    near = np.abs(slip_angle_deg) <= max(1.5, np.sort(np.abs(slip_angle_deg))[min(4, x.size - 1)])
    slope = np.polyfit(x[near], y[near], 1)[0] if np.count_nonzero(near) >= 2 else -20.0 * load_n
    d0 = max(np.max(np.abs(y)), 1.0)
    c0 = 1.3
    p0 = np.array([slope / (c0 * d0), c0, d0, 0.0, 0.0, 0.0])
    lo = np.array([-np.inf, 1.0, 0.1 * d0, -10.0, -0.1, -0.3 * d0])
    hi = np.array([np.inf, 2.5, 3.0 * d0, 1.0, 0.1, 0.3 * d0])
    p0[1:] = np.clip(p0[1:], lo[1:] + 1e-9 * (hi[1:] - lo[1:]), hi[1:] - 1e-9 * (hi[1:] - lo[1:]))

    def resid(q):
        B, C, D, E, SH, SV = q
        return mf.sine_form(x + SH, B, C, D, min(E, 1.0)) + SV - y

    res = optimize.least_squares(resid, p0, bounds=(lo, hi), max_nfev=2000)
    B, C, D, E, SH, SV = res.x
    return PointFit(load_n, B, C, D, E, SH, SV, float(np.sqrt(np.mean(res.fun**2))))


def fit_lateral(points: list[OperatingPoint], settings: FitSettings, fz0_n: float) -> LateralFit:
    """Fit Fy0 to every operating point of one specimen at one pressure and camber.

    Parameters
    ----------
    points : list of OperatingPoint
        Conditioned curves of one specimen, one pressure, one camber; one or more loads.
    settings : FitSettings
        Loss and evaluation budget from the manifest.
    fz0_n : float
        Nominal load Fz0 of the model, N.
    """
    if not points:
        raise StageError("no operating points to fit")
    specimen = points[0].specimen
    alpha_deg = np.concatenate([p.curve.slip_angle_deg for p in points])
    fz = np.concatenate([p.curve.fz_n for p in points])
    fy = np.concatenate([p.curve.fy_n for p in points])
    loads = sorted({p.load_n for p in points})

    point_fits = tuple(fit_point(p.curve.slip_angle_deg, p.curve.fy_n, p.mean_load_n) for p in points)
    setting_list = _settings(point_fits, loads, fz0_n)
    free = [s for s in setting_list if not s.held]
    names = tuple(s.name for s in free)
    fixed = {s.name: s.start for s in setting_list if s.held}
    lo = np.array([s.lower for s in free])
    hi = np.array([s.upper for s in free])
    x0 = np.array([s.start for s in free])
    alpha_rad = alpha_deg * mf.DEG
    gamma = points[0].camber_deg * mf.DEG

    def resid(q):
        return mf.fy0(alpha_rad, fz, {**fixed, **dict(zip(names, q))}, fz0_n, gamma) - fy

    noise = float(np.sqrt(np.mean([pf.rmse_n**2 for pf in point_fits])))
    f_scale = max(2.0 * noise, 1e-6 * np.max(np.abs(fy)) + 1e-9)
    budget = settings.max_evaluations
    best = None
    evaluations = 0
    restarts = 0
    rng = np.random.default_rng(20261201)  # fixed seed: the same data give the same fit
    start = x0
    for attempt in range(4):
        res = optimize.least_squares(resid, start, bounds=(lo, hi), loss=settings.loss, f_scale=f_scale,
                                     max_nfev=max(50, budget - evaluations), x_scale="jac")
        evaluations += res.nfev
        rmse = float(np.sqrt(np.mean(resid(res.x) ** 2)))
        if best is None or rmse < best[1]:
            best = (res, rmse)
        # A fit is stalled when it ends far worse than the per-point fits (which share its
        # noise) and worse than 1 % of the peak force: a model mismatch smaller than that is
        # not a reason to search again.
        stalled = (not res.success) or (rmse > 3.0 * noise and rmse > 0.01 * np.max(np.abs(fy)))
        if not stalled or evaluations >= budget:
            break
        restarts += 1
        span = hi - lo
        start = np.clip(x0 + 0.1 * rng.standard_normal(x0.size) * np.minimum(np.abs(x0) + 0.1, span),
                        lo + 1e-6 * span, hi - 1e-6 * span)
    res, rmse = best
    if evaluations >= budget and not res.success:
        raise StageError(f"the lateral fit of specimen {specimen!r} did not converge within "
                         f"{budget} evaluations (fit.max_evaluations); last state: {res.message}")

    x = res.x
    r = resid(x)  # recompute the plain residual at the solution
    n, k = r.size, x.size
    dof = n - k
    if dof <= 0:
        raise StageError(f"specimen {specimen!r}: {n} conditioned points cannot determine {k} coefficients")
    at_bound = (x - lo <= 1e-6 * (hi - lo)) | (hi - x <= 1e-6 * (hi - lo))
    cov, note = _covariance(resid, x, r, dof, at_bound)
    sd = np.sqrt(np.diag(cov))
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(sd, sd)
    t95 = float(stats.t.ppf(0.975, dof))

    estimates = []
    values = {**fixed, **dict(zip(names, x))}
    for s in setting_list:
        info = mf.FY0_INFO[s.name]
        if s.held:
            estimates.append(CoefficientEstimate(s.name, s.start, info.unit, info.equation, "held", None, None,
                                                 False, s.reason))
            continue
        i = names.index(s.name)
        ok = np.isfinite(sd[i])
        why = "at a bound: no standard error" if at_bound[i] else ("" if ok else note)
        estimates.append(CoefficientEstimate(
            s.name, float(values[s.name]), info.unit, info.equation, "fitted",
            float(sd[i]) if ok else None,
            (float(x[i] - t95 * sd[i]), float(x[i] + t95 * sd[i])) if ok else None,
            bool(at_bound[i]), why))

    peak = float(np.max(np.abs(fy)))
    stat = FitStatistics(n, k, dof, rmse, 100.0 * rmse / peak, evaluations, restarts, bool(res.success),
                         str(res.message))
    warnings = []
    for e in estimates:
        if e.at_bound:
            warnings.append(f"{e.name} is at a bound of its physical range; its value is not a free estimate")
        elif e.relative_stderr is not None and e.relative_stderr > 0.5 and abs(e.value) > 1e-3:
            warnings.append(f"{e.name} is poorly determined (standard error {100 * e.relative_stderr:.0f} % of its value)")
    provisional = LateralFit(specimen, points[0].pressure_kpa, points[0].camber_deg, fz0_n,
                             tuple(setting_list), tuple(estimates), names, cov, corr, stat, point_fits,
                             (min(p.mean_load_n for p in points), max(p.mean_load_n for p in points)),
                             (float(alpha_deg.min()), float(alpha_deg.max())), t95, (), tuple(p.key for p in points))
    for a, b, rho in provisional.strongly_correlated_pairs():
        warnings.append(f"{a} and {b} are strongly correlated (r = {rho:+.3f}); read them together")
    if not res.success:
        warnings.append(f"the optimiser stopped without meeting its tolerance: {res.message}")
    return replace(provisional, warnings=tuple(warnings))


def _settings(point_fits, loads, fz0_n) -> list[CoefficientSetting]:
    """Starting values from the per-point fits; hold what the data cannot identify."""
    fz = np.array([pf.load_n for pf in point_fits])
    dfz = (fz - fz0_n) / fz0_n
    mu = np.array([pf.D for pf in point_fits]) / fz
    E = np.array([pf.E for pf in point_fits])
    K = np.array([pf.B * pf.C * pf.D for pf in point_fits])
    SH = np.array([pf.SH for pf in point_fits])
    SVn = np.array([pf.SV for pf in point_fits]) / fz
    multi = len(loads) >= 2

    def line(y):
        if multi:
            b, a = np.polyfit(dfz, y, 1)
            return a, b
        return float(np.mean(y)), 0.0

    start = mf.fy0_defaults()
    start["pCy1"] = float(np.median([pf.C for pf in point_fits]))
    start["pDy1"], start["pDy2"] = line(mu)
    start["pEy1"], start["pEy2"] = line(E)
    start["pHy1"], start["pHy2"] = line(SH)
    start["pVy1"], start["pVy2"] = line(SVn)
    start["pKy1"], start["pKy2"] = _stiffness_start(fz, K, fz0_n)

    out = []
    for info in mf.FY0_COEFFICIENTS:
        held, reason = False, ""
        if info.camber:
            held, reason = True, "held at default: camber dependence needs cambered data (not fitted in this version)"
        elif info.name in LOAD_TERMS and not multi:
            held, reason = True, "held at default: load dependence needs two or more loads"
        elif info.name == "pKy2" and len(loads) < 3:
            held, reason = True, "held at default: the load of maximum stiffness needs three or more loads"
        value = info.default if held else float(start[info.name])
        if not held:
            span = info.upper - info.lower
            value = float(np.clip(value, info.lower + 1e-3 * span, info.upper - 1e-3 * span))
        out.append(CoefficientSetting(info.name, value, info.lower, info.upper, held, reason))
    return out


def _stiffness_start(fz, K, fz0_n):
    if fz.size < 2:
        return float(K[0] / (fz0_n * np.sin(2 * np.arctan(fz[0] / (2.0 * fz0_n))))), 2.0

    def r(q):
        return q[0] * fz0_n * np.sin(2 * np.arctan(fz / (q[1] * fz0_n)))- K

    k1 = float(np.max(np.abs(K)) / fz0_n) * np.sign(np.mean(K))
    sol = optimize.least_squares(r, [k1, 2.0], bounds=([-200, 0.1], [200, 20]))
    return float(sol.x[0]), float(sol.x[1])


def _covariance(resid, x, r, dof, at_bound):
    """Covariance s²(JᵀJ)⁻¹ from a central-difference Jacobian of the plain residual.

    Coefficients at a bound are excluded (their row and column are NaN): the quadratic
    approximation does not hold there.
    """
    k = x.size
    J = np.empty((r.size, k))
    for i in range(k):
        h = 1e-6 * max(abs(x[i]), 1e-3)
        xp, xm = x.copy(), x.copy()
        xp[i] += h
        xm[i] -= h
        J[:, i] = (resid(xp) - resid(xm)) / (2 * h)
    s2 = float(r @ r) / dof
    free = ~at_bound
    cov = np.full((k, k), np.nan)
    note = ""
    Jf = J[:, free]
    if Jf.shape[1]:
        u, sv, vt = np.linalg.svd(Jf, full_matrices=False)
        if sv[-1] <= sv[0] * 1e-10:
            note = "not estimable: the Jacobian is singular (coefficients not separable by these data)"
            return cov, note
        inv = (vt.T / sv**2) @ vt
        cov[np.ix_(free, free)] = s2 * inv
    return cov, note
