"""Acceptance: each specimen's metrics against the customer's targets, respecting uncertainty.

Verdicts (one per specimen and target):

* **meets**: the whole 95 % interval lies inside the window (a limit touched counts as inside);
* **marginal**: the interval straddles a limit, or there is no interval to judge by;
* **does not meet**: the whole interval lies outside the window;
* **not measured**: the specimen has no data for the metric, or the target's load, camber or
  pressure lies outside the ranges the specimen was tested over (then also a finding: a target
  the test cannot speak to).

A target is judged at its own load, camber and pressure (no pressure named: the specimen's
nominal one); between tested conditions the fitted model gives the value, and the value says so.

Never a bare "meets" where the interval says otherwise.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from ..conditioning.steady_state import same_condition
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
    camber_deg: float = 0.0  # the condition it was judged at
    pressure_kpa: float | None = None

    @property
    def untestable(self) -> bool:
        """The target asks for a condition outside what the specimen was tested over."""
        return self.verdict == NOT_MEASURED and self.reason.startswith(OUTSIDE)


OUTSIDE = "the target's condition lies outside the tested range"


def judge(target: Target, value: MetricValue | None) -> tuple[str, str]:
    """Return (verdict, reason) of one metric value against one target window."""
    if value is None:
        return NOT_MEASURED, "no data for this metric"
    if value.extrapolated:
        return NOT_MEASURED, f"{OUTSIDE} ({value.note})"
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
    targets: tuple[Target, ...],
    specimens: list[str],
    metrics: list[MetricValue],
    nominal_pressure_kpa: Mapping[str, float],
) -> list[Verdict]:
    """Judge every target for every specimen it applies to, at the target's condition (`metrics`: the
    values at every condition; `nominal_pressure_kpa`: each specimen's, for targets that name none)."""
    out = []
    for t in targets:
        for sid in t.specimens or specimens:
            pressure = t.pressure_kpa if t.pressure_kpa is not None else nominal_pressure_kpa.get(sid)
            v = next(
                (
                    m
                    for m in metrics
                    if m.specimen == sid
                    and m.metric == t.metric
                    and abs(m.load_n - t.load_n) < 1e-6
                    and (pressure is None or same_condition((m.camber_deg, m.pressure_kpa), (t.camber_deg, pressure)))
                ),
                None,
            )
            verdict, reason = judge(t, v)
            out.append(
                Verdict(
                    t,
                    sid,
                    verdict,
                    None if v is None else v.value,
                    None if v is None else v.ci95,
                    "" if v is None else v.unit,
                    reason,
                    t.camber_deg,
                    pressure,
                )
            )
    return out
