"""The manifest's schema (``dossier.toml``), declared once as data.

Every key, its type, its bounds and whether it is required are stated here; a setting's default
is stated once, on the field of its typed result (:mod:`dossier.project.manifest`), and read
from there. Cross-references between keys are checked afterwards by
:mod:`dossier.project.checks`.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..standards import axes
from .catalogue import METRICS
from .manifest import (
    ASSEMBLIES,
    AXLE_POSITIONS,
    CHANNELS,
    ROLES,
    SIGNOFF_ROLES,
    STATUSES,
    SWEEPS,
    ConditioningSettings,
    DriftSettings,
    FitSettings,
    LabSettings,
    MetricSettings,
    RunSpec,
)
from .validation import (
    Boolean,
    Checker,
    Choice,
    Date,
    DateTime,
    Integer,
    Key,
    ListOf,
    MapOf,
    NamedTables,
    Number,
    Problem,
    RelativePath,
    Table,
    Text,
    Unit,
    default_of,
    options_of,
    shown,
    suggest,
)

# Bounds of this tool's range, stated: an id short enough for file names and page headers; a
# quantity small enough that no unit conversion overflows (1e7 of the largest unit stays finite).
MAX_ID_CHARS = 120
MAX_QUANTITY = 1e7


def _quantity(quantity: str) -> Table:
    return Table(
        {"value": Key(Number(minimum=0, maximum=MAX_QUANTITY, exclusive_minimum=True)), "unit": Key(Unit(quantity))}
    )


def _length_from_zero() -> Table:
    return Table({"value": Key(Number(minimum=0, maximum=MAX_QUANTITY)), "unit": Key(Unit("length"))})


def _axle() -> Table:
    return Table(
        {
            "name": Key(Text(), help="the axle's name, as the fitments give it (steer, drive-1, ...)"),
            "position": Key(Choice(AXLE_POSITIONS)),
            "from_front": Key(_length_from_zero(), help="distance behind the first axle (the first axle: 0)"),
            "load": Key(
                _quantity("force"),
                required=False,
                help="static axle load (without the vehicle's mass and centre of gravity)",
            ),
            "track": Key(
                _quantity("length"),
                required=False,
                help="between the centres of the axle's tires (dual pairs: between the pairs' centres)",
            ),
            "steered": Key(Boolean(), required=False, help="default: a steer axle steers, the others do not"),
        }
    )


def _mounting() -> Table:
    return Table(
        {
            "specimen": Key(Text()),
            "assembly": Key(Choice(ASSEMBLIES), required=False, default="single"),
            "dual_spacing": Key(
                _quantity("length"), required=False, help="centre to centre of the two tires of a dual pair"
            ),
            "track": Key(
                _quantity("length"), required=False, help="this assembly's own track, where it differs from the axle's"
            ),
        }
    )


def _fitment() -> Table:
    return Table(
        {
            "name": Key(Text()),
            "mounted": Key(NamedTables(_mounting()), help="per axle name: the specimen and its assembly"),
            "replaces": Key(
                Text(), required=False, help="the fitment this one replaces: compared axle for axle at equal axle load"
            ),
        }
    )


_LAB_CHECKERS: dict[str, Checker] = {
    "force_accuracy_pct": Number(minimum=0, maximum=20),
    "moment_accuracy_pct": Number(minimum=0, maximum=20),
    "load_accuracy_pct": Number(minimum=0, maximum=20),
    "force_full_scale_n": Number(minimum=0, maximum=MAX_QUANTITY, exclusive_minimum=True),
    "force_accuracy_pct_of_full_scale": Number(minimum=0, maximum=20),
    "angle_accuracy_deg": Number(minimum=0, maximum=2),
    "drift_allowance_pct": Number(minimum=0, maximum=50),
    "repeatability_allowance_pct": Number(minimum=0, maximum=50),
}


def _lab() -> Table:
    """A lab's accuracy: every key optional; what is not declared is the stated default (assumed)."""
    options_of(LabSettings, _LAB_CHECKERS)  # the checkers and the settings' fields name the same keys
    return Table({name: Key(checker, required=False, default=None) for name, checker in _LAB_CHECKERS.items()})


@dataclass(frozen=True)
class MetricName:
    """The name of a metric in the catalogue (:data:`dossier.project.catalogue.METRICS`)."""

    def __call__(self, value, path, problems):
        if not isinstance(value, str) or value not in METRICS:
            hint = suggest(value, list(METRICS)) if isinstance(value, str) else ""
            problems.append(Problem(path, f"unknown metric {shown(value)}{hint}; metrics are listed in the glossary"))
            return None
        return value


def _column(quantity: str) -> Table:
    return Table(
        {
            "name": Key(Text(), help="the column's header text in the file"),
            "unit": Key(Unit(quantity)),
        }
    )


MANIFEST_SCHEMA = Table(
    {
        "document": Key(
            Table(
                {
                    "title": Key(Text()),
                    "number": Key(Text(), help="the document number, e.g. 'NTC-EVD-0001'"),
                    "revision": Key(Text()),
                    "customer": Key(Text()),
                    "program": Key(Text(), help="the vehicle program"),
                    "supplier": Key(Text(), required=False),
                    "authors": Key(ListOf(Text(), min_items=1)),
                    "date": Key(Date()),
                }
            )
        ),
        "specimens": Key(
            ListOf(
                Table(
                    {
                        "id": Key(Text(max_length=MAX_ID_CHARS), help="the specimen's id, e.g. 'CND-B'"),
                        "role": Key(Choice(ROLES)),
                        "size": Key(Text(), help="sidewall size designation, e.g. '225/45 R17 94W'"),
                        "construction": Key(Text(), required=False, default=""),
                        "rated_load_n": Key(Number(minimum=0, exclusive_minimum=True), required=False),
                        "tin": Key(
                            Text(), required=False, help="DOT tire identification number, e.g. 'DOT 7HX2 VK3R 4126'"
                        ),
                        "unloaded_radius_m": Key(
                            Number(minimum=0.1, maximum=1.5),
                            required=False,
                            help="R0 for the aligning-moment model; default from the size designation",
                        ),
                        "nominal_pressure_kpa": Key(
                            Number(minimum=0, maximum=MAX_QUANTITY, exclusive_minimum=True),
                            required=False,
                            help="the pressure its headline metrics are given at; default: its most-tested pressure",
                        ),
                        "nominal_camber_deg": Key(
                            Number(minimum=-15, maximum=15),
                            required=False,
                            help="the camber its headline metrics are given at; default: zero where tested "
                            "there, else its most-tested camber",
                        ),
                    }
                ),
                min_items=1,
            )
        ),
        "runs": Key(
            ListOf(
                Table(
                    {
                        "specimen": Key(Text()),
                        "file": Key(RelativePath()),
                        "lab": Key(Text(), required=False, default=""),
                        "rig": Key(Text(), required=False, default="", help="the machine within the lab"),
                        "axis_convention": Key(Choice(axes.CONVENTIONS)),
                        "delimiter": Key(Choice((",", ";", "\t")), required=False, default=","),
                        "decimal": Key(Choice((".", ",")), required=False, default="."),
                        "header_line": Key(Integer(minimum=1), required=False, default=1),
                        "skip_after_header": Key(Integer(minimum=0), required=False, default=0),
                        "columns": Key(MapOf({name: _column(q) for name, q in CHANNELS.items()})),
                        "sweep": Key(Choice(SWEEPS), required=False, default=default_of(RunSpec, "sweep")),
                        "rolling_direction": Key(
                            Choice(("forward", "reverse")),
                            required=False,
                            default=default_of(RunSpec, "rolling_direction"),
                        ),
                        "tested_at": Key(DateTime(), required=False),
                        "load_setpoints": Key(
                            Table(
                                {
                                    "values": Key(
                                        ListOf(
                                            Number(minimum=0, maximum=MAX_QUANTITY, exclusive_minimum=True),
                                            min_items=1,
                                            max_items=100,
                                        )
                                    ),
                                    "unit": Key(Unit("force")),
                                }
                            ),
                            required=False,
                            help="nominal normal loads of the run, e.g. { values = [2, 4, 6], unit = 'kN' }",
                        ),
                        "camber_setpoints_deg": Key(
                            ListOf(Number(minimum=-15, maximum=15), min_items=1), required=False
                        ),
                        "slip_angle_setpoints_deg": Key(
                            ListOf(Number(minimum=-30, maximum=30), min_items=1, max_items=100),
                            required=False,
                            help="combined slip: the slip angles held while a slip-ratio sweep runs, in the "
                            "run's axis convention",
                        ),
                        "slip_ratio_setpoints": Key(
                            ListOf(Number(minimum=-1, maximum=1), min_items=1, max_items=100),
                            required=False,
                            help="combined slip: the slip ratios held while a slip-angle sweep runs",
                        ),
                        "pressure": Key(
                            Table(
                                {
                                    "value": Key(Number(minimum=0, maximum=MAX_QUANTITY, exclusive_minimum=True)),
                                    "unit": Key(Unit("pressure")),
                                }
                            ),
                            help="the nominal inflation pressure of the run",
                        ),
                    }
                ),
                min_items=1,
            )
        ),
        "conditioning": Key(
            options_of(
                ConditioningSettings,
                {
                    "settling_s": Number(minimum=0),
                    "load_tolerance_pct": Number(minimum=0.5, maximum=50),
                    "camber_tolerance_deg": Number(minimum=0.01, maximum=5),
                    "slip_bin_deg": Number(minimum=0.05, maximum=2),
                    "slip_ratio_bin": Number(minimum=0.001, maximum=0.05),
                    "slip_settling_s": Number(minimum=0, maximum=10),
                    "sweep_run_in_deg": Number(minimum=0, maximum=5),
                    "sweep_run_in_ratio": Number(minimum=0, maximum=0.1),
                    "min_samples_per_bin": Integer(minimum=1),
                    "spike_threshold_mad": Number(minimum=2),
                    "min_slip_range_deg": Number(minimum=0.5, maximum=30),
                    "min_points_per_curve": Integer(minimum=5),
                    "pressure_tolerance_pct": Number(minimum=0.1, maximum=50),
                },
            ),
            required=False,
            default=None,
        ),
        "metrics": Key(
            options_of(
                MetricSettings,
                {
                    "loads_n": ListOf(Number(minimum=0, exclusive_minimum=True)),
                    "crosscheck_threshold_pct": Number(minimum=0.1, maximum=50),
                },
                help={"loads_n": "extra loads to report metrics at, besides the measured ones"},
            ),
            required=False,
            default=None,
        ),
        "signoff": Key(
            Table(
                {
                    "status": Key(Choice(STATUSES)),
                    "people": Key(
                        ListOf(
                            Table(
                                {
                                    "name": Key(Text()),
                                    "role": Key(Choice(SIGNOFF_ROLES)),
                                    "organisation": Key(Text(), required=False),
                                    "date": Key(
                                        Date(),
                                        required=False,
                                        help="when this person signed; required for the approver of a released "
                                        "revision",
                                    ),
                                }
                            ),
                            min_items=1,
                        )
                    ),
                }
            ),
            required=False,
            default=None,
        ),
        "revisions": Key(
            ListOf(
                Table(
                    {
                        "revision": Key(Text()),
                        "date": Key(Date()),
                        "description": Key(Text()),
                    }
                )
            ),
            required=False,
            default=[],
        ),
        "narrative": Key(
            Table(
                {
                    "summary": Key(RelativePath(), required=False),
                    "test_notes": Key(RelativePath(), required=False),
                    "conclusions": Key(RelativePath(), required=False),
                }
            ),
            required=False,
            default=None,
        ),
        "targets": Key(
            ListOf(
                Table(
                    {
                        "metric": Key(MetricName()),
                        "load_n": Key(Number(minimum=0, exclusive_minimum=True)),
                        "minimum": Key(Number(), required=False),
                        "maximum": Key(Number(), required=False),
                        "nominal": Key(Number(), required=False),
                        "tolerance": Key(Number(minimum=0, exclusive_minimum=True), required=False),
                        "camber_deg": Key(Number(minimum=-15, maximum=15), required=False, default=0.0),
                        "pressure_kpa": Key(Number(minimum=0, exclusive_minimum=True), required=False),
                        "reference": Key(
                            Text(), help="where the target comes from, e.g. the customer specification's clause"
                        ),
                        "specimens": Key(ListOf(Text(), min_items=1), required=False),
                    }
                )
            ),
            required=False,
            default=[],
        ),
        "vehicle": Key(
            Table(
                {
                    "name": Key(Text()),
                    "mass": Key(_quantity("mass"), required=False, help="two axles only: gives the axle loads"),
                    "cg_to_front_axle": Key(
                        _quantity("length"),
                        required=False,
                        help="two axles only: distance from the front axle back to the centre of gravity",
                    ),
                    "cg_height": Key(
                        _quantity("length"),
                        required=False,
                        help="centre-of-gravity height above the ground (for the static rollover threshold)",
                    ),
                    "axles": Key(ListOf(_axle(), min_items=2, max_items=12), help="front to back"),
                    "fitments": Key(ListOf(_fitment(), min_items=1), help="what is mounted on each axle"),
                    "speeds_kmh": Key(ListOf(Number(minimum=1, maximum=400), min_items=2), required=False),
                }
            ),
            required=False,
            default=None,
        ),
        "labs": Key(
            NamedTables(_lab()),
            required=False,
            default={},
            help="each lab's declared rig accuracy, by the name its runs give in `lab`",
        ),
        "drift": Key(
            options_of(
                DriftSettings,
                {
                    "control": Text(),
                    "correct": Boolean(),
                },
                help={"control": "id of the control specimen re-tested through the session"},
            ),
            required=False,
            default=None,
        ),
        "fit": Key(
            options_of(
                FitSettings,
                {
                    "nominal_load_n": Number(minimum=0, exclusive_minimum=True),
                    "nominal_pressure_kpa": Number(minimum=0, exclusive_minimum=True),
                    "leave_one_load_out": Boolean(),
                    "loss": Choice(("linear", "soft_l1", "huber")),
                    "max_evaluations": Integer(minimum=50),
                },
            ),
            required=False,
            default=None,
        ),
    }
)
