import numpy as np
import pytest

from dossier.standards import axes, units


@pytest.mark.parametrize(
    "quantity, unit, expected",
    [
        ("force", "lbf", 4.448222),  # NIST SP 811 (2008) B.8: 1 lbf = 4.448 222 N
        ("force", "kN", 1000.0),  # SI prefix
        ("force", "kgf", 9.80665),  # NIST SP 811 B.8: kilogram-force = 9.806 65 N
        ("moment", "lbf·in", 0.1129848),  # NIST SP 811 B.8: pound-force inch = 0.112 984 8 N·m
        ("moment", "lbf·ft", 1.355818),  # NIST SP 811 B.8: pound-force foot = 1.355 818 N·m
        ("pressure", "psi", 6.894757),  # NIST SP 811 B.8: 1 psi = 6.894 757 kPa
        ("pressure", "bar", 100.0),  # NIST SP 811 B.8: 1 bar = 100 kPa
        ("speed", "mph", 1.609344),  # NIST SP 811 B.8: mile per hour = 1.609 344 km/h
        ("speed", "m/s", 3.6),  # definition
        ("angle", "rad", 57.29578),  # NIST SP 811 B.8: 1 rad = 57.295 78 deg
    ],
)
def test_unit_factors_match_nist_sp811(quantity, unit, expected):
    # NIST gives 7 significant digits: agree within half a unit in the last one.
    assert units.factor_to_internal(quantity, unit) == pytest.approx(expected, rel=5e-7)


def test_sae_to_iso_flips_exactly_the_documented_channels():
    # SAE J670 vs ISO 8855 tire axes: Y and Z reversed, so slip angle, Fy, Fz, My, Mz change
    # sign; Fx, Mx, inclination angle and slip ratio keep theirs (domain primer §3).
    v = np.array([1.0, -2.0])
    for ch in ("slip_angle", "fy", "fz", "my", "mz"):
        np.testing.assert_array_equal(axes.to_internal(ch, v, axes.SAE_J670), -v)
    for ch in ("fx", "mx", "inclination", "slip_ratio", "time"):
        np.testing.assert_array_equal(axes.to_internal(ch, v, axes.SAE_J670), v)
    np.testing.assert_array_equal(axes.to_internal("fy", v, axes.ISO_8855), v)


def test_conversion_is_its_own_inverse_and_keeps_the_cornering_slope():
    alpha = np.linspace(-5, 5, 11)
    fy_sae = -1000.0 * alpha  # SAE J670: positive slip gives negative Fy
    a_iso = axes.to_internal("slip_angle", alpha, axes.SAE_J670)
    fy_iso = axes.to_internal("fy", fy_sae, axes.SAE_J670)
    # dFy/dα keeps its sign between the conventions (domain primer §3)
    assert np.polyfit(a_iso, fy_iso, 1)[0] == pytest.approx(np.polyfit(alpha, fy_sae, 1)[0])
    np.testing.assert_array_equal(axes.from_internal("fy", fy_iso, axes.SAE_J670), fy_sae)
