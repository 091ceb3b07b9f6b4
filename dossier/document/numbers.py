"""Number formatting for the dossier: the filters every page and the narrative use.

A number is formatted in one place so that the same value reads the same in a table, in the
text and in the PDF: decimals by unit, thin-space thousands, an en dash for "no value".
"""

from __future__ import annotations

import math

DECIMALS = {
    "N/deg": 0,
    "1/deg": 4,
    "1": 3,
    "deg": 2,
    "mm": 1,
    "N·m/deg": 2,
    "deg/g": 2,
    "N·m": 1,
    "N": 0,
    "1/kN": 4,
    "N/deg per 10 kPa": 1,
    "per 10 kPa": 4,
    "mm per 10 kPa": 2,
    "%/bar": 1,
}


def fmt_metric(value: float | None, unit: str) -> str:
    if value is None or not math.isfinite(value):
        return "–"
    return f"{value:,.{DECIMALS.get(unit, 3)}f}".replace(",", "\u2009")


def with_unit(number: str, unit: str) -> str:
    """A formatted number and its unit as running text prints them: a no-break space between, and
    no unit at all for a dimensionless "1" ("1.129", not "1.129 1")."""
    return number if unit in ("1", "") else f"{number}\u00a0{unit}"


def fmt_ci(ci, unit: str) -> str:
    if not ci:
        return "not estimable"
    return f"{fmt_metric(ci[0], unit)} … {fmt_metric(ci[1], unit)}"


def fmt_sig(value: float | None, digits: int = 4) -> str:
    if value is None or not math.isfinite(value):
        return "–"
    text = f"{value:.{digits}g}"
    if "e+" in text and abs(value) < 1e7:  # 1.5e+02 reads as 150: no exponent below ten million
        return f"{float(text):.0f}"
    return text


def fmt_kn(value_n: float) -> str:
    return f"{value_n / 1000:.1f}"


def fmt_camber(value_deg: float | None) -> str:
    """An inclination as the tables print it: "0°", "−1.5°", "+3°" (a typographic minus)."""
    if value_deg is None or not math.isfinite(value_deg):
        return "–"
    v = round(value_deg, 2)
    return ("0" if v == 0 else f"{v:+g}".replace("-", "−")) + "°"


def fmt_fixed(value: float | None, decimals: int = 1, signed: bool = False) -> str:
    if value is None or not math.isfinite(value):
        return "–"
    return f"{value:{'+' if signed else ''}.{decimals}f}".replace("-", "−")
