"""Generate the truck example's rig files and the truth they were generated from.

Everything here is FICTIONAL demo material: the supplier (Norrvik Tyre Works, truck tires), the
customer (Havbro Trucks), the program (HX-6, a 6×4 tractor), the lab, the specimens and every number.

Run it with no arguments; it rewrites, relative to this script's folder:

* ``rig/*.csv``                   one rig file per run, ISO 8855 axes, SI units, ',' separated;
* ``truth/true_coefficients.json`` each specimen's true Fy0 and Mz0 Magic Formula coefficients and its
  true cornering stiffness, peak lateral friction and aligning stiffness at each set-point load.

The session (one day, 2026-11-18, the flat-track rig TR-2 of the truck tire lab):

* DRV-D, 315/80 R22.5 156/150L, an all-position regional tire (steer axle and drive duals in
  production), at 830 kPa: loads 10, 20, 30 and 36 kN;
* WBS-W, 445/50 R22.5 161L, a wide-base single for the drive axles, at its own 900 kPa: loads 15,
  30 and 45 kN.

At each set-point: a load ramp, a hold with a decaying load oscillation, then a continuous slip sweep
0 -> +20 -> -20 -> 0 deg at 4 deg/s, sampled at 25 Hz; the tire responds to the slip angle lagged by
its relaxation length at 10 km/h. Fy and Mz from ``dossier.model.magic_formula`` with the true
coefficients, plus gaussian noise; no drift (the lab's rig was re-zeroed before each run).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from dossier.model.magic_formula import FY0_COEFFICIENTS, MZ0_COEFFICIENTS, fy0, mz0

HERE = Path(__file__).resolve().parent
SEED = 20261118
FZ0_N = 30000.0  # the coefficients' nominal load
SPEED_KMH = 10.0
SAMPLE_RATE_HZ = 25.0
SIM_RATE_HZ = 500.0
RAMP_S, HOLD_S = 2.0, 1.0
SWEEP_MAX_DEG, SWEEP_RATE_DEG_S = 20.0, 4.0
PRELOAD_N = 1000.0
NOISE_FZ_FRACTION = 0.004
NOISE_FY_N, NOISE_MZ_NM, NOISE_SLIP_DEG = 60.0, 8.0, 0.02

SPECIMENS = {
    "DRV-D": {
        "size": "315/80 R22.5 156/150L",
        "unloaded_radius_m": (22.5 * 25.4 + 2 * 315 * 0.80) / 2000.0,
        "pressure_kpa": 830.0,
        "relaxation_m": 0.85,
        "loads_n": (10000.0, 20000.0, 30000.0, 36000.0),
        "fy": {"pCy1": 1.50, "pDy1": 0.82, "pDy2": -0.085, "pEy1": -1.50, "pEy2": -0.35,
               "pKy1": -7.2, "pKy2": 1.85, "pHy1": 0.0010, "pVy1": 0.010},
        "mz": {"qBz1": 8.5, "qBz2": -1.2, "qCz1": 1.20, "qDz1": 0.085, "qDz2": -0.020,
               "qEz1": -1.6, "qHz1": 0.0015},
    },
    "WBS-W": {
        "size": "445/50 R22.5 161L",
        "unloaded_radius_m": (22.5 * 25.4 + 2 * 445 * 0.50) / 2000.0,
        "pressure_kpa": 900.0,
        "relaxation_m": 1.05,
        "loads_n": (15000.0, 30000.0, 45000.0),
        "fy": {"pCy1": 1.50, "pDy1": 0.77, "pDy2": -0.070, "pEy1": -1.40, "pEy2": -0.35,
               "pKy1": -10.0, "pKy2": 2.30, "pHy1": 0.0008, "pVy1": 0.008},
        "mz": {"qBz1": 8.0, "qBz2": -1.0, "qCz1": 1.22, "qDz1": 0.075, "qDz2": -0.018,
               "qEz1": -1.4, "qHz1": 0.0012},
    },
}
RUNS = (("rig/TR2-0181_DRV-D.csv", "DRV-D"), ("rig/TR2-0182_WBS-W.csv", "WBS-W"))


def complete(catalogue, given: dict[str, float]) -> dict[str, float]:
    """Every coefficient of the catalogue: the given value, else the catalogue's default."""
    names = {c.name for c in catalogue}
    unknown = sorted(set(given) - names)
    if unknown:
        raise ValueError(f"unknown coefficient(s) {unknown}")
    return {c.name: float(given.get(c.name, c.default)) for c in catalogue}


def program(loads_n) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(time s, load N, commanded slip angle deg) on the fine grid: per load a ramp, a hold, a sweep."""
    dt = 1.0 / SIM_RATE_HZ
    sweep_s = 4.0 * SWEEP_MAX_DEG / SWEEP_RATE_DEG_S
    t, fz, slip = [], [], []
    t0, previous = 0.0, PRELOAD_N
    for load in loads_n:
        for duration, kind in ((RAMP_S, "ramp"), (HOLD_S, "hold"), (sweep_s, "sweep")):
            tau = np.arange(0.0, duration, dt)
            if kind == "ramp":
                z = previous + (load - previous) * tau / RAMP_S
                s = np.zeros_like(tau)
            else:
                since = tau + (HOLD_S if kind == "sweep" else 0.0)
                z = load * (1.0 + 0.03 * np.exp(-since / 0.3) * np.sin(2 * np.pi * 2.5 * since))
                phase = SWEEP_RATE_DEG_S * tau
                m = SWEEP_MAX_DEG
                s = (np.where(phase <= m, phase, np.where(phase <= 3 * m, 2 * m - phase, phase - 4 * m))
                     if kind == "sweep" else np.zeros_like(tau))
            t.append(t0 + tau)
            fz.append(z)
            slip.append(s)
            t0 += duration
        previous = load
    return np.concatenate(t), np.concatenate(fz), np.concatenate(slip)


def lagged(x: np.ndarray, time_constant_s: float, dt: float) -> np.ndarray:
    a = np.exp(-dt / time_constant_s)
    y = np.empty_like(x)
    y[0] = x[0]
    for i in range(1, x.size):
        y[i] = a * y[i - 1] + (1.0 - a) * x[i]
    return y


def simulate(spec: dict, rng: np.random.Generator) -> dict[str, np.ndarray]:
    t_fine, fz_fine, slip_fine = program(spec["loads_n"])
    tire_slip = lagged(slip_fine, spec["relaxation_m"] / (SPEED_KMH / 3.6), 1.0 / SIM_RATE_HZ)
    step = int(round(SIM_RATE_HZ / SAMPLE_RATE_HZ))
    t, fz, slip, alpha = t_fine[::step], fz_fine[::step], slip_fine[::step], np.deg2rad(tire_slip[::step])
    fy_c, mz_c = complete(FY0_COEFFICIENTS, spec["fy"]), complete(MZ0_COEFFICIENTS, spec["mz"])
    n = t.size
    return {
        "time": t,
        "slip_angle": slip + rng.normal(0.0, NOISE_SLIP_DEG, n),
        "fz": fz * (1.0 + rng.normal(0.0, NOISE_FZ_FRACTION, n)),
        "fy": fy0(alpha, fz, fy_c, FZ0_N) + rng.normal(0.0, NOISE_FY_N, n),
        "mz": mz0(alpha, fz, mz_c, fy_c, FZ0_N, spec["unloaded_radius_m"]) + rng.normal(0.0, NOISE_MZ_NM, n),
        "pressure": spec["pressure_kpa"] + rng.normal(0.0, 1.0, n),
    }


def write(path: Path, ch: dict[str, np.ndarray]) -> None:
    columns = [("t_s", ch["time"], 3), ("alpha_deg", ch["slip_angle"], 3), ("Fz_N", ch["fz"], 1),
               ("Fy_N", ch["fy"], 1), ("Mz_Nm", ch["mz"], 2), ("p_kPa", ch["pressure"], 1)]
    lines = [",".join(name for name, _, _ in columns)]
    cells = [[f"{v:.{d}f}" for v in np.round(vals, d) + 0.0] for _, vals, d in columns]
    lines += [",".join(row) for row in zip(*cells)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8", newline="\n")


def truth() -> dict:
    out = {"fz0_n": FZ0_N, "axes": "ISO 8855", "specimens": {}}
    h = 1e-6
    for sid, spec in SPECIMENS.items():
        fy_c, mz_c = complete(FY0_COEFFICIENTS, spec["fy"]), complete(MZ0_COEFFICIENTS, spec["mz"])
        r0 = spec["unloaded_radius_m"]
        per_load = []
        for z in spec["loads_n"]:
            c = float(fy0(np.array([h]), np.array([z]), fy_c, FZ0_N)[0] - fy0(np.array([-h]), np.array([z]), fy_c, FZ0_N)[0]) / (2 * h)
            k = float(mz0(np.array([h]), np.array([z]), mz_c, fy_c, FZ0_N, r0)[0] - mz0(np.array([-h]), np.array([z]), mz_c, fy_c, FZ0_N, r0)[0]) / (2 * h)
            grid = np.deg2rad(np.linspace(0.0, 30.0, 6001))
            peak = float(np.max(np.abs(fy0(grid, np.full_like(grid, z), fy_c, FZ0_N))))
            per_load.append({"load_n": z, "cornering_stiffness_n_per_deg": abs(c) * np.pi / 180.0,
                             "aligning_stiffness_nm_per_deg": abs(k) * np.pi / 180.0,
                             "peak_lateral_friction": peak / z})
        out["specimens"][sid] = {"size": spec["size"], "pressure_kpa": spec["pressure_kpa"], "unloaded_radius_m": r0,
                                 "fy": fy_c, "mz": mz_c, "at_loads": per_load}
    return out


def main() -> None:
    (HERE / "rig").mkdir(exist_ok=True)
    (HERE / "truth").mkdir(exist_ok=True)
    for stream, (rel, sid) in enumerate(RUNS):
        ch = simulate(SPECIMENS[sid], np.random.default_rng([SEED, stream]))
        write(HERE / rel, ch)
        print(f"wrote {rel} ({ch['time'].size} samples)")
    (HERE / "truth" / "true_coefficients.json").write_text(json.dumps(truth(), indent=2) + "\n", encoding="utf-8")
    print("wrote truth/true_coefficients.json")


if __name__ == "__main__":
    main()
