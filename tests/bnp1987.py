"""The published lateral-force parameter set of Bakker, Nyborg & Pacejka (1987).

Source: E. Bakker, L. Nyborg, H. B. Pacejka, "Tyre modelling for use in vehicle dynamics
studies", SAE 870421 (1987), Tables 2-3, values as reproduced in many secondary sources
(see the domain primer, §8). Fz in kN, slip angle in degrees, Fy in N; zero camber, no shifts.
"""

import numpy as np

C_FY = 1.30
A = (-22.1, 1011.0, 1078.0, 1.82, 0.208, 0.000, -0.354, 0.707)


def coefficients(fz_kn):
    """Return (B, C, D, E) of the 1987 lateral-force formula at load `fz_kn`."""
    a1, a2, a3, a4, a5, a6, a7, a8 = A
    D = a1 * fz_kn**2 + a2 * fz_kn
    BCD = a3 * np.sin(a4 * np.arctan(a5 * fz_kn))
    E = a6 * fz_kn**2 + a7 * fz_kn + a8
    B = BCD / (C_FY * D)
    return B, C_FY, D, E


def lateral_force_n(slip_deg, fz_kn):
    """Fy in N with the 1987 sign: positive for positive slip angle."""
    B, C, D, E = coefficients(fz_kn)
    x = np.asarray(slip_deg, dtype=float)
    return D * np.sin(C * np.arctan(B * x - E * (B * x - np.arctan(B * x))))
