"""Generate the demo project's rig files and the truth they were generated from.

Everything here is FICTIONAL demo material: the supplier (Norrvik Tyre Works), the customer
(Castellan Motors), the vehicle program (K27 Aster), the two test labs, the specimens, the test
session and every number. The script exists so the demo can show how close the fitted model comes
to a known truth.

Run it with no arguments; it rewrites, relative to this script's folder:

* ``rig/*.csv``                   one rig file per run, in the style of the lab that "tested" it;
* ``truth/true_coefficients.json`` the true Magic Formula coefficients per specimen (Fy0, Mz0 and
  Fx0, complete with camber and pressure terms), the true cornering stiffness and peak lateral
  friction at each set-point load, the true pneumatic trail, longitudinal slip stiffness and
  peak longitudinal friction, PRD-A's true conicity and ply-steer, and the session: each run's
  time, program and drift factor.

The test session (one day, 2026-11-12; see :data:`RUNS`):

* nineteen runs between 08:00 and 16:00. The control tire CTL-1 is run at 08:00, 10:00, 12:00,
  14:00 and 16:00 (4 kN only). In the morning: the lateral runs at 240 kPa and camber 0 (PRD-A,
  CND-B, CND-C) and PRD-A in reverse rolling; in the afternoon: a camber run (-3 and +3 deg), a
  pressure run (280 kPa) and a longitudinal (slip-ratio) run of each of PRD-A, CND-B and CND-C,
  and a combined-slip run of PRD-A (slip-ratio sweeps at 4 kN with the slip angle held at 0, 2, 4
  and 6 deg; Fx and Fy from ``fx_combined`` and ``fy_combined`` with PRD-A's true weighting);
* force-level drift: Fy, Mz and Fx of a run are multiplied by one factor per run,
  g(t) = 1 - 0.01 (t - 08:00) / 1 h, where t is the run's start time (the force level falls by
  1 % an hour as the belt surface and the tread condition change). The truth keeps the UNdrifted
  values and records each run's factor. The Eisenau rig, with no control tire, drifts
  slowly: g(t) = 1 - 0.002 (t - 10:30) / 1 h;
* PRD-A's zero-slip offset is conicity + ply-steer: pHy1 = 0 and pVy1 = c + p rolling forward,
  c - p rolling in reverse (c = 0.012, p = 0.008, fractions of Fz, ISO 8855 rig axes).

What is simulated per run:

* lateral runs (slip-angle sweeps): the run's set-points (load, or load and camber); before
  each: a linear ramp of load and camber from the previous set-point (transition), then a hold
  with a decaying load oscillation (settling), then a continuous triangular slip sweep
  0 -> +12 -> -12 -> 0 deg at 4 deg/s (in ISO 8855 axes). The tire responds to a *lagged* slip
  angle: a first-order lag with time constant relaxation length / speed, which gives the up/down
  hysteresis of a real sweep. Fy from ``dossier.model.magic_formula.fy0`` and Mz from
  ``dossier.model.magic_formula.mz0`` with the specimen's true coefficients, at the set camber and
  the run's relative pressure dpi = (p - p0)/p0;
* longitudinal runs (slip-ratio sweeps): loads 2, 4, 6, 8 kN at camber 0, each a ramp, a hold and
  a continuous triangular slip-ratio sweep 0 -> +0.25 -> -0.25 -> 0 at 0.1 per second; Fx from
  ``dossier.model.magic_formula.fx0`` of the slip ratio lagged by a first-order lag of 0.02 s; sampled
  at 100 Hz (lateral runs at 25 Hz);
* the main force (Fy, or Fx) and Mz times the run's drift factor, plus gaussian noise; a few
  isolated spikes on the main force; measurement noise on every channel; the recorded inflation
  pressure creeps up slightly as the tire warms (the model sees the run's set pressure).

The computation is done in the internal ISO 8855 axes and SI-like units; each lab writer then
converts to its own axes, units, separators and decimal mark.
"""

from __future__ import annotations

import datetime as dt
import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from dossier.model.magic_formula import (
    FX0_COEFFICIENTS,
    FXC_COEFFICIENTS,
    FY0_COEFFICIENTS,
    FYC_COEFFICIENTS,
    MZ0_COEFFICIENTS,
    fx0,
    fx_combined,
    fy0,
    fy_combined,
    mz0,
)

HERE = Path(__file__).resolve().parent
RIG_DIR = HERE / "rig"
TRUTH_FILE = HERE / "truth" / "true_coefficients.json"

SEED = 20261120

# --- test session and force-level drift ----------------------------------------------------------
SESSION_START = dt.datetime(2026, 11, 12, 8, 0)
EZ_START = dt.datetime(2026, 11, 12, 10, 30)  # the first Eisenau run
EZ_DRIFT_RATE_PER_H = 0.002  # the Eisenau rig's slower drift (no control tire there)
DRIFT_RATE_PER_H = 0.01  # fraction of the force level lost per hour since SESSION_START

# --- tire and model reference values ------------------------------------------------------------
FZ0_N = 4000.0  # nominal load of the Magic Formula coefficients
P0_KPA = 240.0  # nominal inflation pressure of the coefficients (2.4 bar, 34.8 psi)
# Unloaded radius of a 225/45 R17: (17 in * 25.4 + 2 * 225 mm * 0.45) / 2 = 317.15 mm.
R0_M = 0.3172

# --- rig program (common to all runs; a run may use a subset of the loads) ---------------------
LOADS_N = (2000.0, 4000.0, 6000.0, 8000.0)
SINGLE_LOAD_N = (4000.0,)  # control-tire and reverse-rolling runs
CAMBER_LOADS_N = (4000.0, 6000.0)
PRESSURE_LOADS_N = (2000.0, 4000.0, 6000.0)
CAMBER_STEPS_DEG = (-3.0, 3.0)  # the camber run's set-points, in this order at each load
COMBINED_HELD_DEG = (0.0, 2.0, 4.0, 6.0)  # the combined-slip run's held slip angles (ISO 8855)
HIGH_PRESSURE_KPA = 280.0  # the pressure run (2.8 bar, 40.6 psi)
PRELOAD_N = 250.0  # contact load before the first ramp and after the last sweep
SPEED_KMH = 30.0
RELAXATION_LENGTH_M = 0.45
SAMPLE_RATE_HZ = 25.0
# Longitudinal runs are logged faster: the sample period must be well below the 0.02 s lag of Fx.
SAMPLE_RATE_LONGITUDINAL_HZ = 100.0
SIM_RATE_HZ = 1000.0  # fine grid on which the slip lag is integrated
PREROLL_S = 0.5
RAMP_S = 1.5  # load and camber move together over a ramp
HOLD_S = 1.0
SWEEP_MAX_DEG = 12.0
SWEEP_RATE_DEG_S = 4.0
SLIP_RATIO_MAX = 0.25
SLIP_RATIO_RATE_PER_S = 0.1
SLIP_RATIO_LAG_S = 0.02  # first-order lag of Fx behind the slip ratio
SETTLING_AMPLITUDE = 0.04  # fraction of the set-point load
SETTLING_FREQUENCY_HZ = 3.0
SETTLING_DECAY_S = 0.3
PEAK_SEARCH_DEG = 12.0

# --- measurement noise (1 sigma) -----------------------------------------------------------------
NOISE_FZ_FRACTION = 0.005
NOISE_FY_N = 25.0
NOISE_FX_N = 25.0
NOISE_MZ_NM = 1.5
NOISE_SLIP_DEG = 0.02
NOISE_SLIP_RATIO = 0.0002
NOISE_INCLINATION_DEG = 0.01
NOISE_SPEED_KMH = 0.05
NOISE_PRESSURE_KPA = 0.2
PRESSURE_WARMUP_KPA = 3.0  # slow rise over the run
SPIKE_SIZE_N = 800.0
SPIKES_PER_FILE = (3, 6)  # inclusive range

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
    fy: dict[str, float]  # lateral force, rolling forward
    mz: dict[str, float]  # aligning moment
    fx: dict[str, float]  # longitudinal force
    # Zero-slip offset split (conicity c, ply-steer p), fractions of Fz; None: pVy1 as given both ways.
    conicity_ply_steer: tuple[float, float] | None = None
    # Combined-slip weighting (Pacejka 2006, 4.E50-4.E67) of Fx and Fy; None: not run under combined slip.
    fxc: dict[str, float] | None = None
    fyc: dict[str, float] | None = None

    def coefficients_for(self, rolling_direction: str) -> dict[str, float]:
        """The true Fy coefficients of a run rolling `rolling_direction` ("forward" or "reverse").

        Conicity keeps its sign in the rig axes when the rolling direction is reversed; ply-steer
        changes sign. So pVy1 = c + p forward and c - p in reverse (pHy1 = 0 for such a specimen).
        """
        if rolling_direction == "forward" or self.conicity_ply_steer is None:
            return dict(self.fy)
        c, p = self.conicity_ply_steer
        return {**self.fy, "pVy1": c - p}


PRD_A_CONICITY = 0.012  # c, fraction of Fz
PRD_A_PLY_STEER = 0.008  # p, fraction of Fz

# Camber thrust: a positive inclination gives a positive Fy (ISO 8855) through pVy3 (and a little
# through pHy3, which acts with the negative cornering stiffness). At 4 kN the camber stiffness
# dFy/dgamma is about 5-6 % of the cornering stiffness. More pressure: a little more cornering
# stiffness at high load and a little less at low load (ppy1 > 0, ppy2 > 0), a little less
# friction (ppy3 < 0). Coefficients not given are 0 (each is checked against the catalogue).
SPECIMENS: dict[str, DemoSpecimen] = {s.id: s for s in (
    # Control: production construction from a single reserved batch, re-tested through the session.
    DemoSpecimen(
        "CTL-1",
        fy={"pCy1": 1.36, "pDy1": 1.02, "pDy2": -0.078, "pDy3": 3.2, "pEy1": -0.25, "pEy2": -0.40,
            "pEy3": 0.06, "pKy1": -23.2, "pKy2": 1.88, "pKy3": 0.42, "pHy1": 0.0015, "pHy2": 0.0,
            "pHy3": -0.004, "pVy1": 0.016, "pVy2": 0.0, "pVy3": 1.00, "pVy4": -0.15,
            "ppy1": 0.33, "ppy2": 0.60, "ppy3": -0.25, "ppy4": 0.15},
        mz={"qBz1": 10.2, "qBz2": -1.4, "qBz9": 0.4, "qBz10": 0.18, "qCz1": 1.20, "qDz1": 0.098,
            "qDz2": -0.030, "qDz3": -0.45, "qDz6": 0.0025, "qDz8": 0.30, "qEz1": -1.8, "qEz2": 0.30,
            "qHz1": 0.0020, "qHz3": 0.08, "ppz1": -0.28},
        fx={"pCx1": 1.65, "pDx1": 1.16, "pDx2": -0.070, "pEx1": 0.40, "pEx2": 0.10, "pEx4": 0.06,
            "pKx1": 21.5, "pKx2": 0.6, "pKx3": -0.12, "pHx1": 0.0008, "pVx1": -0.0015,
            "ppx1": -0.30, "ppx2": 0.10, "ppx3": -0.18, "ppx4": 0.08},
    ),
    # Baseline: current production construction. Zero-slip offset = conicity + ply-steer.
    DemoSpecimen(
        "PRD-A",
        fy={"pCy1": 1.38, "pDy1": 1.05, "pDy2": -0.075, "pDy3": 3.0, "pEy1": -0.20, "pEy2": -0.40,
            "pEy3": 0.05, "pKy1": -24.3, "pKy2": 1.90, "pKy3": 0.40, "pHy1": 0.0, "pHy2": 0.0,
            "pHy3": -0.004, "pVy1": PRD_A_CONICITY + PRD_A_PLY_STEER, "pVy2": 0.0, "pVy3": 1.05,
            "pVy4": -0.15, "ppy1": 0.35, "ppy2": 0.62, "ppy3": -0.26, "ppy4": 0.16},
        mz={"qBz1": 10.0, "qBz2": -1.4, "qBz9": 0.4, "qBz10": 0.18, "qCz1": 1.20, "qDz1": 0.100,
            "qDz2": -0.030, "qDz3": -0.40, "qDz6": 0.0025, "qDz8": 0.30, "qEz1": -1.8, "qEz2": 0.30,
            "qHz1": 0.0020, "qHz3": 0.08, "ppz1": -0.30},
        fx={"pCx1": 1.65, "pDx1": 1.18, "pDx2": -0.070, "pEx1": 0.40, "pEx2": 0.10, "pEx4": 0.06,
            "pKx1": 22.0, "pKx2": 0.6, "pKx3": -0.12, "pHx1": 0.0008, "pVx1": -0.0015,
            "ppx1": -0.30, "ppx2": 0.10, "ppx3": -0.18, "ppx4": 0.08},
        conicity_ply_steer=(PRD_A_CONICITY, PRD_A_PLY_STEER),
        fxc={"rBx1": 11.5, "rBx2": 8.5, "rCx1": 1.02, "rEx1": -0.20, "rHx1": 0.0},
        fyc={"rBy1": 8.0, "rBy2": 5.5, "rBy3": 0.0, "rCy1": 1.05, "rEy1": 0.10, "rHy1": 0.002,
             "rVy1": 0.04, "rVy4": 30.0, "rVy5": 1.9, "rVy6": 18.0},
    ),
    # Candidate B: steeper belt angle; about 10 % more cornering stiffness, similar friction.
    DemoSpecimen(
        "CND-B",
        fy={"pCy1": 1.42, "pDy1": 1.04, "pDy2": -0.070, "pDy3": 3.4, "pEy1": -0.10, "pEy2": -0.40,
            "pEy3": 0.07, "pKy1": -27.2, "pKy2": 1.95, "pKy3": 0.45, "pHy1": 0.0025, "pHy2": 0.0,
            "pHy3": -0.005, "pVy1": 0.024, "pVy2": 0.0, "pVy3": 1.10, "pVy4": -0.20,
            "ppy1": 0.30, "ppy2": 0.55, "ppy3": -0.24, "ppy4": 0.14},
        mz={"qBz1": 10.8, "qBz2": -1.6, "qBz9": 0.4, "qBz10": 0.20, "qCz1": 1.24, "qDz1": 0.092,
            "qDz2": -0.025, "qDz3": -0.35, "qDz6": 0.0030, "qDz8": 0.28, "qEz1": -1.5, "qEz2": 0.25,
            "qHz1": 0.0025, "qHz3": 0.07, "ppz1": -0.25},
        fx={"pCx1": 1.62, "pDx1": 1.16, "pDx2": -0.065, "pEx1": 0.45, "pEx2": 0.08, "pEx4": 0.05,
            "pKx1": 23.5, "pKx2": 0.8, "pKx3": -0.10, "pHx1": 0.0010, "pVx1": -0.0015,
            "ppx1": -0.28, "ppx2": 0.10, "ppx3": -0.16, "ppx4": 0.07},
    ),
    # Candidate C: full-width nylon cap ply, higher-friction tread compound.
    DemoSpecimen(
        "CND-C",
        fy={"pCy1": 1.34, "pDy1": 1.13, "pDy2": -0.085, "pDy3": 2.6, "pEy1": -0.45, "pEy2": -0.40,
            "pEy3": 0.04, "pKy1": -25.0, "pKy2": 1.85, "pKy3": 0.35, "pHy1": 0.0012, "pHy2": 0.0,
            "pHy3": -0.003, "pVy1": 0.012, "pVy2": 0.0, "pVy3": 1.00, "pVy4": -0.12,
            "ppy1": 0.40, "ppy2": 0.70, "ppy3": -0.22, "ppy4": 0.12},
        mz={"qBz1": 9.4, "qBz2": -1.2, "qBz9": 0.4, "qBz10": 0.16, "qCz1": 1.16, "qDz1": 0.108,
            "qDz2": -0.032, "qDz3": -0.50, "qDz6": 0.0020, "qDz8": 0.32, "qEz1": -2.2, "qEz2": 0.35,
            "qHz1": 0.0015, "qHz3": 0.09, "ppz1": -0.35},
        fx={"pCx1": 1.68, "pDx1": 1.24, "pDx2": -0.085, "pEx1": 0.30, "pEx2": 0.12, "pEx4": 0.07,
            "pKx1": 21.0, "pKx2": 0.5, "pKx3": -0.14, "pHx1": 0.0006, "pVx1": -0.0012,
            "ppx1": -0.32, "ppx2": 0.12, "ppx3": -0.20, "ppx4": 0.09},
    ),
)}

CATALOGUES = {"fy": FY0_COEFFICIENTS, "mz": MZ0_COEFFICIENTS, "fx": FX0_COEFFICIENTS,
              "fxc": FXC_COEFFICIENTS, "fyc": FYC_COEFFICIENTS}


def complete(channel: str, given: dict[str, float]) -> dict[str, float]:
    """Return every coefficient of `channel` in catalogue order: the given value, else 0.

    Refuses a name the catalogue does not know, a value outside its physical bounds, and a
    missing coefficient whose catalogue default is not 0 (the truth must say what it used).
    """
    catalogue = CATALOGUES[channel]
    names = {c.name for c in catalogue}
    unknown = sorted(set(given) - names)
    if unknown:
        raise ValueError(f"{channel}: unknown coefficient(s) {unknown}")
    out = {}
    for c in catalogue:
        if c.name not in given and c.default != 0.0:
            raise ValueError(f"{channel}: {c.name} must be given (catalogue default {c.default})")
        value = float(given.get(c.name, 0.0))
        if not c.lower <= value <= c.upper:
            raise ValueError(f"{channel}: {c.name} = {value} outside [{c.lower}, {c.upper}]")
        out[c.name] = value
    return out


@dataclass(frozen=True)
class DemoRun:
    specimen: str
    lab: str  # "harlow_ridge" or "eisenau"
    file: str  # relative to this folder
    tested_at: dt.datetime
    loads_n: tuple[float, ...]
    rolling_direction: str = "forward"
    stream: int = 0  # random stream of the run (fixed per run, independent of the list order)
    sweep: str = "slip_angle"  # or "slip_ratio"
    cambers_deg: tuple[float, ...] = (0.0,)  # camber set-points, in this order at each load
    pressure_kpa: float = P0_KPA  # set inflation pressure
    held_deg: tuple[float, ...] = ()  # combined slip: slip angles held during a slip-ratio sweep

    @property
    def steps(self) -> tuple[tuple[float, float, float], ...]:
        """(load N, camber deg, held slip angle deg) of each set-point, in program order."""
        return tuple((load, camber, held) for load in self.loads_n for camber in self.cambers_deg
                     for held in (self.held_deg or (0.0,)))

    @property
    def is_nominal_lateral(self) -> bool:
        """A slip-angle run at camber 0 and the nominal pressure (the runs of the load tables)."""
        return self.sweep == "slip_angle" and self.cambers_deg == (0.0,) and self.pressure_kpa == P0_KPA


def _at(hour: int, minute: int) -> dt.datetime:
    return SESSION_START.replace(hour=hour, minute=minute)


HR, EZ = "harlow_ridge", "eisenau"

# The session in time order. Streams 0-6 are those the seven morning runs always had.
RUNS: tuple[DemoRun, ...] = (
    DemoRun("CTL-1", HR, "rig/HR-4470_CTL-1_0800.csv", _at(8, 0), SINGLE_LOAD_N, stream=3),
    DemoRun("PRD-A", HR, "rig/HR-4471_PRD-A.csv", _at(8, 30), LOADS_N, stream=0),
    DemoRun("CND-B", HR, "rig/HR-4472_CND-B.csv", _at(9, 15), LOADS_N, stream=1),
    DemoRun("CTL-1", HR, "rig/HR-4470_CTL-1_1000.csv", _at(10, 0), SINGLE_LOAD_N, stream=4),
    DemoRun("CND-C", EZ, "rig/EZ-0412_CND-C.csv", _at(10, 30), LOADS_N, stream=2),
    DemoRun("PRD-A", HR, "rig/HR-4473_PRD-A_rev.csv", _at(11, 15), SINGLE_LOAD_N,
            rolling_direction="reverse", stream=5),
    DemoRun("CTL-1", HR, "rig/HR-4470_CTL-1_1200.csv", _at(12, 0), SINGLE_LOAD_N, stream=6),
    # Afternoon: camber, pressure and longitudinal runs of the three constructions.
    DemoRun("PRD-A", HR, "rig/HR-4474_PRD-A_camber.csv", _at(12, 15), CAMBER_LOADS_N, stream=7,
            cambers_deg=CAMBER_STEPS_DEG),
    DemoRun("CND-B", HR, "rig/HR-4475_CND-B_camber.csv", _at(12, 45), CAMBER_LOADS_N, stream=8,
            cambers_deg=CAMBER_STEPS_DEG),
    DemoRun("CND-C", EZ, "rig/EZ-0413_CND-C_Sturz.csv", _at(13, 15), CAMBER_LOADS_N, stream=9,
            cambers_deg=CAMBER_STEPS_DEG),
    DemoRun("PRD-A", HR, "rig/HR-4476_PRD-A_p280.csv", _at(13, 45), PRESSURE_LOADS_N, stream=10,
            pressure_kpa=HIGH_PRESSURE_KPA),
    DemoRun("CTL-1", HR, "rig/HR-4470_CTL-1_1400.csv", _at(14, 0), SINGLE_LOAD_N, stream=11),
    DemoRun("CND-B", HR, "rig/HR-4477_CND-B_p280.csv", _at(14, 15), PRESSURE_LOADS_N, stream=12,
            pressure_kpa=HIGH_PRESSURE_KPA),
    DemoRun("CND-C", EZ, "rig/EZ-0414_CND-C_Druck.csv", _at(14, 45), PRESSURE_LOADS_N, stream=13,
            pressure_kpa=HIGH_PRESSURE_KPA),
    DemoRun("PRD-A", HR, "rig/HR-4478_PRD-A_long.csv", _at(15, 0), LOADS_N, stream=14, sweep="slip_ratio"),
    DemoRun("CND-B", HR, "rig/HR-4479_CND-B_long.csv", _at(15, 15), LOADS_N, stream=15, sweep="slip_ratio"),
    DemoRun("CND-C", EZ, "rig/EZ-0415_CND-C_Laengs.csv", _at(15, 30), LOADS_N, stream=16, sweep="slip_ratio"),
    # Combined slip: slip-ratio sweeps of PRD-A at 4 kN with the slip angle held at 0, 2, 4 and 6 deg.
    DemoRun("PRD-A", HR, "rig/HR-4480_PRD-A_combined.csv", _at(15, 45), SINGLE_LOAD_N, stream=18,
            sweep="slip_ratio", held_deg=COMBINED_HELD_DEG),
    DemoRun("CTL-1", HR, "rig/HR-4470_CTL-1_1600.csv", _at(16, 0), SINGLE_LOAD_N, stream=17),
)


def drift_factor(run: DemoRun) -> float:
    """The factor on Fy, Mz and Fx of a run: on the Harlow Ridge rig g(t) = 1 - 0.01 (t - 08:00) / 1 h;
    on the Eisenau rig, which has no control tire, a slow g(t) = 1 - 0.002 (t - 10:30) / 1 h (a 1 %
    fall over its five hours, inside the 2 % drift allowance its manifest entry declares)."""
    if run.lab == HR:
        return 1.0 - DRIFT_RATE_PER_H * ((run.tested_at - SESSION_START) / dt.timedelta(hours=1))
    return 1.0 - EZ_DRIFT_RATE_PER_H * ((run.tested_at - EZ_START) / dt.timedelta(hours=1))


def control_span_h() -> float:
    """Hours from the first to the last control-tire run."""
    times = [run.tested_at for run in RUNS if run.specimen == "CTL-1"]
    return (max(times) - min(times)) / dt.timedelta(hours=1)


# =================================================================================================
# Simulation (internal ISO 8855 axes: N, N·m, deg, 1 (slip ratio), kPa, km/h, s)
# =================================================================================================

def rig_program(steps: tuple[tuple[float, float, float], ...], sweep: str = "slip_angle"
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Return (time s, true load N, set camber deg, commanded slip, held slip angle deg) on the fine
    simulation grid.

    The slip is the slip angle in deg (``sweep == "slip_angle"``) or the slip ratio; the held slip
    angle (combined slip) moves with the load and camber over each ramp and is held otherwise.
    """
    dt = 1.0 / SIM_RATE_HZ
    if sweep == "slip_angle":
        peak, rate = SWEEP_MAX_DEG, SWEEP_RATE_DEG_S
    else:
        peak, rate = SLIP_RATIO_MAX, SLIP_RATIO_RATE_PER_S
    sweep_s = 4.0 * peak / rate
    segments_t, segments_fz, segments_camber, segments_slip, segments_held = [], [], [], [], []
    t0 = 0.0
    held_now = 0.0

    def add(duration: float, fz_of_tau, camber_of_tau, slip_of_tau, held_of_tau=None) -> None:
        nonlocal t0
        tau = np.arange(0.0, duration, dt)
        segments_t.append(t0 + tau)
        segments_fz.append(fz_of_tau(tau))
        segments_camber.append(camber_of_tau(tau))
        segments_slip.append(slip_of_tau(tau))
        segments_held.append(np.full_like(tau, held_now) if held_of_tau is None else held_of_tau(tau))
        t0 += duration

    def ramp(a, b):
        return lambda tau: a + (b - a) * tau / RAMP_S

    def held(value):
        return lambda tau: np.full_like(tau, value)

    zero = np.zeros_like
    add(PREROLL_S, held(PRELOAD_N), zero, zero)
    previous_load, previous_camber = PRELOAD_N, 0.0
    for load, camber, held_slip in steps:
        add(RAMP_S, ramp(previous_load, load), ramp(previous_camber, camber) if camber != previous_camber
            else held(camber), zero, ramp(held_now, held_slip))
        held_now = held_slip

        def settled_load(tau, load=load, offset=0.0):
            s = tau + offset  # time since the end of the ramp
            return load * (1.0 + SETTLING_AMPLITUDE * np.exp(-s / SETTLING_DECAY_S)
                           * np.sin(2.0 * np.pi * SETTLING_FREQUENCY_HZ * s))

        add(HOLD_S, settled_load, held(camber), zero)
        add(sweep_s, lambda tau, f=settled_load: f(tau, offset=HOLD_S), held(camber),
            lambda tau: triangle_sweep(tau, peak, rate))
        previous_load, previous_camber = load, camber
    add(RAMP_S, ramp(previous_load, PRELOAD_N),
        ramp(previous_camber, 0.0) if previous_camber != 0.0 else held(0.0), zero, ramp(held_now, 0.0))
    return (np.concatenate(segments_t), np.concatenate(segments_fz), np.concatenate(segments_camber),
            np.concatenate(segments_slip), np.concatenate(segments_held))


def triangle_sweep(tau: np.ndarray, peak: float = SWEEP_MAX_DEG, rate: float = SWEEP_RATE_DEG_S) -> np.ndarray:
    """Slip of the sweep 0 -> +peak -> -peak -> 0 at a constant rate."""
    phase = rate * tau  # slip travelled
    m = peak
    return np.where(phase <= m, phase, np.where(phase <= 3.0 * m, 2.0 * m - phase, phase - 4.0 * m))


def lagged(x: np.ndarray, time_constant_s: float, dt: float) -> np.ndarray:
    """First-order lag dy/dt = (x - y)/T, exact for x held over each (small) step."""
    a = np.exp(-dt / time_constant_s)
    y = np.empty_like(x)
    y[0] = x[0]
    for i in range(1, x.size):
        y[i] = a * y[i - 1] + (1.0 - a) * x[i]
    return y


def relative_pressure(pressure_kpa: float) -> float:
    """dpi = (p - p0) / p0 of the Magic Formula pressure terms."""
    return (pressure_kpa - P0_KPA) / P0_KPA


def simulate(run: DemoRun, rng: np.random.Generator) -> dict[str, np.ndarray]:
    """Return the recorded channels (internal axes and units) of one run."""
    spec = SPECIMENS[run.specimen]
    p_fy = spec.coefficients_for(run.rolling_direction)
    lateral = run.sweep == "slip_angle"
    g = drift_factor(run)
    dpi = relative_pressure(run.pressure_kpa)
    t_fine, fz_fine, camber_fine, slip_fine, held_fine = rig_program(run.steps, run.sweep)
    time_constant = RELAXATION_LENGTH_M / (SPEED_KMH / 3.6) if lateral else SLIP_RATIO_LAG_S
    slip_tire_fine = lagged(slip_fine, time_constant, 1.0 / SIM_RATE_HZ)
    combined = bool(run.held_deg)
    if combined:  # the held slip angle reaches the tire through the lateral relaxation lag
        held_tire_fine = lagged(held_fine, RELAXATION_LENGTH_M / (SPEED_KMH / 3.6), 1.0 / SIM_RATE_HZ)

    step = int(round(SIM_RATE_HZ / (SAMPLE_RATE_HZ if lateral else SAMPLE_RATE_LONGITUDINAL_HZ)))
    t = t_fine[::step]
    fz_true = fz_fine[::step]
    camber = camber_fine[::step]
    gamma = np.deg2rad(camber)
    slip_cmd = slip_fine[::step]
    slip_tire = slip_tire_fine[::step]
    n = t.size

    fy_true = None
    if lateral:
        alpha = np.deg2rad(slip_tire)
        main_true = fy0(alpha, fz_true, p_fy, FZ0_N, gamma, dpi)
        mz_true = mz0(alpha, fz_true, spec.mz, p_fy, FZ0_N, R0_M, gamma, dpi)
    elif combined:
        alpha_held = np.deg2rad(held_tire_fine[::step])
        main_true = fx_combined(slip_tire, alpha_held, fz_true, spec.fx, spec.fxc, FZ0_N, gamma, dpi)
        fy_true = fy_combined(alpha_held, slip_tire, fz_true, p_fy, spec.fyc, FZ0_N, gamma, dpi)
        mz_true = None
    else:
        main_true = fx0(slip_tire, fz_true, spec.fx, FZ0_N, gamma, dpi)
        mz_true = None
    # Force-level drift: one factor for the whole run, on the true forces and moment (not on noise
    # or spikes).
    main = g * main_true + rng.normal(0.0, NOISE_FY_N if lateral else NOISE_FX_N, n)
    n_spikes = int(rng.integers(SPIKES_PER_FILE[0], SPIKES_PER_FILE[1] + 1))
    # Isolated spikes: at least 10 samples apart, away from the file's ends.
    candidates = np.arange(20, n - 20, 10)
    where = np.sort(rng.choice(candidates, size=n_spikes, replace=False)) + rng.integers(0, 5, n_spikes)
    main[where] += SPIKE_SIZE_N * rng.choice([-1.0, 1.0], size=n_spikes)

    ch = {"time": t}
    if lateral:
        ch["slip_angle"] = slip_cmd + rng.normal(0.0, NOISE_SLIP_DEG, n)
    else:
        ch["slip_ratio"] = slip_cmd + rng.normal(0.0, NOISE_SLIP_RATIO, n)
    if combined:
        ch["held_slip_angle"] = held_fine[::step] + rng.normal(0.0, NOISE_SLIP_DEG, n)
    ch["inclination"] = camber + rng.normal(0.0, NOISE_INCLINATION_DEG, n)
    ch["fz"] = fz_true * (1.0 + rng.normal(0.0, NOISE_FZ_FRACTION, n))
    if lateral:
        ch["fy"] = main
        ch["mz"] = g * mz_true + rng.normal(0.0, NOISE_MZ_NM, n)
    else:
        ch["fx"] = main
    if fy_true is not None:
        ch["fy"] = g * fy_true + rng.normal(0.0, NOISE_FY_N, n)
    ch["speed"] = SPEED_KMH + rng.normal(0.0, NOISE_SPEED_KMH, n)
    ch["pressure"] = (run.pressure_kpa + PRESSURE_WARMUP_KPA * t / t[-1]
                      + rng.normal(0.0, NOISE_PRESSURE_KPA, n))
    ch["_spike_rows"] = where
    return ch


# =================================================================================================
# Lab writers
# =================================================================================================

def _fmt(values: np.ndarray, decimals: int, decimal_mark: str = ".") -> list[str]:
    rounded = np.round(values, decimals) + 0.0  # + 0.0 turns -0.0 into 0.0
    out = [f"{v:.{decimals}f}" for v in rounded]
    return [s.replace(".", ",") for s in out] if decimal_mark == "," else out


def write_harlow_ridge(path: Path, ch: dict[str, np.ndarray]) -> None:
    """Harlow Ridge Proving Lab style: SAE J670 axes, US customary units, ',' separated, header on line 1.

    Longitudinal files carry the slip ratio in percent and Fx instead of slip angle, Fy and Mz.
    """
    flip = -1.0  # ISO 8855 -> SAE J670 for slip angle, Fy, Fz, Mz (Fx, slip ratio, inclination keep their sign)
    if "held_slip_angle" in ch:  # combined slip: a slip-ratio sweep at held slip angles
        columns = [
            ("ElapsedSec", _fmt(ch["time"], 3)),
            ("SlipRatio_pct", _fmt(100.0 * ch["slip_ratio"], 2)),
            ("SlipAng_deg", _fmt(flip * ch["held_slip_angle"], 3)),
            ("InclAng_deg", _fmt(ch["inclination"], 3)),
            ("Fz_lbf", _fmt(flip * ch["fz"] / LBF_N, 2)),
            ("Fx_lbf", _fmt(ch["fx"] / LBF_N, 2)),
            ("Fy_lbf", _fmt(flip * ch["fy"] / LBF_N, 2)),
            ("Speed_mph", _fmt(ch["speed"] / MPH_KMH, 2)),
            ("Infl_psi", _fmt(ch["pressure"] / PSI_KPA, 2)),
        ]
    elif "slip_angle" in ch:
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
    else:
        columns = [
            ("ElapsedSec", _fmt(ch["time"], 3)),
            ("SlipRatio_pct", _fmt(100.0 * ch["slip_ratio"], 2)),
            ("InclAng_deg", _fmt(ch["inclination"], 3)),
            ("Fz_lbf", _fmt(flip * ch["fz"] / LBF_N, 2)),
            ("Fx_lbf", _fmt(ch["fx"] / LBF_N, 2)),
            ("Speed_mph", _fmt(ch["speed"] / MPH_KMH, 2)),
            ("Infl_psi", _fmt(ch["pressure"] / PSI_KPA, 2)),
        ]
    lines = [",".join(name for name, _ in columns)]
    lines += [",".join(row) for row in zip(*(vals for _, vals in columns))]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8", newline="\n")


def write_eisenau(path: Path, ch: dict[str, np.ndarray], run: DemoRun) -> None:
    """Prüfzentrum Eisenau style: ISO 8855, metric (kN, N·m, bar, km/h), ';' separated, decimal commas,
    two preamble lines, header on line 3, units line after the header, CRLF line ends.

    Longitudinal files carry the slip ratio as a fraction and Fx instead of slip angle, Fy and Mz.
    """
    if "slip_angle" in ch:
        sweep_columns = [
            ("Schraeglauf", "°", _fmt(ch["slip_angle"], 3, ",")),
            ("Sturz", "°", _fmt(ch["inclination"], 3, ",")),
            ("Fz", "kN", _fmt(ch["fz"] / 1000.0, 4, ",")),
            ("Fy", "kN", _fmt(ch["fy"] / 1000.0, 4, ",")),
            ("Mz", "N·m", _fmt(ch["mz"], 2, ",")),
        ]
    else:
        sweep_columns = [
            ("Schlupf", "-", _fmt(ch["slip_ratio"], 4, ",")),
            ("Sturz", "°", _fmt(ch["inclination"], 3, ",")),
            ("Fz", "kN", _fmt(ch["fz"] / 1000.0, 4, ",")),
            ("Fx", "kN", _fmt(ch["fx"] / 1000.0, 4, ",")),
        ]
    columns = [
        ("Zeit", "s", _fmt(ch["time"], 3, ",")),
        *sweep_columns,
        ("Geschw", "km/h", _fmt(ch["speed"], 2, ",")),
        ("Fuelldruck", "bar", _fmt(ch["pressure"] / 100.0, 4, ",")),
    ]
    order = Path(run.file).name.split("_")[0].split("-")[1]  # "rig/EZ-0412_CND-C.csv" -> "0412"
    pressure_bar = f"{run.pressure_kpa / 100.0:.1f}".replace(".", ",")
    camber = "/".join(f"{c:+g}°" if len(run.cambers_deg) > 1 else f"{c:g}°" for c in run.cambers_deg)
    lines = [
        f"Prüfzentrum Eisenau;Kraft- und Momentenmessung;Auftrag EZ-26-{order};Flachbahn 2",
        f"Prüfling {run.specimen};225/45 R17 94W;Fülldruck {pressure_bar} bar;Sturz {camber};Geschw. 30 km/h;"
        f"Messbeginn {run.tested_at:%Y-%m-%d %H:%M}",
        ";".join(name for name, _, _ in columns),
        ";".join(unit for _, unit, _ in columns),
    ]
    lines += [";".join(row) for row in zip(*(vals for _, _, vals in columns))]
    path.write_text("\r\n".join(lines) + "\r\n", encoding="utf-8", newline="")


# =================================================================================================
# Truth
# =================================================================================================

H_RAD = 1e-6  # central-difference step, rad (slip angle) or 1 (slip ratio)


def true_cornering_stiffness_n_per_deg(coeffs: dict[str, float], fz_n: float, gamma_rad: float = 0.0,
                                       dpi: float = 0.0) -> float:
    """-dFy/dalpha at alpha = 0 of the true model, central difference, N/deg."""
    fy_plus = fy0(H_RAD, fz_n, coeffs, FZ0_N, gamma_rad, dpi)
    fy_minus = fy0(-H_RAD, fz_n, coeffs, FZ0_N, gamma_rad, dpi)
    return float(-(fy_plus - fy_minus) / (2.0 * H_RAD) * np.pi / 180.0)


def true_peak(coeffs: dict[str, float], fz_n: float, gamma_rad: float = 0.0, dpi: float = 0.0
              ) -> tuple[float, float]:
    """Return (max |Fy|/Fz, slip angle deg where it occurs) for |alpha| <= 12 deg."""
    alpha_deg = np.linspace(-PEAK_SEARCH_DEG, PEAK_SEARCH_DEG, 24001)
    fy = fy0(np.deg2rad(alpha_deg), fz_n, coeffs, FZ0_N, gamma_rad, dpi)
    i = int(np.argmax(np.abs(fy)))
    return float(abs(fy[i]) / fz_n), float(alpha_deg[i])


def true_peak_both_directions(coeffs: dict[str, float], fz_n: float, gamma_rad: float = 0.0,
                              dpi: float = 0.0) -> float:
    """Return the mean of max |Fy|/Fz over 0..+12 deg and over -12..0 deg (offsets cancel)."""
    alpha_deg = np.linspace(0.0, PEAK_SEARCH_DEG, 12001)
    pos = np.max(np.abs(fy0(np.deg2rad(alpha_deg), fz_n, coeffs, FZ0_N, gamma_rad, dpi)))
    neg = np.max(np.abs(fy0(np.deg2rad(-alpha_deg), fz_n, coeffs, FZ0_N, gamma_rad, dpi)))
    return float(0.5 * (pos + neg) / fz_n)


def true_trail_at_zero_slip_m(spec: DemoSpecimen, fz_n: float, gamma_rad: float = 0.0, dpi: float = 0.0,
                              rolling_direction: str = "forward") -> float:
    """-(dMz/dalpha)/(dFy/dalpha) at alpha = 0 of the true model, central differences, m."""
    p = spec.coefficients_for(rolling_direction)
    d_fy = fy0(H_RAD, fz_n, p, FZ0_N, gamma_rad, dpi) - fy0(-H_RAD, fz_n, p, FZ0_N, gamma_rad, dpi)
    d_mz = (mz0(H_RAD, fz_n, spec.mz, p, FZ0_N, R0_M, gamma_rad, dpi)
            - mz0(-H_RAD, fz_n, spec.mz, p, FZ0_N, R0_M, gamma_rad, dpi))
    return float(-d_mz / d_fy)


def true_slip_stiffness(spec: DemoSpecimen, fz_n: float, dpi: float = 0.0) -> float:
    """dFx/dkappa at kappa = 0 of the true model, central difference, N per unit slip ratio."""
    return float((fx0(H_RAD, fz_n, spec.fx, FZ0_N, 0.0, dpi) - fx0(-H_RAD, fz_n, spec.fx, FZ0_N, 0.0, dpi))
                 / (2.0 * H_RAD))


def true_fx_peaks(spec: DemoSpecimen, fz_n: float, dpi: float = 0.0) -> dict[str, float]:
    """max |Fx|/Fz and the slip ratio where it occurs, for 0 < kappa <= 0.25 and -0.25 <= kappa < 0."""
    out = {}
    for side, kappa in (("positive", np.linspace(0.0, SLIP_RATIO_MAX, 25001)[1:]),
                        ("negative", -np.linspace(0.0, SLIP_RATIO_MAX, 25001)[1:])):
        fx = np.abs(fx0(kappa, fz_n, spec.fx, FZ0_N, 0.0, dpi))
        i = int(np.argmax(fx))
        out[f"peak_fx_mu_{side}_slip"] = round(float(fx[i] / fz_n), 5)
        out[f"slip_ratio_at_peak_fx_{side}"] = round(float(kappa[i]), 5)
    return out


def _load_table(coeffs: dict[str, float], loads_n: tuple[float, ...], gamma_rad: float = 0.0,
                dpi: float = 0.0) -> dict:
    """True cornering stiffness and peak friction of `coeffs` at each of `loads_n`."""
    peaks = [true_peak(coeffs, fz, gamma_rad, dpi) for fz in loads_n]
    return {
        "loads_n": list(loads_n),
        "cornering_stiffness_n_per_deg": [round(true_cornering_stiffness_n_per_deg(coeffs, fz, gamma_rad, dpi), 3)
                                          for fz in loads_n],
        "peak_mu_within_12deg": [round(mu, 5) for mu, _ in peaks],
        "slip_at_peak_deg": [round(a, 3) for _, a in peaks],
        "peak_mu_mean_of_both_directions": [round(true_peak_both_directions(coeffs, fz, gamma_rad, dpi), 5)
                                            for fz in loads_n],
    }


def _nominal_lateral_loads(specimen_id: str) -> tuple[float, ...]:
    loads = {fz for run in RUNS if run.specimen == specimen_id and run.rolling_direction == "forward"
             and run.is_nominal_lateral for fz in run.loads_n}
    return tuple(sorted(loads))


def _lateral_conditions(spec: DemoSpecimen) -> list[dict]:
    """Per forward slip-angle run condition (pressure, camber): the true values at its loads."""
    out = []
    seen = set()
    for run in RUNS:
        if run.specimen != spec.id or run.sweep != "slip_angle" or run.rolling_direction != "forward":
            continue
        for camber in run.cambers_deg:
            key = (run.pressure_kpa, camber)
            if key in seen:
                continue
            seen.add(key)
            loads = tuple(sorted({fz for r in RUNS if r.specimen == spec.id and r.sweep == "slip_angle"
                                  and r.rolling_direction == "forward" and r.pressure_kpa == run.pressure_kpa
                                  and camber in r.cambers_deg for fz in r.loads_n}))
            gamma, dpi = float(np.deg2rad(camber)), relative_pressure(run.pressure_kpa)
            p = spec.coefficients_for("forward")
            out.append({
                "pressure_kpa": run.pressure_kpa,
                "dpi": round(dpi, 6),
                "camber_deg": camber,
                **_load_table(p, loads, gamma, dpi),
                "fy_at_zero_slip_n": [round(float(fy0(0.0, fz, p, FZ0_N, gamma, dpi)), 3) for fz in loads],
                "mz_at_zero_slip_nm": [round(float(mz0(0.0, fz, spec.mz, p, FZ0_N, R0_M, gamma, dpi)), 3)
                                       for fz in loads],
                "pneumatic_trail_at_zero_slip_m": [round(true_trail_at_zero_slip_m(spec, fz, gamma, dpi), 6)
                                                   for fz in loads],
            })
    return sorted(out, key=lambda c: (c["pressure_kpa"], c["camber_deg"]))


def _longitudinal_table(spec: DemoSpecimen) -> dict | None:
    loads = tuple(sorted({fz for run in RUNS if run.specimen == spec.id and run.sweep == "slip_ratio"
                          for fz in run.loads_n}))
    if not loads:
        return None
    peaks = [true_fx_peaks(spec, fz) for fz in loads]
    return {
        "pressure_kpa": P0_KPA,
        "camber_deg": 0.0,
        "loads_n": list(loads),
        "slip_stiffness_n_per_unit_slip": [round(true_slip_stiffness(spec, fz), 1) for fz in loads],
        **{key: [pk[key] for pk in peaks] for key in peaks[0]},
    }


def nominal_point_truth(spec: DemoSpecimen) -> dict:
    """Trail, slip stiffness and longitudinal peaks at 4000 N, 240 kPa, camber 0 (undrifted)."""
    fz = FZ0_N
    return {
        "load_n": fz,
        "pressure_kpa": P0_KPA,
        "camber_deg": 0.0,
        "pneumatic_trail_at_zero_slip_m": round(true_trail_at_zero_slip_m(spec, fz), 6),
        "longitudinal_slip_stiffness_n_per_unit_slip": round(true_slip_stiffness(spec, fz), 1),
        **true_fx_peaks(spec, fz),
    }


def zero_slip_truth(spec: DemoSpecimen) -> dict:
    """PRD-A's true conicity and ply-steer, undrifted, at the nominal load."""
    c, p = spec.conicity_ply_steer
    fz = FZ0_N
    forward = float(fy0(0.0, fz, spec.coefficients_for("forward"), FZ0_N))
    reverse = float(fy0(0.0, fz, spec.coefficients_for("reverse"), FZ0_N))
    factors = {run.rolling_direction: drift_factor(run) for run in RUNS
               if run.specimen == spec.id and run.is_nominal_lateral and fz in run.loads_n}
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
            "note": "what the drifted runs show if the drift is not corrected (factors from session.runs; "
                    "the camber-0, 240 kPa runs)",
            "residual_fy_at_zero_slip_forward_n": round(fwd_drifted, 3),
            "residual_fy_at_zero_slip_reverse_n": round(rev_drifted, 3),
            "conicity_force_n": round(0.5 * (fwd_drifted + rev_drifted), 3),
            "ply_steer_force_n": round(0.5 * (fwd_drifted - rev_drifted), 3),
        },
    }


def truth_document(spike_rows: dict[str, list[int]]) -> dict:
    specimens = {}
    for spec in SPECIMENS.values():
        fy_forward = complete("fy", spec.coefficients_for("forward"))
        entry = {
            "rig_files": [run.file for run in RUNS if run.specimen == spec.id],
            "fz0_n": FZ0_N,
            "p0_kpa": P0_KPA,
            "r0_m": R0_M,
            "coefficients": fy_forward,
            "coefficients_fy": fy_forward,
            "coefficients_mz": complete("mz", spec.mz),
            "coefficients_fx": complete("fx", spec.fx),
            **_load_table(spec.coefficients_for("forward"), _nominal_lateral_loads(spec.id)),
            "nominal_point": nominal_point_truth(spec),
            "lateral_conditions": _lateral_conditions(spec),
        }
        longitudinal = _longitudinal_table(spec)
        if longitudinal is not None:
            entry["longitudinal"] = longitudinal
        reverse_runs = [run for run in RUNS if run.specimen == spec.id and run.rolling_direction == "reverse"]
        if reverse_runs:
            loads = tuple(sorted({fz for run in reverse_runs for fz in run.loads_n}))
            entry["reverse_rolling"] = {
                "coefficients": complete("fy", spec.coefficients_for("reverse")),
                **_load_table(spec.coefficients_for("reverse"), loads),
            }
        if spec.conicity_ply_steer is not None:
            entry["conicity_and_ply_steer"] = zero_slip_truth(spec)
        if spec.fxc is not None and spec.fyc is not None:
            entry["coefficients_fxc"] = complete("fxc", spec.fxc)
            entry["coefficients_fyc"] = complete("fyc", spec.fyc)
        specimens[spec.id] = entry
    span_h = control_span_h()
    return {
        "note": "Fictional demo data. True Magic Formula coefficients (Pacejka 2006, 4.3.2, lambda = 1, "
                "pressure terms as in dossier.model.magic_formula) in ISO 8855 axes, alpha and gamma in rad, "
                "kappa as a fraction; dpi = (p - p0)/p0 with p0 = p0_kpa and p the run's set pressure. "
                "coefficients_fy (= coefficients), coefficients_mz and coefficients_fx are complete: every "
                "catalogue coefficient, 0 where not used. All values here are UNdrifted (the rig files carry "
                "the drift, see session). Cornering stiffness = -dFy/dalpha at alpha = 0 by central difference, "
                "per degree; peak_mu = max |Fy|/Fz for |alpha| <= 12 deg; peak_mu_mean_of_both_directions "
                "averages the two slip directions' peaks (as dossier reports). Per specimen, loads_n and the "
                "lists after it are for the forward-rolling slip-angle runs at camber 0 and 240 kPa; "
                "lateral_conditions repeats them for every (pressure, camber) tested. Pneumatic trail at zero "
                "slip = -(dMz/dalpha)/(dFy/dalpha) at alpha = 0 by central differences, m. Longitudinal slip "
                "stiffness = dFx/dkappa at kappa = 0 by central difference, N per unit slip ratio; "
                "peak_fx_mu_positive_slip / _negative_slip = max |Fx|/Fz for 0 < kappa <= 0.25 / "
                "-0.25 <= kappa < 0. nominal_point holds these at 4000 N, 240 kPa, camber 0 (for CTL-1, "
                "which has no longitudinal run, from its true Fx coefficients). spike_rows_0_based are "
                "data-row indices (0 = first data row) carrying an added spike on Fy (Fx for slip-ratio runs).",
        "axis_convention": "ISO 8855",
        "generator": {
            "seed": SEED,
            "sample_rate_hz": SAMPLE_RATE_HZ,
            "sample_rate_longitudinal_hz": SAMPLE_RATE_LONGITUDINAL_HZ,
            "relaxation_length_m": RELAXATION_LENGTH_M,
            "speed_kmh": SPEED_KMH,
            "pressure_kpa": P0_KPA,
            "p0_kpa": P0_KPA,
            "fz0_n": FZ0_N,
            "r0_m": R0_M,
            "sweep": f"0 -> +{SWEEP_MAX_DEG:g} -> -{SWEEP_MAX_DEG:g} -> 0 deg (ISO 8855) at {SWEEP_RATE_DEG_S:g} deg/s",
            "slip_ratio_sweep": f"0 -> +{SLIP_RATIO_MAX:g} -> -{SLIP_RATIO_MAX:g} -> 0 at {SLIP_RATIO_RATE_PER_S:g} "
                                f"per s; Fx lags the slip ratio by a first-order lag of {SLIP_RATIO_LAG_S:g} s",
            "noise_fy_n": NOISE_FY_N,
            "noise_fx_n": NOISE_FX_N,
            "noise_mz_nm": NOISE_MZ_NM,
            "noise_fz_fraction": NOISE_FZ_FRACTION,
            "noise_slip_deg": NOISE_SLIP_DEG,
            "noise_slip_ratio": NOISE_SLIP_RATIO,
            "noise_inclination_deg": NOISE_INCLINATION_DEG,
            "spike_size_n": SPIKE_SIZE_N,
            "mz_model": "dossier.model.magic_formula.mz0 with the specimen's true Mz0 and Fy0 coefficients, "
                        "of the lagged slip angle",
            "pressure_model": "the forces see the run's set pressure; the recorded channel adds a warm-up "
                              f"rise of {PRESSURE_WARMUP_KPA:g} kPa over the run and noise",
        },
        "session": {
            "date": SESSION_START.date().isoformat(),
            "drift": {
                "law": f"g(t) = 1 - {DRIFT_RATE_PER_H:g} * (t - {SESSION_START:%H:%M}) / 1 h, t = the run's tested_at, "
                f"on the Harlow Ridge rig; g(t) = 1 - {EZ_DRIFT_RATE_PER_H:g} * (t - {EZ_START:%H:%M}) / 1 h on the "
                "Eisenau rig",
                "applies_to": "Fy, Mz and Fx of every run (true values times g, before noise and spikes); "
                              "one factor per run, constant within the run",
                "reference_time": SESSION_START.isoformat(),
                "rate_per_h": DRIFT_RATE_PER_H,
                "drop_over_span": round(DRIFT_RATE_PER_H * span_h, 6),
                "span_h": span_h,
                "span": "from the first to the last control-tire run",
            },
            "runs": [
                {
                    "file": run.file,
                    "specimen": run.specimen,
                    "tested_at": run.tested_at.isoformat(),
                    "rolling_direction": run.rolling_direction,
                    "sweep": run.sweep,
                    "pressure_kpa": run.pressure_kpa,
                    "camber_setpoints_deg": list(run.cambers_deg),
                    "loads_n": list(run.loads_n),
                    "drift_factor": round(drift_factor(run), 6),
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
        if run.lab == HR:
            write_harlow_ridge(path, ch)
        else:
            write_eisenau(path, ch, run)
        print(f"wrote {path.relative_to(HERE)} ({path.stat().st_size / 1024:.0f} KiB, {ch['time'].size} samples, "
              f"drift factor {drift_factor(run):.4f})")
    TRUTH_FILE.write_text(json.dumps(truth_document(spike_rows), indent=2) + "\n", encoding="utf-8")
    print(f"wrote {TRUTH_FILE.relative_to(HERE)}")


if __name__ == "__main__":
    main()
