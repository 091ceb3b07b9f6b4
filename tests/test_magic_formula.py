import bnp1987
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from dossier.model import magic_formula as mf


@settings(max_examples=60, deadline=None, derandomize=True)
@given(B=st.floats(0.02, 2.0), C=st.floats(1.05, 2.0), D=st.floats(100, 10000), E=st.floats(-3.0, 0.9))
def test_sine_form_properties(B, C, D, E):
    # Pacejka 2006 §4.3.1: slope at the origin is BCD; for C > 1 the peak value is D.
    h = 1e-6
    slope = (mf.sine_form(h, B, C, D, E) - mf.sine_form(-h, B, C, D, E)) / (2 * h)
    assert slope == pytest.approx(B * C * D, rel=1e-5)
    x = np.linspace(0, 400 / B, 400001)
    assert np.max(mf.sine_form(x, B, C, D, E)) == pytest.approx(D, rel=1e-6)


def test_sine_form_asymptote():
    # Pacejka 2006 §4.3.1: y_a = D sin(πC/2) as x → ∞ (for E < 1)
    B, C, D, E = 0.3, 1.4, 5000.0, -0.5
    assert mf.sine_form(1e9, B, C, D, E) == pytest.approx(D * np.sin(np.pi * C / 2), rel=1e-6)


def test_published_1987_parameter_set_values():
    # Bakker, Nyborg & Pacejka, SAE 870421 (1987) Tables 2-3, recomputed at Fz = 4 kN
    # (values as reproduced in the domain primer §8).
    B, C, D, E = bnp1987.coefficients(4.0)
    assert pytest.approx(3690.4, abs=0.05) == D
    assert pytest.approx(1027.3, abs=0.05) == B * C * D
    assert pytest.approx(-0.709, abs=5e-4) == E
    assert bnp1987.lateral_force_n(2.0, 4.0) == pytest.approx(1911, abs=1)
    assert bnp1987.lateral_force_n(5.0, 4.0) == pytest.approx(3390, abs=1)


def test_fy0_at_nominal_load_reduces_to_the_sine_form():
    # With dfz = 0, no camber and no shifts, Fy0 = Dy sin[Cy arctan{By α − Ey(By α − arctan By α)}]
    # with Dy = pDy1 Fz, Kyα = pKy1 Fz0 sin(2 arctan(1/pKy2)), By = Kyα/(Cy Dy) (Pacejka 2006 §4.3.2).
    p = {"pCy1": 1.35, "pDy1": 1.05, "pEy1": -0.3, "pKy1": -22.0, "pKy2": 1.8}
    fz0 = 4000.0
    alpha = np.linspace(-0.2, 0.2, 41)
    D = 1.05 * fz0
    K = -22.0 * fz0 * np.sin(2 * np.arctan(1 / 1.8))
    expected = mf.sine_form(alpha, K / (1.35 * D), 1.35, D, -0.3)
    np.testing.assert_allclose(mf.fy0(alpha, fz0, p, fz0), expected, rtol=1e-12)
    assert mf.fy0_cornering_stiffness_n_per_rad(fz0, p, fz0) == pytest.approx(K)


def test_fy0_sign_in_iso_axes_and_curvature_limit():
    p = {"pKy1": -20.0, "pEy1": 3.0}  # E is capped at 1 (Pacejka 2006 §4.3.1: E <= 1)
    capped = mf.fy0(0.1, 4000.0, p, 4000.0)
    assert capped < 0  # ISO 8855: positive slip angle gives negative lateral force
    np.testing.assert_allclose(capped, mf.fy0(0.1, 4000.0, {**p, "pEy1": 1.0}, 4000.0))
