"""Specimen identity as the dossier shows it: decoded sidewall, age at test, test loads vs rating.

Combines :mod:`dossier.standards.sidewall` (pure decoding) with the manifest's specimens and runs.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from ..project.manifest import Manifest, Specimen
from ..standards.sidewall import DateCode, SizeDesignation, parse_size, parse_tin

OLD_TIRE_YEARS = 6.0  # many makers advise replacing tires older than 6-10 years (common practice)


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
    findings = []
    over = [t for t in tests if t.pct_of_rated and t.pct_of_rated > 100.0]
    if over:
        findings.append(
            "test loads above the rated load: "
            + ", ".join(f"{t.load_n / 1000:.1f} kN ({t.pct_of_rated:.0f} %)" for t in over)
        )
    if age is not None and age < 0:
        assert code is not None  # an age comes only from a parsed date code
        findings.append(f"the date code (week {code.week} of {code.year}) is after the test date {test_date}")
    elif age is not None and age > OLD_TIRE_YEARS:
        findings.append(f"specimen was {age:.1f} years old at test: rubber ageing may affect the results")
    if s.tin is None:
        findings.append("no DOT code recorded: the specimen's age is unknown")
    return SpecimenIdentity(s, size, rated, source, code, test_date, age, tests, tuple(findings))
