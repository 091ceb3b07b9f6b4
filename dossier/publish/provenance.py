"""Provenance: where every number of the dossier came from, as a W3C PROV document (PROV-JSON).

Entities: the manifest, every rig file and narrative file (with SHA-256), the conditioned curves
of every run, the drift estimate and each drift-corrected run, each fitted model and coefficient,
each metric value, each target and verdict, each candidate-against-baseline difference and
standing, the recommendation, each vehicle fitment result, each ply-steer/conicity split, the
rendered narrative and the dossier itself. Activities: ingest-and-condition per run, the drift
estimate and correction, one fit per specimen and channel (with its settings), one metric
evaluation per specimen, acceptance, comparison, vehicle balance, the offset split and the
narrative rendering. Agents: the software (with its version) and the people of the manifest.
Relations: used, wasGeneratedBy, wasDerivedFrom, wasAssociatedWith, wasAttributedTo.

Written by hand to the PROV-JSON layout (W3C Member Submission "PROV-JSON", 2013) because every
ordering must be explicit for the bytes to be the same in every process; the tests read it back
with the `prov` package. Every loop below runs over a list or a sorted collection, never a set.
"""

from __future__ import annotations

import hashlib
import json
import re
from dataclasses import dataclass, field

from .. import __version__
from ..conditioning.drift import DriftEstimate
from ..conditioning.steady_state import ConditionedRun, OperatingPoint, same_condition
from ..evaluation.vehicle import NO_VEHICLE, VehicleResults
from ..metrics.evaluate import MetricValue
from ..model.fit import BASE_CHANNEL, CHANNEL_SYMBOL
from ..project.catalogue import METRICS
from ..project.manifest import MANIFEST_NAME, Manifest
from ..standards import axes

NS = "urn:x-dossier:"  # our own namespace for identifiers inside one dossier


def pid(*parts) -> str:
    """A PROV identifier (qualified name in the dossier namespace) from readable parts."""
    return "d:" + "-".join(re.sub(r"[^A-Za-z0-9_.]+", "_", str(p)).strip("_") for p in parts)


def anchor(identifier: str) -> str:
    """The HTML anchor of a provenance entry on the provenance page."""
    return "prov-" + identifier.split(":", 1)[1]


def fit_id(specimen: str, channel: str) -> str:
    return pid("fit", specimen, channel)


def metric_id(
    specimen: str, metric: str, load_n: float | None = None, condition: tuple[float, float] | None = None
) -> str:
    """A metric value's identifier; `condition` (camber deg, pressure kPa) for a value away from the
    specimen's nominal condition."""
    if load_n is None:
        return pid("metric", specimen, metric)
    if condition is None:
        return pid("metric", specimen, metric, f"{load_n:.0f}N")
    camber, pressure = round(condition[0], 2), condition[1]
    sign = "minus" if camber < 0 else "plus" if camber > 0 else ""  # a "-" would not survive in a name
    return pid("metric", specimen, metric, f"{load_n:.0f}N", f"camber_{sign}{abs(camber):g}deg", f"{pressure:.0f}kPa")


def _judged_value_id(v, evidence: Evidence) -> str:
    """The identifier of the metric value a verdict was judged by: at the verdict's condition."""
    here = (v.camber_deg, v.pressure_kpa if v.pressure_kpa is not None else float("nan"))
    for values, nominal in ((evidence.metrics, True), (evidence.condition_metrics, False)):
        for m in values:
            if (m.specimen, m.metric, m.load_n) == (v.specimen, v.target.metric, v.target.load_n) and same_condition(
                (m.camber_deg, m.pressure_kpa), here
            ):
                return metric_id(m.specimen, m.metric, m.load_n, None if nominal else (m.camber_deg, m.pressure_kpa))
    return ""  # nothing measured there: the verdict rests on the target alone


def input_id(relative_path: str) -> str:
    return pid("input", relative_path)


def run_curves_id(run_index: int, corrected: bool) -> str:
    """The conditioned curves of a run, or (after the drift correction) their rescaled version."""
    return pid("drift_corrected" if corrected else "conditioned", "run", run_index)


@dataclass(frozen=True)
class Evidence:
    """Everything the build found, as the provenance record needs it (the build's own results)."""

    conditioned: tuple[ConditionedRun, ...]
    points: tuple[OperatingPoint, ...]  # after the drift correction, as the fits used them
    models: tuple = ()
    metrics: tuple[MetricValue, ...] = ()
    drift: DriftEstimate | None = None
    offset_splits: tuple = ()
    verdicts: tuple = ()
    standings: tuple = ()
    recommendation: tuple = (None, "")
    vehicle: VehicleResults = NO_VEHICLE
    input_sha256: dict = field(default_factory=dict)  # relative path -> SHA-256 of the project's files
    condition_metrics: tuple[MetricValue, ...] = ()  # at the other conditions tested


class _Record:
    """The PROV-JSON document under construction; relation ids are numbered in the order made."""

    KINDS = (
        "entity",
        "activity",
        "agent",
        "used",
        "wasGeneratedBy",
        "wasDerivedFrom",
        "wasAssociatedWith",
        "wasAttributedTo",
    )

    def __init__(self):
        self.doc: dict = {"prefix": {"d": NS}, **{k: {} for k in self.KINDS}}
        self.n = 0

    def rel(self, kind: str, record: dict) -> None:
        self.n += 1
        self.doc[kind][f"d:r{self.n}"] = record

    def entity(self, ident: str, attrs: dict, derived_from=(), generated_by: str | None = None) -> str:
        self.doc["entity"][ident] = attrs
        if generated_by:
            self.rel("wasGeneratedBy", {"prov:entity": ident, "prov:activity": generated_by})
        for used in derived_from:
            self.rel("wasDerivedFrom", {"prov:generatedEntity": ident, "prov:usedEntity": used})
        return ident

    def activity(self, ident: str, attrs: dict, software: str, used=()) -> str:
        self.doc["activity"][ident] = attrs
        self.rel("wasAssociatedWith", {"prov:activity": ident, "prov:agent": software})
        for u in used:
            self.rel("used", {"prov:activity": ident, "prov:entity": u})
        return ident


def provenance_record(manifest: Manifest, evidence: Evidence) -> dict:
    """Return the PROV-JSON document of a build as plain data."""
    r = _Record()
    doc = r.doc
    software = pid("software", "dossier", __version__)
    soft_label = f"dossier {__version__}"
    doc["agent"][software] = {"prov:type": "prov:SoftwareAgent", "prov:label": soft_label}
    people = []
    for name in manifest.document.authors:
        people.append(pid("person", name))
        doc["agent"][people[-1]] = {"prov:type": "prov:Person", "prov:label": name, "d:role": "author"}
    for p in manifest.signoff.people:
        ident = pid("person", p.name)
        doc["agent"].setdefault(ident, {"prov:type": "prov:Person", "prov:label": p.name})["d:role"] = p.role

    man = r.entity(input_id(MANIFEST_NAME), {"prov:label": MANIFEST_NAME, "d:sha256": manifest.sha256})
    corrected = {c.run_index: c for c in (evidence.drift.corrections if evidence.drift else ())}

    # Ingest and conditioning: each run's curves derive from its own file and the manifest.
    for c in evidence.conditioned:
        a = c.account
        spec = manifest.runs[a.run_index]
        f = r.entity(
            input_id(a.source_file),
            {
                "prov:label": a.source_file,
                "d:sha256": a.sha256,
                "d:lab": spec.lab or "",
                "d:axis_convention": spec.axis_convention,
            },
        )
        act = r.activity(
            pid("conditioning", "run", a.run_index),
            {
                "prov:label": f"ingest and condition run {a.run_index}",
                "d:settings": json.dumps(manifest.conditioning.__dict__, sort_keys=True),
                "d:internal_axes": axes.INTERNAL,
                "d:software": soft_label,
            },
            software,
            used=(f, man),
        )
        r.entity(
            run_curves_id(a.run_index, False),
            {
                "prov:label": f"conditioned curves of run {a.run_index}",
                "d:samples_kept": a.n_kept,
                "d:samples": a.n_samples,
                "d:operating_points": "; ".join(
                    f"{p.load_n:.0f} N, {p.camber_deg:g} deg, {p.pressure_kpa:.0f} kPa: lines "
                    f"{p.first_line}-{p.last_line}"
                    for p in c.points
                ),
            },
            derived_from=(f,),
            generated_by=act,
        )

    # Drift: the estimate derives from the control runs; each corrected run from its own curves
    # and the estimate, with the scale factor that was applied to its forces and moments.
    drift = evidence.drift
    if drift is not None:
        control_runs = sorted({rep.run_index for rep in drift.repeats})
        est_act = r.activity(
            pid("drift", "estimate"),
            {
                "prov:label": f"drift of the rig seen on the control tire {drift.control}",
                "d:method": "straight line in time through model-free metrics of the control repeats",
                "d:software": soft_label,
            },
            software,
            used=[run_curves_id(i, False) for i in control_runs],
        )
        estimate = r.entity(
            pid("drift", "estimate", drift.control),
            {
                "prov:label": f"drift estimate from {len(drift.repeats)} repeats of {drift.control} at "
                f"{drift.load_n:.0f} N",
                "d:level_slope_per_hour": float(drift.level_slope_per_hour),
                "d:level_intercept": float(drift.level_intercept),
                "d:control_runs": ", ".join(str(i) for i in control_runs),
            },
            derived_from=[run_curves_id(i, False) for i in control_runs],
            generated_by=est_act,
        )
        if corrected:
            cor_act = r.activity(
                pid("drift", "correction"),
                {
                    "prov:label": "drift correction of the forces and moments of every non-control run",
                    "d:method": "each run scaled by level(first control repeat) / level(its tested_at)",
                    "d:software": soft_label,
                },
                software,
                used=[estimate] + [run_curves_id(i, False) for i in sorted(corrected)],
            )
            for i in sorted(corrected):
                k = corrected[i]
                r.entity(
                    run_curves_id(i, True),
                    {
                        "prov:label": f"conditioned curves of run {i}, corrected for drift",
                        "d:force_scale": float(k.force_scale),
                        "d:tested_at": k.tested_at.isoformat(),
                    },
                    derived_from=(run_curves_id(i, False), estimate),
                    generated_by=cor_act,
                )

    def curves_of(run_index: int) -> str:
        return run_curves_id(run_index, run_index in corrected)

    # Fits and coefficients.
    for m in evidence.models:
        for fit in m.channels:
            ent = fit_id(m.specimen, fit.channel)
            runs = sorted({k[0] for k in fit.source_points})
            base = BASE_CHANNEL.get(fit.channel)  # the fit this one is made with
            used = [curves_of(i) for i in runs] + ([fit_id(m.specimen, base)] if base else [])
            act = r.activity(
                pid("fitting", m.specimen, fit.channel),
                {
                    "prov:label": f"fit {CHANNEL_SYMBOL[fit.channel]} of {m.specimen}",
                    "d:settings": json.dumps(
                        {
                            **manifest.fit.__dict__,
                            "fz0_n": fit.fz0_n,
                            "p0_kpa": fit.p0_kpa,
                            "r0_m": fit.r0_m if fit.channel == "mz" else None,
                        },
                        sort_keys=True,
                    ),
                    "d:software": soft_label,
                },
                software,
            )
            for i in runs:
                pts = [k for k in fit.source_points if k[0] == i]
                r.rel(
                    "used",
                    {
                        "prov:activity": act,
                        "prov:entity": curves_of(i),
                        "d:operating_points": "; ".join(
                            f"{k[1]:.0f} N, {k[2]:g} deg, {k[3]:.0f} kPa"
                            + (f", held slip {k[4]:g}" if len(k) > 4 else "")
                            for k in pts
                        ),
                    },
                )
            if base:
                r.rel("used", {"prov:activity": act, "prov:entity": fit_id(m.specimen, base)})
            r.entity(
                ent,
                {
                    "prov:label": f"fitted {CHANNEL_SYMBOL[fit.channel]} of {m.specimen}",
                    "d:rmse": fit.statistics.rmse,
                    "d:n_points": fit.statistics.n_points,
                },
                derived_from=used,
                generated_by=act,
            )
            for c in fit.coefficients:
                r.entity(
                    pid("coefficient", m.specimen, fit.channel, c.name),
                    {
                        "prov:label": f"{c.name} of {m.specimen}",
                        "prov:value": float(c.value),
                        "d:status": c.status,
                        "d:stderr": -1.0 if c.stderr is None else float(c.stderr),
                    },
                    derived_from=(ent,),
                )

    # Metrics.
    channels = sorted({c for d in METRICS.values() for c in d.channels})
    for m in evidence.models:
        r.activity(
            pid("metrics", m.specimen),
            {
                "prov:label": f"metrics of {m.specimen}",
                "d:software": soft_label,
                "d:method": "model evaluation at zero camber and nominal pressure; delta-method intervals",
            },
            software,
            used=[fit_id(m.specimen, ch) for ch in channels if getattr(m, ch) is not None],
        )
    for v, nominal in [(v, True) for v in evidence.metrics] + [(v, False) for v in evidence.condition_metrics]:
        where = "" if nominal else f", camber {v.camber_deg:g}°, {v.pressure_kpa:.0f} kPa"
        r.entity(
            metric_id(v.specimen, v.metric, v.load_n, None if nominal else (v.camber_deg, v.pressure_kpa)),
            {
                "prov:label": f"{METRICS[v.metric].label} of {v.specimen} at {v.load_n:.0f} N{where}",
                "prov:value": float(v.value),
                "d:unit": v.unit,
            },
            derived_from=[fit_id(v.specimen, ch) for ch in METRICS[v.metric].channels],
            generated_by=pid("metrics", v.specimen),
        )

    # Targets and verdicts.
    outcome = []  # what the dossier's conclusion rests on
    if evidence.verdicts:
        judging = r.activity(
            pid("acceptance"),
            {"prov:label": "targets judged against the 95 % intervals", "d:software": soft_label},
            software,
            used=(man,),
        )
        for v in evidence.verdicts:
            i = _index_of(manifest.targets, v.target)
            target = pid("target", i)
            if target not in doc["entity"]:
                r.entity(
                    target,
                    {
                        "prov:label": f"targets[{i}]: {v.target.metric} at {v.target.load_n:.0f} N "
                        f"({v.target.reference})"
                    },
                    derived_from=(man,),
                )
            metric = _judged_value_id(v, evidence)
            sources = [target] + ([metric] if metric in doc["entity"] else [])
            outcome.append(
                r.entity(
                    pid("verdict", i, v.specimen),
                    {
                        "prov:label": f"{v.specimen} against targets[{i}]: {v.verdict}",
                        "d:verdict": v.verdict,
                        "d:reason": v.reason,
                    },
                    derived_from=sources,
                    generated_by=judging,
                )
            )

    # Candidates against the baseline, and the recommendation.
    if evidence.standings:
        comparing = r.activity(
            pid("comparison"), {"prov:label": "candidates against the baseline", "d:software": soft_label}, software
        )
        standings = []
        for s in evidence.standings:
            diffs = []
            for d in s.differences:
                sources = [metric_id(d.candidate, d.metric, d.load_n), metric_id(d.baseline, d.metric, d.load_n)]
                if d.repeatability_pct is not None and drift is not None:
                    sources.append(pid("drift", "estimate", drift.control))
                diffs.append(
                    r.entity(
                        pid("difference", d.candidate, d.baseline, d.metric, f"{d.load_n:.0f}N"),
                        {
                            "prov:label": f"{d.metric} of {d.candidate} minus {d.baseline} at {d.load_n:.0f} N",
                            "prov:value": float(d.diff),
                            "d:unit": d.unit,
                            "d:real": bool(d.significant),
                        },
                        derived_from=[x for x in sources if x in doc["entity"]],
                        generated_by=comparing,
                    )
                )
            mine = [
                pid("verdict", _index_of(manifest.targets, v.target), v.specimen)
                for v in evidence.verdicts
                if v.specimen == s.candidate
            ]
            standings.append(
                r.entity(
                    pid("standing", s.candidate),
                    {"prov:label": s.text},
                    derived_from=diffs + mine,
                    generated_by=comparing,
                )
            )
        best, why = evidence.recommendation
        outcome.append(
            r.entity(
                pid("recommendation"),
                {"prov:label": why, "d:candidate": best or ""},
                derived_from=standings,
                generated_by=comparing,
            )
        )

    # Vehicle balance: each declared fitment from the lateral fits of the specimens on its axles; each
    # replacement from the two fitments it compares.
    if evidence.vehicle.fitments:
        balancing = r.activity(
            pid("vehicle", "balance"),
            {
                "prov:label": "understeer gradient of each declared fitment from its axles' cornering stiffnesses",
                "d:software": soft_label,
            },
            software,
            used=(man,),
        )
        for fitted in evidence.vehicle.fitments:
            sources = list(dict.fromkeys(fit_id(a.specimen, "fy") for a in fitted.axles))
            outcome.append(
                r.entity(
                    pid("fitment", fitted.name),
                    {
                        "prov:label": f"fitment {fitted.name}: understeer gradient",
                        "prov:value": float(fitted.understeer_gradient_deg_per_g.value),
                        "d:unit": "deg/g",
                    },
                    derived_from=sources + [man],
                    generated_by=balancing,
                )
            )
        for x in evidence.vehicle.replacements:
            outcome.append(
                r.entity(
                    pid("replacement", x.fitment, x.replaces),
                    {
                        "prov:label": f"{x.fitment} in place of {x.replaces}: change of the understeer gradient",
                        "prov:value": float(x.understeer_gradient_change_deg_per_g.value),
                        "d:unit": "deg/g",
                    },
                    derived_from=[pid("fitment", x.fitment), pid("fitment", x.replaces)],
                    generated_by=balancing,
                )
            )

    # Ply-steer and conicity: each split from the forward and reverse runs it pairs.
    if evidence.offset_splits:
        splitting = r.activity(
            pid("offsets"),
            {"prov:label": "ply-steer and conicity from both rolling directions", "d:software": soft_label},
            software,
        )
        for o in evidence.offset_splits:
            runs = sorted(
                {
                    p.run_index
                    for p in evidence.points
                    if p.specimen == o.specimen
                    and p.load_n == o.load_n
                    and p.camber_deg == o.camber_deg
                    and p.sweep == "slip_angle"
                    and p.offsets is not None
                }
            )
            r.entity(
                pid("offset_split", o.specimen, f"{o.load_n:.0f}N", f"{o.camber_deg:g}deg"),
                {
                    "prov:label": f"ply-steer and conicity of {o.specimen} at {o.load_n:.0f} N",
                    "d:conicity_fy_n": float(o.conicity_fy_n),
                    "d:ply_steer_fy_n": float(o.ply_steer_fy_n),
                },
                derived_from=[curves_of(i) for i in runs],
                generated_by=splitting,
            )

    # The narrative: each part from its file (its numbers come from the metrics above).
    for part, rel in sorted(manifest.narrative.items()):
        f = r.entity(input_id(rel), {"prov:label": rel, "d:sha256": evidence.input_sha256.get(rel, "")})
        act = r.activity(
            pid("narrative", part),
            {"prov:label": f"render the {part} narrative", "d:software": soft_label},
            software,
            used=(f,),
        )
        outcome.append(
            r.entity(
                pid("narrative", part, "rendered"),
                {"prov:label": f"{part} narrative as rendered"},
                derived_from=(f,),
                generated_by=act,
            )
        )

    dossier = r.entity(
        pid("dossier", manifest.document.number, manifest.document.revision),
        {
            "prov:label": f"{manifest.document.number} rev. {manifest.document.revision}",
            "d:status": manifest.signoff.status,
        },
        derived_from=[man] + outcome,
    )
    for agent in people:
        r.rel("wasAttributedTo", {"prov:entity": dossier, "prov:agent": agent})
    return {k: v for k, v in doc.items() if v}


def _index_of(items, item) -> int:
    return next(i for i, x in enumerate(items) if x is item)


def provenance_bytes(record: dict) -> bytes:
    return (json.dumps(record, indent=1, sort_keys=True, ensure_ascii=False) + "\n").encode("utf-8")


def sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()
