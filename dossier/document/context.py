"""The one typed context every page renders from, site and PDF alike.

:func:`make_context` gathers the results of every stage into a :class:`DossierContext`;
:func:`with_narrative` adds the engineer's narrative, rendered against the facts.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from markupsafe import Markup

from .. import __version__
from ..common.names import slug
from ..conditioning.drift import DriftEstimate
from ..conditioning.offsets import OffsetSplit
from ..conditioning.steady_state import ConditionedRun, ConditioningAccount
from ..evaluation.identity import SpecimenIdentity, specimen_identity
from ..evaluation.vehicle import (
    MULTI_AXLE_SIMPLIFICATION,
    NO_VEHICLE,
    ROLLOVER_CAUTION,
    SIMPLIFICATIONS,
    VehicleResults,
)
from ..metrics.evaluate import MetricValue
from ..model.fit import ChannelFit
from ..project.catalogue import METRICS, PRESSURE_SENSITIVE, MetricDefinition
from ..project.manifest import Manifest, RunSpec, Specimen
from ..standards import axes
from .artifacts import FigureArtifact
from .cautions import CAUTIONS, CAUTIONS_ID
from .numbers import fmt_camber


@dataclass(frozen=True)
class Glance:
    """The candidates side by side against the baseline: what the one-page comparison shows."""

    baseline: str
    candidates: tuple[str, ...]
    rows: tuple  # (metric definition, the baseline's value, one Difference or None per candidate)
    verdict_counts: dict  # specimen -> (meets, marginal, does not meet, not measured)
    baseline_understeer_deg_per_g: float | None
    handling: tuple  # (candidate, understeer gradient with it on every axle, change from the baseline's) in deg/g


@dataclass(frozen=True)
class ConditionGroup:
    """A specimen's metric values at one camber and pressure other than its nominal ones."""

    camber_deg: float
    pressure_kpa: float
    values: tuple[MetricValue, ...]

    @property
    def loads(self) -> list[float]:
        return sorted({m.load_n for m in self.values})

    def metric(self, name: str, load_n: float) -> MetricValue | None:
        return next((m for m in self.values if m.metric == name and math.isclose(m.load_n, load_n)), None)

    def tables(self, groups: list[tuple[str, list[MetricDefinition]]], columns: int = 6):
        """The headline `groups` as (title, metrics) with only the metrics that have a value here; the
        groups joined into one table where that fits `columns` metrics."""
        have = {m.metric for m in self.values}
        shown = [(title, [m for m in defs if m.name in have]) for title, defs in groups]
        shown = [(title, defs) for title, defs in shown if defs]
        if len(shown) > 1 and sum(len(defs) for _, defs in shown) <= columns:
            return [("headline", [m for _, defs in shown for m in defs])]
        return [(title.lower(), defs) for title, defs in shown]


@dataclass(frozen=True)
class SpecimenView:
    specimen: Specimen
    page: str
    accounts: tuple[ConditioningAccount, ...]
    fits: tuple[ChannelFit, ...]  # fy, mz, fx as available
    metrics: tuple[MetricValue, ...]
    figures: tuple[FigureArtifact, ...]

    identity: SpecimenIdentity | None = None
    condition_metrics: tuple[MetricValue, ...] = ()  # at the other cambers × pressures tested

    def metric(self, name: str, load_n: float) -> MetricValue | None:
        return next((m for m in self.metrics if m.metric == name and math.isclose(m.load_n, load_n)), None)

    @property
    def pressure_pairs(self) -> list[tuple[str, MetricDefinition, MetricDefinition]]:
        """(label, per-10-kPa metric, %-per-bar metric) of each metric this specimen has a tested slope
        against pressure of (the catalogue's order)."""
        have = {m.metric for m in self.metrics if METRICS[m.metric].group == "pressure" and not m.extrapolated}
        return [
            (label, METRICS[f"{name}_per_10kpa"], METRICS[f"{name}_pct_per_bar"])
            for name, (label, _, _) in PRESSURE_SENSITIVE.items()
            if f"{name}_per_10kpa" in have
        ]

    @property
    def pressure_loads(self) -> list[float]:
        """The loads at which two or more pressures were tested (a slope against pressure that is not extrapolated)."""
        return sorted({m.load_n for m in self.metrics if METRICS[m.metric].group == "pressure" and not m.extrapolated})

    @property
    def camber_deg(self) -> float | None:
        """The camber this specimen's headline metrics are given at (its own nominal camber)."""
        return next((m.camber_deg for m in self.metrics), None)

    @property
    def conditions(self) -> list[ConditionGroup]:
        """The values at every other camber × pressure, one group per condition (camber, then pressure)."""
        groups: dict[tuple[float, float], list[MetricValue]] = {}
        for m in self.condition_metrics:
            groups.setdefault((round(m.camber_deg, 2), round(m.pressure_kpa)), []).append(m)
        return [ConditionGroup(c, p, tuple(vs)) for (c, p), vs in sorted(groups.items())]

    @property
    def loads(self) -> list[float]:
        return sorted({m.load_n for m in self.metrics if METRICS[m.metric].per_load})

    @property
    def pressure_kpa(self) -> float | None:
        """The pressure this specimen's metrics are given at (its own nominal pressure)."""
        return next((m.pressure_kpa for m in self.metrics), None)

    @property
    def specimen_level(self) -> list[MetricValue]:
        return [m for m in self.metrics if not METRICS[m.metric].per_load]

    @property
    def findings(self) -> list[str]:
        return [
            f"{METRICS[m.metric].label} at {m.load_n / 1000:.1f} kN: {m.finding}" for m in self.metrics if m.finding
        ]

    @property
    def fit(self) -> ChannelFit | None:
        """The lateral-force fit, which the metrics come from."""
        return next((f for f in self.fits if f.channel == "fy"), None)

    def figures_of(self, channel: str) -> list[FigureArtifact]:
        return [f for f in self.figures if f.filename.startswith(channel + "-")]


@dataclass(frozen=True)
class RunView:
    """One rig run as the data-quality section shows it."""

    run: ConditionedRun
    spec: RunSpec
    figures: tuple[FigureArtifact, ...]

    @property
    def account(self) -> ConditioningAccount:
        return self.run.account


@dataclass(frozen=True)
class DossierContext:
    """Everything a template may use. Templates get this one object as ``d``."""

    manifest: Manifest
    software_version: str
    axis_convention: str
    specimens: tuple[SpecimenView, ...]
    summary_figures: tuple[FigureArtifact, ...]
    metric_definitions: tuple[MetricDefinition, ...]
    cautions: tuple[tuple[str, str], ...]
    cautions_id: str
    nominal_load_n: float
    runs: tuple[RunView, ...] = ()
    drift: DriftEstimate | None = None
    drift_figures: tuple[FigureArtifact, ...] = ()
    offset_splits: tuple[OffsetSplit, ...] = ()
    quality_page: str = "data-quality.html"
    comparison_page: str = "comparison.html"
    vehicle_page: str = "vehicle.html"
    verdicts: tuple = ()
    standings: tuple = ()
    recommendation: tuple = (None, "")
    vehicle_results: VehicleResults = NO_VEHICLE
    comparison_figures: dict = field(default_factory=dict)
    drifts: tuple[DriftEstimate, ...] = ()  # every rig's control line (`drift` is the first)
    rollover_caution: str = ROLLOVER_CAUTION
    narrative: dict = field(default_factory=dict)  # part -> rendered HTML (Markup)
    downloads_page: str = "downloads.html"

    @property
    def signoff(self):
        return self.manifest.signoff

    @property
    def status_label(self) -> str:
        return {"draft": "DRAFT", "in review": "IN REVIEW", "released": "RELEASED"}[self.signoff.status]

    @property
    def vehicle(self):
        return self.manifest.vehicle

    @property
    def targets(self):
        return self.manifest.targets

    def verdict(self, target, specimen_id):
        return next((v for v in self.verdicts if v.target is target and v.specimen == specimen_id), None)

    @property
    def glance(self) -> Glance | None:
        """The candidates side by side against the baseline at the nominal load (None: nothing to compare)."""
        base = next((s.id for s in self.manifest.specimens if s.role == "baseline"), None)
        standings = [s for s in self.standings if s.differences]
        if base is None or not standings:
            return None
        views = {v.specimen.id: v for v in self.specimens}
        metrics = list(dict.fromkeys(d.metric for s in standings for d in s.differences))
        rows = []
        for name in metrics:
            cells = tuple(next((d for d in s.differences if d.metric == name), None) for s in standings)
            rows.append((METRICS[name], views[base].metric(name, self.nominal_load_n), cells))
        counts = {}
        for sid in [base] + [s.candidate for s in standings]:
            mine = [v.verdict for v in self.verdicts if v.specimen == sid]
            counts[sid] = tuple(mine.count(k) for k in ("meets", "marginal", "does not meet", "not measured"))
        handling = []
        own = self.vehicle_results.uniform(base)
        for s in standings:
            b = self.vehicle_results.uniform(s.candidate)
            if own is not None and b is not None:
                k, k0 = b.understeer_gradient_deg_per_g.value, own.understeer_gradient_deg_per_g.value
                handling.append((s.candidate, k, k - k0))
        return Glance(
            base,
            tuple(s.candidate for s in standings),
            tuple(rows),
            counts,
            None if own is None else own.understeer_gradient_deg_per_g.value,
            tuple(handling),
        )

    @property
    def judged_specimens(self) -> list[str]:
        return list(dict.fromkeys(v.specimen for v in self.verdicts))

    @property
    def fitments(self) -> tuple:
        return self.vehicle_results.fitments

    @property
    def vehicle_simplifications(self) -> tuple[str, ...]:
        many = self.vehicle is not None and len(self.vehicle.axles) > 2
        return SIMPLIFICATIONS + ((MULTI_AXLE_SIMPLIFICATION,) if many else ())

    @property
    def replacements(self) -> tuple:
        return self.vehicle_results.replacements

    @property
    def fitment_findings(self) -> list[str]:
        return [x for f in self.fitments for x in f.findings] + [
            f"not evaluated: {x}" for x in self.vehicle_results.not_evaluated
        ]

    @property
    def nominal_condition(self) -> str:
        """Where the headline values are, in words: one camber and pressure, or each specimen's own."""
        conditions = {(round(v.camber_deg, 2), round(v.pressure_kpa)) for v in self.specimens if v.metrics}
        if len(conditions) == 1:
            camber, pressure = next(iter(conditions))
            return f"camber {fmt_camber(camber)} and {pressure:.0f} kPa"
        return "each specimen's own nominal camber and pressure (given on its page)"

    @property
    def open_findings(self) -> list[str]:
        """Everything a reviewer should see before signing, gathered from every stage."""
        out = []
        for v in self.verdicts:
            if v.verdict in ("marginal", "does not meet"):
                where = "" if not v.target.camber_deg else f", camber {v.camber_deg:g}°"
                where += "" if v.target.pressure_kpa is None else f", {v.target.pressure_kpa:.0f} kPa"
                out.append(
                    f"{v.specimen}: {METRICS[v.target.metric].label.lower()} at {v.target.load_n / 1000:.1f} kN{where} "
                    f"{v.verdict} the target {v.target.window} {v.unit} ({v.target.reference}): {v.reason}"
                )
        for v in self.verdicts:
            if v.untestable:
                out.append(
                    f"{v.specimen}: the target for {METRICS[v.target.metric].label.lower()} at "
                    f"{v.target.load_n / 1000:.1f} kN, camber {v.camber_deg:g}°"
                    f"{'' if v.pressure_kpa is None else f', {v.pressure_kpa:.0f} kPa'} ({v.target.reference}) "
                    f"cannot be judged from this test: {v.reason}"
                )
        for view in self.specimens:
            if view.identity:
                out += [f"{view.specimen.id}: {f}" for f in view.identity.findings]
            out += [f"{view.specimen.id}: {f}" for f in view.findings]
            warnings = sum(len(f.warnings) for f in view.fits)
            if warnings:
                out.append(
                    f"{view.specimen.id}: {warnings} fit warning(s) (poorly determined or correlated coefficients); "
                    "see the fit reports"
                )
        for r in self.runs:
            if r.account.verdict != "sound":
                out.append(f"run {r.account.run_index} ({r.account.source_file}): {r.account.verdict}")
        for line in self.drifts:
            mu = next((m for m in line.metrics if m.metric == "peak_friction"), None)
            if mu and abs(mu.over_session_pct) > 1.0:
                lab, rig = line.station
                where = f" ({lab or 'the lab'}{', rig ' + rig if rig else ''})" if len(self.drifts) > 1 else ""
                out.append(
                    f"the rig's force level{where} drifted {mu.over_session_pct:+.1f} % over the session "
                    f"({'corrected' if line.corrected else 'not corrected'})"
                )
        out += [f"vehicle: {f}" for f in self.fitment_findings]
        return out

    @property
    def document(self):
        return self.manifest.document

    @property
    def headline(self) -> list[MetricDefinition]:
        return [m for m in self.metric_definitions if m.headline]

    @property
    def headline_groups(self) -> list[tuple[str, list[MetricDefinition]]]:
        """The headline metrics in two tables, so that each fits a page width."""
        titles = {"cornering": "Cornering and aligning", "camber_longitudinal": "Camber and longitudinal"}
        out = []
        for key, title in titles.items():
            defs = [m for m in self.headline if m.group == key]
            if defs:
                out.append((title, defs))
        return out

    def summary_metrics(self, specimen_id: str, definitions=None) -> list[MetricValue | None]:
        """Headline metrics of a specimen at the nominal load, in registry order (None: not measured)."""
        view = next(v for v in self.specimens if v.specimen.id == specimen_id)
        return [view.metric(m.name, self.nominal_load_n) for m in (definitions or self.headline)]


def with_narrative(ctx: DossierContext, texts: dict[str, tuple[str, str]]) -> DossierContext:
    """Return `ctx` with the narrative parts rendered (sandboxed template, then Markdown)."""
    from dataclasses import replace

    from .narrative import render_narrative

    rendered = {part: Markup(render_narrative(rel, text, ctx)) for part, (rel, text) in texts.items()}
    return replace(ctx, narrative=rendered)


def make_context(
    manifest: Manifest,
    conditioned: list[ConditionedRun],
    models,
    metrics,
    specimen_figures,
    summary_figures,
    nominal_load_n: float,
    quality_figures=None,
    drift=None,
    drift_figures=(),
    offset_splits=(),
    judged=(),
    standings=(),
    recommendation=(None, ""),
    vehicle: VehicleResults = NO_VEHICLE,
    comparison_figures=None,
    condition_metrics=(),
    drifts=(),
) -> DossierContext:
    accounts = [c.account for c in conditioned]
    quality_figures = quality_figures or {}
    runs = tuple(
        RunView(c, manifest.runs[c.account.run_index], tuple(quality_figures.get(c.account.run_index, ())))
        for c in conditioned
    )
    views = []
    for s in manifest.specimens:
        views.append(
            SpecimenView(
                specimen=s,
                page=f"specimen-{slug(s.id)}.html",
                accounts=tuple(a for a in accounts if a.specimen == s.id),
                fits=tuple(next((m.channels for m in models if m.specimen == s.id), ())),
                metrics=tuple(m for m in metrics if m.specimen == s.id),
                figures=tuple(specimen_figures.get(s.id, ())),
                identity=specimen_identity(s, manifest),
                condition_metrics=tuple(m for m in condition_metrics if m.specimen == s.id),
            )
        )
    return DossierContext(
        manifest,
        __version__,
        axes.INTERNAL,
        tuple(views),
        tuple(summary_figures),
        tuple(METRICS.values()),
        CAUTIONS,
        CAUTIONS_ID,
        nominal_load_n,
        runs,
        drift,
        tuple(drift_figures),
        tuple(offset_splits),
        verdicts=tuple(judged),
        standings=tuple(standings),
        recommendation=recommendation,
        vehicle_results=vehicle,
        comparison_figures=dict(comparison_figures or {}),
        drifts=tuple(drifts) or ((drift,) if drift else ()),
    )
