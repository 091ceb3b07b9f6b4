"""Sidewall identity: what the size designation and the DOT code say about a tire.

Size designation per ISO 4000-1 / UN ECE R30 and R54, e.g. ``225/45 R17 94W``: section width
225 mm, aspect ratio 45 %, radial, 17-inch rim, load index 94, speed symbol W. Variants read:
``P`` and ``LT`` prefixes, ``ZR``, ``XL``/``RF``/``reinforced``, single/dual load indices
(``123/120R``), heavy-truck, low-section and wide-base sizes (``295/75R22.5 144/141L``,
``385/65R22.5 160K``, ``445/45R19.5``), numeric truck sizes (``11R22.5 146/143L``, ``11.00R20``),
a service description in brackets (``255/40 ZR19 (101Y)``), commercial ``C`` after the rim
(``215/65 R16C 109/107R``) and LT load ranges (``LT265/75R16 123/120S LRE``).
Nominal overall diameter = rim × 25.4 + 2 × width × aspect/100 (mm).

The DOT tire identification number (49 CFR 574.5) ends in the date code: since 2000 four
digits, week then year (``2319`` = week 23 of 2019); before 2000 three digits (week, then the
last digit of a 1990s year).
"""

from __future__ import annotations

import datetime as dt
import math
import re
from dataclasses import dataclass

from ..common.errors import SidewallError
from .units import STANDARD_GRAVITY_M_PER_S2

# Load index → load capacity per tire, kg (ISO 4000-1 / UN ECE R30 Annex 4 / R54 Annex IV; ETRTO).
# From memory; the values the domain primer lists agree. The published table is one series: the
# capacity at LI + 80 is ten times that at LI, so indices 80-159 below give the whole range 0-279
# (LI 0 = 45 kg, LI 279 = 136 000 kg), each shown as published: truncated to 0.1 kg below 100 kg,
# to 1 kg above (LI 81 = 462 kg but LI 161 = 4 625 kg and LI 1 = 46.2 kg). Every entry lies within
# 2 % of the geometric series 45·10^(LI/80) (tested).
_SERIES_KG = (
    450, 462.5, 475, 487.5, 500, 515, 530, 545, 560, 580,  # LI 80-89
    600, 615, 630, 650, 670, 690, 710, 730, 750, 775,  # LI 90-99
    800, 825, 850, 875, 900, 925, 950, 975, 1000, 1030,  # LI 100-109
    1060, 1090, 1120, 1150, 1180, 1215, 1250, 1285, 1320, 1360,  # LI 110-119
    1400, 1450, 1500, 1550, 1600, 1650, 1700, 1750, 1800, 1850,  # LI 120-129
    1900, 1950, 2000, 2060, 2120, 2180, 2240, 2300, 2360, 2430,  # LI 130-139
    2500, 2575, 2650, 2725, 2800, 2900, 3000, 3075, 3150, 3250,  # LI 140-149
    3350, 3450, 3550, 3650, 3750, 3875, 4000, 4125, 4250, 4375,  # LI 150-159
)  # fmt: skip
LOAD_INDEX_MIN, LOAD_INDEX_MAX = 0, 279


def _load_index_kg(li: int) -> float:
    decade, i = divmod(li - 80, 80)
    exact = _SERIES_KG[i] * 10.0**decade
    # as published: whole kilograms from 100 kg up, one decimal below (truncated, not rounded)
    return float(math.floor(exact)) if exact >= 100 else math.floor(exact * 10 + 1e-9) / 10


def _as_published(kg: float) -> float:
    return int(kg) if kg == int(kg) else kg


LOAD_INDEX_KG: dict[int, float] = {
    li: _as_published(_load_index_kg(li)) for li in range(LOAD_INDEX_MIN, LOAD_INDEX_MAX + 1)
}

# Speed symbol → maximum speed, km/h (ISO 4000-1 / UN ECE R30 and R54; from memory): A1-A8 for
# slow-moving vehicles, then B to Y; "(Y)" in brackets means above 300 km/h.
SPEED_SYMBOL_KMH: dict[str, int] = {
    **{f"A{i}": 5 * i for i in range(1, 9)},
    "B": 50,
    "C": 60,
    "D": 65,
    "E": 70,
    "F": 80,
    "G": 90,
    "J": 100,
    "K": 110,
    "L": 120,
    "M": 130,
    "N": 140,
    "P": 150,
    "Q": 160,
    "R": 170,
    "S": 180,
    "T": 190,
    "U": 200,
    "H": 210,
    "V": 240,
    "W": 270,
    "Y": 300,
}

_SERVICE = (
    r"(?:\s*(?P<open>\()?\s*(?P<li>\d{1,3})(?:\s*/\s*(?P<li_dual>\d{1,3}))?\s*"
    r"(?P<speed>\((?:A[1-8]|[B-HJ-NP-WY])\)|(?:A[1-8]|[B-HJ-NP-WY]))?\s*(?P<close>\))?)?"
)
_FLAGS = r"(?:\s*(?P<reinforced>XL|RF|EXTRA\s+LOAD|REINFORCED))?(?:\s*(?:LR\s*|LOAD\s+RANGE\s+)(?P<load_range>[B-N]))?"
_METRIC = re.compile(
    r"^\s*(?P<prefix>P|LT)?\s*(?P<width>\d{3})\s*/\s*(?P<aspect>\d{2,3})\s*"
    r"(?P<construction>ZR|R|-|D|B)\s*(?P<rim>\d{2}(?:\.\d)?)(?P<commercial>C\b)?"
    r"(?:\s*(?P<reinforced_pre>XL|RF|EXTRA\s+LOAD|REINFORCED)\b)?" + _SERVICE + _FLAGS + r"\s*$",
    re.IGNORECASE,
)
# Numeric (inch) sizes of truck and light-truck tires: 11R22.5, 12R22.5, 11.00R20, 7.50R16; the
# designation gives no aspect ratio, so no overall diameter either (ETRTO lists it per size).
_NUMERIC = re.compile(
    r"^\s*(?P<prefix>LT)?\s*(?P<width_in>\d{1,2}(?:\.\d{2})?)\s*(?P<construction>R|-)\s*"
    r"(?P<rim>\d{2}(?:\.\d)?)(?P<commercial>C\b)?" + _SERVICE + _FLAGS + r"\s*$",
    re.IGNORECASE,
)


@dataclass(frozen=True)
class SizeDesignation:
    """A decoded size designation."""

    text: str
    prefix: str  # "", "P" or "LT"
    width_mm: float
    aspect_pct: float | None  # None: a numeric (inch) size, which states none
    construction: str  # "R", "ZR", "-", "D", "B"
    rim_in: float
    load_index: int | None
    load_index_dual: int | None
    speed_symbol: str | None  # as written, e.g. "W" or "(Y)"
    reinforced: bool
    load_range: str | None = None  # LT load range letter (B, C, D, E, ...)
    commercial: bool = False  # "C" after the rim diameter (a commercial, van tire)
    bracketed: bool = False  # the whole service description in brackets, e.g. "(101Y)"

    @property
    def sidewall_height_mm(self) -> float | None:
        return None if self.aspect_pct is None else self.width_mm * self.aspect_pct / 100.0

    @property
    def overall_diameter_mm(self) -> float | None:
        h = self.sidewall_height_mm
        return None if h is None else self.rim_in * 25.4 + 2.0 * h

    @property
    def unloaded_radius_m(self) -> float | None:
        """Nominal unloaded radius R0 from the designation, m (None: the size states no aspect ratio)."""
        d = self.overall_diameter_mm
        return None if d is None else d / 2000.0

    @property
    def revolutions_per_km(self) -> float | None:
        """Nominal revolutions per km of the unloaded circumference (the loaded one is smaller)."""
        d = self.overall_diameter_mm
        return None if d is None else 1.0e6 / (math.pi * d)

    @property
    def rated_load_kg(self) -> float | None:
        return None if self.load_index is None else LOAD_INDEX_KG.get(self.load_index)

    @property
    def rated_load_dual_kg(self) -> float | None:
        return None if self.load_index_dual is None else LOAD_INDEX_KG.get(self.load_index_dual)

    @property
    def wide_base(self) -> bool:
        """A wide-base truck tire (385 mm section or wider on a 17.5-24.5 in commercial rim, e.g. 385/65R22.5,
        445/50R22.5, 495/45R22.5): fitted single, never in a dual pair (common practice)."""
        return self.width_mm >= 385 and self.rim_in >= 17.5 and self.rim_in % 1.0 == 0.5

    def rated_load_kg_as(self, assembly: str) -> float | None:
        """The capacity per tire where it is fitted as a "single" or in a "dual" pair: the second load
        index where the designation gives two (e.g. 146/143: 146 single, 143 dual), else the one."""
        if assembly == "dual" and self.load_index_dual is not None:
            return self.rated_load_dual_kg
        return self.rated_load_kg

    @property
    def rated_load_n(self) -> float | None:
        kg = self.rated_load_kg
        return None if kg is None else kg * STANDARD_GRAVITY_M_PER_S2

    @property
    def max_speed_kmh(self) -> int | None:
        if not self.speed_symbol:
            return None
        return SPEED_SYMBOL_KMH.get(self.speed_symbol.strip("()").upper())

    @property
    def speed_note(self) -> str:
        """The speed category in words, including the open-ended ZR and bracketed cases."""
        sym = (self.speed_symbol or "").upper()
        if sym == "(Y)" or (self.bracketed and sym == "Y"):
            return "above 300 km/h (speed symbol in brackets)"
        if self.max_speed_kmh:
            base = f"up to {self.max_speed_kmh} km/h"
            if self.bracketed:
                return base + " (service description in brackets: the tire may run faster, as its maker states)"
            return base + (
                "; ZR in the size: above 240 km/h" if self.construction == "ZR" and self.max_speed_kmh > 240 else ""
            )
        if self.construction == "ZR":
            return "above 240 km/h (ZR, no service description)"
        return "no speed symbol"


def parse_size(text: str) -> SizeDesignation | None:
    """Decode a size designation such as '225/45 R17 94W', '11R22.5 146/143L' or '255/40 ZR19 (101Y)';
    None if it does not match."""
    m = _METRIC.match(text or "")
    numeric = None if m else _NUMERIC.match(text or "")
    found = m or numeric
    if not found:
        return None
    if bool(found["open"]) != bool(found["close"]):
        return None  # an unbalanced bracket
    li = int(found["li"]) if found["li"] else None
    dual = int(found["li_dual"]) if found["li_dual"] else None
    speed = found["speed"].upper() if found["speed"] else None
    if speed and (speed.count("(") != speed.count(")") or speed.strip("()") not in SPEED_SYMBOL_KMH):
        return None
    if li is not None and not LOAD_INDEX_MIN <= li <= LOAD_INDEX_MAX:
        return None
    if dual is not None and not LOAD_INDEX_MIN <= dual <= LOAD_INDEX_MAX:
        return None
    if m:
        width_mm, aspect = float(m["width"]), float(m["aspect"])
        reinforced = bool(m["reinforced"] or m["reinforced_pre"])
    else:
        assert numeric is not None
        width_mm, aspect = float(numeric["width_in"]) * 25.4, None
        reinforced = bool(numeric["reinforced"])
    return SizeDesignation(
        text=text.strip(),
        prefix=(found["prefix"] or "").upper(),
        width_mm=width_mm,
        aspect_pct=aspect,
        construction=found["construction"].upper(),
        rim_in=float(found["rim"]),
        load_index=li,
        load_index_dual=dual,
        speed_symbol=speed,
        reinforced=reinforced,
        load_range=found["load_range"].upper() if found["load_range"] else None,
        commercial=bool(found["commercial"]),
        bracketed=bool(found["open"]),
    )


@dataclass(frozen=True)
class DateCode:
    week: int
    year: int

    def age_years(self, on: dt.date) -> float:
        """Age in years on `on`, counting from the Monday of the ISO week of manufacture."""
        made = dt.date.fromisocalendar(self.year, min(self.week, 52), 1)
        return (on - made).days / 365.25


def parse_tin(text: str) -> DateCode:
    """Read the date code at the end of a DOT tire identification number (49 CFR 574.5).

    Four final digits are week and year (since 2000); three are week and the last digit of a
    1990s year. Raises SidewallError with what was expected when the code cannot be read.
    """
    cleaned = re.sub(r"^\s*DOT\s*", "", text or "", flags=re.IGNORECASE).strip()
    groups = cleaned.split()
    last = groups[-1] if groups else ""
    if not re.fullmatch(r"[A-Z0-9]+", cleaned.replace(" ", ""), re.IGNORECASE):
        raise SidewallError(f"expected letters and digits after 'DOT'; got {text!r}")
    digits = re.search(r"(\d{3,4})$", last)
    if not digits:
        raise SidewallError(f"expected the TIN to end in a 4-digit date code (week, year) such as '2319'; got {text!r}")
    code = digits.group(1)
    if len(last) > 4 and len(code) == 4:
        code = last[-4:]
    if len(code) == 4:
        week, year = int(code[:2]), 2000 + int(code[2:])
    else:
        week, year = int(code[:2]), 1990 + int(code[2])
    if not 1 <= week <= 53:
        raise SidewallError(f"the date code {code!r} gives week {week}; expected a week from 01 to 53")
    return DateCode(week, year)
