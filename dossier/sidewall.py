"""Sidewall identity: what a size designation says about the tire.

Size designation per ISO 4000-1 / UN ECE R30 and R54, e.g. ``225/45 R17 94W``: section width
225 mm, aspect ratio 45 %, radial, 17-inch rim. Nominal overall diameter
= rim × 25.4 + 2 × width × aspect/100 (mm).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

_SIZE = re.compile(r"^\s*(?P<prefix>P|LT)?\s*(?P<width>\d{3})\s*/\s*(?P<aspect>\d{2,3})\s*"
                   r"(?P<construction>Z?R|-|D|B)\s*(?P<rim>\d{2}(?:\.\d)?)", re.IGNORECASE)


@dataclass(frozen=True)
class SizeDesignation:
    width_mm: float
    aspect_pct: float
    rim_in: float
    construction: str

    @property
    def overall_diameter_mm(self) -> float:
        return self.rim_in * 25.4 + 2.0 * self.width_mm * self.aspect_pct / 100.0

    @property
    def unloaded_radius_m(self) -> float:
        """Nominal unloaded radius R0 from the designation, m."""
        return self.overall_diameter_mm / 2000.0


def parse_size(text: str) -> SizeDesignation | None:
    """Parse the size part of a designation such as '225/45 R17 94W'; None if it does not match."""
    m = _SIZE.match(text)
    if not m:
        return None
    return SizeDesignation(float(m["width"]), float(m["aspect"]), float(m["rim"]), m["construction"].upper())
