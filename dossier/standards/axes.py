"""Axis conventions: the one place that knows about signs.

Internal convention: **ISO 8855** tire axes (X forward, Y left, Z up), so the normal load
is a positive Fz. Converting SAE J670 (X forward, Y right, Z down) to ISO 8855 flips the sign
of slip angle, Fy, Fz, My and Mz; Fx, Mx, inclination angle and slip ratio keep their sign.
In both conventions a positive slip angle gives a negative lateral force and a positive
(restoring) aligning moment, so the slope dFy/dα is negative and reported cornering
stiffness is its negation (SAE J670 definition).
"""

from __future__ import annotations

import numpy as np

SAE_J670 = "SAE J670"
ISO_8855 = "ISO 8855"
CONVENTIONS = (SAE_J670, ISO_8855)
INTERNAL = ISO_8855

# channel -> sign factor applied when converting between SAE J670 and ISO 8855
_FLIPPED_BETWEEN_SAE_AND_ISO = {"slip_angle": -1.0, "fy": -1.0, "fz": -1.0, "my": -1.0, "mz": -1.0}


def to_internal(channel: str, values: np.ndarray, convention: str) -> np.ndarray:
    """Return `values` of `channel`, measured in `convention`, in the internal ISO 8855 axes."""
    if convention not in CONVENTIONS:
        raise ValueError(f"unknown axis convention {convention!r}")
    if convention == INTERNAL:
        return values
    return values * _FLIPPED_BETWEEN_SAE_AND_ISO.get(channel, 1.0)


def from_internal(channel: str, values: np.ndarray, convention: str) -> np.ndarray:
    """Return internal ISO 8855 `values` of `channel` expressed in `convention`."""
    # The SAE <-> ISO map is its own inverse.
    return to_internal(channel, values, convention)
