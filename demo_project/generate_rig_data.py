"""Generate the demo project's rig files and the truth they were generated from.

Everything here is FICTIONAL demo material: the supplier (Norrvik Tyre Works), the customer
(Castellan Motors), the vehicle program (K27 Aster), the two test labs, the specimens, the test
session and every number. The script exists so the demo can show how close the fitted model comes
to a known truth.

Run it with no arguments; it rewrites, relative to this script's folder:

* ``rig/*.csv``                   one rig file per run, in the style of the lab that "tested" it;
* ``truth/true_coefficients.json`` the true Magic Formula Fy0 coefficients per specimen, with the
  true cornering stiffness and peak lateral friction at each set-point load, PRD-A's true
  conicity and ply-steer, and the session: each run's time, rolling direction and drift factor.

The test session (one day, 2026-11-12; see :data:`RUNS`):

* seven runs between 08:00 and 12:00. The control tire CTL-1 is run at 08:00, 10:00 and 12:00
  (4 kN only); PRD-A forward at 08:30 and in reverse rolling at 11:15 (4 kN only); CND-B at
  09:15 and CND-C (the Eisenau run) at 10:30;
* force-level drift: Fy and Mz of a run are multiplied by one factor per run,
  g(t) = 1 - 0.04 (t - 08:00) / 4 h, where t is the run's start time (the force level falls 4 %
  over the session as the belt surface and the tread condition change). The truth keeps the
  UNdrifted values and records each run's factor. For simplicity the same law is applied to the
  Eisenau run;
* PRD-A's zero-slip offset is conicity + ply-steer: pHy1 = 0 and pVy1 = c + p rolling forward,
  c - p rolling in reverse (c = 0.012, p = 0.008, fractions of Fz, ISO 8855 rig axes).

What is simulated per run (one pressure, camber 0):

* the run's loads (2, 4, 6, 8 kN or 4 kN only); before each: a linear load ramp from the previous
  level (transition), then a hold with a decaying load oscillation (settling), then a continuous
  triangular slip sweep 0 -> +12 -> -12 -> 0 deg at 4 deg/s (in ISO 8855 axes);
* the tire responds to a *lagged* slip angle: a first-order lag with time constant
  relaxation length / speed, which gives the up/down hysteresis of a real sweep;
* Fy from the true coefficients (``dossier.magic_formula.fy0``) times the drift factor, plus
  gaussian noise and a few isolated spikes; Mz from a simple placeholder
  (see :func:`aligning_moment_placeholder`) times the drift factor;
* measurement noise on every channel; inflation pressure creeps up slightly as the tire warms.

The computation is done in the internal ISO 8855 axes and SI-like units; each lab writer then
converts to its own axes, units, separators and decimal mark.
"""

from __future__ import annotations

import datetime as dt
import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from dossier.magic_formula import fy0

HERE = Path(__file__).resolve().parent
RIG_DIR = HERE / "rig"
TRUTH_FILE = HERE / "truth" / "true_coefficients.json"

SEED = 20261120

# --- test session and force-level drift ----------------------------------------------------------
SESSION_START = dt.datetime(2026, 11, 12, 8, 0)
DRIFT_DROP = 0.04  # fraction of the force level lost over DRIFT_SPAN
DRIFT_SPAN = dt.timedelta(hours=4)

# --- rig program (common to all runs; a run may use a subset of the loads) ---------------------
FZ0_N = 4000.0  # nominal load of the Magic Formula coefficients
LOADS_N = (2000.0, 4000.0, 6000.0, 8000.0)
SINGLE_LOAD_N = (4000.0,)  # control-tire and reverse-rolling runs
PRELOAD_N = 250.0  # contact load before the first ramp and after the last sweep
PRESSURE_KPA = 240.0  # 2.4 bar, 34.8 psi
SPEED_KMH = 30.0
RELAXATION_LENGTH_M = 0.45
SAMPLE_RATE_HZ = 25.0
SIM_RATE_HZ = 1000.0  # fine grid on which the slip lag is integrated
PREROLL_S = 0.5
RAMP_S = 1.5
HOLD_S = 1.0
SWEEP_MAX_DEG = 12.0
SWEEP_RATE_DEG_S = 4.0
SETTLING_AMPLITUDE = 0.04  # fraction of the set-point load
SETTLING_FREQUENCY_HZ = 3.0
SETTLING_DECAY_S = 0.3
PEAK_SEARCH_DEG = 12.0

# --- measurement noise (1 sigma) -----------------------------------------------------------------
NOISE_FZ_FRACTION = 0.005
NOISE_FY_N = 25.0
NOISE_MZ_NM = 1.5
NOISE_SLIP_DEG = 0.02
NOISE_INCLINATION_DEG = 0.01
NOISE_SPEED_KMH = 0.05
NOISE_PRESSURE_KPA = 0.2
PRESSURE_WARMUP_KPA = 3.0  # slow rise over the run
SPIKE_SIZE_N = 800.0
SPIKES_PER_FILE = (3, 6)  # inclusive range

# --- aligning-moment placeholder -------------------------------------------------------------------
TRAIL_AT_ZERO_M = 0.03
TRAIL_ZERO_AT_DEG = 10.0

# --- unit factors (NIST SP 811; the same values as dossier.units) ---------------------------
LBF_N = 4.4482216152605
FT_M = 0.3048
PSI_KPA = LBF_N / 0.0254**2 / 1000.0
MPH_KMH = 1.609344


# =================================================================================================
# The specimens and their (invented) true coefficients, ISO 8855 signs (pKy1 < 0).
# =================================================================================================

@dataclass(frozen=True)
class DemoSpecimen:
    id: str
    coefficients: dict[str, float]  # rolling forward
    # Zero-slip offset split (conicity c, ply-steer p), fractions of Fz; None: pVy1 as given both ways.
    conicity_ply_steer: tuple[float, float] | None = None

    def coefficients_for(self, rolling_direction: str) -> dict[str, float]:
        """The true coefficients of a run rolling `rolling_direction` ("forward" or "reverse").

        Conicity keeps its sign in the rig axes when the rolling direction is reversed; ply-steer
        changes sign. So pVy1 = c + p forward and c - p in reverse (pHy1 = 0 for such a specimen).
        """
        if rolling_direction == "forward" or self.conicity_ply_steer is None:
            return dict(self.coefficients)
        c, p = self.conicity_ply_steer
        return {**self.coefficients, "pVy1": c - p}


PRD_A_CONICITY = 0.012  # c, fraction of Fz
PRD_A_PLY_STEER = 0.008  # p, fraction of Fz

SPECIMENS: dict[str, DemoSpecimen] = {s.id: s for s in (
    # Control: production construction from a single reserved batch, re-tested through the session.
    DemoSpecimen("CTL-1", {
        "pCy1": 1.36, "pDy1": 1.02, "pDy2": -0.078, "pEy1": -0.25, "pEy2": -0.40,
        "pKy1": -23.2, "pKy2": 1.88, "pHy1": 0.0015, "pHy2": 0.0, "pVy1": 0.016, "pVy2": 0.0,
    }),
    # Baseline: current production construction. Zero-slip offset = conicity + ply-steer.
    DemoSpecimen("PRD-A", {
        "pCy1": 1.38, "pDy1": 1.05, "pDy2": -0.075, "pEy1": -0.20, "pEy2": -0.40,
        "pKy1": -24.3, "pKy2": 1.90, "pHy1": 0.0, "pHy2": 0.0,
        "pVy1": PRD_A_CONICITY + PRD_A_PLY_STEER, "pVy2": 0.0,
    }, conicity_ply_steer=(PRD_A_CONICITY, PRD_A_PLY_STEER)),
    # Candidate B: steeper belt angle; about 10 % more cornering stiffness, similar friction.
    DemoSpecimen("CND-B", {
        "pCy1": 1.42, "pDy1": 1.04, "pDy2": -0.070, "pEy1": -0.10, "pEy2": -0.40,
        "pKy1": -27.2, "pKy2": 1.95, "pHy1": 0.0025, "pHy2": 0.0, "pVy1": 0.024, "pVy2": 0.0,
    }),
    # Candidate C: full-width nylon cap ply, higher-friction tread compound.
    DemoSpecimen("CND-C", {
        "pCy1": 1.34, "pDy1": 1.13, "pDy2": -0.085, "pEy1": -0.45, "pEy2": -0.40,
        "pKy1": -25.0, "pKy2": 1.85, "pHy1": 0.0012, "pHy2": 0.0, "pVy1": 0.012, "pVy2": 0.0,
    }),
)}


@dataclass(frozen=True)
class DemoRun:
    specimen: str
    lab: str  # "harlow_ridge" or "eisenau"
    file: str  # relative to this folder
    tested_at: dt.datetime
    loads_n: tuple[float, ...]
    rolling_direction: str = "forward"
    stream: int = 0  # random stream of the run (fixed per run, independent of the list order)


def _at(hour: int, minute: int) -> dt.datetime:
    return SESSION_START.replace(hour=hour, minute=minute)


# The session in time order. Streams 0-2 are those the three original runs always had.
RUNS: tuple[DemoRun, ...] = (
    DemoRun("CTL-1", "harlow_ridge", "rig/HR-4470_CTL-1_0800.csv", _at(8, 0), SINGLE_LOAD_N, stream=3),
    DemoRun("PRD-A", "harlow_ridge", "rig/HR-4471_PRD-A.csv", _at(8, 30), LOADS_N, stream=0),
    DemoRun("CND-B", "harlow_ridge", "rig/HR-4472_CND-B.csv", _at(9, 15), LOADS_N, stream=1),
    DemoRun("CTL-1", "harlow_ridge", "rig/HR-4470_CTL-1_1000.csv", _at(10, 0), SINGLE_LOAD_N, stream=4),
    DemoRun("CND-C", "eisenau", "rig/EZ-0412_CND-C.csv", _at(10, 30), LOADS_N, stream=2),
    DemoRun("PRD-A", "harlow_ridge", "rig/HR-4473_PRD-A_rev.csv", _at(11, 15), SINGLE_LOAD_N,
            rolling_direction="reverse", stream=5),
    DemoRun("CTL-1", "harlow_ridge", "rig/HR-4470_CTL-1_1200.csv", _at(12, 0), SINGLE_LOAD_N, stream=6),
)


def drift_factor(tested_at: dt.datetime) -> float:
    """g(t) = 1 - 0.04 (t - 08:00) / 4 h: the factor on Fy and Mz of a run started at `tested_at`."""
    return 1.0 - DRIFT_DROP * ((tested_at - SESSION_START) / DRIFT_SPAN)


# =================================================================================================
# Simulation (internal ISO 8855 axes: N, N·m, deg, kPa, km/h, s)
# =================================================================================================

def rig_program(loads_n: tuple[float, ...]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return (time s, true load N, commanded slip deg) on the fine simulation grid."""
    dt = 1.0 / SIM_RATE_HZ
    sweep_s = 4.0 * SWEEP_MAX_DEG / SWEEP_RATE_DEG_S
    segments_t, segments_fz, segments_slip = [], [], []
    t0 = 0.0

    def add(duration: float, fz_of_tau, slip_of_tau) -> None:
        nonlocal t0
        tau = np.arange(0.0, duration, dt)
        segments_t.append(t0 + tau)
        segments_fz.append(fz_of_tau(tau))
        segments_slip.append(slip_of_tau(tau))
        t0 += duration

    zero = np.zeros_like
    add(PREROLL_S, lambda tau: np.full_like(tau, PRELOAD_N), zero)
    previous = PRELOAD_N
    for load in loads_n:
        add(RAMP_S, lambda tau, a=previous, b=load: a + (b - a) * tau / RAMP_S, zero)

        def settled_load(tau, load=load, offset=0.0):
            s = tau + offset  # time since the end of the ramp
            return load * (1.0 + SETTLING_AMPLITUDE * np.exp(-s / SETTLING_DECAY_S)
                           * np.sin(2.0 * np.pi * SETTLING_FREQUENCY_HZ * s))

        add(HOLD_S, settled_load, zero)
        add(sweep_s, lambda tau, f=settled_load: f(tau, offset=HOLD_S), triangle_sweep)
        previous = load
    add(RAMP_S, lambda tau, a=previous: a + (PRELOAD_N - a) * tau / RAMP_S, zero)
    return np.concatenate(segments_t), np.concatenate(segments_fz), np.concatenate(segments_slip)


def triangle_sweep(tau: np.ndarray) -> np.ndarray:
    """Slip angle, deg, of the sweep 0 -> +max -> -max -> 0 at a constant rate."""
    phase = SWEEP_RATE_DEG_S * tau  # deg travelled
    m = SWEEP_MAX_DEG
    return np.where(phase <= m, phase, np.where(phase <= 3.0 * m, 2.0 * m - phase, phase - 4.0 * m))


def lagged(x: np.ndarray, time_constant_s: float, dt: float) -> np.ndarray:
    """First-order lag dy/dt = (x - y)/T, exact for x held over each (small) step."""
    a = np.exp(-dt / time_constant_s)
    y = np.empty_like(x)
    y[0] = x[0]
    for i in range(1, x.size):
        y[i] = a * y[i - 1] + (1.0 - a) * x[i]
    return y


def aligning_moment_placeholder(slip_deg: np.ndarray, fy_n: np.ndarray) -> np.ndarray:
    """Mz = -t(alpha) Fy with t = 0.03 m * cos(pi/2 * |alpha|/10 deg), 0 beyond 10 deg.

    A simple demo placeholder for a plausible aligning moment: it is NOT a Magic Formula Mz and
    is not meant to be fitted or compared with a truth.
    """
    frac = np.minimum(np.abs(slip_deg) / TRAIL_ZERO_AT_DEG, 1.0)
    trail = TRAIL_AT_ZERO_M * np.cos(0.5 * np.pi * frac)
    return -trail * fy_n


def simulate(run: DemoRun, rng: np.random.Generator) -> dict[str, np.ndarray]:
    """Return the recorded channels (internal axes and units) of one run."""
    coefficients = SPECIMENS[run.specimen].coefficients_for(run.rolling_direction)
    g = drift_factor(run.tested_at)
    t_fine, fz_fine, slip_fine = rig_program(run.loads_n)
    time_constant = RELAXATION_LENGTH_M / (SPEED_KMH / 3.6)
    slip_tire_fine = lagged(slip_fine, time_constant, 1.0 / SIM_RATE_HZ)

    step = int(round(SIM_RATE_HZ / SAMPLE_RATE_HZ))
    t = t_fine[::step]
    fz_true = fz_fine[::step]
    slip_cmd = slip_fine[::step]
    slip_tire = slip_tire_fine[::step]
    n = t.size

    fy_true = fy0(np.deg2rad(slip_tire), fz_true, coefficients, FZ0_N)
    mz_true = aligning_moment_placeholder(slip_tire, fy_true)
    # Force-level drift: one factor for the whole run, on the true Fy and Mz (not on noise or spikes).
    fy_recorded = g * fy_true
    mz_recorded = g * mz_true

    fy = fy_recorded + rng.normal(0.0, NOISE_FY_N, n)
    n_spikes = int(rng.integers(SPIKES_PER_FILE[0], SPIKES_PER_FILE[1] + 1))
    # Isolated spikes: at least 10 samples apart, away from the file's ends.
    candidates = np.arange(20, n - 20, 10)
    where = np.sort(rng.choice(candidates, size=n_spikes, replace=False)) + rng.integers(0, 5, n_spikes)
    fy[where] += SPIKE_SIZE_N * rng.choice([-1.0, 1.0], size=n_spikes)

    return {
        "time": t,
        "slip_angle": slip_cmd + rng.normal(0.0, NOISE_SLIP_DEG, n),
        "inclination": rng.normal(0.0, NOISE_INCLINATION_DEG, n),
        "fz": fz_true * (1.0 + rng.normal(0.0, NOISE_FZ_FRACTION, n)),
        "fy": fy,
        "mz": mz_recorded + rng.normal(0.0, NOISE_MZ_NM, n),
        "speed": SPEED_KMH + rng.normal(0.0, NOISE_SPEED_KMH, n),
        "pressure": PRESSURE_KPA + PRESSURE_WARMUP_KPA * t / t[-1] + rng.normal(0.0, NOISE_PRESSURE_KPA, n),
        "_spike_rows": where,
    }


# =================================================================================================
# Lab writers
# =================================================================================================

def _fmt(values: np.ndarray, decimals: int, decimal_mark: str = ".") -> list[str]:
    rounded = np.round(values, decimals) + 0.0  # + 0.0 turns -0.0 into 0.0
    out = [f"{v:.{decimals}f}" for v in rounded]
    return [s.replace(".", ",") for s in out] if decimal_mark == "," else out


def write_harlow_ridge(path: Path, ch: dict[str, np.ndarray]) -> None:
    """Harlow Ridge Proving Lab style: SAE J670 axes, US customary units, ',' separated, header on line 1."""
    flip = -1.0  # ISO 8855 -> SAE J670 for slip angle, Fy, Fz, Mz
    columns = [
        ("ElapsedSec", _fmt(ch["time"], 3)),
        ("SlipAng_deg", _fmt(flip * ch["slip_angle"], 3)),
        ("InclAng_deg", _fmt(ch["inclination"], 3)),
        ("Fz_lbf", _fmt(flip * ch["fz"] / LBF_N, 2)),
        ("Fy_lbf", _fmt(flip * ch["fy"] / LBF_N, 2)),
        ("Mz_lbfft", _fmt(flip * ch["mz"] / (LBF_N * FT_M), 2)),
        ("Speed_mph", _fmt(ch["speed"] / MPH_KMH, 2)),
        ("Infl_psi", _fmt(ch["pressure"] / PSI_KPA, 2)),
    ]
    lines = [",".join(name for name, _ in columns)]
    lines += [",".join(row) for row in zip(*(vals for _, vals in columns))]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8", newline="\n")


def write_eisenau(path: Path, ch: dict[str, np.ndarray], run: DemoRun) -> None:
    """Prüfzentrum Eisenau style: ISO 8855, metric (kN, N·m, bar, km/h), ';' separated, decimal commas,
    two preamble lines, header on line 3, units line after the header, CRLF line ends."""
    columns = [
        ("Zeit", "s", _fmt(ch["time"], 3, ",")),
        ("Schraeglauf", "°", _fmt(ch["slip_angle"], 3, ",")),
        ("Sturz", "°", _fmt(ch["inclination"], 3, ",")),
        ("Fz", "kN", _fmt(ch["fz"] / 1000.0, 4, ",")),
        ("Fy", "kN", _fmt(ch["fy"] / 1000.0, 4, ",")),
        ("Mz", "N·m", _fmt(ch["mz"], 2, ",")),
        ("Geschw", "km/h", _fmt(ch["speed"], 2, ",")),
        ("Fuelldruck", "bar", _fmt(ch["pressure"] / 100.0, 4, ",")),
    ]
    lines = [
        "Prüfzentrum Eisenau;Kraft- und Momentenmessung;Auftrag EZ-26-0412;Flachbahn 2",
        f"Prüfling {run.specimen};225/45 R17 94W;Fülldruck 2,4 bar;Sturz 0°;Geschw. 30 km/h;"
        f"Messbeginn {run.tested_at:%Y-%m-%d %H:%M}",
        ";".join(name for name, _, _ in columns),
        ";".join(unit for _, unit, _ in columns),
    ]
    lines += [";".join(row) for row in zip(*(vals for _, _, vals in columns))]
    path.write_text("\r\n".join(lines) + "\r\n", encoding="utf-8", newline="")


# =================================================================================================
# Truth
# =================================================================================================

def true_cornering_stiffness_n_per_deg(coeffs: dict[str, float], fz_n: float) -> float:
    """-dFy/dalpha at alpha = 0 of the true model, central difference, N/deg."""
    h = 1e-6  # rad
    fy_plus = fy0(h, fz_n, coeffs, FZ0_N)
    fy_minus = fy0(-h, fz_n, coeffs, FZ0_N)
    return float(-(fy_plus - fy_minus) / (2.0 * h) * np.pi / 180.0)


def true_peak(coeffs: dict[str, float], fz_n: float) -> tuple[float, float]:
    """Return (max |Fy|/Fz, slip angle deg where it occurs) for |alpha| <= 12 deg."""
    alpha_deg = np.linspace(-PEAK_SEARCH_DEG, PEAK_SEARCH_DEG, 24001)
    fy = fy0(np.deg2rad(alpha_deg), fz_n, coeffs, FZ0_N)
    i = int(np.argmax(np.abs(fy)))
    return float(abs(fy[i]) / fz_n), float(alpha_deg[i])


def true_peak_both_directions(coeffs: dict[str, float], fz_n: float) -> float:
    """Return the mean of max |Fy|/Fz over 0..+12 deg and over -12..0 deg (offsets cancel)."""
    alpha_deg = np.linspace(0.0, PEAK_SEARCH_DEG, 12001)
    pos = np.max(np.abs(fy0(np.deg2rad(alpha_deg), fz_n, coeffs, FZ0_N)))
    neg = np.max(np.abs(fy0(np.deg2rad(-alpha_deg), fz_n, coeffs, FZ0_N)))
    return float(0.5 * (pos + neg) / fz_n)


def _load_table(coeffs: dict[str, float], loads_n: tuple[float, ...]) -> dict:
    """True cornering stiffness and peak friction of `coeffs` at each of `loads_n`."""
    peaks = [true_peak(coeffs, fz) for fz in loads_n]
    return {
        "loads_n": list(loads_n),
        "cornering_stiffness_n_per_deg": [round(true_cornering_stiffness_n_per_deg(coeffs, fz), 3)
                                          for fz in loads_n],
        "peak_mu_within_12deg": [round(mu, 5) for mu, _ in peaks],
        "slip_at_peak_deg": [round(a, 3) for _, a in peaks],
        "peak_mu_mean_of_both_directions": [round(true_peak_both_directions(coeffs, fz), 5)
                                            for fz in loads_n],
    }


def _forward_loads(specimen_id: str) -> tuple[float, ...]:
    loads = {fz for run in RUNS if run.specimen == specimen_id and run.rolling_direction == "forward"
             for fz in run.loads_n}
    return tuple(sorted(loads))


def zero_slip_truth(spec: DemoSpecimen) -> dict:
    """PRD-A's true conicity and ply-steer, undrifted, at the nominal load."""
    c, p = spec.conicity_ply_steer
    fz = FZ0_N
    forward = float(fy0(0.0, fz, spec.coefficients_for("forward"), FZ0_N))
    reverse = float(fy0(0.0, fz, spec.coefficients_for("reverse"), FZ0_N))
    factors = {run.rolling_direction: drift_factor(run.tested_at) for run in RUNS
               if run.specimen == spec.id and fz in run.loads_n}
    fwd_drifted, rev_drifted = factors["forward"] * forward, factors["reverse"] * reverse
    return {
        "model": "pHy1 = 0; pVy1 = c + p rolling forward, c - p rolling in reverse (ISO 8855 rig axes)",
        "conicity_fraction_of_fz": c,
        "ply_steer_fraction_of_fz": p,
        "load_n": fz,
        "residual_fy_at_zero_slip_forward_n": round(forward, 3),
        "residual_fy_at_zero_slip_reverse_n": round(reverse, 3),
        "conicity_force_n": round(0.5 * (forward + reverse), 3),
        "ply_steer_force_n": round(0.5 * (forward - reverse), 3),
        "conicity_formula": "conicity = (residual Fy at zero slip, forward + residual Fy at zero slip, reverse) / 2",
        "ply_steer_formula": "ply-steer = (residual Fy at zero slip, forward - residual Fy at zero slip, reverse) / 2",
        "as_recorded_without_drift_correction": {
            "note": "what the drifted runs show if the drift is not corrected (factors from session.runs)",
            "residual_fy_at_zero_slip_forward_n": round(fwd_drifted, 3),
            "residual_fy_at_zero_slip_reverse_n": round(rev_drifted, 3),
            "conicity_force_n": round(0.5 * (fwd_drifted + rev_drifted), 3),
            "ply_steer_force_n": round(0.5 * (fwd_drifted - rev_drifted), 3),
        },
    }


def truth_document(spike_rows: dict[str, list[int]]) -> dict:
    specimens = {}
    for spec in SPECIMENS.values():
        entry = {
            "rig_files": [run.file for run in RUNS if run.specimen == spec.id],
            "fz0_n": FZ0_N,
            "coefficients": spec.coefficients_for("forward"),
            **_load_table(spec.coefficients_for("forward"), _forward_loads(spec.id)),
        }
        reverse_runs = [run for run in RUNS if run.specimen == spec.id and run.rolling_direction == "reverse"]
        if reverse_runs:
            loads = tuple(sorted({fz for run in reverse_runs for fz in run.loads_n}))
            entry["reverse_rolling"] = {
                "coefficients": spec.coefficients_for("reverse"),
                **_load_table(spec.coefficients_for("reverse"), loads),
            }
        if spec.conicity_ply_steer is not None:
            entry["conicity_and_ply_steer"] = zero_slip_truth(spec)
        specimens[spec.id] = entry
    return {
        "note": "Fictional demo data. True Magic Formula Fy0 coefficients (Pacejka 2006, 4.3.2, "
                "lambda = 1) in ISO 8855 axes, alpha in rad. All values here are UNdrifted (the rig "
                "files carry the drift, see session). Cornering stiffness = -dFy/dalpha at "
                "alpha = 0 by central difference, per degree; peak_mu = max |Fy|/Fz for |alpha| <= 12 deg; "
                "peak_mu_mean_of_both_directions averages the two slip directions' peaks (as dossier reports). "
                "Per specimen, loads_n and the lists after it are for the forward-rolling runs. "
                "spike_rows_0_based are data-row indices (0 = first data row) carrying an added Fy spike.",
        "axis_convention": "ISO 8855",
        "generator": {
            "seed": SEED,
            "sample_rate_hz": SAMPLE_RATE_HZ,
            "relaxation_length_m": RELAXATION_LENGTH_M,
            "speed_kmh": SPEED_KMH,
            "pressure_kpa": PRESSURE_KPA,
            "sweep": f"0 -> +{SWEEP_MAX_DEG:g} -> -{SWEEP_MAX_DEG:g} -> 0 deg (ISO 8855) at {SWEEP_RATE_DEG_S:g} deg/s",
            "noise_fy_n": NOISE_FY_N,
            "noise_mz_nm": NOISE_MZ_NM,
            "noise_fz_fraction": NOISE_FZ_FRACTION,
            "noise_slip_deg": NOISE_SLIP_DEG,
            "spike_size_n": SPIKE_SIZE_N,
            "mz_model": "placeholder: Mz = -t(alpha) Fy, t = 0.03 m cos(pi/2 |alpha|/10 deg), 0 beyond 10 deg",
        },
        "session": {
            "date": SESSION_START.date().isoformat(),
            "drift": {
                "law": f"g(t) = 1 - {DRIFT_DROP:g} * (t - {SESSION_START:%H:%M}) / "
                       f"{DRIFT_SPAN.total_seconds() / 3600:g} h, t = the run's tested_at",
                "applies_to": "Fy and Mz of every run (true values times g, before noise and spikes); "
                              "one factor per run, constant within the run",
                "reference_time": SESSION_START.isoformat(),
                "drop_over_span": DRIFT_DROP,
                "span_h": DRIFT_SPAN.total_seconds() / 3600,
            },
            "runs": [
                {
                    "file": run.file,
                    "specimen": run.specimen,
                    "tested_at": run.tested_at.isoformat(),
                    "rolling_direction": run.rolling_direction,
                    "loads_n": list(run.loads_n),
                    "drift_factor": round(drift_factor(run.tested_at), 6),
                    "spike_rows_0_based": spike_rows[run.file],
                }
                for run in RUNS
            ],
        },
        "specimens": specimens,
    }


def main() -> None:
    RIG_DIR.mkdir(parents=True, exist_ok=True)
    TRUTH_FILE.parent.mkdir(parents=True, exist_ok=True)
    spike_rows = {}
    for run in RUNS:
        rng = np.random.default_rng([SEED, run.stream])
        ch = simulate(run, rng)
        spike_rows[run.file] = [int(r) for r in ch.pop("_spike_rows")]
        path = HERE / run.file
        if run.lab == "harlow_ridge":
            write_harlow_ridge(path, ch)
        else:
            write_eisenau(path, ch, run)
        print(f"wrote {path.relative_to(HERE)} ({path.stat().st_size / 1024:.0f} KiB, {ch['time'].size} samples, "
              f"drift factor {drift_factor(run.tested_at):.4f})")
    TRUTH_FILE.write_text(json.dumps(truth_document(spike_rows), indent=2) + "\n", encoding="utf-8")
    print(f"wrote {TRUTH_FILE.relative_to(HERE)}")


if __name__ == "__main__":
    main()
