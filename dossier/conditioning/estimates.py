"""Model-free estimates from conditioned curves: no Magic Formula involved.

Used where a number must not depend on the fit (drift of the control tire), and later as the
cross-check beside the model's metrics.
"""

from __future__ import annotations

import numpy as np

from ..conditioning.steady_state import SlipCurve

LOCAL_HALF_RANGE_DEG = 2.0  # local fit of Fy over |α| ≤ 2°


def cornering_stiffness_n_per_deg(curve: SlipCurve) -> float | None:
    """Return −dFy/dα at zero slip from a local cubic through the points with |α| ≤ 2°.

    A cubic (not a straight line) so that the curvature of Fy within ±2° does not bias the
    slope at zero; its linear coefficient is the slope there.
    """
    near = np.abs(curve.x) <= LOCAL_HALF_RANGE_DEG + 1e-9
    if np.count_nonzero(near) < 5 or curve.fy_n is None:
        return None
    return float(-np.polyfit(curve.x[near], curve.fy_n[near], 3)[2])


def peak_friction(curve: SlipCurve) -> float | None:
    """Return the mean over both slip directions of max|Fy| (3-point smoothed) over the mean load."""
    if curve.fy_n is None:
        return None
    smooth = np.convolve(curve.fy_n, np.ones(3) / 3.0, mode="same")
    peaks = []
    for m in (curve.x > 0, curve.x < 0):
        if np.count_nonzero(m) < 3:
            return None
        peaks.append(np.max(np.abs(smooth[m][1:-1] if np.count_nonzero(m) > 4 else smooth[m])))
    return float(np.mean(peaks) / np.mean(curve.fz_n))


LOCAL_HALF_RANGE_RATIO = 0.03  # local fit of Fx over |κ| ≤ 0.03


def _local_slope(x: np.ndarray, y: np.ndarray | None, half: float) -> float | None:
    """The slope at zero of a local cubic through the points with |x| ≤ `half` (None: too few)."""
    if y is None:
        return None
    near = np.abs(x) <= half + 1e-9
    if np.count_nonzero(near) < 5:
        return None
    return float(np.polyfit(x[near], y[near], 3)[2])


def aligning_stiffness_nm_per_deg(curve: SlipCurve) -> float | None:
    """Return dMz/dα at zero slip from a local cubic through the points with |α| ≤ 2°."""
    return _local_slope(curve.x, curve.mz_nm, LOCAL_HALF_RANGE_DEG)


def pneumatic_trail_mm(curve: SlipCurve) -> float | None:
    """Return −(dMz/dα)/(dFy/dα) at zero slip, in mm, from the two local cubics."""
    dmz = aligning_stiffness_nm_per_deg(curve)
    dfy = _local_slope(curve.x, curve.fy_n, LOCAL_HALF_RANGE_DEG)
    return None if dmz is None or not dfy else 1000.0 * -dmz / dfy


def slip_stiffness_n(curve: SlipCurve) -> float | None:
    """Return dFx/dκ at zero slip ratio from a local cubic through the points with |κ| ≤ 0.03."""
    return _local_slope(curve.x, curve.fx_n, LOCAL_HALF_RANGE_RATIO)


def peak_longitudinal_friction(curve: SlipCurve, side: float) -> float | None:
    """Return max|Fx| (3-point smoothed) on the driving (`side` > 0) or braking side over the mean load."""
    if curve.fx_n is None:
        return None
    m = curve.x * side > 0
    if np.count_nonzero(m) < 5:
        return None
    smooth = np.convolve(curve.fx_n, np.ones(3) / 3.0, mode="same")[m][1:-1]
    return float(np.max(np.abs(smooth)) / np.mean(curve.fz_n))
