"""Zero-slip offsets split into ply-steer and conicity, where both rolling directions were run.

With forces in the same machine frame, conicity keeps its sign when the tire rolls the other
way and ply-steer reverses (common practice, from memory): conicity = (F_fwd + F_rev)/2 and
ply-steer = (F_fwd − F_rev)/2, for residual lateral force and aligning moment alike.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..conditioning.steady_state import OperatingPoint


@dataclass(frozen=True)
class OffsetSplit:
    specimen: str
    load_n: float
    camber_deg: float
    fy_forward_n: float
    fy_reverse_n: float
    conicity_fy_n: float
    ply_steer_fy_n: float
    conicity_mz_nm: float | None
    ply_steer_mz_nm: float | None


def split_offsets(points: list[OperatingPoint]) -> list[OffsetSplit]:
    """Pair forward and reverse operating points of a specimen at equal load and camber."""
    out = []
    fwd = {}
    for p in points:
        if p.sweep == "slip_angle" and p.offsets and p.offsets.fy_at_zero_slip_n is not None:
            fwd.setdefault((p.specimen, p.load_n, p.camber_deg, p.rolling_direction), []).append(p)
    for (sid, load, camber, direction), ps in sorted(fwd.items()):
        if direction != "forward" or (sid, load, camber, "reverse") not in fwd:
            continue
        f = _mean([p.offsets.fy_at_zero_slip_n for p in ps])
        r = _mean([p.offsets.fy_at_zero_slip_n for p in fwd[(sid, load, camber, "reverse")]])
        mf = [p.offsets.mz_at_zero_slip_nm for p in ps]
        mr = [p.offsets.mz_at_zero_slip_nm for p in fwd[(sid, load, camber, "reverse")]]
        has_mz = all(v is not None for v in mf + mr)
        mzf, mzr = (_mean(mf), _mean(mr)) if has_mz else (None, None)
        out.append(
            OffsetSplit(
                sid,
                load,
                camber,
                f,
                r,
                0.5 * (f + r),
                0.5 * (f - r),
                None if not has_mz else 0.5 * (mzf + mzr),
                None if not has_mz else 0.5 * (mzf - mzr),
            )
        )
    return out


def _mean(values):
    return float(sum(values) / len(values))
