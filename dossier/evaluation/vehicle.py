"""Vehicle balance from tire data: steady-state turning of a vehicle with any number of axles, per
declared fitment, replacement comparisons at equal axle load, and a static rollover indicator.

Two axles: Gillespie, *Fundamentals of Vehicle Dynamics* (SAE, 1992), ch. 6; K = Wf/Cαf − Wr/Cαr
in deg/g with axle loads (N) and axle cornering stiffnesses (N/deg); K > 0 understeer.

Any number of axles (tandems, tag and pusher axles, trailers treated as part of one rigid unit): the
linear single-track model with n axles at x_i ahead of the centre of gravity, axle cornering
stiffness C_i and steer s_i (1 steered, 0 not). The steady-state equations
ΣC_i(s_iδ − β − x_iρ) = m·a_y and ΣC_i·x_i(s_iδ − β − x_iρ) = 0 (ρ = 1/R) give
δ = L_eq·ρ + K·a_y with, for A = ΣC, B = ΣCx, D = ΣCx², S = ΣCs, T = ΣCxs,

    L_eq = (B² − A·D) / (B·S − A·T)   (the equivalent wheelbase)
    K    = m·B / (B·S − A·T)           (the understeer gradient, rad per m/s²)

which reduce to the wheelbase and to Gillespie's K for two axles with the front one steered. This is
the equivalent-wheelbase treatment of multi-axle steady-state turning (Winkler, "Simplified analysis
of the steady-state turning of complex vehicles", Vehicle System Dynamics 29, 1998; from memory).
Characteristic speed (K > 0) V = sqrt(L_eq/K), critical speed (K < 0) V = sqrt(−L_eq/K), yaw-rate
gain r/δ = (V/L_eq)/(1 + K V²/L_eq) (K in rad per m/s²).

Static rollover threshold of a rigid vehicle (Gillespie 1992, ch. 9): a_y/g = t/(2h) with t the
effective track (here the axle-load-weighted mean of the axles' effective tracks: the outer tires'
centres of a dual pair) and h the centre-of-gravity height. An upper bound: suspension roll, tire
compliance and lateral load shift lower the real threshold.

Uncertainty: each tire quantity comes from its specimen's fit with a standard error and degrees of
freedom; a vehicle quantity's is propagated by the delta method (central differences), the
contributions of one specimen added linearly (its values at different loads come from one fit:
fully correlated, the worst case), those of different specimens in quadrature (independent fits),
the degrees of freedom by Welch–Satterthwaite.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Protocol

from ..metrics.evaluate import single_metric
from ..model.fit import SpecimenModel
from ..project.manifest import FitmentSpec, Manifest, Mounting, VehicleSpec
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
MULTI_AXLE_SIMPLIFICATION = (
    "more than two axles: one rigid unit whose non-steered axles resist yaw through their slip angles "
    "(the equivalent wheelbase); axle loads as declared (a tandem's split is set by its suspension)"
)
ROLLOVER_CAUTION = (
    "an upper-bound indicator for a rigid vehicle: suspension roll, tire lateral and vertical compliance and "
    "lateral load shift lower the real threshold, often by a quarter or more"
)


@dataclass(frozen=True)
class Estimate:
    """A value with its 95 % interval (None when an input has no standard error)."""

    value: float
    ci95: tuple[float, float] | None = None


@dataclass(frozen=True)
class TireInput:
    """One specimen's quantity at one tire load, as the fit gives it."""

    specimen: str
    value: float
    stderr: float | None
    dof: float | None


@dataclass(frozen=True)
class AxleResult:
    """One axle of one fitment: its tires at their own static load."""

    axle: str
    position: str
    steered: bool
    specimen: str
    assembly: str
    tires: int
    tire_load_n: float
    cornering_stiffness_n_per_deg: Estimate  # the axle's: tires × the tire's
    lateral_capacity_n: Estimate | None  # the axle's: tires × peak lateral friction × tire load
    aligning_stiffness_nm_per_deg: Estimate | None  # the axle's
    effective_track_m: float | None
    rated_load_kg: float | None  # per tire, as fitted (the dual index in a dual pair)
    load_index: int | None  # the one that applies as fitted
    extrapolated: bool  # the tire load lies outside the fitted load range

    @property
    def tire_load_kg(self) -> float:
        return self.tire_load_n / STANDARD_GRAVITY_M_PER_S2

    @property
    def over_rating(self) -> bool:
        return self.rated_load_kg is not None and self.tire_load_kg > self.rated_load_kg * 1.001


@dataclass(frozen=True)
class FitmentResult:
    """The linear handling and stability indicator of one declared fitment."""

    name: str
    axles: tuple[AxleResult, ...]
    understeer_gradient_deg_per_g: Estimate
    equivalent_wheelbase_m: float
    characteristic_speed_kmh: float | None  # K > 0
    critical_speed_kmh: float | None  # K < 0
    character: str  # "understeer", "neutral", "oversteer"
    rollover_threshold_g: float | None
    findings: tuple[str, ...]
    replaces: str | None = None
    uniform_specimen: str | None = None  # the specimen on every axle, if one

    @property
    def extrapolated(self) -> bool:
        return any(a.extrapolated for a in self.axles)

    def axle(self, name: str) -> AxleResult:
        return next(a for a in self.axles if a.axle == name)


@dataclass(frozen=True)
class AxleChange:
    """One axle where a replacement differs from what it replaces, at the same axle load."""

    axle: str
    before: AxleResult
    after: AxleResult
    cornering_stiffness_pct: Estimate
    lateral_capacity_pct: Estimate | None
    aligning_stiffness_pct: Estimate | None  # steered axles only


@dataclass(frozen=True)
class Replacement:
    fitment: str
    replaces: str
    changes: tuple[AxleChange, ...]
    understeer_gradient_change_deg_per_g: Estimate
    rollover_threshold_change_g: float | None


def understeer_gradient_deg_per_g(
    front_axle_load_n: float,
    rear_axle_load_n: float,
    front_axle_stiffness_n_per_deg: float,
    rear_axle_stiffness_n_per_deg: float,
) -> float:
    """K = Wf/Cαf − Wr/Cαr in deg/g (Gillespie 1992, ch. 6); loads in N, stiffnesses in N/deg per axle."""
    return front_axle_load_n / front_axle_stiffness_n_per_deg - rear_axle_load_n / rear_axle_stiffness_n_per_deg


def steady_turning(
    axle_loads_n: list[float],
    from_front_m: list[float],
    steered: list[bool],
    axle_stiffness_n_per_deg: list[float],
) -> tuple[float, float]:
    """(understeer gradient in deg/g, equivalent wheelbase in m) of the n-axle single-track model."""
    weight = sum(axle_loads_n)
    cg = sum(w * x for w, x in zip(axle_loads_n, from_front_m)) / weight
    x = [cg - p for p in from_front_m]  # ahead of the centre of gravity
    c = [k * DEG_PER_RAD for k in axle_stiffness_n_per_deg]  # N/rad
    a = sum(c)
    b = sum(ci * xi for ci, xi in zip(c, x))
    d = sum(ci * xi * xi for ci, xi in zip(c, x))
    s = sum(ci for ci, st in zip(c, steered) if st)
    t = sum(ci * xi for ci, xi, st in zip(c, x, steered) if st)
    den = b * s - a * t
    k_rad_per_mps2 = (weight / STANDARD_GRAVITY_M_PER_S2) * b / den
    return k_rad_per_mps2 * STANDARD_GRAVITY_M_PER_S2 * DEG_PER_RAD, (b * b - a * d) / den


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


def static_rollover_threshold_g(effective_track_m: float, cg_height_m: float) -> float:
    """a_y/g = t/(2h) of a rigid vehicle (Gillespie 1992, ch. 9)."""
    return effective_track_m / (2.0 * cg_height_m)


def effective_track_m(axle_track_m: float | None, m: Mounting) -> float | None:
    """The track about which an assembly tips: a single's (or its own), a dual pair's outer tires' centres."""
    track = m.track_m if m.track_m is not None else axle_track_m
    if track is None:
        return None
    return track + (m.dual_spacing_m or 0.0) if m.assembly == "dual" else track


def character(k_deg_per_g: float) -> str:
    if abs(k_deg_per_g) < NEUTRAL_BAND_DEG_PER_G:
        return "neutral"
    return "understeer" if k_deg_per_g > 0 else "oversteer"


def propagate(f, inputs: list[TireInput]) -> Estimate:
    """f(values) with its 95 % interval: delta method over `inputs` (see the module docstring)."""
    x = [i.value for i in inputs]
    value = f(x)
    if not inputs or any(i.stderr is None or i.dof is None for i in inputs):
        return Estimate(value, None)
    per_specimen: dict[str, list] = {}
    for n, i in enumerate(inputs):
        h = 1e-6 * max(abs(i.value), 1e-9)
        up, down = list(x), list(x)
        up[n] += h
        down[n] -= h
        g = (f(up) - f(down)) / (2 * h)
        acc = per_specimen.setdefault(i.specimen, [0.0, i.dof])
        acc[0] += abs(g * i.stderr)
        acc[1] = min(acc[1], i.dof)
    sd = math.sqrt(sum(u * u for u, _ in per_specimen.values()))
    return Estimate(value, interval(value, sd, effective_dof([(u, n) for u, n in per_specimen.values()])))


def _axle(vehicle: VehicleSpec, i: int, m: Mounting, tires: TireSource, sizes: dict[str, str]):
    a = vehicle.axles[i]
    load = a.load_n / m.tires
    c = tires.quantity(m.specimen, "cornering_stiffness", load)
    assert c is not None  # the caller evaluates only specimens with a lateral fit
    mu = tires.quantity(m.specimen, "peak_lateral_friction", load)
    ca = tires.quantity(m.specimen, "aligning_stiffness", load)
    size = parse_size(sizes.get(m.specimen) or "")
    fitted = "dual" if m.assembly == "dual" else "single"
    rated = None if size is None else size.rated_load_kg_as(fitted)
    index = (
        None
        if size is None
        else (size.load_index_dual if fitted == "dual" and size.load_index_dual else size.load_index)
    )
    n = m.tires
    inputs = {"c": [c], "mu": [mu] if mu else [], "ca": [ca] if ca else []}
    result = AxleResult(
        a.name,
        a.position,
        a.steered,
        m.specimen,
        m.assembly,
        n,
        load,
        propagate(lambda v: n * v[0], [c]),
        None if mu is None else propagate(lambda v: n * v[0] * load, [mu]),
        None if ca is None else propagate(lambda v: n * v[0], [ca]),
        effective_track_m(a.track_m, m),
        rated,
        index,
        tires.extrapolated(m.specimen, load),
    )
    return result, inputs


def _fitment(vehicle: VehicleSpec, f: FitmentSpec, tires: TireSource, sizes: dict[str, str]):
    axles, inputs = zip(*(_axle(vehicle, i, m, tires, sizes) for i, m in enumerate(f.mountings)))
    loads = [a.load_n for a in vehicle.axles]
    where = [a.from_front_m for a in vehicle.axles]
    steer = [a.steered for a in vehicle.axles]
    counts = [a.tires for a in axles]
    stiffness_inputs = [ins["c"][0] for ins in inputs]

    def k_of(values):
        return steady_turning(loads, where, steer, [n * v for n, v in zip(counts, values)])[0]

    k = propagate(k_of, stiffness_inputs)
    _, l_eq = steady_turning(loads, where, steer, [a.cornering_stiffness_n_per_deg.value for a in axles])
    tracks = [a.effective_track_m for a in axles]
    srt = None
    if vehicle.cg_height_m and all(t is not None for t in tracks):
        mean_track = sum(w * t for w, t in zip(loads, tracks)) / sum(loads)
        srt = static_rollover_threshold_g(mean_track, vehicle.cg_height_m)
    findings = []
    for a in axles:
        if a.over_rating:
            findings.append(
                f"{f.name}, {a.axle} axle: {a.tire_load_kg:.0f} kg per tire is above the {a.rated_load_kg:.0f} kg of "
                f"load index {a.load_index} ({'dual' if a.assembly == 'dual' else 'single'} fitment) of {a.specimen}"
            )
        if a.extrapolated:
            findings.append(
                f"{f.name}, {a.axle} axle: {a.tire_load_n:.0f} N per tire lies outside {a.specimen}'s fitted loads"
            )
    result = FitmentResult(
        f.name,
        tuple(axles),
        k,
        l_eq,
        characteristic_speed_kmh(k.value, l_eq),
        critical_speed_kmh(k.value, l_eq),
        character(k.value),
        srt,
        tuple(findings),
        f.replaces,
        f.uniform_specimen(),
    )
    return result, (k_of, stiffness_inputs, inputs)


def _replacement(new: FitmentResult, old: FitmentResult, new_parts, old_parts) -> Replacement:
    k_new, s_new, ins_new = new_parts
    k_old, s_old, ins_old = old_parts
    n = len(s_old)
    dk = propagate(lambda v: k_new(v[n:]) - k_old(v[:n]), s_old + s_new)
    changes = []
    for i, (b, a) in enumerate(zip(old.axles, new.axles)):
        if (b.specimen, b.assembly) == (a.specimen, a.assembly):
            continue

        def pct(key, b=b, a=a, i=i):
            """100·(after/before − 1) of the axle's total, both specimens' inputs propagated together."""
            ib, ia = ins_old[i][key], ins_new[i][key]
            if not ib or not ia:
                return None
            scale_b = b.tires * (b.tire_load_n if key == "mu" else 1.0)
            scale_a = a.tires * (a.tire_load_n if key == "mu" else 1.0)
            return propagate(lambda v: 100.0 * (scale_a * v[1] / (scale_b * v[0]) - 1.0), ib + ia)

        changes.append(AxleChange(a.axle, b, a, pct("c"), pct("mu"), pct("ca") if a.steered else None))
    srt = (
        None
        if new.rollover_threshold_g is None or old.rollover_threshold_g is None
        else new.rollover_threshold_g - old.rollover_threshold_g
    )
    return Replacement(new.name, old.name, tuple(changes), dk, srt)


@dataclass(frozen=True)
class VehicleResults:
    fitments: tuple[FitmentResult, ...]
    replacements: tuple[Replacement, ...]
    not_evaluated: tuple[str, ...]  # fitments that could not be evaluated, with the reason

    def fitment(self, name: str) -> FitmentResult | None:
        return next((f for f in self.fitments if f.name == name), None)

    def uniform(self, specimen: str) -> FitmentResult | None:
        """The declared fitment with `specimen` on every axle, if there is one."""
        return next((f for f in self.fitments if f.uniform_specimen == specimen), None)

    def __bool__(self) -> bool:
        return bool(self.fitments or self.not_evaluated)


NO_VEHICLE = VehicleResults((), (), ())


class TireSource(Protocol):
    """Where tire quantities come from: the fitted models in a build, a table in a test."""

    def quantity(self, specimen: str, metric: str, load_n: float) -> TireInput | None: ...

    def extrapolated(self, specimen: str, load_n: float) -> bool: ...

    def has(self, specimen: str) -> bool: ...


class FittedTires:
    """Each specimen's tire quantities at a load, from its fitted models."""

    def __init__(self, models: list[SpecimenModel]):
        self.models = {m.specimen: m for m in models if m.fy is not None}

    def has(self, specimen: str) -> bool:
        return specimen in self.models

    def quantity(self, specimen: str, metric: str, load_n: float) -> TireInput | None:
        mv = single_metric(self.models[specimen], metric, load_n)
        return None if mv is None else TireInput(specimen, mv.value, mv.stderr, mv.dof)

    def extrapolated(self, specimen: str, load_n: float) -> bool:
        fy = self.models[specimen].fy
        assert fy is not None  # only specimens with a lateral fit are held
        lo, hi = fy.load_range_n
        return not (0.98 * lo <= load_n <= 1.02 * hi)


def evaluate_vehicle(manifest: Manifest, models: list[SpecimenModel]) -> VehicleResults:
    """Every declared fitment of the manifest's vehicle, and every declared replacement."""
    if manifest.vehicle is None:
        return NO_VEHICLE
    sizes = {s.id: s.size for s in manifest.specimens}
    return evaluate_fitments(manifest.vehicle, FittedTires(models), sizes)


def evaluate_fitments(v: VehicleSpec, tires: TireSource, sizes: dict[str, str]) -> VehicleResults:
    """The fitments of `v` from `tires`; `sizes`: each specimen's size designation (for its rating)."""
    results, parts, skipped = [], {}, []
    for f in v.fitments:
        missing = sorted({m.specimen for m in f.mountings if not tires.has(m.specimen)})
        if missing:
            skipped.append(f"{f.name}: no lateral fit of {', '.join(missing)}")
            continue
        r, p = _fitment(v, f, tires, sizes)
        results.append(r)
        parts[f.name] = p
    by_name = {r.name: r for r in results}
    replacements = tuple(
        _replacement(by_name[f.name], by_name[f.replaces], parts[f.name], parts[f.replaces])
        for f in v.fitments
        if f.replaces and f.name in by_name and f.replaces in by_name
    )
    return VehicleResults(tuple(results), replacements, tuple(skipped))
