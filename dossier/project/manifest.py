"""The manifest's typed result: what a project declares, as immutable dataclasses.

:func:`typed_manifest` turns a validated document (see :mod:`dossier.project.schema`) into a
:class:`Manifest`, converting every quantity into the internal units.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..standards import axes, units
from ..standards.statics import static_axle_loads_n
from ..standards.units import STANDARD_GRAVITY_M_PER_S2

MANIFEST_NAME = "dossier.toml"
ROLES = ("baseline", "candidate", "control")
STATUSES = ("draft", "in review", "released")
SIGNOFF_ROLES = ("author", "checker", "approver")

# Channels a rig file may carry: channel -> quantity (for its unit).
CHANNELS: dict[str, str] = {
    "time": "time",
    "slip_angle": "angle",
    "inclination": "angle",
    "slip_ratio": "slip_ratio",
    "fz": "force",
    "fy": "force",
    "fx": "force",
    "mz": "moment",
    "mx": "moment",
    "my": "moment",
    "pressure": "pressure",
    "speed": "speed",
}
SWEEPS = ("slip_angle", "slip_ratio")
# Channels every run needs, and those its sweep needs in addition.
REQUIRED_CHANNELS = ("time", "fz")
SWEEP_CHANNELS = {"slip_angle": ("slip_angle", "fy"), "slip_ratio": ("slip_ratio", "fx")}
# Combined slip: the other slip is held at set-points while the sweep runs; both forces are needed.
HELD_SLIP = {"slip_ratio": "slip_angle", "slip_angle": "slip_ratio"}  # sweep -> the slip it holds
HELD_SETPOINTS_KEY = {"slip_angle": "slip_angle_setpoints_deg", "slip_ratio": "slip_ratio_setpoints"}
COMBINED_CHANNELS = ("slip_angle", "slip_ratio", "fy", "fx")


@dataclass(frozen=True)
class DocumentInfo:
    title: str
    number: str
    revision: str
    customer: str
    program: str
    supplier: str | None
    authors: tuple[str, ...]
    date: dt.date


@dataclass(frozen=True)
class Specimen:
    id: str
    role: str
    size: str
    construction: str
    rated_load_n: float | None
    unloaded_radius_m: float | None = None
    tin: str | None = None
    nominal_pressure_kpa: float | None = None  # None: the specimen's most-tested pressure
    nominal_camber_deg: float | None = None  # None: zero where tested there, else its most-tested camber


@dataclass(frozen=True)
class ColumnSpec:
    name: str
    unit: str


@dataclass(frozen=True)
class RunSpec:
    index: int
    specimen: str
    file: str  # relative to the project folder, POSIX separators
    lab: str
    axis_convention: str
    delimiter: str
    decimal: str
    header_line: int
    skip_after_header: int
    columns: dict[str, ColumnSpec]
    load_setpoints_n: tuple[float, ...] | None  # None: detect the load steps from the data
    camber_setpoints_deg: tuple[float, ...] | None  # None: detect (or 0 without an inclination channel)
    pressure_kpa: float
    sweep: str = "slip_angle"
    rolling_direction: str = "forward"
    tested_at: dt.datetime | None = None
    rig: str = ""  # the machine within the lab; drift is tracked per lab and rig
    # Combined slip: the levels of the other slip held while the sweep runs (slip angle in deg, ISO
    # 8855 signs, for a slip-ratio sweep; slip ratio for a slip-angle sweep); None: pure slip.
    held_setpoints: tuple[float, ...] | None = None

    @property
    def held_channel(self) -> str | None:
        """The slip held at set-points (combined slip), or None for a pure-slip run."""
        return HELD_SLIP[self.sweep] if self.held_setpoints else None

    @property
    def station(self) -> tuple[str, str]:
        """The lab and rig the run was tested on: a control tracks drift only where it was tested."""
        return (self.lab, self.rig)

    @property
    def location(self) -> str:
        return f"runs[{self.index}]"


@dataclass(frozen=True)
class ConditioningSettings:
    settling_s: float = 1.0
    load_tolerance_pct: float = 8.0
    camber_tolerance_deg: float = 0.3
    slip_bin_deg: float = 0.5
    slip_ratio_bin: float = 0.01
    slip_settling_s: float = 0.5
    sweep_run_in_deg: float = 1.0
    sweep_run_in_ratio: float = 0.02
    min_samples_per_bin: int = 3
    spike_threshold_mad: float = 6.0
    min_slip_range_deg: float = 6.0
    min_points_per_curve: int = 12
    pressure_tolerance_pct: float = 3.0


@dataclass(frozen=True)
class Target:
    index: int
    metric: str
    load_n: float
    minimum: float | None
    maximum: float | None
    camber_deg: float
    pressure_kpa: float | None
    reference: str
    specimens: tuple[str, ...] | None  # None: every specimen that is not a control

    @property
    def window(self) -> str:
        if self.minimum is not None and self.maximum is not None:
            return f"{self.minimum:g} … {self.maximum:g}"
        return f"≥ {self.minimum:g}" if self.minimum is not None else f"≤ {self.maximum:g}"


AXLE_POSITIONS = ("steer", "drive", "tag", "pusher", "trailer", "free-rolling")
ASSEMBLIES = ("single", "dual", "wide-base single")
TIRES_PER_AXLE = {"single": 2, "dual": 4, "wide-base single": 2}  # a dual assembly: a pair each side


@dataclass(frozen=True)
class AxleSpec:
    """One axle of the vehicle: where it is, what it carries, whether it steers."""

    name: str
    position: str  # one of AXLE_POSITIONS
    from_front_m: float  # distance behind the first axle
    load_n: float  # static axle load
    track_m: float | None  # between the centres of the axle's tires (dual pairs: of the pairs)
    steered: bool


@dataclass(frozen=True)
class Mounting:
    """What one fitment puts on one axle: a specimen and its assembly."""

    axle: str
    specimen: str
    assembly: str  # one of ASSEMBLIES
    dual_spacing_m: float | None = None  # centre to centre of the two tires of a dual pair
    track_m: float | None = None  # this assembly's own track where it differs from the axle's

    @property
    def tires(self) -> int:
        return TIRES_PER_AXLE[self.assembly]


@dataclass(frozen=True)
class FitmentSpec:
    """A declared fitment: one mounting per axle, in the vehicle's axle order."""

    index: int
    name: str
    mountings: tuple[Mounting, ...]
    replaces: str | None = None  # the fitment this one is a replacement for

    @property
    def location(self) -> str:
        return f"vehicle.fitments[{self.index}]"

    def on(self, axle: str) -> Mounting:
        return next(m for m in self.mountings if m.axle == axle)

    def uniform_specimen(self) -> str | None:
        """The specimen on every axle, or None when the fitment mixes specimens."""
        ids = {m.specimen for m in self.mountings}
        return next(iter(ids)) if len(ids) == 1 else None


@dataclass(frozen=True)
class VehicleSpec:
    name: str
    axles: tuple[AxleSpec, ...]  # front to back
    fitments: tuple[FitmentSpec, ...]
    speeds_kmh: tuple[float, ...]
    cg_height_m: float | None = None

    @property
    def mass_kg(self) -> float:
        return sum(a.load_n for a in self.axles) / STANDARD_GRAVITY_M_PER_S2

    @property
    def cg_from_front_m(self) -> float:
        """The centre of gravity behind the first axle, from the static axle loads (moments about it)."""
        return sum(a.load_n * a.from_front_m for a in self.axles) / sum(a.load_n for a in self.axles)

    @property
    def wheelbase_m(self) -> float:
        """First axle to last axle (the equivalent wheelbase of a fitment is on its result)."""
        return self.axles[-1].from_front_m - self.axles[0].from_front_m

    def fitment(self, name: str) -> FitmentSpec:
        return next(f for f in self.fitments if f.name == name)


@dataclass(frozen=True)
class Person:
    name: str
    role: str
    organisation: str | None
    date: dt.date | None


@dataclass(frozen=True)
class SignOff:
    status: str
    people: tuple[Person, ...]

    @property
    def released(self) -> bool:
        return self.status == "released"

    @property
    def approver(self) -> Person | None:
        return next((p for p in self.people if p.role == "approver" and p.date), None)


@dataclass(frozen=True)
class Revision:
    revision: str
    date: dt.date
    description: str


@dataclass(frozen=True)
class MetricSettings:
    loads_n: tuple[float, ...] = ()
    crosscheck_threshold_pct: float = 5.0


@dataclass(frozen=True)
class LabSettings:
    """What a lab declares about its rig's accuracy (`[labs."NAME"]`), each a bound (± a, read as
    a rectangular distribution, u = a/√3, GUM 4.3.7). A value not declared takes the default below,
    stated as assumed on the dossier's pages."""

    force_accuracy_pct: float = 0.5  # % of reading (common practice for rig load cells)
    moment_accuracy_pct: float = 1.0  # % of reading (common practice)
    load_accuracy_pct: float = 0.5  # % of reading of the normal-load channel (common practice)
    force_full_scale_n: float | None = None  # with force_accuracy_pct_of_full_scale: a part in % of full scale
    force_accuracy_pct_of_full_scale: float = 0.0
    angle_accuracy_deg: float = 0.05  # slip-angle and camber set-point accuracy (common practice)
    drift_allowance_pct: float = 1.0  # where no control was tested on the lab's rig (common practice)
    repeatability_allowance_pct: float = 0.5  # where nothing was repeated (common practice)


LAB_DEFAULTS = LabSettings()


@dataclass(frozen=True)
class DriftSettings:
    control: str
    correct: bool = False


@dataclass(frozen=True)
class FitSettings:
    nominal_load_n: float | None = None
    nominal_pressure_kpa: float | None = None
    leave_one_load_out: bool = True
    loss: str = "soft_l1"
    max_evaluations: int = 4000


@dataclass(frozen=True)
class Manifest:
    project_dir: Path
    document: DocumentInfo
    specimens: tuple[Specimen, ...]
    runs: tuple[RunSpec, ...]
    conditioning: ConditioningSettings = field(default_factory=ConditioningSettings)
    fit: FitSettings = field(default_factory=FitSettings)
    drift: DriftSettings | None = None
    metrics: MetricSettings = field(default_factory=MetricSettings)
    targets: tuple[Target, ...] = ()
    vehicle: VehicleSpec | None = None
    signoff: SignOff = field(default_factory=lambda: SignOff("draft", ()))
    revisions: tuple[Revision, ...] = ()
    narrative: dict[str, str] = field(default_factory=dict)  # part -> relative path
    sha256: str = ""  # of the manifest file as read
    labs: tuple[tuple[str, LabSettings, tuple[str, ...]], ...] = ()  # name, settings, the keys declared

    def specimen(self, specimen_id: str) -> Specimen:
        return next(s for s in self.specimens if s.id == specimen_id)

    def lab(self, name: str) -> tuple[LabSettings, tuple[str, ...]]:
        """A lab's declared accuracy and the keys it declared (nothing declared: the defaults)."""
        return next(((s, keys) for n, s, keys in self.labs if n == name), (LAB_DEFAULTS, ()))


def typed_manifest(data: dict, project_dir: Path) -> Manifest:
    """The :class:`Manifest` of a document that passed validation."""
    d = data["document"]
    document = DocumentInfo(
        d["title"],
        d["number"],
        d["revision"],
        d["customer"],
        d["program"],
        d["supplier"],
        tuple(d["authors"]),
        d["date"],
    )
    specimens = tuple(
        Specimen(
            s["id"],
            s["role"],
            s["size"],
            s["construction"] or "",
            s["rated_load_n"],
            s["unloaded_radius_m"],
            s["tin"],
            s["nominal_pressure_kpa"],
            s["nominal_camber_deg"],
        )
        for s in data["specimens"]
    )
    runs = []
    for i, r in enumerate(data["runs"]):
        loads = None
        if r["load_setpoints"]:
            force_factor = units.factor_to_internal("force", r["load_setpoints"]["unit"])
            loads = tuple(v * force_factor for v in r["load_setpoints"]["values"])
        pressure_factor = units.factor_to_internal("pressure", r["pressure"]["unit"])
        held_key = HELD_SETPOINTS_KEY[HELD_SLIP[r["sweep"]]]
        held = None
        if r.get(held_key):
            internal = axes.to_internal(HELD_SLIP[r["sweep"]], np.asarray(r[held_key], float), r["axis_convention"])
            held = tuple(float(v) + 0.0 for v in internal)  # + 0.0: no "-0" where a flipped zero is shown
        runs.append(
            RunSpec(
                index=i,
                specimen=r["specimen"],
                file=r["file"],
                lab=r["lab"] or "",
                axis_convention=r["axis_convention"],
                delimiter=r["delimiter"],
                decimal=r["decimal"],
                header_line=r["header_line"],
                skip_after_header=r["skip_after_header"],
                columns={k: ColumnSpec(v["name"], v["unit"]) for k, v in r["columns"].items()},
                load_setpoints_n=loads,
                camber_setpoints_deg=tuple(r["camber_setpoints_deg"]) if r["camber_setpoints_deg"] else None,
                pressure_kpa=r["pressure"]["value"] * pressure_factor,
                sweep=r["sweep"],
                rolling_direction=r["rolling_direction"],
                tested_at=r["tested_at"],
                rig=r["rig"] or "",
                held_setpoints=held,
            )
        )
    cond = ConditioningSettings(**data["conditioning"]) if data.get("conditioning") else ConditioningSettings()
    fit = FitSettings(**data["fit"]) if data.get("fit") else FitSettings()
    drift = DriftSettings(**data["drift"]) if data.get("drift") else None
    met = data.get("metrics")
    metrics = MetricSettings(tuple(met["loads_n"] or ()), met["crosscheck_threshold_pct"]) if met else MetricSettings()
    targets = tuple(_target(i, t) for i, t in enumerate(data.get("targets") or []))
    so = data.get("signoff")
    signoff = (
        SignOff(so["status"], tuple(Person(p["name"], p["role"], p["organisation"], p["date"]) for p in so["people"]))
        if so
        else SignOff("draft", ())
    )
    revisions = tuple(Revision(r["revision"], r["date"], r["description"]) for r in data.get("revisions") or [])
    narrative = {k: v for k, v in (data.get("narrative") or {}).items() if v}
    return Manifest(
        Path(project_dir),
        document,
        specimens,
        tuple(runs),
        cond,
        fit,
        drift,
        metrics,
        targets,
        _vehicle(data["vehicle"]) if data.get("vehicle") else None,
        signoff,
        revisions,
        narrative,
        labs=tuple(
            (
                name,
                LabSettings(**{k: v for k, v in lab.items() if v is not None}),
                tuple(sorted(k for k in lab if lab[k] is not None)),
            )
            for name, lab in sorted((data.get("labs") or {}).items())
        ),
    )


def _target(i: int, t: dict) -> Target:
    lo, hi = t["minimum"], t["maximum"]
    if t["nominal"] is not None:
        lo, hi = t["nominal"] - t["tolerance"], t["nominal"] + t["tolerance"]
    return Target(
        i,
        t["metric"],
        t["load_n"],
        lo,
        hi,
        t["camber_deg"],
        t["pressure_kpa"],
        t["reference"],
        tuple(t["specimens"]) if t["specimens"] else None,
    )


def quantity_value(q: dict, quantity: str) -> float:
    """A validated ``{ value, unit }`` table in the internal unit of `quantity`."""
    return q["value"] * units.factor_to_internal(quantity, q["unit"])


def _vehicle(v: dict) -> VehicleSpec:
    axles = v["axles"]
    loads: tuple[float, ...]
    if v["mass"]:  # two axles, checked: the loads from the mass and its centre of gravity
        loads = static_axle_loads_n(
            quantity_value(v["mass"], "mass"),
            quantity_value(axles[1]["from_front"], "length") - quantity_value(axles[0]["from_front"], "length"),
            quantity_value(v["cg_to_front_axle"], "length"),
        )
    else:
        loads = tuple(quantity_value(a["load"], "force") for a in axles)
    speeds = tuple(v["speeds_kmh"]) if v["speeds_kmh"] else tuple(float(x) for x in range(20, 201, 10))
    specs = tuple(
        AxleSpec(
            a["name"],
            a["position"],
            quantity_value(a["from_front"], "length"),
            load,
            quantity_value(a["track"], "length") if a["track"] else None,
            a["position"] == "steer" if a["steered"] is None else a["steered"],
        )
        for a, load in zip(axles, loads)
    )
    fitments = tuple(
        FitmentSpec(
            i,
            f["name"],
            tuple(
                Mounting(
                    a.name,
                    f["mounted"][a.name]["specimen"],
                    f["mounted"][a.name]["assembly"],
                    _length_or_none(f["mounted"][a.name]["dual_spacing"]),
                    _length_or_none(f["mounted"][a.name]["track"]),
                )
                for a in specs
            ),
            f["replaces"],
        )
        for i, f in enumerate(v["fitments"])
    )
    return VehicleSpec(v["name"], specs, fitments, speeds, _length_or_none(v["cg_height"]))


def _length_or_none(q: dict | None) -> float | None:
    return None if not q else quantity_value(q, "length")
