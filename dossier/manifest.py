"""The project manifest (``dossier.toml``): its schema, validation and typed result.

The schema is declared once, as data (:data:`MANIFEST_SCHEMA`). Validation walks the TOML
document against it and collects *every* problem with its key path
(``runs[1].columns.fy.unit: unknown unit 'klbf'; expected one of N, kN, lbf, kgf``) before
anything is built. Unknown keys are errors, with a spelling suggestion.
"""

from __future__ import annotations

import datetime as dt
import difflib
import tomllib
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath
from typing import Any, Callable

from . import axes, sidewall, units
from .errors import ManifestError, Problem

MANIFEST_NAME = "dossier.toml"
ROLES = ("baseline", "candidate", "control")
STATUSES = ("draft", "in review", "released")
SIGNOFF_ROLES = ("author", "checker", "approver")
NARRATIVE_PARTS = ("summary", "test_notes", "conclusions")

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


# ---------------------------------------------------------------------------------------------
# Declarative schema: a handful of node types, each validating one value at one key path.
# ---------------------------------------------------------------------------------------------

Checker = Callable[[Any, str, list[Problem]], Any]


def _type_name(value: Any) -> str:
    return {str: "a string", int: "an integer", float: "a number", bool: "true/false",
            list: "a list", dict: "a table", dt.date: "a date"}.get(type(value), type(value).__name__)


@dataclass(frozen=True)
class Text:
    """A non-empty string."""

    def __call__(self, value, path, problems):
        if not isinstance(value, str) or not value.strip():
            problems.append(Problem(path, f"must be a non-empty string; got {_shown(value)}"))
            return None
        return value.strip()


@dataclass(frozen=True)
class Choice:
    """One of a fixed set of strings."""

    options: tuple[str, ...]

    def __call__(self, value, path, problems):
        if value not in self.options:
            hint = _suggest(value, self.options) if isinstance(value, str) else ""
            problems.append(Problem(path, f"must be one of {', '.join(self.options)}; got {_shown(value)}{hint}"))
            return None
        return value


@dataclass(frozen=True)
class Number:
    """A finite number, optionally within [minimum, maximum]."""

    minimum: float | None = None
    maximum: float | None = None
    exclusive_minimum: bool = False

    def __call__(self, value, path, problems):
        if isinstance(value, bool) or not isinstance(value, (int, float)) or value != value or value in (float("inf"), float("-inf")):
            problems.append(Problem(path, f"must be a finite number; got {_shown(value)}"))
            return None
        if self.minimum is not None and (value < self.minimum or (self.exclusive_minimum and value == self.minimum)):
            op = ">" if self.exclusive_minimum else ">="
            problems.append(Problem(path, f"must be {op} {self.minimum:g}; got {value!r}"))
            return None
        if self.maximum is not None and value > self.maximum:
            problems.append(Problem(path, f"must be <= {self.maximum:g}; got {value!r}"))
            return None
        return float(value)


@dataclass(frozen=True)
class Integer:
    minimum: int = 0

    def __call__(self, value, path, problems):
        if isinstance(value, bool) or not isinstance(value, int) or value < self.minimum:
            problems.append(Problem(path, f"must be an integer >= {self.minimum}; got {_shown(value)}"))
            return None
        return value


@dataclass(frozen=True)
class Boolean:
    def __call__(self, value, path, problems):
        if not isinstance(value, bool):
            problems.append(Problem(path, f"must be true or false; got {_shown(value)}"))
            return None
        return value


@dataclass(frozen=True)
class DateTime:
    """A TOML local or offset date-time, e.g. 2026-11-03T09:40:00."""

    def __call__(self, value, path, problems):
        if isinstance(value, dt.datetime):
            return value.replace(tzinfo=None) if value.tzinfo is None else value
        problems.append(Problem(path, f"must be a TOML date-time such as 2026-11-03T09:40:00; got {_shown(value)}"))
        return None


@dataclass(frozen=True)
class Date:
    def __call__(self, value, path, problems):
        if isinstance(value, dt.datetime):
            return value.date()
        if isinstance(value, dt.date):
            return value
        problems.append(Problem(path, f"must be a TOML date such as 2026-11-20; got {_shown(value)}"))
        return None


@dataclass(frozen=True)
class Unit:
    """A unit spelling accepted for `quantity` (see :mod:`dossier.units`)."""

    quantity: str

    def __call__(self, value, path, problems):
        accepted = units.accepted_units(self.quantity)
        if value not in accepted:
            hint = _suggest(value, accepted) if isinstance(value, str) else ""
            problems.append(Problem(path, f"unknown unit {_shown(value)} for {self.quantity}; expected one of {', '.join(accepted)}{hint}"))
            return None
        return value


@dataclass(frozen=True)
class RelativePath:
    """A path inside the project folder, written relative to the manifest."""

    def __call__(self, value, path, problems):
        if not isinstance(value, str) or not value.strip():
            problems.append(Problem(path, f"must be a file path relative to the project folder; got {_shown(value)}"))
            return None
        posix = PurePosixPath(value.replace("\\", "/"))
        if posix.is_absolute() or ":" in posix.parts[0] or ".." in posix.parts:
            problems.append(Problem(path, f"must stay inside the project folder (relative, no '..'); got {value!r}"))
            return None
        return str(posix)


@dataclass(frozen=True)
class ListOf:
    item: Checker
    min_items: int = 0

    def __call__(self, value, path, problems):
        if not isinstance(value, list):
            problems.append(Problem(path, f"must be a list; got {_shown(value)}"))
            return None
        if len(value) < self.min_items:
            problems.append(Problem(path, f"must have at least {self.min_items} item(s); got {len(value)}"))
        return [self.item(v, f"{path}[{i}]", problems) for i, v in enumerate(value)]


@dataclass(frozen=True)
class Key:
    checker: Checker
    required: bool = True
    default: Any = None
    help: str = ""


@dataclass(frozen=True)
class Table:
    """A TOML table with known keys; unknown keys are errors with a suggestion."""

    keys: dict[str, Key]

    def __call__(self, value, path, problems):
        if not isinstance(value, dict):
            problems.append(Problem(path, f"must be a table; got {_shown(value)}"))
            return None
        out = {}
        for name in value:
            if name not in self.keys:
                problems.append(Problem(_join(path, name), f"unknown key{_suggest(name, list(self.keys))}"))
        for name, key in self.keys.items():
            if name in value:
                out[name] = key.checker(value[name], _join(path, name), problems)
            elif key.required:
                problems.append(Problem(_join(path, name), "is required" + (f" ({key.help})" if key.help else "")))
                out[name] = None
            else:
                out[name] = key.default
        return out


@dataclass(frozen=True)
class MapOf:
    """A table whose keys are chosen from `allowed` and whose values share one checker per key."""

    allowed: dict[str, Checker]

    def __call__(self, value, path, problems):
        if not isinstance(value, dict):
            problems.append(Problem(path, f"must be a table; got {_shown(value)}"))
            return None
        out = {}
        for name, item in value.items():
            if name not in self.allowed:
                problems.append(Problem(_join(path, name), f"unknown channel{_suggest(name, list(self.allowed))}; channels are {', '.join(self.allowed)}"))
                continue
            out[name] = self.allowed[name](item, _join(path, name), problems)
        return out


def _join(path: str, name: str) -> str:
    return f"{path}.{name}" if path else name


def _shown(value: Any) -> str:
    if isinstance(value, str):
        return repr(value)
    if isinstance(value, (dict, list)):
        return _type_name(value)
    return f"{_type_name(value)} {value!r}"


def _suggest(word: str, options) -> str:
    close = difflib.get_close_matches(str(word), list(options), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


def _quantity(quantity: str) -> Table:
    return Table({"value": Key(Number(minimum=0, exclusive_minimum=True)), "unit": Key(Unit(quantity))})


def _axle() -> Table:
    return Table({"tires": Key(Integer(minimum=1)),
                  "kind": Key(Choice(("single", "dual", "wide-base single")), required=False, default="single")})


@dataclass(frozen=True)
class MetricName:
    """The name of a metric in the registry (see dossier.metrics.METRICS)."""

    def __call__(self, value, path, problems):
        from .metrics import METRICS

        if value not in METRICS:
            hint = _suggest(value, list(METRICS)) if isinstance(value, str) else ""
            problems.append(Problem(path, f"unknown metric {_shown(value)}{hint}; metrics are listed in the glossary"))
            return None
        return value


def _column(quantity: str) -> Table:
    return Table({
        "name": Key(Text(), help="the column's header text in the file"),
        "unit": Key(Unit(quantity)),
    })


MANIFEST_SCHEMA = Table({
    "document": Key(Table({
        "title": Key(Text()),
        "number": Key(Text(), help="the document number, e.g. 'NTC-EVD-0001'"),
        "revision": Key(Text()),
        "customer": Key(Text()),
        "program": Key(Text(), help="the vehicle program"),
        "supplier": Key(Text(), required=False),
        "authors": Key(ListOf(Text(), min_items=1)),
        "date": Key(Date()),
    })),
    "specimens": Key(ListOf(Table({
        "id": Key(Text()),
        "role": Key(Choice(ROLES)),
        "size": Key(Text(), help="sidewall size designation, e.g. '225/45 R17 94W'"),
        "construction": Key(Text(), required=False, default=""),
        "rated_load_n": Key(Number(minimum=0, exclusive_minimum=True), required=False),
        "tin": Key(Text(), required=False, help="DOT tire identification number, e.g. 'DOT 7HX2 VK3R 4126'"),
        "unloaded_radius_m": Key(Number(minimum=0.1, maximum=1.5), required=False,
                                 help="R0 for the aligning-moment model; default from the size designation"),
    }), min_items=1)),
    "runs": Key(ListOf(Table({
        "specimen": Key(Text()),
        "file": Key(RelativePath()),
        "lab": Key(Text(), required=False, default=""),
        "axis_convention": Key(Choice(axes.CONVENTIONS)),
        "delimiter": Key(Choice((",", ";", "\t")), required=False, default=","),
        "decimal": Key(Choice((".", ",")), required=False, default="."),
        "header_line": Key(Integer(minimum=1), required=False, default=1),
        "skip_after_header": Key(Integer(minimum=0), required=False, default=0),
        "columns": Key(MapOf({name: _column(q) for name, q in CHANNELS.items()})),
        "sweep": Key(Choice(SWEEPS), required=False, default="slip_angle"),
        "rolling_direction": Key(Choice(("forward", "reverse")), required=False, default="forward"),
        "tested_at": Key(DateTime(), required=False),
        "load_setpoints": Key(Table({
            "values": Key(ListOf(Number(minimum=0, exclusive_minimum=True), min_items=1)),
            "unit": Key(Unit("force")),
        }), required=False, help="nominal normal loads of the run, e.g. { values = [2, 4, 6], unit = 'kN' }"),
        "camber_setpoints_deg": Key(ListOf(Number(minimum=-15, maximum=15), min_items=1), required=False),
        "pressure": Key(Table({
            "value": Key(Number(minimum=0, exclusive_minimum=True)),
            "unit": Key(Unit("pressure")),
        }), help="the nominal inflation pressure of the run"),
    }), min_items=1)),
    "conditioning": Key(Table({
        "settling_s": Key(Number(minimum=0), required=False, default=1.0),
        "load_tolerance_pct": Key(Number(minimum=0.5, maximum=50), required=False, default=8.0),
        "camber_tolerance_deg": Key(Number(minimum=0.01, maximum=5), required=False, default=0.3),
        "slip_bin_deg": Key(Number(minimum=0.05, maximum=2), required=False, default=0.5),
        "slip_ratio_bin": Key(Number(minimum=0.001, maximum=0.05), required=False, default=0.01),
        "slip_settling_s": Key(Number(minimum=0, maximum=10), required=False, default=0.5),
        "sweep_run_in_deg": Key(Number(minimum=0, maximum=5), required=False, default=1.0),
        "sweep_run_in_ratio": Key(Number(minimum=0, maximum=0.1), required=False, default=0.02),
        "min_samples_per_bin": Key(Integer(minimum=1), required=False, default=3),
        "spike_threshold_mad": Key(Number(minimum=2), required=False, default=6.0),
        "min_slip_range_deg": Key(Number(minimum=0.5, maximum=30), required=False, default=6.0),
        "min_points_per_curve": Key(Integer(minimum=5), required=False, default=12),
        "pressure_tolerance_pct": Key(Number(minimum=0.1, maximum=50), required=False, default=3.0),
    }), required=False, default=None),
    "metrics": Key(Table({
        "loads_n": Key(ListOf(Number(minimum=0, exclusive_minimum=True)), required=False, default=[],
                       help="extra loads to report metrics at, besides the measured ones"),
        "crosscheck_threshold_pct": Key(Number(minimum=0.1, maximum=50), required=False, default=5.0),
    }), required=False, default=None),
    "signoff": Key(Table({
        "status": Key(Choice(STATUSES)),
        "people": Key(ListOf(Table({
            "name": Key(Text()),
            "role": Key(Choice(SIGNOFF_ROLES)),
            "organisation": Key(Text(), required=False),
            "date": Key(Date(), required=False, help="when this person signed; required for the approver of a released revision"),
        }), min_items=1)),
    }), required=False, default=None),
    "revisions": Key(ListOf(Table({
        "revision": Key(Text()),
        "date": Key(Date()),
        "description": Key(Text()),
    })), required=False, default=[]),
    "narrative": Key(Table({
        "summary": Key(RelativePath(), required=False),
        "test_notes": Key(RelativePath(), required=False),
        "conclusions": Key(RelativePath(), required=False),
    }), required=False, default=None),
    "targets": Key(ListOf(Table({
        "metric": Key(MetricName()),
        "load_n": Key(Number(minimum=0, exclusive_minimum=True)),
        "minimum": Key(Number(), required=False),
        "maximum": Key(Number(), required=False),
        "nominal": Key(Number(), required=False),
        "tolerance": Key(Number(minimum=0, exclusive_minimum=True), required=False),
        "camber_deg": Key(Number(minimum=-15, maximum=15), required=False, default=0.0),
        "pressure_kpa": Key(Number(minimum=0, exclusive_minimum=True), required=False),
        "reference": Key(Text(), help="where the target comes from, e.g. the customer specification's clause"),
        "specimens": Key(ListOf(Text(), min_items=1), required=False),
    })), required=False, default=[]),
    "vehicle": Key(Table({
        "name": Key(Text()),
        "wheelbase": Key(_quantity("length")),
        "mass": Key(_quantity("mass"), required=False),
        "cg_to_front_axle": Key(_quantity("length"), required=False,
                                help="distance from the front axle back to the centre of gravity"),
        "front_axle_load": Key(_quantity("force"), required=False),
        "rear_axle_load": Key(_quantity("force"), required=False),
        "front": Key(_axle()),
        "rear": Key(_axle()),
        "speeds_kmh": Key(ListOf(Number(minimum=1, maximum=400), min_items=2), required=False),
    }), required=False, default=None),
    "drift": Key(Table({
        "control": Key(Text(), help="id of the control specimen re-tested through the session"),
        "correct": Key(Boolean(), required=False, default=False),
    }), required=False, default=None),
    "fit": Key(Table({
        "nominal_load_n": Key(Number(minimum=0, exclusive_minimum=True), required=False),
        "nominal_pressure_kpa": Key(Number(minimum=0, exclusive_minimum=True), required=False),
        "leave_one_load_out": Key(Boolean(), required=False, default=True),
        "loss": Key(Choice(("linear", "soft_l1", "huber")), required=False, default="soft_l1"),
        "max_evaluations": Key(Integer(minimum=50), required=False, default=4000),
    }), required=False, default=None),
})


# ---------------------------------------------------------------------------------------------
# Typed result
# ---------------------------------------------------------------------------------------------

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


@dataclass(frozen=True)
class AxleSpec:
    tires: int
    kind: str


@dataclass(frozen=True)
class VehicleSpec:
    name: str
    wheelbase_m: float
    front_axle_load_n: float
    rear_axle_load_n: float
    front: AxleSpec
    rear: AxleSpec
    speeds_kmh: tuple[float, ...]


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

    def specimen(self, specimen_id: str) -> Specimen:
        return next(s for s in self.specimens if s.id == specimen_id)


def load_manifest(project_dir: Path) -> Manifest:
    """Read and validate ``dossier.toml`` in `project_dir`; raise ManifestError listing every problem."""
    project_dir = Path(project_dir)
    path = project_dir / MANIFEST_NAME
    shown = str(path)
    if not project_dir.is_dir():
        raise ManifestError(str(project_dir), [Problem("project", "is not a folder")])
    if not path.is_file():
        raise ManifestError(shown, [Problem(MANIFEST_NAME, f"not found in {project_dir}; a project folder needs one")])
    try:
        raw_bytes = path.read_bytes()
        raw = tomllib.loads(raw_bytes.decode("utf-8-sig"))
    except UnicodeDecodeError as exc:
        raise ManifestError(shown, [Problem("file", f"is not UTF-8 text ({exc.reason} at byte {exc.start})")]) from None
    except tomllib.TOMLDecodeError as exc:
        raise ManifestError(shown, [Problem("TOML syntax", str(exc))]) from None
    import hashlib
    from dataclasses import replace

    return replace(parse_manifest(raw, project_dir, shown), sha256=hashlib.sha256(raw_bytes).hexdigest())


def parse_manifest(raw: dict, project_dir: Path, shown: str = MANIFEST_NAME) -> Manifest:
    """Validate a parsed TOML document against the schema and the cross-references."""
    problems: list[Problem] = []
    data = MANIFEST_SCHEMA(raw, "", problems)
    if data is not None:
        _check_references(data, project_dir, problems)
    if problems:
        raise ManifestError(shown, problems)
    return _build(data, project_dir)


def _check_references(data: dict, project_dir: Path, problems: list[Problem]) -> None:
    specimens = data.get("specimens") or []
    ids = [s["id"] for s in specimens if s and s.get("id")]
    seen: set[str] = set()
    for i, s in enumerate(specimens):
        if s and s.get("id") in seen:
            problems.append(Problem(f"specimens[{i}].id", f"duplicate specimen id {s['id']!r}"))
        if s and s.get("id"):
            seen.add(s["id"])
    for i, s in enumerate(specimens):
        if s and s.get("size") and sidewall.parse_size(s["size"]) is None:
            problems.append(Problem(f"specimens[{i}].size", f"cannot read {s['size']!r} as a size designation; "
                                    "expected e.g. '225/45 R17 94W', 'LT265/75R16 123/120R' or '295/75R22.5 144/141L'"))
        if s and s.get("tin"):
            try:
                sidewall.parse_tin(s["tin"])
            except sidewall.SidewallError as exc:
                problems.append(Problem(f"specimens[{i}].tin", str(exc)))
    baselines = [s for s in specimens if s and s.get("role") == "baseline"]
    if specimens and len(baselines) > 1:
        problems.append(Problem("specimens", f"at most one specimen may have role 'baseline'; got {len(baselines)}"))
    root = project_dir.resolve()
    for i, run in enumerate(data.get("runs") or []):
        if not run:
            continue
        sid = run.get("specimen")
        if sid and ids and sid not in ids:
            problems.append(Problem(f"runs[{i}].specimen", f"no specimen with id {sid!r}{_suggest(sid, ids)}; known ids: {', '.join(ids)}"))
        columns = run.get("columns") or {}
        if run.get("columns") is not None:
            sweep = run.get("sweep") or "slip_angle"
            for ch in REQUIRED_CHANNELS + SWEEP_CHANNELS.get(sweep, ()):
                if ch not in columns:
                    problems.append(Problem(f"runs[{i}].columns.{ch}",
                                            f"is required (a {sweep} run needs {', '.join(REQUIRED_CHANNELS + SWEEP_CHANNELS[sweep])})"))
        cambers = run.get("camber_setpoints_deg") or []
        if run.get("columns") is not None and len(cambers) > 1 and "inclination" not in columns:
            problems.append(Problem(f"runs[{i}].columns.inclination",
                                    f"is required when the run has {len(cambers)} camber set-points"))
        if run.get("delimiter") and run.get("decimal") and run["delimiter"] == run["decimal"]:
            problems.append(Problem(f"runs[{i}].decimal", f"cannot equal the delimiter {run['delimiter']!r}"))
        rel = run.get("file")
        if rel:
            target = (project_dir / rel)
            try:
                resolved = target.resolve()
            except OSError:
                resolved = target
            if not resolved.is_relative_to(root):
                problems.append(Problem(f"runs[{i}].file", f"resolves outside the project folder (symbolic link?): {rel!r}"))
            elif not target.is_file():
                problems.append(Problem(f"runs[{i}].file", f"file not found: {rel!r} (paths are relative to the manifest's folder)"))
    for i, t in enumerate(data.get("targets") or []):
        if not t:
            continue
        kinds = [k for k in ("minimum", "maximum") if t.get(k) is not None]
        nominal = t.get("nominal") is not None or t.get("tolerance") is not None
        if nominal and kinds:
            problems.append(Problem(f"targets[{i}]", "give either minimum/maximum or nominal and tolerance, not both"))
        elif nominal and (t.get("nominal") is None or t.get("tolerance") is None):
            problems.append(Problem(f"targets[{i}]", "nominal and tolerance go together; one of them is missing"))
        elif not nominal and not kinds:
            problems.append(Problem(f"targets[{i}]", "needs a window: minimum, maximum, or nominal and tolerance"))
        elif t.get("minimum") is not None and t.get("maximum") is not None and t["minimum"] > t["maximum"]:
            problems.append(Problem(f"targets[{i}].minimum", f"is above the maximum ({t['minimum']!r} > {t['maximum']!r})"))
        for j, sid in enumerate(t.get("specimens") or []):
            if sid and ids and sid not in ids:
                problems.append(Problem(f"targets[{i}].specimens[{j}]", f"no specimen with id {sid!r}{_suggest(sid, ids)}"))
    so = data.get("signoff")
    if so and so.get("status") == "released":
        approvers = [p for p in (so.get("people") or []) if p and p.get("role") == "approver" and p.get("date")]
        if not approvers:
            problems.append(Problem("signoff.people", "a released revision needs an approver with a date"))
    revs = [r.get("revision") for r in (data.get("revisions") or []) if r]
    doc = data.get("document") or {}
    if revs and doc.get("revision") and doc["revision"] not in revs:
        problems.append(Problem("revisions", f"has no entry for the document's revision {doc['revision']!r}"))
    for part, rel in (data.get("narrative") or {}).items():
        if rel and not (project_dir / rel).is_file():
            problems.append(Problem(f"narrative.{part}", f"file not found: {rel!r} (paths are relative to the manifest's folder)"))
    v = data.get("vehicle")
    if v:
        by_mass = v.get("mass") is not None or v.get("cg_to_front_axle") is not None
        by_load = v.get("front_axle_load") is not None or v.get("rear_axle_load") is not None
        if by_mass == by_load:
            problems.append(Problem("vehicle", "give either mass and cg_to_front_axle, or front_axle_load and rear_axle_load"))
        elif by_mass and (v.get("mass") is None or v.get("cg_to_front_axle") is None):
            problems.append(Problem("vehicle", "mass and cg_to_front_axle go together; one of them is missing"))
        elif by_load and (v.get("front_axle_load") is None or v.get("rear_axle_load") is None):
            problems.append(Problem("vehicle", "front_axle_load and rear_axle_load go together; one of them is missing"))
        elif by_mass and v.get("wheelbase") and v.get("cg_to_front_axle"):
            L = _q(v["wheelbase"], "length")
            b = _q(v["cg_to_front_axle"], "length")
            if not 0 < b < L:
                problems.append(Problem("vehicle.cg_to_front_axle", f"must lie between the axles (0 … {L:.3f} m); got {b:.3f} m"))
    drift = data.get("drift")
    if drift and drift.get("control") and ids:
        ctl = drift["control"]
        roles = {s["id"]: s.get("role") for s in specimens if s and s.get("id")}
        if ctl not in roles:
            problems.append(Problem("drift.control", f"no specimen with id {ctl!r}{_suggest(ctl, ids)}"))
        elif roles[ctl] != "control":
            problems.append(Problem("drift.control", f"specimen {ctl!r} must have role 'control'; got {roles[ctl]!r}"))
        untimed = [i for i, r in enumerate(data.get("runs") or []) if r and not r.get("tested_at")]
        if untimed:
            problems.append(Problem(f"runs[{untimed[0]}].tested_at",
                                    "is required for every run when [drift] is set (drift is estimated over time)"))
    used = {r.get("specimen") for r in (data.get("runs") or []) if r}
    for i, s in enumerate(specimens):
        if s and s.get("id") and s["id"] not in used and data.get("runs"):
            problems.append(Problem(f"specimens[{i}]", f"specimen {s['id']!r} has no rig run; add a [[runs]] entry or remove it"))


def _build(data: dict, project_dir: Path) -> Manifest:
    d = data["document"]
    document = DocumentInfo(d["title"], d["number"], d["revision"], d["customer"], d["program"],
                            d["supplier"], tuple(d["authors"]), d["date"])
    specimens = tuple(Specimen(s["id"], s["role"], s["size"], s["construction"] or "", s["rated_load_n"],
                               s["unloaded_radius_m"], s["tin"])
                      for s in data["specimens"])
    runs = []
    for i, r in enumerate(data["runs"]):
        loads = None
        if r["load_setpoints"]:
            force_factor = units.factor_to_internal("force", r["load_setpoints"]["unit"])
            loads = tuple(v * force_factor for v in r["load_setpoints"]["values"])
        pressure_factor = units.factor_to_internal("pressure", r["pressure"]["unit"])
        runs.append(RunSpec(
            index=i, specimen=r["specimen"], file=r["file"], lab=r["lab"] or "",
            axis_convention=r["axis_convention"], delimiter=r["delimiter"], decimal=r["decimal"],
            header_line=r["header_line"], skip_after_header=r["skip_after_header"],
            columns={k: ColumnSpec(v["name"], v["unit"]) for k, v in r["columns"].items()},
            load_setpoints_n=loads,
            camber_setpoints_deg=tuple(r["camber_setpoints_deg"]) if r["camber_setpoints_deg"] else None,
            pressure_kpa=r["pressure"]["value"] * pressure_factor,
            sweep=r["sweep"], rolling_direction=r["rolling_direction"], tested_at=r["tested_at"],
        ))
    cond = ConditioningSettings(**data["conditioning"]) if data.get("conditioning") else ConditioningSettings()
    fit = FitSettings(**data["fit"]) if data.get("fit") else FitSettings()
    drift = DriftSettings(**data["drift"]) if data.get("drift") else None
    met = data.get("metrics")
    metrics = MetricSettings(tuple(met["loads_n"] or ()), met["crosscheck_threshold_pct"]) if met else MetricSettings()
    targets = tuple(_target(i, t) for i, t in enumerate(data.get("targets") or []))
    so = data.get("signoff")
    signoff = SignOff(so["status"], tuple(Person(p["name"], p["role"], p["organisation"], p["date"])
                                         for p in so["people"])) if so else SignOff("draft", ())
    revisions = tuple(Revision(r["revision"], r["date"], r["description"]) for r in data.get("revisions") or [])
    narrative = {k: v for k, v in (data.get("narrative") or {}).items() if v}
    return Manifest(Path(project_dir), document, specimens, tuple(runs), cond, fit, drift, metrics, targets,
                    _vehicle(data["vehicle"]) if data.get("vehicle") else None, signoff, revisions, narrative)


def _target(i: int, t: dict) -> Target:
    lo, hi = t["minimum"], t["maximum"]
    if t["nominal"] is not None:
        lo, hi = t["nominal"] - t["tolerance"], t["nominal"] + t["tolerance"]
    return Target(i, t["metric"], t["load_n"], lo, hi, t["camber_deg"], t["pressure_kpa"], t["reference"],
                  tuple(t["specimens"]) if t["specimens"] else None)


def _q(q: dict, quantity: str) -> float:
    return q["value"] * units.factor_to_internal(quantity, q["unit"])


def _vehicle(v: dict) -> VehicleSpec:
    L = _q(v["wheelbase"], "length")
    if v["mass"]:
        weight = _q(v["mass"], "mass") * units.STANDARD_GRAVITY_M_PER_S2
        b = _q(v["cg_to_front_axle"], "length")
        front, rear = weight * (L - b) / L, weight * b / L  # static axle loads from the CG position
    else:
        front, rear = _q(v["front_axle_load"], "force"), _q(v["rear_axle_load"], "force")
    speeds = tuple(v["speeds_kmh"]) if v["speeds_kmh"] else tuple(float(x) for x in range(20, 201, 10))
    return VehicleSpec(v["name"], L, front, rear, AxleSpec(v["front"]["tires"], v["front"]["kind"]),
                       AxleSpec(v["rear"]["tires"], v["rear"]["kind"]), speeds)
