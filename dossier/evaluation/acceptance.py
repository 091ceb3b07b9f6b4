"""Acceptance: each specimen's metrics against the customer's targets, respecting uncertainty.

Verdicts (one per specimen and target):

* **meets**: the whole 95 % interval lies inside the window (a limit touched counts as inside);
* **marginal**: the interval straddles a limit, or there is no interval to judge by;
* **does not meet**: the whole interval lies outside the window;
* **not measured**: the specimen has no data for the metric, or the target's load lies outside
  the measured load range, or its camber/pressure is not the nominal one the metrics are made at.

Never a bare "meets" where the interval says otherwise.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..metrics.evaluate import MetricValue
from ..project.manifest import Target

MEETS, MARGINAL, FAILS, NOT_MEASURED = "meets", "marginal", "does not meet", "not measured"


@dataclass(frozen=True)
class Verdict:
    target: Target
    specimen: str
    verdict: str
    value: float | None
    ci95: tuple[float, float] | None
    unit: str
    reason: str


def judge(target: Target, value: MetricValue | None, p0_kpa: float | None = None) -> tuple[str, str]:
    """Return (verdict, reason) of one metric value against one target window."""
    if target.camber_deg != 0.0:
        return NOT_MEASURED, "metrics are evaluated at zero camber; this target asks for another inclination"
    at_kpa = value.pressure_kpa if value is not None else p0_kpa  # the specimen's own nominal pressure
    if target.pressure_kpa is not None and at_kpa is not None and round(target.pressure_kpa) != round(at_kpa):
        return NOT_MEASURED, f"this specimen's metrics are evaluated at its nominal pressure {at_kpa:.0f} kPa"
    if value is None:
        return NOT_MEASURED, "no data for this metric"
    if value.extrapolated:
        return NOT_MEASURED, "the target's load lies outside the measured load range"
    lo = -float("inf") if target.minimum is None else target.minimum
    hi = float("inf") if target.maximum is None else target.maximum
    if value.ci95 is None:
        inside = lo <= value.value <= hi
        return MARGINAL, (
            "value inside the window but no interval to judge by"
            if inside
            else "value outside the window, no interval to judge by"
        )
    a, b = value.ci95
    if lo <= a and b <= hi:
        return MEETS, "the whole 95 % interval (expanded uncertainty of the budget) lies inside the window"
    if b < lo or a > hi:
        return FAILS, "the whole 95 % interval lies outside the window"
    return MARGINAL, "the 95 % interval straddles a limit"


def verdicts(
    targets: tuple[Target, ...], specimens: list[str], metrics: list[MetricValue], p0_kpa: float | None
) -> list[Verdict]:
    """Judge every target for every specimen it applies to."""
    out = []
    for t in targets:
        for sid in t.specimens or specimens:
            v = next(
                (m for m in metrics if m.specimen == sid and m.metric == t.metric and abs(m.load_n - t.load_n) < 1e-6),
                None,
            )
            verdict, reason = judge(t, v, p0_kpa)
            out.append(
                Verdict(
                    t,
                    sid,
                    verdict,
                    None if v is None else v.value,
                    None if v is None else v.ci95,
                    "" if v is None else v.unit,
                    reason,
                )
            )
    return out
