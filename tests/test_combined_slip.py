"""Combined slip: the weighting functions of the Magic Formula 2002 (Pacejka 2006, §4.3.2,
4.E50-4.E67, recalled from the book: from memory) against their published limits, exact recovery
from noise-free data, and a small project with a combined-slip run through the whole build."""

from dataclasses import replace

import numpy as np
import projects as P
import pytest

from dossier.cli import main
from dossier.common.errors import EXIT_INPUT
from dossier.model import magic_formula as mf
from dossier.model.fit import fit_channel
from dossier.project.manifest import FitSettings

FZ0 = 4000.0
EXACT = FitSettings(loss="linear", max_evaluations=20000)
KAPPA = np.arange(-0.25, 0.2501, 0.01)
HELD_DEG = (-4.0, 0.0, 2.0, 4.0, 6.0)
LOADS = (3000.0, 5000.0)
PURE_FX = {"pCx1": 1.65, "pDx1": 1.2, "pDx2": -0.07, "pEx1": 0.3, "pKx1": 22.0, "pKx2": 2.0, "pHx1": 0.001}
PURE_FY = {"pCy1": 1.35, "pDy1": 1.05, "pDy2": -0.08, "pEy1": -0.4, "pKy1": -22.0, "pKy2": 1.9, "pVy1": 0.02}
# An invented truth inside the catalogue's bounds (the demo's own values are different).
TRUE_FXC = {"rBx1": 12.0, "rBx2": 9.0, "rCx1": 1.05, "rEx1": -0.3, "rEx2": 0.2, "rHx1": 0.003}
TRUE_FYC = {
    "rBy1": 9.0,
    "rBy2": 6.0,
    "rBy3": 0.01,
    "rCy1": 1.08,
    "rEy1": 0.2,
    "rEy2": -0.3,
    "rHy1": 0.002,
    "rHy2": 0.001,
    "rVy1": 0.05,
    "rVy2": 0.01,
    "rVy4": 40.0,
    "rVy5": 1.9,
    "rVy6": 20.0,
}


def test_each_weighting_is_one_at_zero_of_the_other_slip():
    # Pacejka 2006, 4.E51 and 4.E59: G = cos[...]/G0, so Gxα(α = 0) = Gyκ(κ = 0) = 1 for any
    # coefficients, and the slip-ratio-induced force SVyκ (4.E66) vanishes at κ = 0.
    rng = np.random.default_rng(7)
    for _ in range(20):
        r = {c.name: rng.uniform(max(c.lower, -5), min(c.upper, 20)) for c in mf.FXC_COEFFICIENTS + mf.FYC_COEFFICIENTS}
        fz = rng.uniform(1000, 9000)
        assert mf.gx_alpha(KAPPA, 0.0, fz, r, FZ0) == pytest.approx(np.ones_like(KAPPA), abs=1e-12)
        alphas = np.deg2rad(np.arange(-12, 12.1, 1.0))
        assert mf.gy_kappa(0.0, alphas, fz, r, FZ0) == pytest.approx(np.ones_like(alphas), abs=1e-12)
        assert mf.svy_kappa(0.0, alphas, fz, r, 1.0, FZ0) == pytest.approx(np.zeros_like(alphas), abs=1e-9)


def test_combined_forces_reduce_to_the_pure_slip_forces():
    # 4.E50 and 4.E58 with G = 1 and SVyκ = 0 at zero of the other slip: Fx = Fx0, Fy = Fy0.
    alphas = np.deg2rad(np.arange(-12, 12.1, 0.5))
    fx = mf.fx_combined(KAPPA, 0.0, 4500.0, PURE_FX, TRUE_FXC, FZ0)
    fy = mf.fy_combined(alphas, 0.0, 4500.0, PURE_FY, TRUE_FYC, FZ0)
    assert fx == pytest.approx(mf.fx0(KAPPA, 4500.0, PURE_FX, FZ0), rel=1e-12)
    assert fy == pytest.approx(mf.fy0(alphas, 4500.0, PURE_FY, FZ0), rel=1e-12)


def test_slip_angle_reduces_the_longitudinal_force_and_slip_ratio_the_lateral():
    # The friction-ellipse behaviour the weighting is built for (Pacejka 2006, §4.3.2): with the
    # other slip growing, |Fx| at a braking slip and |Fy| at a cornering slip both fall. # common practice
    fx = [abs(float(mf.fx_combined(-0.1, np.deg2rad(a), 4000.0, PURE_FX, TRUE_FXC, FZ0))) for a in (0, 2, 4, 8)]
    fy = [abs(float(mf.fy_combined(np.deg2rad(4.0), k, 4000.0, PURE_FY, TRUE_FYC, FZ0))) for k in (0, 0.05, 0.1, 0.2)]
    assert fx == sorted(fx, reverse=True) and fx[-1] < 0.8 * fx[0]
    assert fy == sorted(fy, reverse=True) and fy[-1] < 0.8 * fy[0]


def combined_points(noise=0.0, seed=0):
    """Slip-ratio sweeps at held slip angles and two loads, made from the true weighting."""
    rng = np.random.default_rng(seed)
    pts = []
    for i, load in enumerate(LOADS):
        for held in HELD_DEG:
            a = np.deg2rad(held)
            fx = mf.fx_combined(KAPPA, a, load, PURE_FX, TRUE_FXC, FZ0) + noise * rng.standard_normal(KAPPA.size)
            fy = mf.fy_combined(a, KAPPA, load, PURE_FY, TRUE_FYC, FZ0) + noise * rng.standard_normal(KAPPA.size)
            p = P.operating_point(KAPPA, load, fx=fx, sweep="slip_ratio", run_index=i)
            p = replace(p, curve=replace(p.curve, fy_n=fy), held_slip=held, held_slip_mean=held)
            pts.append(p)
    return pts


@pytest.mark.parametrize(("channel", "base", "truth"), [("fxc", PURE_FX, TRUE_FXC), ("fyc", PURE_FY, TRUE_FYC)])
def test_noise_free_combined_slip_data_give_the_coefficients_back(channel, base, truth):
    fit = fit_channel(combined_points(), channel, EXACT, FZ0, 250.0, fy_values=base)
    fitted = {c.name for c in fit.coefficients if c.status == "fitted"}
    assert set(truth) <= fitted  # both signs of slip angle, two loads, three held levels besides zero
    for name, true in truth.items():
        assert fit.values[name] == pytest.approx(true, rel=1e-5, abs=1e-7), name


def test_combined_slip_intervals_cover_the_truth_on_noisy_data():
    # 95 % intervals of the fit part, over 20 noise seeds, for every fitted coefficient of both
    # weightings: coverage between 85 and 100 % (20 seeds x 19 coefficients). An interval claims a coverage.
    inside = total = 0
    for seed in range(20):
        pts = combined_points(noise=15.0, seed=seed)
        for channel, base, truth in (("fxc", PURE_FX, TRUE_FXC), ("fyc", PURE_FY, TRUE_FYC)):
            fit = fit_channel(pts, channel, FitSettings(loss="linear"), FZ0, 250.0, fy_values=base)
            for c in fit.coefficients:
                if c.name in truth and c.ci95 is not None:
                    total += 1
                    inside += c.ci95[0] <= truth[c.name] <= c.ci95[1]
    assert total >= 300
    assert 0.85 <= inside / total <= 1.0, f"{inside}/{total}"


# --- a small project with pure-slip runs and a combined-slip run ------------------------------

PROJECT_LOADS = (3000.0, 5000.0)
PROJECT_HELD_DEG = (-3.0, 0.0, 3.0, 6.0)


def _run(file, sweep, loads, units, extra=""):
    cols = "\n".join(f'{ch} = {{ name = "{ch.upper()}", unit = "{u}" }}' for ch, u in units.items())
    return (
        f'\n[[runs]]\nspecimen = "S"\nfile = "{file}"\naxis_convention = "ISO 8855"\nsweep = "{sweep}"\n{extra}'
        f'load_setpoints = {{ values = [{", ".join(str(v) for v in loads)}], unit = "N" }}\n'
        'pressure = { value = 250, unit = "kPa" }\n'
        f"[runs.columns]\n{cols}\n"
    )


def _write_project(root, held_key="slip_angle_setpoints_deg", combined_columns=("fx", "fy")):
    t, a, fz, fy = P.sweep_samples(PROJECT_LOADS, lambda s, z: mf.fy0(np.deg2rad(s), z, PURE_FY, FZ0), noise_n=2.0)
    P.write_csv(root / "rig/lat.csv", ["TIME", "SLIP_ANGLE", "FZ", "FY"], [t, a, fz, fy])
    t, k, fz, fx = P.sweep_samples(
        PROJECT_LOADS, lambda s, z: mf.fx0(s, z, PURE_FX, FZ0), sweep_deg=0.25, rate_deg_s=0.1, noise_n=2.0, seed=1
    )
    P.write_csv(root / "rig/long.csv", ["TIME", "SLIP_RATIO", "FZ", "FX"], [t, k, fz, fx])
    parts, t0 = [], 0.0
    for held in PROJECT_HELD_DEG:
        a = np.deg2rad(held)
        t, k, fz, fx = P.sweep_samples(
            (4000.0,),
            lambda s, z, a=a: mf.fx_combined(s, a, z, PURE_FX, TRUE_FXC, FZ0),
            sweep_deg=0.25,
            rate_deg_s=0.1,
            noise_n=2.0,
            seed=2,
        )
        fyc = mf.fy_combined(a, k, fz, PURE_FY, TRUE_FYC, FZ0) + 2.0 * np.random.default_rng(3).standard_normal(k.size)
        parts.append([t + t0, k, np.full(t.size, held), fz, fx, fyc])
        t0 += t[-1] + 1.0 / P.RATE_HZ
    columns = [np.concatenate(c) for c in zip(*parts)]
    names = ["TIME", "SLIP_RATIO", "SLIP_ANGLE", "FZ", "FX", "FY"]
    keep = [i for i, n in enumerate(names) if n.lower() not in {"fx", "fy"} - set(combined_columns)]
    P.write_csv(root / "rig/comb.csv", [names[i] for i in keep], [columns[i] for i in keep])
    units = {"time": "s", "slip_ratio": "1", "slip_angle": "deg", "fz": "N", "fx": "N", "fy": "N"}
    units = {c: u for c, u in units.items() if c not in {"fx", "fy"} - set(combined_columns)}
    held = f"{held_key} = [{', '.join(str(v) for v in PROJECT_HELD_DEG)}]\n"
    manifest = (
        P.MANIFEST_HEAD
        + P.specimen_block("S")
        + _run("rig/lat.csv", "slip_angle", PROJECT_LOADS, {"time": "s", "slip_angle": "deg", "fz": "N", "fy": "N"})
        + _run("rig/long.csv", "slip_ratio", PROJECT_LOADS, {"time": "s", "slip_ratio": "1", "fz": "N", "fx": "N"})
        + _run("rig/comb.csv", "slip_ratio", (4000.0,), units, held)
        + "\n[fit]\nnominal_load_n = 4000\n"
    )
    (root / "dossier.toml").write_text(manifest, encoding="utf-8")
    return root


@pytest.fixture(scope="module")
def project_evaluation(tmp_path_factory):
    from dossier.engine.build import evaluate
    from dossier.project.load import load_project

    return evaluate(load_project(_write_project(tmp_path_factory.mktemp("combined"))))


def test_a_combined_run_becomes_one_point_per_held_slip_angle(project_evaluation):
    e = project_evaluation
    held = sorted(p.held_slip for p in e.combined_points)
    assert held == pytest.approx(sorted(PROJECT_HELD_DEG))
    assert all(p.sweep == "slip_ratio" and p.load_n == 4000.0 for p in e.combined_points)
    # the pure-slip stages never see them: every other point is pure slip
    assert not any(p.combined for p in e.points)


def test_the_project_recovers_the_weighting_of_both_forces(project_evaluation):
    (model,) = project_evaluation.models
    assert model.fxc is not None and model.fyc is not None
    for fit in (model.fxc, model.fyc):
        # through the rig file, conditioning (binning, lag) and the pure-slip fits it weights:
        # the weighted force within 1 % of the true combined force over the swept range
        k = np.linspace(-0.2, 0.2, 41)
        for held in PROJECT_HELD_DEG:
            a = np.full(k.size, held)
            true = (
                mf.fx_combined(k, np.deg2rad(a), 4000.0, PURE_FX, TRUE_FXC, FZ0)
                if fit.channel == "fxc"
                else mf.fy_combined(np.deg2rad(a), k, 4000.0, PURE_FY, TRUE_FYC, FZ0)
            )
            got = fit.predict(k, 4000.0, other=a)
            assert np.max(np.abs(got - true)) < 0.01 * np.max(np.abs(true)), (fit.channel, held)
        assert all(c.ci95 is not None for c in fit.coefficients if c.status == "fitted" and not c.at_bound)


def test_a_held_slip_of_the_swept_channel_is_a_located_error(tmp_path, capsys):
    _write_project(tmp_path, held_key="slip_ratio_setpoints")
    assert main(["check", str(tmp_path)]) == EXIT_INPUT
    err = capsys.readouterr().err
    assert "runs[2].slip_ratio_setpoints" in err and "slip_angle_setpoints_deg" in err and "Traceback" not in err


def test_a_combined_run_without_both_forces_is_a_located_error(tmp_path, capsys):
    _write_project(tmp_path, combined_columns=("fx",))
    assert main(["check", str(tmp_path)]) == EXIT_INPUT
    assert "runs[2].columns.fy: is required" in capsys.readouterr().err
