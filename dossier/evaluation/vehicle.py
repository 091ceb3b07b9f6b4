"""Vehicle balance from tire data: the steady-state understeer gradient of a two-axle vehicle.

Gillespie, *Fundamentals of Vehicle Dynamics* (SAE, 1992), ch. 6; Milliken & Milliken, *Race Car
Vehicle Dynamics* (1995). Linear range only: K = Wf/Cαf − Wr/Cαr in deg/g with axle loads (N)
and axle cornering stiffnesses (N/deg); K > 0 understeer, K < 0 oversteer. Characteristic speed
(K > 0) V = sqrt(57.3 L g / K); critical speed (K < 0) V = sqrt(−57.3 L g / K); yaw-rate gain
r/δ = (V/L) / (1 + K V² / (57.3 L g)). Simplifications (stated in the dossier): no roll steer,
compliance steer, lateral load transfer or aligning-torque effects; tires in their linear range.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from ..metrics.evaluate import single_metric
from ..model.fit import SpecimenModel
from ..project.manifest import Manifest
from ..standards.coverage import effective_dof, interval
from ..standards.sidewall import parse_size
from ..standards.units import STANDARD_GRAVITY_M_PER_S2

DEG_PER_RAD = 180.0 / math.pi  # the "57.3" of the handbook formulas
NEUTRAL_BAND_DEG_PER_G = 0.05  # |K| below this is called neutral (common practice)

SIMPLIFICATIONS = (
    "steady-state cornering in the tires' linear range (small slip angles, lateral acceleration well below the limit)",
    "each tire at its static load: no lateral load transfer, no roll steer, no compliance steer",
    "no aligning-torque, camber-thrust or traction effects; the rig's cornering stiffness stands for the road's",
)


@dataclass(frozen=True)
class AxleFitment:
    """What is fitted on one axle: the specimen and how many tires carry the axle."""

    specimen: str
    tires: int  # 2 for singles, 4 for duals, 2 for wide-base singles
    kind: str  # "single", "dual" or "wide-base single"


@dataclass(frozen=True)
class Balance:
    """The linear handling of one front/rear fitment."""

    front: str
    rear: str
    front_tire_load_n: float
    rear_tire_load_n: float
    front_axle_stiffness_n_per_deg: float
    rear_axle_stiffness_n_per_deg: float
    understeer_gradient_deg_per_g: float
    understeer_gradient_ci95: tuple[float, float] | None
    characteristic_speed_kmh: float | None  # K > 0
    critical_speed_kmh: float | None  # K < 0
    character: str  # "understeer", "neutral", "oversteer"
    extrapolated: bool = False
    notes: tuple[str, ...] = ()  # how a tire was counted where it differs from the axle's declaration


def understeer_gradient_deg_per_g(
    front_axle_load_n: float,
    rear_axle_load_n: float,
    front_axle_stiffness_n_per_deg: float,
    rear_axle_stiffness_n_per_deg: float,
) -> float:
    """K = Wf/Cαf − Wr/Cαr in deg/g (Gillespie 1992, ch. 6); loads in N, stiffnesses in N/deg per axle."""
    return front_axle_load_n / front_axle_stiffness_n_per_deg - rear_axle_load_n / rear_axle_stiffness_n_per_deg


def characteristic_speed_kmh(k_deg_per_g: float, wheelbase_m: float) -> float | None:
    """V = sqrt(57.3 L g / K) for K > 0, km/h."""
    return (
        None
        if k_deg_per_g <= 0
        else 3.6 * math.sqrt(DEG_PER_RAD * wheelbase_m * STANDARD_GRAVITY_M_PER_S2 / k_deg_per_g)
    )


def critical_speed_kmh(k_deg_per_g: float, wheelbase_m: float) -> float | None:
    """V = sqrt(−57.3 L g / K) for K < 0, km/h."""
    return (
        None
        if k_deg_per_g >= 0
        else 3.6 * math.sqrt(-DEG_PER_RAD * wheelbase_m * STANDARD_GRAVITY_M_PER_S2 / k_deg_per_g)
    )


def yaw_rate_gain_per_s(speed_kmh: float, k_deg_per_g: float, wheelbase_m: float) -> float:
    """r/δ = (V/L)/(1 + K V²/(57.3 L g)) in (rad/s) per rad of road-wheel steer."""
    v = speed_kmh / 3.6
    denom = 1.0 + k_deg_per_g * v * v / (DEG_PER_RAD * wheelbase_m * STANDARD_GRAVITY_M_PER_S2)
    return float("inf") if denom <= 0 else (v / wheelbase_m) / denom


def character(k_deg_per_g: float) -> str:
    if abs(k_deg_per_g) < NEUTRAL_BAND_DEG_PER_G:
        return "neutral"
    return "understeer" if k_deg_per_g > 0 else "oversteer"


def balance(
    front: AxleFitment,
    rear: AxleFitment,
    front_axle_load_n: float,
    rear_axle_load_n: float,
    wheelbase_m: float,
    stiffness_n_per_deg,
    extrapolated=lambda specimen, load: False,
) -> Balance:
    """Understeer gradient of a fitment; `stiffness_n_per_deg(specimen, tire_load_n)` → (value,
    stderr | None, degrees of freedom | None)."""
    fl = front_axle_load_n / front.tires
    rl = rear_axle_load_n / rear.tires
    cf, sf, nf = stiffness_n_per_deg(front.specimen, fl)
    cr, sr, nr = stiffness_n_per_deg(rear.specimen, rl)
    caf, car = front.tires * cf, rear.tires * cr
    k = understeer_gradient_deg_per_g(front_axle_load_n, rear_axle_load_n, caf, car)
    ci = None
    if sf is not None and sr is not None:
        # delta method: dK/dCαf = −Wf/Cαf², dK/dCαr = +Wr/Cαr²; the two tires' errors independent
        # unless the same specimen is on both axles (then fully correlated: worst case, added linearly).
        gf = -front_axle_load_n / caf**2 * front.tires * sf
        gr = rear_axle_load_n / car**2 * rear.tires * sr
        if front.specimen == rear.specimen:  # one fit: its own degrees of freedom
            sd, dof = abs(gf) + abs(gr), nf
        else:
            sd, dof = math.hypot(gf, gr), effective_dof([(gf, nf), (gr, nr)])
        ci = interval(k, sd, dof)
    return Balance(
        front.specimen,
        rear.specimen,
        fl,
        rl,
        caf,
        car,
        k,
        ci,
        characteristic_speed_kmh(k, wheelbase_m),
        critical_speed_kmh(k, wheelbase_m),
        character(k),
        extrapolated(front.specimen, fl) or extrapolated(rear.specimen, rl),
    )


def as_fitted(axle: AxleFitment, size: str, where: str) -> tuple[AxleFitment, str | None]:
    """The axle as the specimen is fitted to it: a wide-base single on an axle declared as duals is
    counted as one tire per dual pair (half the tires, each at twice the load), with a note saying so."""
    decoded = parse_size(size)
    if axle.kind != "dual" or decoded is None or not decoded.wide_base:
        return axle, None
    tires = max(axle.tires // 2, 1)
    note = (
        f"{axle.specimen} ({size}) is a wide-base single: on the {where} axle, declared as {axle.tires} tires in dual "
        f"pairs, it is counted as {tires} tires, each at 1/{tires} of the axle load (a wide-base single replaces a "
        "dual pair; common practice)"
    )
    return AxleFitment(axle.specimen, tires, "wide-base single"), note


def fitment_matrix(manifest: Manifest, models: list[SpecimenModel]) -> list:
    """Understeer gradient of every front × rear pairing of the fitted specimens (no controls)."""
    v = manifest.vehicle
    if v is None:
        return []
    by_id = {m.specimen: m for m in models if m.fy is not None}
    ids = [s.id for s in manifest.specimens if s.role != "control" and s.id in by_id]

    def stiffness(sid, load):
        mv = single_metric(by_id[sid], "cornering_stiffness", load)
        assert mv is not None  # by_id holds only lateral fits, and their cornering stiffness is never None
        return mv.value, mv.stderr, mv.dof

    def extrapolated(sid, load):
        fy = by_id[sid].fy
        assert fy is not None  # by_id holds only models with a lateral fit
        lo, hi = fy.load_range_n
        return not (0.98 * lo <= load <= 1.02 * hi)

    sizes = {s.id: s.size for s in manifest.specimens}
    out = []
    for f in ids:
        for r in ids:
            front, front_note = as_fitted(AxleFitment(f, v.front.tires, v.front.kind), sizes[f], "front")
            rear, rear_note = as_fitted(AxleFitment(r, v.rear.tires, v.rear.kind), sizes[r], "rear")
            b = balance(front, rear, v.front_axle_load_n, v.rear_axle_load_n, v.wheelbase_m, stiffness, extrapolated)
            out.append(replace(b, notes=tuple(n for n in (front_note, rear_note) if n)))
    return out
