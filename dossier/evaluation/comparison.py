"""Comparison: every candidate against the baseline, with intervals from both uncertainty budgets.

A difference of a metric (candidate − baseline) has a 95 % interval from both values' budgets
(:func:`dossier.metrics.budget.difference_uncertainty`): the parts they share are correlated (the
same lab's calibration largely cancels; corrections from the same control line are correlated),
the rest independent; ν_eff by Welch–Satterthwaite and k = t₀.₉₇₅(ν_eff), the one rule of
:mod:`dossier.standards.coverage`. The budgets already carry the rig's repeatability, so a
difference is real when its expanded interval excludes zero — unless the two specimens were tested
in different labs with no specimen tested in both (no common reference): such a difference is
labelled so and never called real on its own. The summary in words is built from these numbers only.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..conditioning.drift import DriftEstimate
from ..evaluation.acceptance import FAILS, MARGINAL, MEETS, Verdict
from ..metrics.budget import difference_uncertainty
from ..metrics.evaluate import MetricValue
from ..project.catalogue import METRICS
from ..project.manifest import Manifest
from ..standards.coverage import effective_dof, interval

COMPARED = (
    "cornering_stiffness",
    "cornering_coefficient",
    "peak_lateral_friction",
    "slip_angle_at_peak",
    "pneumatic_trail",
    "camber_stiffness",
    "longitudinal_slip_stiffness",
    "peak_driving_friction",
    "peak_braking_friction",
)
REPEATABILITY_OF = {
    "cornering_stiffness": "cornering_stiffness_n_per_deg",
    "cornering_coefficient": "cornering_stiffness_n_per_deg",
    "peak_lateral_friction": "peak_friction",
}


@dataclass(frozen=True)
class Difference:
    metric: str
    unit: str
    load_n: float
    candidate: str
    baseline: str
    candidate_value: float
    baseline_value: float
    diff: float
    diff_ci95: tuple[float, float] | None
    diff_pct: float
    repeatability_pct: float | None  # 1σ of the control repeats, % of their mean
    significant: bool
    normalised: float | None = None  # diff / target half-width (or tolerance), for the chart
    normalised_by: str = ""
    correlation_note: str = ""  # how the parts both values share were treated
    across_labs: str = ""  # set when the two were tested in different labs: with or without a common reference


@dataclass(frozen=True)
class Standing:
    """A candidate's standing: its differences, its verdict counts and a sentence built from them."""

    candidate: str
    differences: tuple[Difference, ...]
    meets: int
    marginal: int
    fails: int
    text: str


def repeatability_pct(drift: DriftEstimate | None) -> dict[str, float]:
    """1σ scatter of the control repeats about the drift line, % of the mean (needs ≥ 3 repeats)."""
    if drift is None or len(drift.repeats) < 3:
        return {}
    t = np.array([(r.tested_at - drift.reference_time).total_seconds() / 3600.0 for r in drift.repeats])
    out = {}
    for name in ("cornering_stiffness_n_per_deg", "peak_friction"):
        y = np.array([getattr(r, name) for r in drift.repeats], dtype=float)
        k = np.polyfit(t, y, 1)
        resid = y - np.polyval(k, t)
        out[name] = float(100.0 * np.sqrt(np.sum(resid**2) / (y.size - 2)) / np.mean(y))
    return out


def compare(
    baseline: str,
    candidates: list[str],
    metrics: list[MetricValue],
    load_n: float,
    drift: DriftEstimate | None,
    verdicts: list[Verdict],
    labs_of: dict[str, frozenset[str]] | None = None,
) -> list[Standing]:
    """Compare every candidate with the baseline at `load_n`; one Standing per candidate.

    `labs_of` gives the labs each specimen was tested in (for the cross-lab label)."""
    labs_of = labs_of or {}
    rep = repeatability_pct(drift)
    at = {(m.specimen, m.metric): m for m in metrics if math.isclose(m.load_n, load_n)}
    windows = {}
    for v in verdicts:
        t = v.target
        if t.minimum is not None and t.maximum is not None and math.isclose(t.load_n, load_n):
            windows[t.metric] = (0.5 * (t.maximum - t.minimum), f"half the target window of {t.metric}")
    out = []
    for c in candidates:
        diffs = []
        for name in COMPARED:
            a, b = at.get((c, name)), at.get((baseline, name))
            if a is None or b is None:
                continue
            d = a.value - b.value
            ci = None
            note = ""
            if a.budget is not None and b.budget is not None:
                sd, dof, note = difference_uncertainty(a.budget, a.value, b.budget, b.value)
                ci = interval(d, sd, dof)
            elif a.stderr is not None and b.stderr is not None:
                sd = math.hypot(a.stderr, b.stderr)
                ci = interval(d, sd, effective_dof([(a.stderr, a.dof), (b.stderr, b.dof)]))
            pct = 100.0 * d / b.value if b.value else float("nan")
            r = rep.get(REPEATABILITY_OF.get(name, ""))
            excludes_zero = ci is not None and (ci[0] > 0 or ci[1] < 0)
            crossing = _across_labs(c, baseline, labs_of)
            norm, by = None, ""
            if name in windows:
                norm, by = d / windows[name][0], windows[name][1]
            elif r:
                norm, by = pct / (2.0 * r * math.sqrt(2.0)), "twice the rig repeatability of the difference"
            diffs.append(
                Difference(
                    name,
                    a.unit,
                    load_n,
                    c,
                    baseline,
                    a.value,
                    b.value,
                    d,
                    ci,
                    pct,
                    r,
                    excludes_zero and not crossing.startswith("no common reference"),
                    norm,
                    by,
                    note,
                    crossing,
                )
            )
        mine = [v for v in verdicts if v.specimen == c]
        counts = {k: sum(1 for v in mine if v.verdict == k) for k in (MEETS, MARGINAL, FAILS)}
        out.append(
            Standing(
                c,
                tuple(diffs),
                counts[MEETS],
                counts[MARGINAL],
                counts[FAILS],
                _sentence(c, baseline, diffs, mine, counts),
            )
        )
    return out


def _across_labs(candidate: str, baseline: str, labs_of: dict[str, frozenset[str]]) -> str:
    """ "" when both were tested in the same labs; else whether a specimen tested in both links them."""
    a, b = labs_of.get(candidate, frozenset()), labs_of.get(baseline, frozenset())
    if not a or not b or a == b:
        return ""
    if a & b:
        return "partly in different labs"
    linked = [s for s, labs in sorted(labs_of.items()) if s not in (candidate, baseline) and labs & a and labs & b]
    where = f"{', '.join(sorted(a))} against {', '.join(sorted(b))}"
    if linked:
        return f"different labs ({where}), linked by {', '.join(linked)} tested in both"
    return f"no common reference: tested in different labs ({where}) and no specimen was tested in both"


def _sentence(c, baseline, diffs, mine, counts) -> str:
    def label(d):
        return f"{METRICS[d.metric].label.lower()} {d.diff_pct:+.1f}\u00a0%"

    def excludes_zero(d):
        return d.diff_ci95 is not None and (d.diff_ci95[0] > 0 or d.diff_ci95[1] < 0)

    real = [d for d in diffs if d.significant]
    unlinked = [d for d in diffs if not d.significant and excludes_zero(d)]  # only ever across unlinked labs
    same = [METRICS[d.metric].label.lower() for d in diffs if not d.significant and not excludes_zero(d)][:3]
    text = f"{c} against {baseline}: "
    crossing = next((d.across_labs for d in diffs if d.across_labs.startswith("no common reference")), "")
    if crossing:
        text += f"{crossing[len('no common reference: ') :]}, so no difference is called real on its own; "
        if unlinked:
            text += "apparent differences, not confirmed across the labs: " + ", ".join(label(d) for d in unlinked[:4])
        else:
            text += "no difference beyond the uncertainty"
    else:
        text += (
            ("real differences in " + ", ".join(label(d) for d in real[:4]))
            if real
            else "no difference beyond the uncertainty"
        )
    if same:
        text += "; within the uncertainty: " + ", ".join(same)
    if mine:
        text += f". Targets: {counts[MEETS]} met, {counts[MARGINAL]} marginal, {counts[FAILS]} not met of {len(mine)}"
        bad = [
            f"{METRICS[v.target.metric].label.lower()} ({v.verdict})" for v in mine if v.verdict in (MARGINAL, FAILS)
        ]
        if bad:
            text += ": " + ", ".join(bad)
    return text + "."


def recommend(standings: list[Standing]) -> tuple[str | None, str]:
    """Pick the candidate with no target failed, then fewest marginal, then most met; say why.

    No recommendation without evidence: when no target was judged for any candidate, or when the
    best candidates tie on every count, none is recommended and the reason says so (for a tie,
    with the metric on which the tied candidates differ most, as what would separate them).
    """
    if not standings:
        return None, "no candidate to compare"
    if all(s.meets == s.marginal == s.fails == 0 for s in standings):
        return None, (
            "no recommendation: no target was judged for any candidate (none given, or none measured); "
            "the candidates are compared with the baseline only"
        )
    ranked = sorted(standings, key=lambda s: (s.fails, s.marginal, -s.meets))
    best = ranked[0]
    if best.fails:
        return None, (
            f"no candidate meets every target; the closest is {best.candidate} "
            f"({best.fails} not met, {best.marginal} marginal)"
        )
    tied = [s for s in ranked if (s.fails, s.marginal, s.meets) == (best.fails, best.marginal, best.meets)]
    if len(tied) > 1:
        names = " and ".join(s.candidate for s in tied)
        return None, (
            f"no recommendation: {names} tie ({best.meets} target(s) met, {best.marginal} marginal); "
            + _what_separates(tied)
        )
    why = f"{best.candidate} meets {best.meets} target(s)"
    why += f" with {best.marginal} marginal" if best.marginal else " with none marginal"
    others = [s for s in ranked[1:]]
    if others:
        why += "; " + "; ".join(
            f"{s.candidate}: {s.meets} met, {s.marginal} marginal, {s.fails} not met" for s in others
        )
    return best.candidate, why


def _what_separates(tied: list[Standing]) -> str:
    """The metric on which tied candidates differ most from each other (in % of the baseline)."""
    spread = {}
    for name in {d.metric for s in tied for d in s.differences}:
        pcts = {s.candidate: d.diff_pct for s in tied for d in s.differences if d.metric == name}
        if len(pcts) == len(tied) and all(math.isfinite(v) for v in pcts.values()):
            spread[name] = (max(pcts.values()) - min(pcts.values()), pcts)
    if not spread:
        return "a target on a metric where they differ would separate them"
    name = max(sorted(spread), key=lambda n: spread[n][0])
    shown = ", ".join(f"{c} {v:+.1f}\u00a0%" for c, v in spread[name][1].items())
    label = METRICS[name].label.lower()
    return f"they differ most in {label} ({shown} against the baseline): a target there would separate them"


def compare_candidates(manifest: Manifest, metrics, fz0_n, drift, judged):
    """Every candidate against the baseline at the nominal load, and the recommended candidate."""
    base = next((s.id for s in manifest.specimens if s.role == "baseline"), None)
    candidates = [s.id for s in manifest.specimens if s.role == "candidate"]
    if base is None or not candidates:
        return [], (None, "no baseline and candidates to compare")
    labs_of: dict[str, frozenset[str]] = {}
    for r in manifest.runs:
        labs_of[r.specimen] = labs_of.get(r.specimen, frozenset()) | {r.lab or "(lab not given)"}
    standings = compare(base, candidates, metrics, fz0_n, drift, judged, labs_of)
    return standings, recommend(standings)
