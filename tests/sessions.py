"""Small seeded rig-test sessions with known truth, for testing the 95 % intervals.

Everything here is INVENTED test material: the labs, the specimens, the coefficient sets, the
session times, the drift, the calibration errors and the noise levels. Nothing is a measured or
published value; the numbers only have to be plausible for a passenger-car tire on a flat-belt
rig (common practice), so that the conditioning and the fits see data like a real session's.

``session(seed)`` returns ``(files, truth)``:

* ``files``: relative path -> bytes of a complete project (``dossier.toml`` and the rig CSV
  files), for :func:`dossier.project.load.project_from_files`;
* ``truth``: specimen id -> {metric name: true value at the nominal load (4000 N), zero camber
  and the session's nominal pressure}, of the tire as it was at the first control repeat
  (undrifted, with no calibration error, no repeat scatter, no lag, no noise).

``session(seed, second_pressure=True)`` adds, for each non-control specimen, a slip-angle run at
the same loads at 1.15 times the session's nominal pressure; ``slope_truth(seed)`` gives the true
slopes against pressure of such a session (see "Truth").

The truth is computed here, numerically from the true Magic Formula (dossier.model.magic_formula:
fy0, mz0, fx0) by central differences and a fine grid refined by scipy.optimize, and does not use
the package's metric code. The slopes against pressure are the true tire's secant between the
lowest and highest pressure its specimen was tested at, at each tested load and zero camber, per
10 kPa and in % per bar of the value at a tested pressure (the definition of the package's
``*_per_10kpa`` and ``*_pct_per_bar`` metrics, dossier.project.catalogue), from the same
numerical truth at each pressure. ``session_details(seed)`` also returns what was simulated (drift slopes,
calibration gains, run factors, times, coefficients), for reading a failure.

A session, one day on two labs' rigs (every choice varies with the seed):

* "Lab A" (SAE J670 axes, N and N·m, ',' separated): the control "CTL" re-tested four times,
  about two hours apart, over about 6 h, at 4000 N (slip-angle sweeps, Mz recorded); the baseline
  "S1": one slip-angle run at 2000, 4000 and 6000 N (Mz recorded) and one slip-ratio run at the
  same loads, each at a random slot between the control repeats;
* in about half of the sessions, "Lab B" (ISO 8855, kN and N·m, ';' separated, decimal commas, a
  preamble line and a units line) with the candidate "S2" (the same two runs); no control there;
* with ``second_pressure``: one more slip-angle run of S1 (Lab A) and of S2 (Lab B) at the same
  loads at 1.15 times the nominal pressure, each at a free slot of its lab (drawn from a random
  stream of its own, so that every other run of the session is the same with or without it).

The true tires carry the inflation-pressure terms of Besselink, Schmeitz & Pacejka (2010) as
dossier.model.magic_formula places them (ppy1, ppy2 on the cornering stiffness, ppy3 on the
lateral friction, ppz1 on the peak trail), relative to the session's nominal pressure: at that
pressure they have no effect, so a session without the second pressure is unchanged by them.

Simulated effects:

1. force-level drift: at Lab A every force and moment of a run (not the normal load) is multiplied
   by g(t) = 1 + slope·(t − t_first_control), t the run's ``tested_at``, |slope| up to 1.5 %/h; at
   Lab B by 1 + slope_B·(t − t_first_control) with |g − 1| at most half of the lab's declared
   drift allowance over the day (a rig with little drift, inside its allowance);
2. repeat scatter: each run's forces and moments times 1 + N(0, 0.4 %);
3. calibration: per lab, a gain error on the forces (Fy, Fx), on the moment (Mz) and on the
   normal-load channel, each uniform within ± the accuracy the manifest declares for the lab, and
   a slip-angle zero error uniform within ± its declared angle accuracy. The rig holds the load
   set-point on its own load cell, so the tire carries set-point / (1 + load gain error);
4. first-order slip lag (relaxation length / speed, about 0.1 s for the slip angle, 0.03 s for
   the slip ratio), exact for the piecewise-linear sweeps: up/down hysteresis;
5. gaussian noise on every recorded channel (not the time);
6. a few isolated spikes on the main force (Fy, or Fx in a slip-ratio run).

Run ``python tests/sessions.py`` for a self-check: three sessions loaded, conditioned and fitted,
with the number of operating points per specimen and the seconds taken (``--no-labs``: without
the ``[labs.*]`` tables; ``--no-load-out``: with ``[fit] leave_one_load_out = false``;
``--second-pressure``: with the second pressure).
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import minimize_scalar
from scipy.signal import lfilter, lfilter_zi
from test_fit_checks import TRUE_FX, TRUE_FY

from dossier.model import magic_formula as mf

FZ0_N = 4000.0  # nominal load of the coefficients and of the truth
LOADS_N = (2000.0, 4000.0, 6000.0)
PRELOAD_N = 250.0  # contact load before the first ramp and after the last sweep
SIZE = "225/45 R17 94W"  # load index 94: 670 kg, 6570 N, above every set-point
# R0 of 225/45 R17 from the designation: (17 · 25.4 + 2 · 225 · 0.45) / 2 mm (ISO 4000-1 geometry,
# common practice); the package derives the same from the size, and the trail does not depend on it.
R0_M = (17 * 25.4 + 2 * 225 * 0.45) / 2000.0
SPEED_KMH = 30.0
PRESSURES_KPA = (230.0, 240.0, 250.0)  # the session's nominal pressure is one of these
SECOND_PRESSURE_FACTOR = 1.15  # the second pressure of a session that has one, times the nominal

# Rig program (invented, in the range of common practice: domain primer §2).
LATERAL_RATE_HZ = 25.0
SWEEP_MAX_DEG = 12.0
SWEEP_RATE_DEG_S = 4.0
# Slip-ratio runs are logged at 100 Hz: at 50 Hz the few rising samples left between the run-in
# and ±0.02 rarely fill a 0.01 bin, and the conditioning then finds no hysteresis to undo.
LONGITUDINAL_RATE_HZ = 100.0
SLIP_RATIO_MAX = 0.25
SLIP_RATIO_RATE_PER_S = 0.1
RAMP_S = 1.0
HOLD_S = 1.6  # the package drops the first settling_s = 1.0 s of each stay at a set-point
SETTLING_AMPLITUDE = 0.04  # decaying load oscillation after a ramp, fraction of the set-point
SETTLING_FREQUENCY_HZ = 3.0
SETTLING_DECAY_S = 0.3
RELAXATION_LENGTH_M = (0.7, 0.9)  # lateral, uniform range: lag 0.084-0.108 s at 30 km/h
LONGITUDINAL_LAG_S = 0.03
RUN_IN_RATIO = 0.01  # [conditioning] sweep_run_in_ratio: 0.01 of travel is 3.3 lag time constants

# Effects (invented magnitudes).
DRIFT_MAX_PCT_PER_H = 1.5
REPEAT_SCATTER = 0.004
NOISE_FY_N = 20.0
NOISE_FX_N = 25.0
NOISE_MZ_NM = 1.0
NOISE_FZ_FRACTION = 0.004
NOISE_SLIP_DEG = 0.02
NOISE_SLIP_RATIO = 0.0002
NOISE_INCLINATION_DEG = 0.01
NOISE_SPEED_KMH = 0.05
NOISE_PRESSURE_KPA = 0.3
SPIKES_PER_FILE = (2, 4)  # inclusive range
SPIKE_SIZE_N = (600.0, 1000.0)
PERTURBATION = 0.04  # each true coefficient times 1 + U(−4 %, +4 %), per specimen and seed

SESSION_DAY = dt.date(2026, 3, 9)  # a fictional day; the hour varies with the seed
CONTROL_HOURS = (0.0, 2.0, 4.0, 6.0)  # after the first control repeat, each ± up to 0.1 h
SLOTS_H = (0.5, 1.0, 1.5, 2.5, 3.0, 3.5, 4.5, 5.0, 5.5)  # where the other runs may go

# The labs' declared accuracies (invented), as the manifest's [labs."NAME"] tables give them.
LABS: dict[str, dict[str, float]] = {
    "Lab A": {
        "force_accuracy_pct": 0.3,
        "moment_accuracy_pct": 0.5,
        "load_accuracy_pct": 0.3,
        "angle_accuracy_deg": 0.05,
        "drift_allowance_pct": 1.0,
    },
    "Lab B": {
        "force_accuracy_pct": 0.5,
        "moment_accuracy_pct": 0.8,
        "load_accuracy_pct": 0.4,
        "angle_accuracy_deg": 0.05,
        "drift_allowance_pct": 1.0,
    },
}

# True tires (invented, ISO 8855 signs: pKy1 < 0). Fx0: the invented set of
# tests/test_fit_checks.py (TRUE_FX). Fy0: its TRUE_FY with pCy1 1.35 -> 1.45 and pEy1 -0.4 -> -1.0,
# so that the lateral peak lies well inside the ±12° sweep (about 6°, 7° and 8° at 2, 4 and 6 kN,
# falling 3-7 % by 12°; the original set peaks near 10° at 6 kN and is flat to within 0.4 %, which
# the noise hides). Mz0: an invented set giving a zero-slip trail of
# about 28 mm at 4 kN (a car tire's is tens of mm: domain primer §5). Only coefficients the fits
# can identify from three loads at one camber and one pressure are used, so the truth lies inside
# the fitted model family.
BASE_FY = {**TRUE_FY, "pCy1": 1.45, "pEy1": -1.0}  # the fit checks' set, peaking well inside ±12°
BASE_MZ = {
    "qBz1": 9.0,
    "qBz2": -1.0,
    "qCz1": 1.18,
    "qDz1": 0.090,
    "qDz2": -0.020,
    "qDz6": 0.002,
    "qEz1": -1.6,
    "qEz2": 0.25,
    "qHz1": 0.0015,
    "qBz10": 0.2,
}
BASE_FX = dict(TRUE_FX)  # the same invented longitudinal set as the fit checks
# Inflation-pressure terms (invented magnitudes, BSP2010 placement as in dossier.model.magic_formula;
# dpi relative to the session's nominal pressure). At +15 % pressure: cornering stiffness about −2 %
# at 2 kN, +1 % at 4 kN and +4 % at 6 kN (a higher pressure moves the load of maximum stiffness up:
# ppy2 > 0, while ppy1 > 0 keeps the stiffness from falling at every load); lateral friction about
# −4 % (ppy3) and the peak trail about −6 % (ppz1: a shorter contact patch), common practice in sign.
# Only the linear terms: two pressures identify no quadratic one (ppy4 stays 0), so the truth lies
# inside the fitted model family.
BASE_FY_PRESSURE = {"ppy1": 0.4, "ppy2": 0.6, "ppy3": -0.25}
BASE_MZ_PRESSURE = {"ppz1": -0.4}
PRESSURE_STREAM = 9001  # the second pressure's own random stream: (seed, this)

METRIC_NAMES = (
    "cornering_stiffness",
    "cornering_coefficient",
    "peak_lateral_friction",
    "pneumatic_trail",
    "longitudinal_slip_stiffness",
    "peak_braking_friction",
)
SLOPED = ("cornering_stiffness", "peak_lateral_friction", "pneumatic_trail")  # against pressure
SLOPE_NAMES = tuple(f"{name}{suffix}" for name in SLOPED for suffix in ("_per_10kpa", "_pct_per_bar"))


# =================================================================================================
# The session's plan
# =================================================================================================


@dataclass(frozen=True)
class Tire:
    fy: dict[str, float]
    mz: dict[str, float]
    fx: dict[str, float]


@dataclass(frozen=True)
class Lab:
    name: str
    declared: dict[str, float]
    force_gain: float  # recorded = (1 + error) · true
    moment_gain: float
    load_gain: float
    slip_zero_deg: float  # recorded slip angle = commanded + this
    drift_per_h: float  # fraction per hour, from the first control repeat


@dataclass(frozen=True)
class Run:
    specimen: str
    lab: str
    file: str
    sweep: str  # "slip_angle" or "slip_ratio"
    loads_n: tuple[float, ...]
    tested_at: dt.datetime
    stream: int  # the run's own random stream
    drift_factor: float = 1.0  # g(t) of its lab at its time
    repeat_factor: float = 1.0  # 1 + N(0, 0.4 %)
    pressure_factor: float = 1.0  # the run's pressure / the session's nominal pressure


@dataclass(frozen=True)
class Plan:
    seed: int
    pressure_kpa: float
    t_ref: dt.datetime  # the first control repeat
    relaxation_length_m: float
    labs: dict[str, Lab]
    tires: dict[str, Tire]
    runs: tuple[Run, ...] = field(default=())

    def run_pressure_kpa(self, run: Run) -> float:
        """The inflation pressure `run` was tested at, kPa (to 0.1 kPa, as the manifest states it)."""
        return round(self.pressure_kpa * run.pressure_factor, 1)

    def dpi(self, run: Run) -> float:
        """(p − p0)/p0 of `run`, p0 the session's nominal pressure (the true tire's reference)."""
        return (self.run_pressure_kpa(run) - self.pressure_kpa) / self.pressure_kpa


def _perturbed(base: dict[str, float], channel: str, rng: np.random.Generator) -> dict[str, float]:
    """`base` with every coefficient times 1 + U(−PERTURBATION, +PERTURBATION), kept inside its bounds."""
    out = {}
    for name, value in base.items():
        info = mf.INFO[name]
        assert info in mf.CATALOGUE[channel], name
        v = value * (1.0 + rng.uniform(-PERTURBATION, PERTURBATION))
        out[name] = float(np.clip(v, info.lower, info.upper))
    return out


def _lab(name: str, rng: np.random.Generator, drift_per_h: float) -> Lab:
    d = LABS[name]
    return Lab(
        name,
        d,
        force_gain=1.0 + 0.01 * rng.uniform(-1.0, 1.0) * d["force_accuracy_pct"],
        moment_gain=1.0 + 0.01 * rng.uniform(-1.0, 1.0) * d["moment_accuracy_pct"],
        load_gain=1.0 + 0.01 * rng.uniform(-1.0, 1.0) * d["load_accuracy_pct"],
        slip_zero_deg=rng.uniform(-1.0, 1.0) * d["angle_accuracy_deg"],
        drift_per_h=drift_per_h,
    )


def plan(seed: int, second_pressure: bool = False) -> Plan:
    """The session of `seed`: times, labs' errors, true tires, runs and their factors (with
    `second_pressure`, a slip-angle run of each non-control specimen at the second pressure)."""
    rng = np.random.default_rng(seed)
    pressure = float(rng.choice(PRESSURES_KPA))
    start = dt.datetime.combine(SESSION_DAY, dt.time(7, 0)) + dt.timedelta(minutes=int(rng.integers(0, 121)))
    with_b = bool(rng.random() < 0.5)
    lab_a = _lab("Lab A", rng, 0.01 * rng.uniform(-DRIFT_MAX_PCT_PER_H, DRIFT_MAX_PCT_PER_H))
    span_h = CONTROL_HOURS[-1]
    half_allowance = 0.5 * 0.01 * LABS["Lab B"]["drift_allowance_pct"]
    lab_b = _lab("Lab B", rng, rng.uniform(-1.0, 1.0) * half_allowance / span_h)
    tires = {
        sid: Tire(_perturbed(BASE_FY, "fy", rng), _perturbed(BASE_MZ, "mz", rng), _perturbed(BASE_FX, "fx", rng))
        for sid in ("CTL", "S1", "S2")
    }
    relaxation = float(rng.uniform(*RELAXATION_LENGTH_M))

    def at(hours: float) -> dt.datetime:
        return start + dt.timedelta(seconds=round(hours * 3600.0))

    runs = []
    for i, h in enumerate(CONTROL_HOURS):
        h = h if i == 0 else h + rng.uniform(-0.1, 0.1)
        runs.append(Run("CTL", "Lab A", f"rig/A_CTL_{i + 1}.csv", "slip_angle", (FZ0_N,), at(h), 0))
    s1_lat, s1_long = rng.choice(SLOTS_H, size=2, replace=False)
    runs.append(Run("S1", "Lab A", "rig/A_S1_lateral.csv", "slip_angle", LOADS_N, at(s1_lat), 0))
    runs.append(Run("S1", "Lab A", "rig/A_S1_longitudinal.csv", "slip_ratio", LOADS_N, at(s1_long), 0))
    if with_b:
        s2_lat, s2_long = rng.choice(SLOTS_H, size=2, replace=False)
        runs.append(Run("S2", "Lab B", "rig/B_S2_lateral.csv", "slip_angle", LOADS_N, at(s2_lat), 0))
        runs.append(Run("S2", "Lab B", "rig/B_S2_longitudinal.csv", "slip_ratio", LOADS_N, at(s2_long), 0))
    labs = {"Lab A": lab_a, "Lab B": lab_b} if with_b else {"Lab A": lab_a}
    t_ref = runs[0].tested_at
    timed = []
    for k, run in enumerate(sorted(runs, key=lambda r: r.tested_at)):
        hours = (run.tested_at - t_ref).total_seconds() / 3600.0
        g = 1.0 + labs[run.lab].drift_per_h * hours
        timed.append(
            Run(
                run.specimen,
                run.lab,
                run.file,
                run.sweep,
                run.loads_n,
                run.tested_at,
                k + 1,
                g,
                1.0 + REPEAT_SCATTER * rng.standard_normal(),
            )
        )
    if not with_b:
        tires.pop("S2")
    # The pressure terms and the second-pressure runs come from a stream of their own: the draws
    # above, and so every run at the nominal pressure, are the same with or without them.
    prng = np.random.default_rng([seed, PRESSURE_STREAM])
    tires = {
        sid: Tire(
            {**t.fy, **_perturbed(BASE_FY_PRESSURE, "fy", prng)},
            {**t.mz, **_perturbed(BASE_MZ_PRESSURE, "mz", prng)},
            t.fx,
        )
        for sid, t in tires.items()
    }
    if second_pressure:
        for sid, lab, prefix in (("S1", "Lab A", "A"), ("S2", "Lab B", "B")):
            if sid not in tires:
                continue
            taken = {round((r.tested_at - start).total_seconds() / 3600.0, 6) for r in timed if r.specimen == sid}
            free = [h for h in SLOTS_H if round(h, 6) not in taken]
            h = float(prng.choice(free))
            hours = (at(h) - t_ref).total_seconds() / 3600.0
            timed.append(
                Run(
                    sid,
                    lab,
                    f"rig/{prefix}_{sid}_lateral_p2.csv",
                    "slip_angle",
                    LOADS_N,
                    at(h),
                    len(timed) + 1,
                    1.0 + labs[lab].drift_per_h * hours,
                    1.0 + REPEAT_SCATTER * prng.standard_normal(),
                    SECOND_PRESSURE_FACTOR,
                )
            )
        timed.sort(key=lambda r: (r.tested_at, r.stream))
    return Plan(seed, pressure, t_ref, relaxation, labs, tires, tuple(timed))


# =================================================================================================
# Simulation (internal ISO 8855 axes: N, N·m, deg, slip ratio as a fraction, kPa, km/h, s)
# =================================================================================================


def _program(loads_n, sweep: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return (time s, load set-point N as the rig's load cell follows it, commanded slip).

    Per load: a ramp from the previous load, a hold with a decaying load oscillation, then a
    continuous triangular sweep 0 -> +max -> -max -> 0; a ramp down to the preload at the end.
    Every segment is a whole number of samples, so the sweep's corners fall on samples.
    """
    if sweep == "slip_angle":
        rate_hz, peak, speed = LATERAL_RATE_HZ, SWEEP_MAX_DEG, SWEEP_RATE_DEG_S
    else:
        rate_hz, peak, speed = LONGITUDINAL_RATE_HZ, SLIP_RATIO_MAX, SLIP_RATIO_RATE_PER_S
    n_ramp, n_hold = round(RAMP_S * rate_hz), round(HOLD_S * rate_hz)
    n_quarter = round(peak / speed * rate_hz)
    fz, slip = [np.full(round(0.5 * rate_hz), PRELOAD_N)], [np.zeros(round(0.5 * rate_hz))]
    previous = PRELOAD_N
    for load in loads_n:
        fz.append(np.linspace(previous, load, n_ramp, endpoint=False))
        s = np.arange(n_hold + 4 * n_quarter) / rate_hz
        wobble = np.exp(-s / SETTLING_DECAY_S) * np.sin(2.0 * np.pi * SETTLING_FREQUENCY_HZ * s)
        fz.append(load * (1.0 + SETTLING_AMPLITUDE * wobble))
        q = np.arange(4 * n_quarter) / n_quarter  # quarters of the sweep travelled
        tri = peak * np.where(q <= 1.0, q, np.where(q <= 3.0, 2.0 - q, q - 4.0))
        slip += [np.zeros(n_ramp + n_hold), tri]
        previous = load
    fz.append(np.linspace(previous, PRELOAD_N, n_ramp))
    slip.append(np.zeros(n_ramp))
    fz_all, slip_all = np.concatenate(fz), np.concatenate(slip)
    return np.arange(fz_all.size) / rate_hz, fz_all, slip_all


def lagged(x: np.ndarray, tau_s: float, dt_s: float) -> np.ndarray:
    """First-order lag dy/dt = (x − y)/τ of a piecewise-linear x sampled every dt_s, exact.

    Over a step where x rises linearly from x0 to x1, y1 = a·y0 + (x1 − a·x0) − k·(x1 − x0) with
    a = exp(−dt/τ) and k = (τ/dt)(1 − a): the ramp-invariant discretisation.
    """
    a = np.exp(-dt_s / tau_s)
    k = tau_s / dt_s * (1.0 - a)
    b, den = [1.0 - k, k - a], [1.0, -a]
    y, _ = lfilter(b, den, x, zi=lfilter_zi(b, den) * x[0])  # starting at rest at x[0]
    return y


def _simulate(p: Plan, run: Run) -> dict[str, np.ndarray]:
    """The recorded channels of one run, internal axes and units."""
    rng = np.random.default_rng([p.seed, run.stream])
    lab = p.labs[run.lab]
    tire = p.tires[run.specimen]
    lateral = run.sweep == "slip_angle"
    t, fz_cell, slip_cmd = _program(run.loads_n, run.sweep)
    n = t.size
    fz_true = fz_cell / lab.load_gain  # the rig holds its own load cell on the program
    level = lab.force_gain * run.drift_factor * run.repeat_factor
    m_level = lab.moment_gain * run.drift_factor * run.repeat_factor
    dt_s = t[1] - t[0]
    dpi = p.dpi(run)
    ch = {"time": t}
    if lateral:
        tau = p.relaxation_length_m / (SPEED_KMH / 3.6)
        alpha = lagged(slip_cmd, tau, dt_s) * mf.DEG
        fy = mf.fy0(alpha, fz_true, tire.fy, FZ0_N, dpi=dpi)
        mz = mf.mz0(alpha, fz_true, tire.mz, tire.fy, FZ0_N, R0_M, dpi=dpi)
        ch["slip_angle"] = slip_cmd + lab.slip_zero_deg + rng.normal(0.0, NOISE_SLIP_DEG, n)
        ch["fy"] = level * fy + rng.normal(0.0, NOISE_FY_N, n)
        ch["mz"] = m_level * mz + rng.normal(0.0, NOISE_MZ_NM, n)
        main = "fy"
    else:
        kappa = lagged(slip_cmd, LONGITUDINAL_LAG_S, dt_s)
        ch["slip_ratio"] = slip_cmd + rng.normal(0.0, NOISE_SLIP_RATIO, n)
        ch["fx"] = level * mf.fx0(kappa, fz_true, tire.fx, FZ0_N, dpi=dpi) + rng.normal(0.0, NOISE_FX_N, n)
        main = "fx"
    n_spikes = int(rng.integers(SPIKES_PER_FILE[0], SPIKES_PER_FILE[1] + 1))
    rows = np.sort(rng.choice(np.arange(20, n - 20, 12), size=n_spikes, replace=False))
    ch[main][rows] += rng.uniform(*SPIKE_SIZE_N, n_spikes) * rng.choice([-1.0, 1.0], n_spikes)
    ch["inclination"] = rng.normal(0.0, NOISE_INCLINATION_DEG, n)
    ch["fz"] = fz_cell * (1.0 + rng.normal(0.0, NOISE_FZ_FRACTION, n))
    ch["speed"] = SPEED_KMH + rng.normal(0.0, NOISE_SPEED_KMH, n)
    ch["pressure"] = p.run_pressure_kpa(run) + rng.normal(0.0, NOISE_PRESSURE_KPA, n)
    return ch


# =================================================================================================
# Files: each lab writes its own style
# =================================================================================================


def _table(columns: list[tuple[str, np.ndarray]], delimiter: str, decimal: str) -> list[str]:
    cells = [[f"{v:.6g}" for v in values + 0.0] for _, values in columns]  # + 0.0: no "-0"
    rows = [delimiter.join(row) for row in zip(*cells)]
    return [r.replace(".", ",") for r in rows] if decimal == "," else rows


# channel -> (header, unit in the manifest, factor from internal units to the file's)
LAB_A_COLUMNS = {
    "time": ("Time_s", "s", 1.0),
    "slip_angle": ("SA_deg", "deg", 1.0),
    "slip_ratio": ("SR_pct", "%", 100.0),
    "inclination": ("IA_deg", "deg", 1.0),
    "fz": ("FZ_N", "N", 1.0),
    "fy": ("FY_N", "N", 1.0),
    "fx": ("FX_N", "N", 1.0),
    "mz": ("MZ_Nm", "N·m", 1.0),
    "speed": ("V_kmh", "km/h", 1.0),
    "pressure": ("P_kPa", "kPa", 1.0),
}
LAB_B_COLUMNS = {
    "time": ("t", "s", 1.0),
    "slip_angle": ("alpha", "deg", 1.0),
    "slip_ratio": ("kappa", "1", 1.0),
    "inclination": ("gamma", "deg", 1.0),
    "fz": ("Fz", "kN", 1e-3),
    "fy": ("Fy", "kN", 1e-3),
    "fx": ("Fx", "kN", 1e-3),
    "mz": ("Mz", "N·m", 1.0),
    "speed": ("v", "km/h", 1.0),
    "pressure": ("p", "bar", 1e-2),
}
SAE_FLIPPED = ("slip_angle", "fy", "fz", "mz")  # ISO 8855 -> SAE J670 (domain primer §3)


def _file_bytes(run: Run, ch: dict[str, np.ndarray]) -> bytes:
    order = [
        c
        for c in ("time", "slip_angle", "slip_ratio", "inclination", "fz", "fy", "fx", "mz", "speed", "pressure")
        if c in ch
    ]
    if run.lab == "Lab A":
        cols = [(LAB_A_COLUMNS[c][0], ch[c] * LAB_A_COLUMNS[c][2] * (-1.0 if c in SAE_FLIPPED else 1.0)) for c in order]
        lines = [",".join(name for name, _ in cols), *_table(cols, ",", ".")]
    else:
        cols = [(LAB_B_COLUMNS[c][0], ch[c] * LAB_B_COLUMNS[c][2]) for c in order]
        lines = [
            f"Lab B;flat belt;specimen {run.specimen};{run.tested_at:%Y-%m-%d %H:%M}",
            ";".join(name for name, _ in cols),
            ";".join(LAB_B_COLUMNS[c][1] for c in order),
            *_table(cols, ";", ","),
        ]
    return ("\n".join(lines) + "\n").encode("utf-8")


def _run_entry(run: Run, channels, pressure_kpa: float) -> str:
    a = run.lab == "Lab A"
    style = LAB_A_COLUMNS if a else LAB_B_COLUMNS
    layout = (
        'axis_convention = "SAE J670"\ndelimiter = ","\ndecimal = "."\nheader_line = 1\n'
        if a
        else 'axis_convention = "ISO 8855"\ndelimiter = ";"\ndecimal = ","\nheader_line = 2\nskip_after_header = 1\n'
    )
    loads = ", ".join(f"{v:g}" for v in run.loads_n)
    cols = "\n".join(f'{c} = {{ name = "{style[c][0]}", unit = "{style[c][1]}" }}' for c in channels)
    return (
        f'\n[[runs]]\nspecimen = "{run.specimen}"\nfile = "{run.file}"\nlab = "{run.lab}"\n'
        f'tested_at = {run.tested_at:%Y-%m-%dT%H:%M:%S}\nsweep = "{run.sweep}"\n{layout}'
        f'load_setpoints = {{ values = [{loads}], unit = "N" }}\ncamber_setpoints_deg = [0.0]\n'
        f'pressure = {{ value = {pressure_kpa:g}, unit = "kPa" }}\n\n[runs.columns]\n{cols}\n'
    )


ROLES = {"CTL": "control", "S1": "baseline", "S2": "candidate"}
LAB_KEY_NOTES = {
    "force_accuracy_pct": "% of reading, a bound",
    "moment_accuracy_pct": "% of reading, a bound",
    "load_accuracy_pct": "% of reading, a bound",
    "angle_accuracy_deg": "slip-angle zero, a bound",
    "drift_allowance_pct": "used where no control was tested at the lab",
}


def _manifest(p: Plan, channels_of: dict[str, list[str]], declare_labs: bool, leave_one_load_out: bool) -> str:
    head = f"""\
# A synthetic session (tests/sessions.py, seed {p.seed}): invented test material, not a real test.
[document]
title = "Synthetic session {p.seed}"
number = "SYN-{p.seed:05d}"
revision = "A"
customer = "Test customer"
program = "Interval coverage"
authors = ["Generator"]
date = {SESSION_DAY.isoformat()}
"""
    specimens = "".join(
        f'\n[[specimens]]\nid = "{sid}"\nrole = "{ROLES[sid]}"\nsize = "{SIZE}"\n'
        f'construction = "Synthetic tire (invented coefficients)."\n'
        for sid in p.tires
    )
    runs = "".join(_run_entry(r, channels_of[r.file], p.run_pressure_kpa(r)) for r in p.runs)
    labs = ""
    if declare_labs:
        for name in p.labs:
            d = LABS[name]
            labs += f'\n[labs."{name}"]\n' + "".join(f"{k} = {v:g}  # {LAB_KEY_NOTES[k]}\n" for k, v in d.items())
    tail = (
        "\n# The slip-ratio sweeps start from a hold: drop their first 0.01 of travel (the lag of\n"
        f"# {LONGITUDINAL_LAG_S:g} s has built up by then), not the default 0.02, which would leave no rising\n"
        "# samples inside the ±0.02 where the hysteresis at zero slip is measured.\n"
        f"[conditioning]\nsweep_run_in_ratio = {RUN_IN_RATIO:g}\n"
        '\n[drift]\ncontrol = "CTL"\ncorrect = true\n\n[fit]\nnominal_load_n = 4000\n'
        + ("" if leave_one_load_out else "leave_one_load_out = false\n")
    )
    return head + specimens + runs + labs + tail


# =================================================================================================
# Truth, from the true Magic Formula alone
# =================================================================================================

H_RAD = 1e-6  # central-difference step in rad (slip angle) or in slip ratio


def _side_max(f, edge: float, n: int = 4001) -> tuple[float, float]:
    """(max of the smooth f ≥ 0 on [0, edge], where): a fine grid, then a bounded scalar search."""
    x = np.linspace(0.0, edge, n)
    y = f(x)
    i = int(np.argmax(y))
    if i in (0, n - 1):
        return float(y[i]), float(x[i])
    step = x[1] - x[0]
    res = minimize_scalar(
        lambda v: -float(f(np.array([v]))[0]),
        bounds=(x[i] - step, x[i] + step),
        method="bounded",
        options={"xatol": 1e-10},
    )
    return (float(-res.fun), float(res.x)) if -res.fun >= y[i] else (float(y[i]), float(x[i]))


def truth_of(tire: Tire, longitudinal: bool, load_n: float = FZ0_N, dpi: float = 0.0) -> dict[str, float]:
    """The true metrics of `tire` at `load_n`, zero camber, and relative pressure `dpi` (0: nominal)."""
    dfy = float(mf.fy0(H_RAD, load_n, tire.fy, FZ0_N, dpi=dpi) - mf.fy0(-H_RAD, load_n, tire.fy, FZ0_N, dpi=dpi))
    dmz = float(
        mf.mz0(H_RAD, load_n, tire.mz, tire.fy, FZ0_N, R0_M, dpi=dpi)
        - mf.mz0(-H_RAD, load_n, tire.mz, tire.fy, FZ0_N, R0_M, dpi=dpi)
    )
    stiffness = -dfy / (2.0 * H_RAD) * mf.DEG  # N/rad -> N/deg
    peaks = []
    for sign in (1.0, -1.0):
        top, where = _side_max(
            lambda a: np.abs(mf.fy0(sign * a * mf.DEG, load_n, tire.fy, FZ0_N, dpi=dpi)), SWEEP_MAX_DEG
        )
        if where > SWEEP_MAX_DEG - 1.0:
            raise ValueError(f"true lateral peak at {where:.2f} deg: not inside the sweep")
        peaks.append(top)
    out = {
        "cornering_stiffness": stiffness,
        "cornering_coefficient": stiffness / load_n,
        "peak_lateral_friction": 0.5 * (peaks[0] + peaks[1]) / load_n,
        "pneumatic_trail": 1000.0 * -dmz / dfy,  # mm
    }
    if longitudinal:
        dfx = float(mf.fx0(H_RAD, load_n, tire.fx, FZ0_N, dpi=dpi) - mf.fx0(-H_RAD, load_n, tire.fx, FZ0_N, dpi=dpi))
        top, where = _side_max(lambda k: np.abs(mf.fx0(-k, load_n, tire.fx, FZ0_N, dpi=dpi)), SLIP_RATIO_MAX)
        if where > SLIP_RATIO_MAX - 0.03:
            raise ValueError(f"true braking peak at slip ratio {-where:.3f}: not inside the sweep")
        out["longitudinal_slip_stiffness"] = dfx / (2.0 * H_RAD)
        out["peak_braking_friction"] = top / load_n
    return out


def slopes_of(p: Plan, sid: str) -> dict[tuple[str, float, float], float]:
    """The true slopes against pressure of specimen `sid` of the session `p`: (metric, load N,
    pressure kPa the % per bar refers to) -> value, at each load its slip-angle runs were tested at
    two or more pressures (zero camber). The secant between the lowest and highest tested pressure,
    per 10 kPa, and in % per bar of the value at each tested pressure (the catalogue's definition)."""
    tire = p.tires[sid]
    out: dict[tuple[str, float, float], float] = {}
    for load in sorted({load for r in p.runs if r.specimen == sid and r.sweep == "slip_angle" for load in r.loads_n}):
        tested = {
            p.run_pressure_kpa(r): p.dpi(r)
            for r in p.runs
            if r.specimen == sid and r.sweep == "slip_angle" and load in r.loads_n
        }
        if len(tested) < 2:
            continue
        at = {kpa: truth_of(tire, longitudinal=False, load_n=load, dpi=dpi) for kpa, dpi in tested.items()}
        lo, hi = min(at), max(at)
        for name in SLOPED:
            per_kpa = (at[hi][name] - at[lo][name]) / (hi - lo)
            for kpa in at:
                out[(f"{name}_per_10kpa", load, kpa)] = 10.0 * per_kpa
                out[(f"{name}_pct_per_bar", load, kpa)] = 100.0 * 100.0 * per_kpa / at[kpa][name]
    return out


def slope_truth(seed: int, second_pressure: bool = True) -> dict[str, dict[tuple[str, float, float], float]]:
    """The true slopes against pressure of the session of `seed` (see :func:`slopes_of`), per specimen
    tested at two or more pressures."""
    p = plan(seed, second_pressure)
    found = {sid: slopes_of(p, sid) for sid in p.tires}
    return {sid: values for sid, values in found.items() if values}


# =================================================================================================
# The entry points
# =================================================================================================


def _build(seed: int, declare_labs: bool, leave_one_load_out: bool, second_pressure: bool = False):
    p = plan(seed, second_pressure)
    files: dict[str, bytes] = {}
    channels_of: dict[str, list[str]] = {}
    for run in p.runs:
        ch = _simulate(p, run)
        files[run.file] = _file_bytes(run, ch)
        channels_of[run.file] = list(ch)
    files["dossier.toml"] = _manifest(p, channels_of, declare_labs, leave_one_load_out).encode("utf-8")
    truth = {
        sid: truth_of(tire, longitudinal=any(r.specimen == sid and r.sweep == "slip_ratio" for r in p.runs))
        for sid, tire in p.tires.items()
    }
    return files, truth, p


def session(
    seed: int, *, declare_labs: bool = True, leave_one_load_out: bool = True, second_pressure: bool = False
) -> tuple[dict[str, bytes], dict[str, dict[str, float]]]:
    """Return (files, truth) of the synthetic session of `seed` (see the module's docstring).

    `declare_labs`: write the labs' accuracies as ``[labs."NAME"]`` tables (the errors are
    simulated within the same bounds either way). `leave_one_load_out` false writes
    ``[fit] leave_one_load_out = false``: the fits' load-out check takes most of the fitting time
    and does not enter the metrics' intervals. `second_pressure`: add a slip-angle run of each
    non-control specimen at the second pressure (:func:`slope_truth` gives the true slopes).
    """
    files, truth, _ = _build(seed, declare_labs, leave_one_load_out, second_pressure)
    return files, truth


def session_details(seed: int, second_pressure: bool = False) -> dict:
    """What the session of `seed` simulated: labs' errors and drift, each run's factors, the tires."""
    p = plan(seed, second_pressure)
    return {
        "pressure_kpa": p.pressure_kpa,
        "t_ref": p.t_ref.isoformat(),
        "relaxation_length_m": p.relaxation_length_m,
        "labs": {
            name: {
                "force_gain": lab.force_gain,
                "moment_gain": lab.moment_gain,
                "load_gain": lab.load_gain,
                "slip_zero_deg": lab.slip_zero_deg,
                "drift_pct_per_h": 100.0 * lab.drift_per_h,
                "declared": dict(lab.declared),
            }
            for name, lab in p.labs.items()
        },
        "runs": [
            {
                "file": r.file,
                "specimen": r.specimen,
                "lab": r.lab,
                "sweep": r.sweep,
                "tested_at": r.tested_at.isoformat(),
                "drift_factor": r.drift_factor,
                "repeat_factor": r.repeat_factor,
                "pressure_kpa": p.run_pressure_kpa(r),
            }
            for r in p.runs
        ],
        "tires": {sid: {"fy": t.fy, "mz": t.mz, "fx": t.fx} for sid, t in p.tires.items()},
    }


def _selfcheck(
    seeds=(0, 1, 2), declare_labs: bool = True, leave_one_load_out: bool = True, second_pressure: bool = False
) -> None:
    """Load and condition a few sessions; print points per specimen and the seconds taken."""
    import time
    from pathlib import Path

    from dossier.engine.build import check
    from dossier.engine.specimens import fit_specimens
    from dossier.project.load import project_from_files

    for seed in seeds:
        t0 = time.perf_counter()
        files, truth = session(
            seed, declare_labs=declare_labs, leave_one_load_out=leave_one_load_out, second_pressure=second_pressure
        )
        t1 = time.perf_counter()
        project = project_from_files(files, Path(f"/tmp/session-{seed}"))
        conditioned = check(project)
        t2 = time.perf_counter()
        points = [pt for c in conditioned for pt in c.points]
        fit_specimens(points, project.manifest, FZ0_N)
        t3 = time.perf_counter()
        per = {}
        for pt in points:
            per.setdefault(pt.specimen, []).append(pt)
        counts = ", ".join(
            f"{sid}: {len(pts)} points ({sum(pt.curve.n_points for pt in pts)} bins)"
            for sid, pts in sorted(per.items())
        )
        size_kb = sum(len(b) for b in files.values()) / 1024
        print(f"seed {seed}: {len(files) - 1} rig files, {size_kb:.0f} KiB; {counts}")
        print(f"  generate {t1 - t0:.2f} s, load + condition {t2 - t1:.2f} s, fit + metrics {t3 - t2:.2f} s")
        for sid, values in truth.items():
            print(f"  truth {sid}: " + ", ".join(f"{k} {v:.5g}" for k, v in values.items()))
        for sid, slopes in (slope_truth(seed) if second_pressure else {}).items():
            nominal = min(k[2] for k in slopes)  # the session's nominal pressure: the lower one
            at_fz0 = [(k[0], v) for k, v in sorted(slopes.items()) if k[1] == FZ0_N and k[2] == nominal]
            print(f"  true slopes {sid} at {FZ0_N:g} N: " + ", ".join(f"{k} {v:.4g}" for k, v in at_fz0))


if __name__ == "__main__":
    import sys

    _selfcheck(
        declare_labs="--no-labs" not in sys.argv[1:],
        leave_one_load_out="--no-load-out" not in sys.argv[1:],
        second_pressure="--second-pressure" in sys.argv[1:],
    )
