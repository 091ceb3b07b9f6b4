"""Units of the rig channels and their conversion into the internal units.

Internal units: force N, moment N·m, angle deg, pressure kPa, speed km/h, time s,
slip ratio as a plain fraction, length m, mass kg. Factors are exact definitions or NIST SP 811 (2008),
Appendix B.8/B.9.
"""

from __future__ import annotations

import math

LBF_IN_N = 4.4482216152605  # NIST SP 811 B.8: pound-force (avoirdupois) -> newton
INCH_IN_M = 0.0254  # exact, international inch
FOOT_IN_M = 0.3048  # exact, international foot
PSI_IN_KPA = LBF_IN_N / INCH_IN_M**2 / 1000.0  # 6.894757... kPa, NIST SP 811 B.8
MILE_IN_KM = 1.609344  # exact, international mile
STANDARD_GRAVITY_M_PER_S2 = 9.80665  # exact, CGPM 1901

# quantity -> (internal unit, {accepted spelling: factor to internal unit})
UNITS: dict[str, tuple[str, dict[str, float]]] = {
    "force": ("N", {"N": 1.0, "kN": 1000.0, "lbf": LBF_IN_N, "kgf": STANDARD_GRAVITY_M_PER_S2}),
    "moment": (
        "N·m",
        {
            "N·m": 1.0,
            "N.m": 1.0,
            "Nm": 1.0,
            "N*m": 1.0,
            "kN·m": 1000.0,
            "kN.m": 1000.0,
            "lbf·in": LBF_IN_N * INCH_IN_M,
            "lbf.in": LBF_IN_N * INCH_IN_M,
            "lbf*in": LBF_IN_N * INCH_IN_M,
            "lbf·ft": LBF_IN_N * FOOT_IN_M,
            "lbf.ft": LBF_IN_N * FOOT_IN_M,
            "lbf*ft": LBF_IN_N * FOOT_IN_M,
        },
    ),
    "angle": ("deg", {"deg": 1.0, "rad": 180.0 / math.pi}),
    "pressure": ("kPa", {"kPa": 1.0, "Pa": 0.001, "MPa": 1000.0, "bar": 100.0, "psi": PSI_IN_KPA}),
    "speed": ("km/h", {"km/h": 1.0, "kph": 1.0, "mph": MILE_IN_KM, "m/s": 3.6}),
    "time": ("s", {"s": 1.0, "ms": 0.001, "min": 60.0}),
    "slip_ratio": ("1", {"1": 1.0, "-": 1.0, "%": 0.01}),
    "length": ("m", {"m": 1.0, "mm": 0.001, "ft": FOOT_IN_M, "in": INCH_IN_M}),
    "mass": ("kg", {"kg": 1.0, "t": 1000.0, "lb": 0.45359237}),  # avoirdupois pound, exact (NIST SP 811 B.8)
}


def accepted_units(quantity: str) -> list[str]:
    """Return the unit spellings accepted for a quantity."""
    return list(UNITS[quantity][1])


def factor_to_internal(quantity: str, unit: str) -> float:
    """Return the factor that converts a value in `unit` into the internal unit of `quantity`.

    Raises KeyError for an unknown unit; the manifest validates units before this is called.
    """
    return UNITS[quantity][1][unit]
