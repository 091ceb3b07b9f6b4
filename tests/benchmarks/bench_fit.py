"""Benchmark: the complete Fy0 + Mz0 + Fx0 fit of one specimen, 4 loads × 3 cambers × 2 pressures.

Run: python tests/benchmarks/bench_fit.py
Times `fit_channel` for the three channels (and, separately, leave-one-load-out), then fits the
same data with plain `scipy.optimize.curve_fit` (numerical derivatives, same model, same free
coefficients, same start, same bounds) and prints both times and final costs side by side.
Not a test: nothing is asserted.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
from scipy.optimize import curve_fit

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
import projects as P

from dossier.model import fit as F
from dossier.model import magic_formula as mf
from dossier.project.manifest import FitSettings

FZ0, P0, R0 = 4000.0, 240.0, 0.317
LOADS, CAMBERS, PRESSURES = (2000.0, 4000.0, 6000.0, 8000.0), (-3.0, 0.0, 3.0), (240.0, 280.0)
SLIP = np.arange(-12.0, 12.01, 0.5)
KAPPA = np.arange(-0.25, 0.2501, 0.01)
FY = {
    "pCy1": 1.35,
    "pDy1": 1.05,
    "pDy2": -0.08,
    "pDy3": 2.0,
    "pEy1": -0.4,
    "pEy2": -0.3,
    "pKy1": -22.0,
    "pKy2": 1.9,
    "pKy3": 0.4,
    "pHy1": 0.002,
    "pVy1": 0.02,
    "pVy3": 0.08,
    "ppy1": 0.2,
    "ppy3": -0.3,
}
MZ = {
    "qBz1": 9.0,
    "qBz2": -1.0,
    "qCz1": 1.2,
    "qDz1": 0.1,
    "qDz2": -0.005,
    "qEz1": -1.5,
    "qHz1": 0.002,
    "qDz3": 0.5,
    "qDz6": 0.002,
    "ppz1": -0.3,
}
FX = {"pCx1": 1.65, "pDx1": 1.2, "pDx2": -0.07, "pEx1": 0.3, "pKx1": 22.0, "pKx2": 2.0, "ppx1": 0.3, "ppx3": -0.2}


def points():
    rng = np.random.default_rng(1)
    lat, lon = [], []
    for L in LOADS:
        for g in CAMBERS:
            for p in PRESSURES:
                dpi = (p - P0) / P0
                fy = mf.fy0(SLIP * mf.DEG, L, FY, FZ0, g * mf.DEG, dpi) + 20 * rng.standard_normal(SLIP.size)
                mz = mf.mz0(SLIP * mf.DEG, L, MZ, FY, FZ0, R0, g * mf.DEG, dpi) + 1.5 * rng.standard_normal(SLIP.size)
                lat.append(P.operating_point(SLIP, L, fy=fy, mz=mz, camber_deg=g, pressure_kpa=p))
        for p in PRESSURES:
            dpi = (p - P0) / P0
            fx = mf.fx0(KAPPA, L, FX, FZ0, 0.0, dpi) + 20 * rng.standard_normal(KAPPA.size)
            lon.append(P.operating_point(KAPPA, L, fx=fx, sweep="slip_ratio", pressure_kpa=p))
    return lat, lon


def ours(lat, lon, settings):
    fy = F.fit_channel(lat, "fy", settings, FZ0, P0)
    mz = F.fit_channel(lat, "mz", settings, FZ0, P0, R0, fy.values)
    fx = F.fit_channel(lon, "fx", settings, FZ0, P0)
    return fy, mz, fx


def plain(fit: F.ChannelFit, pts, fy_values=None):
    """The same model, free coefficients, start and bounds, through curve_fit (2-point derivatives)."""
    data = F.fit_data(pts, fit.channel)
    free = [s for s in fit.settings if not s.held]
    fixed = {s.name: s.start for s in fit.settings if s.held}
    names = [s.name for s in free]
    dpi = (data.pressure_kpa - P0) / P0

    def model(_, *q):
        return F._model(
            fit.channel, data.x, data.fz_n, data.gamma_deg, dpi, {**fixed, **dict(zip(names, q))}, FZ0, R0, fy_values
        )

    p0 = [s.start for s in free]
    popt, _ = curve_fit(
        model,
        None,
        data.y,
        p0=p0,
        sigma=data.sigma,
        bounds=([s.lower for s in free], [s.upper for s in free]),
        maxfev=20000,
    )
    return 0.5 * float(np.sum(((model(None, *popt) - data.y) / data.sigma) ** 2))


def cost(fit: F.ChannelFit, pts):
    data = F.fit_data(pts, fit.channel)
    pred = fit.predict(data.x, data.fz_n, data.gamma_deg, data.pressure_kpa)
    return 0.5 * float(np.sum(((pred - data.y) / data.sigma) ** 2))


def main() -> None:
    lat, lon = points()
    settings = FitSettings(loss="linear")
    ours(lat, lon, settings)  # warm-up
    t0 = time.perf_counter()
    fy, mz, fx = ours(lat, lon, settings)
    t_ours = time.perf_counter() - t0
    t0 = time.perf_counter()
    for f, pts in ((fy, lat), (mz, lat), (fx, lon)):
        F.leave_one_load_out(f, pts, settings)
    t_lolo = time.perf_counter() - t0
    t0 = time.perf_counter()
    plain_costs = [plain(fy, lat), plain(mz, lat, fy.values), plain(fx, lon)]
    t_plain = time.perf_counter() - t0
    n = sum(p.curve.n_points for p in lat) + sum(p.curve.n_points for p in lon)
    print(f"data: {len(lat)} lateral + {len(lon)} longitudinal operating points, {n} conditioned points")
    print(
        f"dossier fit_channel (Fy0+Mz0+Fx0): {t_ours:.3f} s; costs "
        + ", ".join(f"{f.channel} {cost(f, pts):.1f}" for f, pts in ((fy, lat), (mz, lat), (fx, lon)))
    )
    print(
        f"plain curve_fit (same model, start, bounds): {t_plain:.3f} s; costs "
        + ", ".join(f"{c} {v:.1f}" for c, v in zip(("fy", "mz", "fx"), plain_costs))
    )
    print(f"ratio plain/dossier: {t_plain / t_ours:.2f}")
    print(f"leave-one-load-out for the three channels (not part of the fit time): {t_lolo:.3f} s")


if __name__ == "__main__":
    main()
