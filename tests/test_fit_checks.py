"""The fit stage against known truths: exact recovery, interval coverage, and a published tire."""

import bnp1987
import numpy as np
import projects as P
import pytest

from dossier.model import magic_formula as mf
from dossier.model.fit import fit_channel
from dossier.project.manifest import FitSettings

FZ0, P0 = 4000.0, 250.0
LOADS = (2000.0, 4000.0, 6000.0, 8000.0)
SLIP = np.arange(-12.0, 12.01, 0.5)
# A plausible passenger-car tire (invented, ISO 8855 signs), used as the synthetic truth.
TRUE_FY = {
    "pCy1": 1.35,
    "pDy1": 1.05,
    "pDy2": -0.08,
    "pEy1": -0.4,
    "pEy2": -0.3,
    "pEy3": 0.05,
    "pKy1": -22.0,
    "pKy2": 1.9,
    "pHy1": 0.002,
    "pHy2": 0.001,
    "pVy1": 0.02,
    "pVy2": -0.01,
}
TRUE_FX = {
    "pCx1": 1.65,
    "pDx1": 1.2,
    "pDx2": -0.07,
    "pEx1": 0.3,
    "pEx2": 0.1,
    "pEx4": 0.05,
    "pKx1": 22.0,
    "pKx2": 2.0,
    "pHx1": 0.001,
    "pVx1": 0.005,
}
EXACT = FitSettings(loss="linear", max_evaluations=20000)


def lateral_points(noise=0.0, seed=0, values=TRUE_FY):
    rng = np.random.default_rng(seed)
    pts = []
    for load in LOADS:
        fy = mf.fy0(SLIP * mf.DEG, load, values, FZ0) + noise * rng.standard_normal(SLIP.size)
        pts.append(P.operating_point(SLIP, load, fy=fy, pressure_kpa=P0))
    return pts


def test_noise_free_lateral_data_give_the_coefficients_back():
    fit = fit_channel(lateral_points(), "fy", EXACT, FZ0, P0)
    for name, true in TRUE_FY.items():
        assert fit.values[name] == pytest.approx(true, rel=1e-6, abs=1e-9), name


def test_noise_free_longitudinal_data_give_the_coefficients_back():
    kappa = np.arange(-0.25, 0.2501, 0.01)
    pts = [
        P.operating_point(kappa, L, fx=mf.fx0(kappa, L, TRUE_FX, FZ0), sweep="slip_ratio", pressure_kpa=P0)
        for L in LOADS
    ]
    fit = fit_channel(pts, "fx", EXACT, FZ0, P0)
    for name, true in TRUE_FX.items():
        assert fit.values[name] == pytest.approx(true, rel=1e-6, abs=1e-9), name


def test_reported_intervals_cover_the_truth_about_95_percent_of_the_time():
    inside = total = 0
    for seed in range(30):
        fit = fit_channel(lateral_points(noise=20.0, seed=seed), "fy", FitSettings(loss="linear"), FZ0, P0)
        for c in fit.coefficients:
            if c.name in TRUE_FY and c.ci95 is not None:
                total += 1
                inside += c.ci95[0] <= TRUE_FY[c.name] <= c.ci95[1]
    coverage = inside / total
    # 30 seeds × 12 coefficients; binomial spread around 0.95 is about ±0.012, so allow 0.90-0.99.
    assert 0.90 <= coverage <= 0.99, coverage


# --- Bakker, Nyborg & Pacejka, SAE 870421 (1987), Tables 2-3 (domain primer §8) ---------------
# Fz in kN, α in deg, κ in %; Fy, Fx in N, Mz in N·m. The 1987 signs: Fy > 0 and Mz < 0 for α > 0;
# in ISO 8855 (ours) both change sign, which keeps the trail t0 = −(dMz/dα)/(dFy/dα) positive.
MZ_A = (-2.72, -2.28, -1.86, -2.73, 0.110, -0.070, 0.643, -4.04)
FX_A = (-21.3, 1144.0, 49.6, 226.0, 0.069, -0.006, 0.056, 0.486)


def _bnp(x, fz_kn, C, a, stiffness_exponential):
    a1, a2, a3, a4, a5, a6, a7, a8 = a
    D = a1 * fz_kn**2 + a2 * fz_kn
    BCD = (a3 * fz_kn**2 + a4 * fz_kn) * np.exp(-a5 * fz_kn) if stiffness_exponential else None
    E = a6 * fz_kn**2 + a7 * fz_kn + a8
    B = BCD / (C * D)
    return mf.sine_form(np.asarray(x, float), B, C, D, E), BCD, D


def bnp_mz(slip_deg, fz_kn):
    return _bnp(slip_deg, fz_kn, 2.40, MZ_A, True)


def bnp_fx(kappa_pct, fz_kn):
    return _bnp(kappa_pct, fz_kn, 1.65, FX_A, True)


def _bnp_points(loads):
    return [
        P.operating_point(
            SLIP, L, fy=-bnp1987.lateral_force_n(SLIP, L / 1000.0), mz=-bnp_mz(SLIP, L / 1000.0)[0], pressure_kpa=P0
        )
        for L in loads
    ]


def _slope(fit, load, h=1e-3):
    return (fit.predict(h, load) - fit.predict(-h, load)) / (2 * h)


def test_published_1987_tire_lateral_through_our_model():
    fy_fit = fit_channel(_bnp_points(LOADS), "fy", FitSettings(loss="linear"), FZ0, P0)
    B, C, D, E = bnp1987.coefficients(4.0)
    # SAE 870421 at 4 kN: cornering stiffness BCD = 1027.3 N/deg and peak D = 3690.4 N
    assert -_slope(fy_fit, FZ0) == pytest.approx(B * C * D, rel=0.02)
    grid = np.linspace(0, 12, 2401)
    assert np.max(np.abs(fy_fit.predict(grid, FZ0))) == pytest.approx(D, rel=0.02)


def test_published_1987_tire_aligning_moment_through_our_model():
    # Fitted at 4 kN alone: the 2002 trail law (Dt linear in dfz) cannot follow the 1987 set's
    # load dependence of the aligning stiffness over 2-8 kN (the trail per load is not monotonic
    # there); over 2-8 kN our fit is 13 % stiff at 4 kN. At one load the shapes still differ:
    # the least-squares 2002 Mz0 is 3.9 % stiff at zero slip (a measured finding, see the note),
    # so zero-slip quantities are checked to 5 % and the peak to 2 %.
    pts = _bnp_points((FZ0,))
    settings = FitSettings(loss="linear")
    fy_fit = fit_channel(pts, "fy", settings, FZ0, P0)
    mz_fit = fit_channel(pts, "mz", settings, FZ0, P0, 0.3, fy_fit.values)
    B, C, D, E = bnp1987.coefficients(4.0)
    _, bcd_mz, d_mz = bnp_mz(0.0, 4.0)
    dfy, dmz = _slope(fy_fit, FZ0), _slope(mz_fit, FZ0)
    # SAE 870421 at 4 kN: aligning stiffness −BCD_Mz = 26.2 N·m/deg, peak |D_Mz| = 52.6 N·m
    assert dmz == pytest.approx(-bcd_mz, rel=0.05)
    # zero-slip pneumatic trail t0 = −(dMz/dα)/(dFy/dα) = 25.5 mm for the 1987 tire at 4 kN
    assert -dmz / dfy == pytest.approx(-bcd_mz / (B * C * D), rel=0.05)
    grid = np.linspace(0, 12, 2401)
    assert np.max(np.abs(mz_fit.predict(grid, FZ0))) == pytest.approx(abs(d_mz), rel=0.02)


def test_published_1987_tire_longitudinal_through_our_model():
    kappa = np.arange(-0.25, 0.2501, 0.005)
    pts = [
        P.operating_point(kappa, L, fx=bnp_fx(100 * kappa, L / 1000.0)[0], sweep="slip_ratio", pressure_kpa=P0)
        for L in LOADS
    ]
    fit = fit_channel(pts, "fx", FitSettings(loss="linear"), FZ0, P0)
    h = 1e-5
    stiffness = (fit.predict(h, FZ0) - fit.predict(-h, FZ0)) / (2 * h)
    _, bcd, D = bnp_fx(0.0, 4.0)
    assert stiffness == pytest.approx(100 * bcd, rel=0.02)  # BCD is per % slip in the 1987 tables
    grid = np.linspace(0, 0.25, 2501)
    assert np.max(fit.predict(grid, FZ0)) == pytest.approx(D, rel=0.02)


def test_magic_formula_properties_of_the_channel_equations():
    # Pacejka 2006 §4.3.1 applied to the 2002 equations without shifts: slope at the origin is
    # Kyα (Fy0) and Kxκ (Fx0), the peak is D = μ Fz, and the trail at zero slip is Dt.
    fz = 5000.0
    p = {"pCy1": 1.4, "pDy1": 1.1, "pDy2": -0.05, "pEy1": -0.5, "pKy1": -21.0, "pKy2": 1.8}
    h = 1e-7
    slope = (mf.fy0(h, fz, p, FZ0) - mf.fy0(-h, fz, p, FZ0)) / (2 * h)
    assert slope == pytest.approx(mf.fy0_cornering_stiffness_n_per_rad(fz, p, FZ0), rel=1e-6)
    a = np.linspace(0, 1.0, 200001)
    assert np.max(np.abs(mf.fy0(a, fz, p, FZ0))) == pytest.approx((1.1 - 0.05 * 0.25) * fz, rel=1e-7)
    px = {"pCx1": 1.6, "pDx1": 1.2, "pKx1": 20.0, "pKx2": 1.0, "pEx1": 0.2}
    kslope = (mf.fx0(h, fz, px, FZ0) - mf.fx0(-h, fz, px, FZ0)) / (2 * h)
    assert kslope == pytest.approx(fz * (20.0 + 1.0 * 0.25), rel=1e-6)
    q = {"qBz1": 9.0, "qCz1": 1.2, "qDz1": 0.1, "qEz1": -1.5}
    t0 = mf.pneumatic_trail_m(0.0, fz, q, FZ0, 0.31)
    assert t0 == pytest.approx(fz * 0.1 * 0.31 / FZ0, rel=1e-12)
    dmz = (mf.mz0(h, fz, q, p, FZ0, 0.31) - mf.mz0(-h, fz, q, p, FZ0, 0.31)) / (2 * h)
    assert -dmz / slope == pytest.approx(t0, rel=1e-5)  # Mz0 = −t·Fy0 near zero slip
