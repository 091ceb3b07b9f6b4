"""Small real projects for tests: a manifest and rig files written into a temporary folder."""

from __future__ import annotations

from pathlib import Path

import numpy as np

RATE_HZ = 25.0


def discrete_lag_deg(rate_deg_s: float, tau_s: float) -> float:
    """Steady lag of the sampled first-order filter used by `sweep_samples` on a constant ramp.

    y[i] = a y[i-1] + (1 - a) x[i] with a = exp(-dt/tau) trails a ramp of r·dt per sample by
    a·r·dt/(1 - a) (solve e = a(e - r dt) for the error e).
    """
    dt = 1.0 / RATE_HZ
    a = np.exp(-dt / tau_s)
    return a * rate_deg_s * dt / (1.0 - a)


def lag(x: np.ndarray, tau_s: float) -> np.ndarray:
    """First-order lag of a sampled signal (the tire's relaxation), exact for a held input."""
    a = np.exp(-1.0 / (RATE_HZ * tau_s))
    y = np.empty_like(x)
    y[0] = x[0]
    for i in range(1, x.size):
        y[i] = a * y[i - 1] + (1.0 - a) * x[i]
    return y


def sweep_samples(
    loads_n,
    fy_of_slip_and_load,
    *,
    settle_s=1.0,
    ramp_s=1.0,
    sweep_deg=12.0,
    rate_deg_s=4.0,
    noise_n=0.0,
    seed=0,
    tau_s=None,
):
    """Return (time_s, slip_deg, fz_n, fy_n) arrays of a stepped-load, triangular-slip program.

    With `tau_s`, the force follows the slip through a first-order lag (relaxation length / speed).
    """
    rng = np.random.default_rng(seed)
    t_all, a_all, fz_all, fy_all = [], [], [], []
    t0 = 0.0
    prev = 0.25 * loads_n[0]  # the rig starts from a small preload
    dt = 1.0 / RATE_HZ
    for load in loads_n:
        # ramp from the previous load, then a settling hold at zero slip
        n_ramp = int(ramp_s * RATE_HZ)
        ramp = np.linspace(prev, load, n_ramp, endpoint=False)
        n_hold = int(settle_s * RATE_HZ)
        hold = load * (1 + 0.04 * np.exp(-np.arange(n_hold) / 6.0) * np.cos(np.arange(n_hold)))
        quarter = sweep_deg / rate_deg_s
        tt = np.arange(0, 4 * quarter, dt)
        tri = sweep_deg * np.where(
            tt < quarter, tt / quarter, np.where(tt < 3 * quarter, 2 - tt / quarter, tt / quarter - 4)
        )
        fz = np.concatenate([ramp, hold, np.full(tri.size, float(load))])
        slip = np.concatenate([np.zeros(n_ramp + n_hold), tri])
        felt = slip if tau_s is None else lag(slip, tau_s)
        fy = fy_of_slip_and_load(felt, fz) + noise_n * rng.standard_normal(slip.size)
        t_all.append(t0 + dt * np.arange(fz.size))
        t0 = t_all[-1][-1] + dt
        a_all.append(slip)
        fz_all.append(fz)
        fy_all.append(fy)
        prev = load
    return tuple(np.concatenate(x) for x in (t_all, a_all, fz_all, fy_all))


def write_csv(
    path: Path, header: list[str], columns: list[np.ndarray], *, delimiter=",", decimal=".", preamble: list[str] = ()
):
    path.parent.mkdir(parents=True, exist_ok=True)
    lines = list(preamble) + [delimiter.join(header)]
    for row in zip(*columns):
        cells = [f"{v:.6g}" for v in row]
        if decimal == ",":
            cells = [c.replace(".", ",") for c in cells]
        lines.append(delimiter.join(cells))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


MANIFEST_HEAD = """\
[document]
title = "Test dossier"
number = "T-0001"
revision = "A"
customer = "Test customer"
program = "Test program"
authors = ["A. Tester"]
date = 2026-11-20
"""


def specimen_block(sid: str, role: str = "baseline", size: str = "225/45 R17 94W") -> str:
    return f'\n[[specimens]]\nid = "{sid}"\nrole = "{role}"\nsize = "{size}"\n'


def run_block(
    sid: str,
    file: str,
    loads,
    load_unit="N",
    convention="SAE J670",
    delimiter=",",
    decimal=".",
    units=None,
    pressure="250",
    pressure_unit="kPa",
) -> str:
    units = {"time": "s", "slip_angle": "deg", "fz": "N", "fy": "N", **(units or {})}
    cols = "\n".join(f'{ch} = {{ name = "{ch.upper()}", unit = "{u}" }}' for ch, u in units.items())
    return (
        f'\n[[runs]]\nspecimen = "{sid}"\nfile = "{file}"\naxis_convention = "{convention}"\n'
        f'delimiter = "{delimiter}"\ndecimal = "{decimal}"\n'
        f'load_setpoints = {{ values = [{", ".join(str(v) for v in loads)}], unit = "{load_unit}" }}\n'
        f'pressure = {{ value = {pressure}, unit = "{pressure_unit}" }}\n'
        f"[runs.columns]\n{cols}\n"
    )


def operating_point(
    x,
    load_n,
    *,
    fy=None,
    mz=None,
    fx=None,
    camber_deg=0.0,
    pressure_kpa=250.0,
    sweep="slip_angle",
    specimen="S",
    run_index=0,
    fz=None,
):
    """A conditioned operating point made directly from arrays (for fit-stage tests)."""
    from dossier.conditioning.steady_state import OperatingPoint, SlipCurve

    x = np.asarray(x, dtype=float)
    fz = np.full(x.size, float(load_n)) if fz is None else np.asarray(fz, dtype=float)
    curve = SlipCurve(sweep, x, fz, fy, mz, fx, np.ones(x.size))
    main = fy if sweep == "slip_angle" else fx
    return OperatingPoint(
        specimen=specimen,
        run_index=run_index,
        source_file="synthetic",
        sweep=sweep,
        rolling_direction="forward",
        tested_at=None,
        load_n=float(load_n),
        camber_deg=float(camber_deg),
        pressure_kpa=float(pressure_kpa),
        mean_load_n=float(np.mean(fz)),
        measured_pressure_kpa=None,
        mean_speed_kmh=None,
        curve=curve,
        rising=None,
        falling=None,
        hysteresis=None,
        offsets=None,
        n_sweeps=1.0,
        raw_x=x,
        raw_main=np.asarray(main, dtype=float),
        first_line=2,
        last_line=2 + x.size,
        n_samples_kept=x.size,
        time_span_s=(0.0, 1.0),
    )
