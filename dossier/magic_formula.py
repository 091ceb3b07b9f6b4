"""The Magic Formula equations, as vectorised pure functions.

Sources: Pacejka & Bakker, VSD 21 suppl. (1992); Pacejka, *Tire and Vehicle Dynamics*,
2nd ed. (2006), §4.3.1 (general form) and §4.3.2 (pure-slip equations of the 2002 form).
Scaling factors λ are 1 throughout (we fit; we do not rescale). Equation numbers such as
``4.E25`` refer to the 2006 edition's list of pure-slip equations *(numbering from memory;
the formulas themselves are those of the domain primer, §4)*.

Signs: the equations are used in the internal ISO 8855 axes (:mod:`dossier.axes`). A tire
gives negative Fy for positive slip angle there, so fitted ``pKy1`` is negative and ``pDy1``
positive; the cornering stiffness reported to people is −dFy/dα (SAE J670 definition).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

DEG = np.pi / 180.0


def sine_form(x, B, C, D, E):
    """Return y = D sin[C arctan{B x − E (B x − arctan B x)}] (Pacejka 2006, eq. 4.49)."""
    bx = B * x
    return D * np.sin(C * np.arctan(bx - E * (bx - np.arctan(bx))))


@dataclass(frozen=True)
class CoefficientInfo:
    """What a published coefficient is: name, unit, default, physical bounds and its equation."""

    name: str
    unit: str
    default: float
    lower: float
    upper: float
    equation: str
    meaning: str
    camber: bool = False  # needs cambered data to be identified


# Lateral force, pure side slip (Pacejka 2006, eqs. 4.E19-4.E30). Bounds are physical ranges
# for car and truck tires (common practice); defaults are what an unidentified term is held at.
FY0_COEFFICIENTS: tuple[CoefficientInfo, ...] = (
    CoefficientInfo("pCy1", "1", 1.3, 1.0, 2.5, "4.E21", "shape factor Cy"),
    CoefficientInfo("pDy1", "1", 1.0, 0.1, 3.5, "4.E23", "lateral friction at nominal load"),
    CoefficientInfo("pDy2", "1", 0.0, -1.5, 1.0, "4.E23", "variation of friction with load"),
    CoefficientInfo("pDy3", "1/rad^2", 0.0, -50.0, 50.0, "4.E23", "variation of friction with camber squared", True),
    CoefficientInfo("pEy1", "1", 0.0, -10.0, 1.0, "4.E24", "curvature factor at nominal load"),
    CoefficientInfo("pEy2", "1", 0.0, -10.0, 10.0, "4.E24", "variation of curvature with load"),
    CoefficientInfo("pEy3", "1", 0.0, -5.0, 5.0, "4.E24", "curvature asymmetry", True),
    CoefficientInfo("pEy4", "1/rad", 0.0, -50.0, 50.0, "4.E24", "curvature asymmetry with camber", True),
    CoefficientInfo("pKy1", "1", -20.0, -200.0, 200.0, "4.E25", "maximum cornering stiffness / nominal load"),
    CoefficientInfo("pKy2", "1", 2.0, 0.1, 20.0, "4.E25", "load at maximum cornering stiffness / nominal load"),
    CoefficientInfo("pKy3", "1/rad", 0.0, -5.0, 5.0, "4.E25", "variation of cornering stiffness with camber", True),
    CoefficientInfo("pHy1", "rad", 0.0, -0.1, 0.1, "4.E27", "horizontal shift at nominal load"),
    CoefficientInfo("pHy2", "rad", 0.0, -0.1, 0.1, "4.E27", "variation of horizontal shift with load"),
    CoefficientInfo("pHy3", "1", 0.0, -1.0, 1.0, "4.E27", "variation of horizontal shift with camber", True),
    CoefficientInfo("pVy1", "1", 0.0, -0.3, 0.3, "4.E29", "vertical shift / load at nominal load"),
    CoefficientInfo("pVy2", "1", 0.0, -0.3, 0.3, "4.E29", "variation of vertical shift with load"),
    CoefficientInfo("pVy3", "1/rad", 0.0, -5.0, 5.0, "4.E29", "vertical shift with camber", True),
    CoefficientInfo("pVy4", "1/rad", 0.0, -5.0, 5.0, "4.E29", "vertical shift with camber and load", True),
)
FY0_NAMES = tuple(c.name for c in FY0_COEFFICIENTS)
FY0_INFO = {c.name: c for c in FY0_COEFFICIENTS}


def fy0_defaults() -> dict[str, float]:
    """Return every Fy0 coefficient at its default value."""
    return {c.name: c.default for c in FY0_COEFFICIENTS}


def fy0(alpha_rad, fz_n, p: dict[str, float], fz0_n: float, gamma_rad=0.0):
    """Pure-slip lateral force Fy0 in N (Pacejka 2006, §4.3.2, eqs. 4.E19-4.E30).

    Parameters
    ----------
    alpha_rad : array_like
        Slip angle, rad, ISO 8855 sign.
    fz_n : array_like
        Normal load, N (positive), broadcastable with `alpha_rad`.
    p : dict
        Coefficients by published name (see :data:`FY0_COEFFICIENTS`); missing ones take defaults.
    fz0_n : float
        Nominal load Fz0, N.
    gamma_rad : array_like
        Inclination angle, rad.
    """
    c = {**fy0_defaults(), **p}
    alpha = np.asarray(alpha_rad, dtype=float)
    fz = np.asarray(fz_n, dtype=float)
    g = np.asarray(gamma_rad, dtype=float)
    dfz = (fz - fz0_n) / fz0_n  # 4.E2a
    shy = c["pHy1"] + c["pHy2"] * dfz + c["pHy3"] * g  # 4.E27
    svy = fz * (c["pVy1"] + c["pVy2"] * dfz + (c["pVy3"] + c["pVy4"] * dfz) * g)  # 4.E29
    alpha_y = alpha + shy  # 4.E20
    cy = c["pCy1"]  # 4.E21
    mu_y = (c["pDy1"] + c["pDy2"] * dfz) * (1.0 - c["pDy3"] * g**2)  # 4.E23
    dy = mu_y * fz  # 4.E22
    ey = (c["pEy1"] + c["pEy2"] * dfz) * (1.0 - (c["pEy3"] + c["pEy4"] * g) * np.sign(alpha_y))  # 4.E24
    ey = np.minimum(ey, 1.0)  # E <= 1 (Pacejka 2006, §4.3.1)
    kya = c["pKy1"] * fz0_n * np.sin(2.0 * np.arctan(fz / (c["pKy2"] * fz0_n))) * (1.0 - c["pKy3"] * np.abs(g))  # 4.E25
    by = kya / _nonzero(cy * dy)  # 4.E26
    return sine_form(alpha_y, by, cy, dy, ey) + svy  # 4.E19


def fy0_cornering_stiffness_n_per_rad(fz_n, p: dict[str, float], fz0_n: float, gamma_rad=0.0):
    """Return Kyα = pKy1 Fz0 sin[2 arctan(Fz/(pKy2 Fz0))](1 − pKy3|γ|), N/rad (eq. 4.E25)."""
    c = {**fy0_defaults(), **p}
    fz = np.asarray(fz_n, dtype=float)
    return c["pKy1"] * fz0_n * np.sin(2.0 * np.arctan(fz / (c["pKy2"] * fz0_n))) * (1.0 - c["pKy3"] * np.abs(gamma_rad))


def _nonzero(x):
    x = np.asarray(x, dtype=float)
    return np.where(np.abs(x) < 1e-9, 1e-9, x)
