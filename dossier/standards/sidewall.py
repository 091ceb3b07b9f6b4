"""Sidewall identity: what the size designation and the DOT code say about a tire.

Size designation per ISO 4000-1 / UN ECE R30 and R54, e.g. ``225/45 R17 94W``: section width
225 mm, aspect ratio 45 %, radial, 17-inch rim, load index 94, speed symbol W. Variants read:
``P`` and ``LT`` prefixes, ``ZR``, ``XL``/``RF``/``reinforced``, dual/single load indices
(``123/120R``), heavy-truck and wide-base sizes (``295/75R22.5 144/141L``, ``445/50R22.5``).
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

# Load index → load capacity per tire, kg (ISO 4000-1 / UN ECE R30 Annex 4 / R54 Annex IV).
# From memory; the values the domain primer lists agree, and every entry lies within 2 % of the
# geometric series 45·10^(LI/80) (tested).
LOAD_INDEX_KG: dict[int, int] = {
    60: 250,
    61: 257,
    62: 265,
    63: 272,
    64: 280,
    65: 290,
    66: 300,
    67: 307,
    68: 315,
    69: 325,
    70: 335,
    71: 345,
    72: 355,
    73: 365,
    74: 375,
    75: 387,
    76: 400,
    77: 412,
    78: 425,
    79: 437,
    80: 450,
    81: 462,
    82: 475,
    83: 487,
    84: 500,
    85: 515,
    86: 530,
    87: 545,
    88: 560,
    89: 580,
    90: 600,
    91: 615,
    92: 630,
    93: 650,
    94: 670,
    95: 690,
    96: 710,
    97: 730,
    98: 750,
    99: 775,
    100: 800,
    101: 825,
    102: 850,
    103: 875,
    104: 900,
    105: 925,
    106: 950,
    107: 975,
    108: 1000,
    109: 1030,
    110: 1060,
    111: 1090,
    112: 1120,
    113: 1150,
    114: 1180,
    115: 1215,
    116: 1250,
    117: 1285,
    118: 1320,
    119: 1360,
    120: 1400,
    121: 1450,
    122: 1500,
    123: 1550,
    124: 1600,
    125: 1650,
    126: 1700,
    127: 1750,
    128: 1800,
    129: 1850,
    130: 1900,
    131: 1950,
    132: 2000,
    133: 2060,
    134: 2120,
    135: 2180,
    136: 2240,
    137: 2300,
    138: 2360,
    139: 2430,
    140: 2500,
    141: 2575,
    142: 2650,
    143: 2725,
    144: 2800,
    145: 2900,
    146: 3000,
    147: 3075,
    148: 3150,
    149: 3250,
    150: 3350,
    151: 3450,
    152: 3550,
    153: 3650,
    154: 3750,
    155: 3875,
    156: 4000,
    157: 4125,
    158: 4250,
    159: 4375,
    160: 4500,
}

# Speed symbol → maximum speed, km/h (ISO 4000-1 / UN ECE R30) — the primer's table.
SPEED_SYMBOL_KMH: dict[str, int] = {
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

_SIZE = re.compile(
    r"^\s*(?P<prefix>P|LT)?\s*(?P<width>\d{3})\s*/\s*(?P<aspect>\d{2,3})\s*"
    r"(?P<construction>ZR|R|-|D|B)\s*(?P<rim>\d{2}(?:\.\d)?)"
    r"(?:\s*(?P<reinforced_pre>XL|RF|EXTRA\s+LOAD|REINFORCED)\b)?"
    r"(?:\s*(?P<li>\d{2,3})(?:\s*/\s*(?P<li_dual>\d{2,3}))?\s*(?P<speed>\(?[A-Z]\)?)?)?"
    r"(?:\s*(?P<reinforced>XL|RF|EXTRA\s+LOAD|REINFORCED))?\s*$",
    re.IGNORECASE,
)


@dataclass(frozen=True)
class SizeDesignation:
    """A decoded size designation."""

    text: str
    prefix: str  # "", "P" or "LT"
    width_mm: float
    aspect_pct: float
    construction: str  # "R", "ZR", "-", "D", "B"
    rim_in: float
    load_index: int | None
    load_index_dual: int | None
    speed_symbol: str | None  # as written, e.g. "W" or "(Y)"
    reinforced: bool

    @property
    def sidewall_height_mm(self) -> float:
        return self.width_mm * self.aspect_pct / 100.0

    @property
    def overall_diameter_mm(self) -> float:
        return self.rim_in * 25.4 + 2.0 * self.sidewall_height_mm

    @property
    def unloaded_radius_m(self) -> float:
        """Nominal unloaded radius R0 from the designation, m."""
        return self.overall_diameter_mm / 2000.0

    @property
    def revolutions_per_km(self) -> float:
        """Nominal revolutions per km of the unloaded circumference (the loaded one is smaller)."""
        return 1.0e6 / (math.pi * self.overall_diameter_mm)

    @property
    def rated_load_kg(self) -> int | None:
        return None if self.load_index is None else LOAD_INDEX_KG.get(self.load_index)

    @property
    def rated_load_dual_kg(self) -> int | None:
        return None if self.load_index_dual is None else LOAD_INDEX_KG.get(self.load_index_dual)

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
        """The speed category in words, including the open-ended ZR and (Y) cases."""
        sym = (self.speed_symbol or "").upper()
        if sym == "(Y)":
            return "above 300 km/h (speed symbol in brackets)"
        if self.max_speed_kmh:
            base = f"up to {self.max_speed_kmh} km/h"
            return base + (
                "; ZR in the size: above 240 km/h" if self.construction == "ZR" and self.max_speed_kmh > 240 else ""
            )
        if self.construction == "ZR":
            return "above 240 km/h (ZR, no service description)"
        return "no speed symbol"


def parse_size(text: str) -> SizeDesignation | None:
    """Decode a size designation such as '225/45 R17 94W'; None if it does not match."""
    m = _SIZE.match(text or "")
    if not m:
        return None
    li = int(m["li"]) if m["li"] else None
    dual = int(m["li_dual"]) if m["li_dual"] else None
    speed = m["speed"].upper() if m["speed"] else None
    if speed and speed.strip("()") not in SPEED_SYMBOL_KMH:
        return None
    return SizeDesignation(
        text=text.strip(),
        prefix=(m["prefix"] or "").upper(),
        width_mm=float(m["width"]),
        aspect_pct=float(m["aspect"]),
        construction=m["construction"].upper(),
        rim_in=float(m["rim"]),
        load_index=li,
        load_index_dual=dual,
        speed_symbol=speed,
        reinforced=bool(m["reinforced"] or m["reinforced_pre"]),
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
