"""The Magic Formula equations, as vectorised pure functions.

Sources: Pacejka & Bakker, VSD 21 suppl. (1992); Pacejka, *Tire and Vehicle Dynamics*,
2nd ed. (2006), §4.3.1 (general form) and §4.3.2 (pure-slip equations of the 2002 form, and
the weighting functions of combined slip, eqs. 4.E50-4.E67: the 2002 form of Pacejka 2006 as
recalled *(from memory; no turn slip, ζ2 = 1)*);
inflation pressure: Besselink, Schmeitz & Pacejka, VSD 48 suppl. 1 (2010). Scaling factors
λ are 1 throughout (we fit; we do not rescale). Equation labels such as ``4.E25`` refer to
the 2006 edition's list of pure-slip equations *(numbering from memory; the formulas
themselves are those of the domain primer, §4)*. The placement of the pressure terms follows
the domain primer's summary of the 2010 paper and has not been checked against the paper.

Signs: the equations are used in the internal ISO 8855 axes (:mod:`dossier.standards.axes`). A tire
gives negative Fy for positive slip angle there, so fitted ``pKy1`` is negative and ``pDy1``
positive; the cornering stiffness reported to people is −dFy/dα (SAE J670 definition).
Driving slip (κ > 0) gives positive Fx, so ``pDx1`` and ``pKx1`` are positive.

Inputs everywhere: slip angle α in rad, slip ratio κ as a fraction, normal load Fz in N
(positive), inclination γ in rad, and ``dpi = (p − p0)/p0`` for the inflation pressure.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

DEG = np.pi / 180.0


def sine_form(x, B, C, D, E):
    """Return y = D sin[C arctan{B x − E (B x − arctan B x)}] (Pacejka 2006, eq. 4.49)."""
    bx = B * x
    return D * np.sin(C * np.arctan(bx - E * (bx - np.arctan(bx))))


def cosine_form(x, B, C, D, E):
    """Return y = D cos[C arctan{B x − E (B x − arctan B x)}] (Pacejka 2006, §4.3.2, trail)."""
    bx = B * x
    return D * np.cos(C * np.arctan(bx - E * (bx - np.arctan(bx))))


@dataclass(frozen=True)
class CoefficientInfo:
    """What a published coefficient is: name, unit, default, physical bounds and its equation.

    `needs` says what the data must contain to identify it: "" (any data of the channel),
    "loads" (two or more loads), "loads3" (three or more loads), "camber" (two or more
    inclination angles), "camber_loads" (two or more inclination angles at each of two or more
    loads), "pressure" (two or more pressures), "pressure3" (three or more: a quadratic term)
    or "pressure_loads" (two or more pressures at each of two or more loads). Unidentified
    coefficients are held at `default`.
    """

    name: str
    unit: str
    default: float
    lower: float
    upper: float
    equation: str
    meaning: str
    needs: str = ""


C = CoefficientInfo
# Bounds are physical ranges for car and truck tires (common practice).
FY0_COEFFICIENTS: tuple[CoefficientInfo, ...] = (
    C("pCy1", "1", 1.3, 1.0, 2.5, "4.E21", "shape factor Cy"),
    C("pDy1", "1", 1.0, 0.1, 3.5, "4.E23", "lateral friction at nominal load"),
    C("pDy2", "1", 0.0, -1.5, 1.0, "4.E23", "variation of friction with load", "loads"),
    C("pDy3", "1/rad^2", 0.0, -50.0, 50.0, "4.E23", "variation of friction with camber squared", "camber"),
    C("pEy1", "1", 0.0, -10.0, 1.0, "4.E24", "curvature factor at nominal load"),
    C("pEy2", "1", 0.0, -10.0, 10.0, "4.E24", "variation of curvature with load", "loads"),
    C("pEy3", "1", 0.0, -5.0, 5.0, "4.E24", "curvature asymmetry (sign of slip)"),
    C("pEy4", "1/rad", 0.0, -50.0, 50.0, "4.E24", "curvature asymmetry with camber", "camber"),
    C("pKy1", "1", -20.0, -200.0, 200.0, "4.E25", "maximum cornering stiffness / nominal load"),
    C("pKy2", "1", 2.0, 0.1, 20.0, "4.E25", "load at maximum cornering stiffness / nominal load", "loads3"),
    C("pKy3", "1/rad", 0.0, -5.0, 5.0, "4.E25", "variation of cornering stiffness with camber", "camber"),
    C("pHy1", "rad", 0.0, -0.1, 0.1, "4.E27", "horizontal shift at nominal load"),
    C("pHy2", "rad", 0.0, -0.1, 0.1, "4.E27", "variation of horizontal shift with load", "loads"),
    C("pHy3", "1", 0.0, -1.0, 1.0, "4.E27", "variation of horizontal shift with camber", "camber"),
    C("pVy1", "1", 0.0, -0.3, 0.3, "4.E29", "vertical shift / load at nominal load"),
    C("pVy2", "1", 0.0, -0.3, 0.3, "4.E29", "variation of vertical shift with load", "loads"),
    C("pVy3", "1/rad", 0.0, -5.0, 5.0, "4.E29", "vertical shift with camber", "camber"),
    C("pVy4", "1/rad", 0.0, -5.0, 5.0, "4.E29", "vertical shift with camber and load", "camber_loads"),
    C("ppy1", "1", 0.0, -3.0, 3.0, "BSP2010", "pressure effect on cornering stiffness", "pressure"),
    C(
        "ppy2",
        "1",
        0.0,
        -3.0,
        3.0,
        "BSP2010",
        "pressure effect on the load of maximum cornering stiffness",
        "pressure_loads",
    ),
    C("ppy3", "1", 0.0, -3.0, 3.0, "BSP2010", "linear pressure effect on lateral friction", "pressure"),
    C("ppy4", "1", 0.0, -3.0, 3.0, "BSP2010", "quadratic pressure effect on lateral friction", "pressure3"),
)

MZ0_COEFFICIENTS: tuple[CoefficientInfo, ...] = (
    C("qBz1", "1", 10.0, 0.5, 50.0, "4.E40", "trail slope factor at nominal load"),
    C("qBz2", "1", 0.0, -20.0, 20.0, "4.E40", "variation of trail slope with load", "loads"),
    C("qBz3", "1", 0.0, -20.0, 20.0, "4.E40", "variation of trail slope with load squared", "loads3"),
    C("qBz4", "1/rad", 0.0, -20.0, 20.0, "4.E40", "variation of trail slope with camber", "camber"),
    C("qBz5", "1/rad", 0.0, -20.0, 20.0, "4.E40", "variation of trail slope with |camber|", "camber"),
    C("qBz9", "1", 0.0, -50.0, 50.0, "4.E44", "slope factor of the residual torque"),
    C("qBz10", "1", 0.0, -5.0, 5.0, "4.E44", "slope factor of the residual torque, with ByCy"),
    C("qCz1", "1", 1.2, 0.5, 3.0, "4.E41", "trail shape factor"),
    C("qDz1", "1", 0.1, 0.0, 1.0, "4.E42", "peak trail / unloaded radius at nominal load"),
    C("qDz2", "1", 0.0, -1.0, 1.0, "4.E42", "variation of peak trail with load", "loads"),
    C("qDz3", "1/rad", 0.0, -20.0, 20.0, "4.E42", "variation of peak trail with camber", "camber"),
    C("qDz4", "1/rad^2", 0.0, -200.0, 200.0, "4.E42", "variation of peak trail with camber squared", "camber"),
    C("qDz6", "1", 0.0, -0.1, 0.1, "4.E47", "residual torque / (load · radius) at nominal load"),
    C("qDz7", "1", 0.0, -0.1, 0.1, "4.E47", "variation of residual torque with load", "loads"),
    C("qDz8", "1/rad", 0.0, -2.0, 2.0, "4.E47", "residual torque with camber", "camber"),
    C("qDz9", "1/rad", 0.0, -2.0, 2.0, "4.E47", "residual torque with camber and load", "camber_loads"),
    C("qEz1", "1", -1.0, -20.0, 1.0, "4.E43", "trail curvature at nominal load"),
    C("qEz2", "1", 0.0, -20.0, 20.0, "4.E43", "variation of trail curvature with load", "loads"),
    C("qEz3", "1", 0.0, -20.0, 20.0, "4.E43", "variation of trail curvature with load squared", "loads3"),
    C("qEz4", "1", 0.0, -5.0, 5.0, "4.E43", "trail curvature asymmetry"),
    C("qEz5", "1/rad", 0.0, -50.0, 50.0, "4.E43", "trail curvature asymmetry with camber", "camber"),
    C("qHz1", "rad", 0.0, -0.1, 0.1, "4.E35", "trail horizontal shift at nominal load"),
    C("qHz2", "rad", 0.0, -0.1, 0.1, "4.E35", "variation of trail shift with load", "loads"),
    C("qHz3", "1", 0.0, -2.0, 2.0, "4.E35", "trail shift with camber", "camber"),
    C("qHz4", "1", 0.0, -2.0, 2.0, "4.E35", "trail shift with camber and load", "camber_loads"),
    C("ppz1", "1", 0.0, -3.0, 3.0, "BSP2010", "pressure effect on the peak trail", "pressure"),
)

FX0_COEFFICIENTS: tuple[CoefficientInfo, ...] = (
    C("pCx1", "1", 1.6, 1.0, 2.5, "4.E11", "shape factor Cx"),
    C("pDx1", "1", 1.0, 0.1, 3.5, "4.E13", "longitudinal friction at nominal load"),
    C("pDx2", "1", 0.0, -1.5, 1.0, "4.E13", "variation of friction with load", "loads"),
    C("pDx3", "1/rad^2", 0.0, -50.0, 50.0, "4.E13", "variation of friction with camber squared", "camber"),
    C("pEx1", "1", 0.0, -10.0, 1.0, "4.E14", "curvature factor at nominal load"),
    C("pEx2", "1", 0.0, -10.0, 10.0, "4.E14", "variation of curvature with load", "loads"),
    C("pEx3", "1", 0.0, -10.0, 10.0, "4.E14", "variation of curvature with load squared", "loads3"),
    C("pEx4", "1", 0.0, -1.0, 1.0, "4.E14", "curvature asymmetry (driving vs braking)"),
    C("pKx1", "1", 20.0, 1.0, 200.0, "4.E15", "longitudinal slip stiffness / load at nominal load"),
    C("pKx2", "1", 0.0, -50.0, 50.0, "4.E15", "variation of slip stiffness with load", "loads"),
    C("pKx3", "1", 0.0, -5.0, 5.0, "4.E15", "exponential variation of slip stiffness with load", "loads3"),
    C("pHx1", "1", 0.0, -0.05, 0.05, "4.E17", "horizontal shift at nominal load"),
    C("pHx2", "1", 0.0, -0.05, 0.05, "4.E17", "variation of horizontal shift with load", "loads"),
    C("pVx1", "1", 0.0, -0.3, 0.3, "4.E18", "vertical shift / load at nominal load"),
    C("pVx2", "1", 0.0, -0.3, 0.3, "4.E18", "variation of vertical shift with load", "loads"),
    C("ppx1", "1", 0.0, -3.0, 3.0, "BSP2010", "linear pressure effect on slip stiffness", "pressure"),
    C("ppx2", "1", 0.0, -3.0, 3.0, "BSP2010", "quadratic pressure effect on slip stiffness", "pressure3"),
    C("ppx3", "1", 0.0, -3.0, 3.0, "BSP2010", "linear pressure effect on longitudinal friction", "pressure"),
    C("ppx4", "1", 0.0, -3.0, 3.0, "BSP2010", "quadratic pressure effect on longitudinal friction", "pressure3"),
)

# Combined slip (Pacejka 2006, §4.3.2, 4.E50-4.E67): weighting functions on top of the pure-slip
# fits. "held_signs": the held slip angles (or ratios) include both signs; "held3": three or more
# held levels other than zero. Defaults and bounds: common practice for car and truck tires.
FXC_COEFFICIENTS: tuple[CoefficientInfo, ...] = (
    C("rBx1", "1", 10.0, 0.5, 60.0, "4.E54", "slope of the Fx weighting against slip angle"),
    C("rBx2", "1", 8.0, 0.0, 60.0, "4.E54", "variation of that slope with slip ratio"),
    C("rBx3", "1", 0.0, -100.0, 100.0, "4.E54", "variation of that slope with camber squared", "camber"),
    C("rCx1", "1", 1.0, 0.5, 2.0, "4.E55", "shape factor of the Fx weighting"),
    C("rEx1", "1", 0.0, -10.0, 1.0, "4.E56", "curvature of the Fx weighting at nominal load"),
    C("rEx2", "1", 0.0, -10.0, 10.0, "4.E56", "variation of that curvature with load", "loads"),
    C("rHx1", "rad", 0.0, -0.05, 0.05, "4.E57", "shift of the Fx weighting in slip angle", "held_signs"),
)
FYC_COEFFICIENTS: tuple[CoefficientInfo, ...] = (
    C("rBy1", "1", 8.0, 0.5, 60.0, "4.E62", "slope of the Fy weighting against slip ratio"),
    C("rBy2", "1", 5.0, 0.0, 60.0, "4.E62", "variation of that slope with slip angle"),
    C("rBy3", "rad", 0.0, -0.1, 0.1, "4.E62", "slip-angle shift of that variation", "held_signs"),
    C("rBy4", "1", 0.0, -100.0, 100.0, "4.E62", "variation of that slope with camber squared", "camber"),
    C("rCy1", "1", 1.0, 0.5, 2.0, "4.E63", "shape factor of the Fy weighting"),
    C("rEy1", "1", 0.0, -10.0, 1.0, "4.E64", "curvature of the Fy weighting at nominal load"),
    C("rEy2", "1", 0.0, -10.0, 10.0, "4.E64", "variation of that curvature with load", "loads"),
    C("rHy1", "1", 0.0, -0.05, 0.05, "4.E65", "shift of the Fy weighting in slip ratio"),
    C("rHy2", "1", 0.0, -0.05, 0.05, "4.E65", "variation of that shift with load", "loads"),
    C("rVy1", "1", 0.0, -1.0, 1.0, "4.E67", "slip-ratio-induced lateral force / (friction · load)"),
    C("rVy2", "1", 0.0, -1.0, 1.0, "4.E67", "variation of the induced force with load", "loads"),
    C("rVy3", "1/rad", 0.0, -10.0, 10.0, "4.E67", "variation of the induced force with camber", "camber"),
    C("rVy4", "1", 0.0, 0.0, 200.0, "4.E67", "fall of the induced force with slip angle", "held3"),
    C("rVy5", "1", 2.0, 0.0, 5.0, "4.E66", "shape of the induced force against slip ratio"),
    C("rVy6", "1", 10.0, 0.0, 100.0, "4.E66", "slope of the induced force against slip ratio"),
)
del C

CATALOGUE = {
    "fy": FY0_COEFFICIENTS,
    "mz": MZ0_COEFFICIENTS,
    "fx": FX0_COEFFICIENTS,
    "fxc": FXC_COEFFICIENTS,
    "fyc": FYC_COEFFICIENTS,
}
INFO = {c.name: c for cat in CATALOGUE.values() for c in cat}


def defaults(channel: str) -> dict[str, float]:
    """Return every coefficient of a channel ("fy", "mz", "fx") at its default value."""
    return dict(_DEFAULTS[channel])


# The defaults of each channel, made once: every model call merges its coefficients into them.
_DEFAULTS = {channel: {c.name: c.default for c in cat} for channel, cat in CATALOGUE.items()}


def _fy0_parts(alpha, fz, c, fz0_n, gamma, dpi):
    """Intermediate quantities of Fy0 (needed again by Mz0)."""
    dfz = (fz - fz0_n) / fz0_n  # 4.E2a
    shy = c["pHy1"] + c["pHy2"] * dfz + c["pHy3"] * gamma  # 4.E27
    svy = fz * (c["pVy1"] + c["pVy2"] * dfz + (c["pVy3"] + c["pVy4"] * dfz) * gamma)  # 4.E29
    alpha_y = alpha + shy  # 4.E20
    cy = c["pCy1"]  # 4.E21
    mu_y = (
        (c["pDy1"] + c["pDy2"] * dfz)
        * (1.0 + c["ppy3"] * dpi + c["ppy4"] * dpi**2)  # 4.E23, BSP2010
        * (1.0 - c["pDy3"] * gamma**2)
    )
    dy = mu_y * fz  # 4.E22
    ey = (c["pEy1"] + c["pEy2"] * dfz) * (1.0 - (c["pEy3"] + c["pEy4"] * gamma) * np.sign(alpha_y))  # 4.E24
    ey = np.minimum(ey, 1.0)  # E <= 1 (Pacejka 2006, §4.3.1)
    kya = (
        c["pKy1"]
        * fz0_n
        * (1.0 + c["ppy1"] * dpi)  # 4.E25, BSP2010
        * np.sin(2.0 * np.arctan(fz / (c["pKy2"] * fz0_n * (1.0 + c["ppy2"] * dpi))))
        * (1.0 - c["pKy3"] * np.abs(gamma))
    )
    by = kya / _nonzero(cy * dy)  # 4.E26
    fy = sine_form(alpha_y, by, cy, dy, ey) + svy  # 4.E19
    return fy, dfz, shy, svy, kya, by, cy, mu_y


def fy0(alpha_rad, fz_n, p: dict[str, float], fz0_n: float, gamma_rad=0.0, dpi=0.0):
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
    dpi : array_like
        Relative inflation pressure (p − p0)/p0.
    """
    c = {**_DEFAULTS["fy"], **p}
    return _fy0_parts(
        np.asarray(alpha_rad, float),
        np.asarray(fz_n, float),
        c,
        fz0_n,
        np.asarray(gamma_rad, float),
        np.asarray(dpi, float),
    )[0]


def fy0_cornering_stiffness_n_per_rad(fz_n, p: dict[str, float], fz0_n: float, gamma_rad=0.0, dpi=0.0):
    """Return Kyα of eq. 4.E25 (with the pressure terms of BSP2010), N/rad."""
    c = {**_DEFAULTS["fy"], **p}
    fz = np.asarray(fz_n, dtype=float)
    return (
        c["pKy1"]
        * fz0_n
        * (1.0 + c["ppy1"] * dpi)
        * np.sin(2.0 * np.arctan(fz / (c["pKy2"] * fz0_n * (1.0 + c["ppy2"] * dpi))))
        * (1.0 - c["pKy3"] * np.abs(gamma_rad))
    )


def mz0(
    alpha_rad, fz_n, q: dict[str, float], p_fy: dict[str, float], fz0_n: float, r0_m: float, gamma_rad=0.0, dpi=0.0
):
    """Pure-slip aligning moment Mz0 in N·m (Pacejka 2006, §4.3.2, eqs. 4.E31-4.E49).

    Mz0 = −t·Fy0 + Mzr, with the pneumatic trail t of a cosine-form Magic Formula and the
    residual torque Mzr. Fy0 and its intermediate quantities come from the lateral
    coefficients `p_fy` (the fitted lateral model), as the 2002 form prescribes.

    Parameters
    ----------
    q : dict
        Aligning-moment coefficients (see :data:`MZ0_COEFFICIENTS`).
    p_fy : dict
        Lateral-force coefficients.
    r0_m : float
        Unloaded tire radius R0, m.
    """
    c = {**_DEFAULTS["fy"], **p_fy}
    cq = {**_DEFAULTS["mz"], **q}
    alpha = np.asarray(alpha_rad, float)
    fz = np.asarray(fz_n, float)
    g = np.asarray(gamma_rad, float)
    dpi = np.asarray(dpi, float)
    fy, dfz, shy, svy, kya, by, cy, _ = _fy0_parts(alpha, fz, c, fz0_n, g, dpi)
    t = pneumatic_trail_m(alpha, fz, cq, fz0_n, r0_m, g, dpi)  # 4.E33
    alpha_r = alpha + shy + svy / _nonzero(kya)  # 4.E37
    br = cq["qBz9"] + cq["qBz10"] * by * cy  # 4.E45
    dr = fz * ((cq["qDz6"] + cq["qDz7"] * dfz) + (cq["qDz8"] + cq["qDz9"] * dfz) * g) * r0_m  # 4.E47
    mzr = dr * np.cos(np.arctan(br * alpha_r)) * np.cos(alpha)  # 4.E36
    return -t * fy + mzr  # 4.E31


def pneumatic_trail_m(alpha_rad, fz_n, q: dict[str, float], fz0_n: float, r0_m: float, gamma_rad=0.0, dpi=0.0):
    """Return the pneumatic trail t of the Mz0 model in m (Pacejka 2006, eqs. 4.E33-4.E43).

    t = Dt cos[Ct arctan{Bt αt − Et(Bt αt − arctan Bt αt)}] cos α, with αt = α + SHt (4.E34-35),
    Bt (4.E40), Ct (4.E41), Dt (4.E42, with the pressure term of BSP2010) and Et ≤ 1 (4.E43).
    """
    cq = {**_DEFAULTS["mz"], **q}
    alpha = np.asarray(alpha_rad, float)
    fz = np.asarray(fz_n, float)
    g = np.asarray(gamma_rad, float)
    dfz = (fz - fz0_n) / fz0_n
    sht = cq["qHz1"] + cq["qHz2"] * dfz + (cq["qHz3"] + cq["qHz4"] * dfz) * g  # 4.E35
    alpha_t = alpha + sht  # 4.E34
    bt = (cq["qBz1"] + cq["qBz2"] * dfz + cq["qBz3"] * dfz**2) * (
        1.0 + cq["qBz4"] * g + cq["qBz5"] * np.abs(g)
    )  # 4.E40
    ct = cq["qCz1"]
    dt = (
        fz
        * (cq["qDz1"] + cq["qDz2"] * dfz)
        * (1.0 + cq["ppz1"] * dpi)  # 4.E42, BSP2010
        * (1.0 + cq["qDz3"] * g + cq["qDz4"] * g**2)
        * r0_m
        / fz0_n
    )
    et = np.minimum(
        (cq["qEz1"] + cq["qEz2"] * dfz + cq["qEz3"] * dfz**2)
        * (1.0 + (cq["qEz4"] + cq["qEz5"] * g) * (2.0 / np.pi) * np.arctan(bt * ct * alpha_t)),
        1.0,
    )
    return cosine_form(alpha_t, bt, ct, dt, et) * np.cos(alpha)


def fx0(kappa, fz_n, p: dict[str, float], fz0_n: float, gamma_rad=0.0, dpi=0.0):
    """Pure longitudinal slip force Fx0 in N (Pacejka 2006, §4.3.2, eqs. 4.E9-4.E18).

    Parameters
    ----------
    kappa : array_like
        Longitudinal slip ratio (fraction; positive when driving).
    """
    c = {**_DEFAULTS["fx"], **p}
    k = np.asarray(kappa, float)
    fz = np.asarray(fz_n, float)
    g = np.asarray(gamma_rad, float)
    dpi = np.asarray(dpi, float)
    dfz = (fz - fz0_n) / fz0_n
    shx = c["pHx1"] + c["pHx2"] * dfz  # 4.E17
    kx = k + shx  # 4.E10
    cx = c["pCx1"]  # 4.E11
    mu_x = (
        (c["pDx1"] + c["pDx2"] * dfz)
        * (1.0 + c["ppx3"] * dpi + c["ppx4"] * dpi**2)  # 4.E13, BSP2010
        * (1.0 - c["pDx3"] * g**2)
    )
    dx = mu_x * fz  # 4.E12
    ex = np.minimum((c["pEx1"] + c["pEx2"] * dfz + c["pEx3"] * dfz**2) * (1.0 - c["pEx4"] * np.sign(kx)), 1.0)  # 4.E14
    kxk = (
        fz * (c["pKx1"] + c["pKx2"] * dfz) * np.exp(c["pKx3"] * dfz) * (1.0 + c["ppx1"] * dpi + c["ppx2"] * dpi**2)
    )  # 4.E15
    bx = kxk / _nonzero(cx * dx)  # 4.E16
    svx = fz * (c["pVx1"] + c["pVx2"] * dfz)  # 4.E18
    return sine_form(kx, bx, cx, dx, ex) + svx  # 4.E9


def _weighting(slip, shift, B, C, E):
    """cos[C arctan{B s − E(B s − arctan B s)}] at s = slip + shift, over its value at s = shift: one
    at zero of the other slip by construction (Pacejka 2006, 4.E51-4.E52, 4.E59-4.E60)."""
    return cosine_form(slip + shift, B, C, 1.0, E) / cosine_form(shift, B, C, 1.0, E)


def gx_alpha(kappa, alpha_rad, fz_n, r: dict[str, float], fz0_n: float, gamma_rad=0.0):
    """Weighting Gxα of Fx by slip angle under combined slip (Pacejka 2006, 4.E51-4.E57); α* = tan α,
    γ* = sin γ. Gxα = 1 at α = 0."""
    c = {**_DEFAULTS["fxc"], **r}
    k = np.asarray(kappa, float)
    a = np.tan(np.asarray(alpha_rad, float))
    g = np.sin(np.asarray(gamma_rad, float))
    dfz = (np.asarray(fz_n, float) - fz0_n) / fz0_n
    b = (c["rBx1"] + c["rBx3"] * g**2) * np.cos(np.arctan(c["rBx2"] * k))  # 4.E54
    e = np.minimum(c["rEx1"] + c["rEx2"] * dfz, 1.0)  # 4.E56
    return _weighting(a, c["rHx1"], b, c["rCx1"], e)  # 4.E51-4.E53, 4.E55, 4.E57


def gy_kappa(kappa, alpha_rad, fz_n, r: dict[str, float], fz0_n: float, gamma_rad=0.0):
    """Weighting Gyκ of Fy by slip ratio under combined slip (Pacejka 2006, 4.E59-4.E65). Gyκ = 1
    at κ = 0."""
    c = {**_DEFAULTS["fyc"], **r}
    k = np.asarray(kappa, float)
    a = np.tan(np.asarray(alpha_rad, float))
    g = np.sin(np.asarray(gamma_rad, float))
    dfz = (np.asarray(fz_n, float) - fz0_n) / fz0_n
    b = (c["rBy1"] + c["rBy4"] * g**2) * np.cos(np.arctan(c["rBy2"] * (a - c["rBy3"])))  # 4.E62
    e = np.minimum(c["rEy1"] + c["rEy2"] * dfz, 1.0)  # 4.E64
    return _weighting(k, c["rHy1"] + c["rHy2"] * dfz, b, c["rCy1"], e)  # 4.E59-4.E61, 4.E63, 4.E65


def svy_kappa(kappa, alpha_rad, fz_n, r: dict[str, float], mu_y, fz0_n: float, gamma_rad=0.0):
    """Lateral force induced by slip ratio, SVyκ in N (Pacejka 2006, 4.E66-4.E67; ζ2 = 1): zero at κ = 0."""
    c = {**_DEFAULTS["fyc"], **r}
    k = np.asarray(kappa, float)
    a = np.tan(np.asarray(alpha_rad, float))
    g = np.sin(np.asarray(gamma_rad, float))
    fz = np.asarray(fz_n, float)
    dfz = (fz - fz0_n) / fz0_n
    dv = mu_y * fz * (c["rVy1"] + c["rVy2"] * dfz + c["rVy3"] * g) * np.cos(np.arctan(c["rVy4"] * a))  # 4.E67
    return dv * np.sin(c["rVy5"] * np.arctan(c["rVy6"] * k))  # 4.E66


def fx_combined(kappa, alpha_rad, fz_n, p: dict[str, float], r: dict[str, float], fz0_n: float, gamma_rad=0.0, dpi=0.0):
    """Longitudinal force under combined slip, Fx = Gxα·Fx0 in N (Pacejka 2006, 4.E50), with the
    pure-slip coefficients `p` and the combined-slip ones `r`."""
    return gx_alpha(kappa, alpha_rad, fz_n, r, fz0_n, gamma_rad) * fx0(kappa, fz_n, p, fz0_n, gamma_rad, dpi)


def fy_combined(alpha_rad, kappa, fz_n, p: dict[str, float], r: dict[str, float], fz0_n: float, gamma_rad=0.0, dpi=0.0):
    """Lateral force under combined slip, Fy = Gyκ·Fy0 + SVyκ in N (Pacejka 2006, 4.E58), with the
    pure-slip coefficients `p` and the combined-slip ones `r`."""
    c = {**_DEFAULTS["fy"], **p}
    a = np.asarray(alpha_rad, float)
    fz = np.asarray(fz_n, float)
    g = np.asarray(gamma_rad, float)
    fy, *_, mu_y = _fy0_parts(a, fz, c, fz0_n, g, np.asarray(dpi, float))
    return gy_kappa(kappa, a, fz, r, fz0_n, g) * fy + svy_kappa(kappa, a, fz, r, mu_y, fz0_n, g)


def _nonzero(x):
    x = np.asarray(x, dtype=float)
    return np.where(np.abs(x) < 1e-9, 1e-9, x)
