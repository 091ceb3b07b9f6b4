"""Specimen identity as the dossier shows it: decoded sidewall, age at test, test loads vs rating.

Combines :mod:`dossier.standards.sidewall` (pure decoding) with the manifest's specimens and runs,
and says where a run's pressure or test load is far from what the size designation implies, with
the unit mix-up the number looks like where one explains it.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable, Sequence
from dataclasses import dataclass

from ..project.manifest import Manifest, RunSpec, Specimen
from ..standards import units
from ..standards.sidewall import DateCode, SizeDesignation, parse_size, parse_tin

OLD_TIRE_YEARS = 6.0  # many makers advise replacing tires older than 6-10 years (common practice)

PASSENGER, LIGHT_TRUCK, TRUCK_BUS = "passenger car", "light truck", "truck/bus"

# Inflation pressure at which a rig plausibly tests each kind of tire, kPa (common practice:
# passenger tires run at about 180-350 kPa, XL ones up to about 350 kPa; LT load ranges up to
# about 550 kPa; truck and bus tires at about 700-900 kPa). The bounds leave room for deliberate
# low- and high-pressure runs; a value outside them is a finding, not an error.
PLAUSIBLE_PRESSURE_KPA: dict[str, tuple[float, float]] = {
    PASSENGER: (150.0, 450.0),
    LIGHT_TRUCK: (150.0, 600.0),
    TRUCK_BUS: (450.0, 1000.0),
}
# The size designation cannot be read: the span of every kind above.
ANY_TIRE_PRESSURE_KPA = (150.0, 1000.0)

# Test loads a rig program uses, % of the rated load (common practice): below 10 % the tire
# carries almost nothing; beyond 150 % is more overload than any program runs on purpose.
PLAUSIBLE_LOAD_PCT = (10.0, 150.0)

# Units a number may have been meant in, with their factor to the internal unit (NIST SP 811
# Appendix B.8 for psi and lbf; bar and MPa by definition; kgf by standard gravity).
PRESSURE_MIX_UPS: tuple[tuple[str, float], ...] = (("psi", units.PSI_IN_KPA), ("bar", 100.0), ("MPa", 1000.0))
LOAD_MIX_UPS: tuple[tuple[str, float], ...] = (
    ("kN", 1000.0),
    ("lbf", units.LBF_IN_N),
    ("kgf", units.STANDARD_GRAVITY_M_PER_S2),
)


@dataclass(frozen=True)
class TestLoad:
    load_n: float
    pct_of_rated: float | None


@dataclass(frozen=True)
class SpecimenIdentity:
    specimen: Specimen
    size: SizeDesignation | None
    rated_load_n: float | None
    rated_load_source: str  # "load index", "manifest" or "unknown"
    date_code: DateCode | None
    test_date: dt.date
    age_years: float | None
    test_loads: tuple[TestLoad, ...]
    findings: tuple[str, ...]
    tire_kind: str | None = None  # PASSENGER, LIGHT_TRUCK or TRUCK_BUS; None when the size cannot be read


def tire_kind(size: SizeDesignation) -> str:
    """Tell passenger car, light truck and truck/bus tires apart by their size designation."""
    if size.prefix == "LT" or size.commercial or size.load_range:
        return LIGHT_TRUCK
    # Commercial-vehicle tubeless rims (15° taper) carry half-inch diameters: 17.5, 19.5, 22.5,
    # 24.5 in (common practice); 16.5 in was a light-truck rim and carries the LT prefix.
    if size.rim_in >= 17.5 and size.rim_in % 1.0 == 0.5:
        return TRUCK_BUS
    # A dual/single load index pair (e.g. 109/107) marks a commercial (van) tire (common practice).
    if size.load_index_dual is not None:
        return LIGHT_TRUCK
    return PASSENGER


def specimen_identity(s: Specimen, manifest: Manifest) -> SpecimenIdentity:
    """Decode a specimen's sidewall and check its test loads against its rating."""
    size = parse_size(s.size)
    if s.rated_load_n:
        rated, source = s.rated_load_n, "manifest"
    elif size is not None and size.rated_load_n:
        rated, source = size.rated_load_n, "load index"
    else:
        rated, source = None, "unknown"
    runs = [r for r in manifest.runs if r.specimen == s.id]
    dates = [r.tested_at.date() for r in runs if r.tested_at]
    test_date = min(dates) if dates else manifest.document.date
    code = parse_tin(s.tin) if s.tin else None
    age = code.age_years(test_date) if code else None
    loads = sorted({L for r in runs for L in (r.load_setpoints_n or ())})
    tests = tuple(TestLoad(L, None if not rated else 100.0 * L / rated) for L in loads)
    kind = tire_kind(size) if size is not None else None
    findings = []
    over = [t for t in tests if t.pct_of_rated and t.pct_of_rated > 100.0]
    if over:
        findings.append(
            "test loads above the rated load: "
            + ", ".join(f"{t.load_n / 1000:.1f} kN ({t.pct_of_rated:.0f} %)" for t in over)
        )
    for r in runs:
        pressure = _pressure_finding(r, kind)
        if pressure:
            findings.append(pressure)
        if rated:
            rating = f"{rated / 1000:.2f} kN " + (
                f"(load index {size.load_index})" if source == "load index" and size else "(as the manifest gives it)"
            )
            findings += _load_findings(r, rated, rating)
    if age is not None and age < 0:
        assert code is not None  # an age comes only from a parsed date code
        findings.append(f"the date code (week {code.week} of {code.year}) is after the test date {test_date}")
    elif age is not None and age > OLD_TIRE_YEARS:
        findings.append(f"specimen was {age:.1f} years old at test: rubber ageing may affect the results")
    if s.tin is None:
        findings.append("no DOT code recorded: the specimen's age is unknown")
    return SpecimenIdentity(s, size, rated, source, code, test_date, age, tests, tuple(findings), kind)


def _pressure_finding(r: RunSpec, kind: str | None) -> str | None:
    """Say so when a run's inflation pressure lies outside the range usual for the tire's kind."""
    lo, hi = PLAUSIBLE_PRESSURE_KPA[kind] if kind else ANY_TIRE_PRESSURE_KPA
    p = r.pressure_kpa
    if lo <= p <= hi:
        return None
    tire = f"a {kind} tire" if kind else "a tire of any kind (the size designation cannot be read)"
    return (
        f"run {r.index} ({r.file}): inflation pressure {_num(p)} kPa is {_how_far(p, lo, hi)} the "
        f"{_num(lo)}–{_num(hi)} kPa usual for {tire}; "
        + _mix_up(
            (p,),
            "kPa",
            PRESSURE_MIX_UPS,
            lambda v: lo <= v <= hi,
            lambda vs: f"{_nums(vs)} kPa",
            f"{r.location}.pressure",
            low=p < lo,
        )
    )


def _load_findings(r: RunSpec, rated_n: float, rating: str) -> list[str]:
    """Say so when a run's load set-points lie far below or far above the rated load."""
    lo_pct, hi_pct = PLAUSIBLE_LOAD_PCT
    setpoints = sorted(set(r.load_setpoints_n or ()))
    below = [L for L in setpoints if 100.0 * L / rated_n < lo_pct]
    above = [L for L in setpoints if 100.0 * L / rated_n > hi_pct]

    def plausible(v: float) -> bool:
        return lo_pct <= 100.0 * v / rated_n <= hi_pct

    def shown(vs: Sequence[float]) -> str:
        return f"{_nums(vs)} N ({_span([100.0 * v / rated_n for v in vs])} %)"

    out = []
    for group, side in ((below, "far below"), (above, "far above")):
        if not group:
            continue
        what = "test load" if len(group) == 1 else "test loads"
        verb = "is" if len(group) == 1 else "are"
        pcts = _span([100.0 * L / rated_n for L in group])
        out.append(
            f"run {r.index} ({r.file}): {what} {_nums(group)} N {verb} {pcts} % of the rated load {rating}, "
            f"{side} the {_num(lo_pct)}–{_num(hi_pct)} % a rig test uses; "
            + _mix_up(
                tuple(group), "N", LOAD_MIX_UPS, plausible, shown, f"{r.location}.load_setpoints", low=group is below
            )
        )
    return out


def _mix_up(
    values: tuple[float, ...],
    unit: str,
    mix_ups: tuple[tuple[str, float], ...],
    plausible: Callable[[float], bool],
    shown: Callable[[Sequence[float]], str],
    key: str,
    *,
    low: bool,
) -> str:
    """Name the unit mix-ups that would bring every value into the plausible range, or say none does."""
    one = len(values) == 1
    looks = "the value looks like" if one else "the values look like"
    readings, names = [], []
    for name, factor in mix_ups:
        # Too low: the number was meant in the larger unit; too high: it was meant in `unit` but
        # declared in the larger one, so the conversion multiplied it by the factor.
        meant = [v * factor if low else v / factor for v in values]
        if all(plausible(v) for v in meant):
            if low:
                readings.append(f"{_nums(values)} {name} = {shown(meant)}")
            else:
                readings.append(f"{_nums(values)} {unit} is {factor:.4g} times a plausible {shown(meant)}")
            names.append(name)
    if not readings:
        units_tried = ", ".join(n for n, _ in mix_ups[:-1]) + f" or {mix_ups[-1][0]}"
        return f"no mix-up with {units_tried} explains it: check the manifest ({key})"
    which = " or ".join(names)
    mixed = f"{which} entered as {unit}" if low else f"{unit} entered as {which}"
    return f"{', '.join(readings)}: {looks} {mixed} (manifest {key})"


def _how_far(v: float, lo: float, hi: float) -> str:
    """Say 'far' when the value is more than a factor of two outside the range."""
    if v < lo:
        return "far below" if v < lo / 2.0 else "below"
    return "far above" if v > 2.0 * hi else "above"


def _num(v: float) -> str:
    """Format a value with three significant digits, whole numbers from 1000 up."""
    return f"{v:.3g}" if abs(v) < 1000 else f"{v:.0f}"


def _nums(vs: Sequence[float]) -> str:
    """Format values as a comma-separated list."""
    return ", ".join(_num(v) for v in vs)


def _span(vs: Sequence[float]) -> str:
    """Format the smallest and largest of some values as a span (one value when they agree)."""
    lo, hi = _num(min(vs)), _num(max(vs))
    return lo if lo == hi else f"{lo}–{hi}"
