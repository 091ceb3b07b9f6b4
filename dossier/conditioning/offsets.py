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
    # (specimen, load, camber, rolling direction) -> (Fy, Mz) at zero slip of each point there
    fwd: dict[tuple[str, float, float, str], list[tuple[float, float | None]]] = {}
    for p in points:
        o = p.offsets
        if p.sweep == "slip_angle" and o and o.fy_at_zero_slip_n is not None:
            key = (p.specimen, p.load_n, p.camber_deg, p.rolling_direction)
            fwd.setdefault(key, []).append((o.fy_at_zero_slip_n, o.mz_at_zero_slip_nm))
    for (sid, load, camber, direction), ps in sorted(fwd.items()):
        if direction != "forward" or (sid, load, camber, "reverse") not in fwd:
            continue
        rs = fwd[(sid, load, camber, "reverse")]
        f = _mean([fy for fy, _ in ps])
        r = _mean([fy for fy, _ in rs])
        mf = [mz for _, mz in ps if mz is not None]
        mr = [mz for _, mz in rs if mz is not None]
        conicity_mz: float | None = None
        ply_steer_mz: float | None = None
        if len(mf) == len(ps) and len(mr) == len(rs):  # Mz on every point of both directions
            mzf, mzr = _mean(mf), _mean(mr)
            conicity_mz, ply_steer_mz = 0.5 * (mzf + mzr), 0.5 * (mzf - mzr)
        out.append(OffsetSplit(sid, load, camber, f, r, 0.5 * (f + r), 0.5 * (f - r), conicity_mz, ply_steer_mz))
    return out


def _mean(values: list[float]) -> float:
    return float(sum(values) / len(values))
