"""The machine-readable result (``results.json``): one record per metric and per coefficient.

Its layout is documented by ``dossier/schemas/results.schema.json``; tests validate every
build against it. This module only assembles a plain dict; the writer serialises it.
"""

from __future__ import annotations

import csv
import datetime as dt
import hashlib
import io
import json
import math
from collections.abc import Sequence

from .. import __version__
from ..conditioning.drift import DriftEstimate
from ..conditioning.offsets import OffsetSplit
from ..conditioning.steady_state import ConditionedRun, OperatingPoint
from ..evaluation.vehicle import NO_VEHICLE, Estimate, VehicleResults
from ..metrics.budget import Budget
from ..metrics.evaluate import MetricValue
from ..model.fit import MODEL_NAME, SLIP_UNIT, ChannelFit
from ..project.catalogue import METRICS
from ..project.manifest import Manifest, VehicleSpec
from ..standards import axes

RESULTS_SCHEMA_VERSION = "2"  # 2: the vehicle block holds declared fitments and replacements


def _num(x: float | None) -> float | None:
    if x is None or not math.isfinite(x):
        return None
    return float(f"{x:.10g}")


def _iso(when: dt.datetime | None) -> str | None:
    """Return `when` in ISO 8601, or None when unknown."""
    return None if when is None else when.isoformat()


def _point(p: OperatingPoint) -> dict:
    h, o = p.hysteresis, p.offsets
    return {
        "load_n": _num(p.load_n),
        "camber_deg": _num(p.camber_deg),
        "pressure_kpa": _num(p.pressure_kpa),
        "mean_load_n": _num(p.mean_load_n),
        "measured_pressure_kpa": _num(p.measured_pressure_kpa),
        "mean_speed_kmh": _num(p.mean_speed_kmh),
        "sweep": p.sweep,
        "n_sweeps": _num(p.n_sweeps),
        "n_points": p.curve.n_points,
        "samples_kept": p.n_samples_kept,
        "lines": [p.first_line, p.last_line],
        "hysteresis": None
        if h is None
        else {"force_diff_n": _num(h.force_diff_n), "mz_diff_nm": _num(h.mz_diff_nm), "slip_lag": _num(h.slip_lag)},
        "offsets": None
        if o is None
        else {
            "fy_at_zero_slip_n": _num(o.fy_at_zero_slip_n),
            "mz_at_zero_slip_nm": _num(o.mz_at_zero_slip_nm),
            "residual_cornering_force_n": _num(o.residual_cornering_force_n),
            "residual_aligning_moment_nm": _num(o.residual_aligning_moment_nm),
        },
        "force_scale": _num(p.force_scale),
        "findings": [{"severity": f.severity, "text": f.text} for f in p.findings],
    }


def _drift(d: DriftEstimate | None) -> dict | None:
    if d is None:
        return None
    return {
        "control": d.control,
        "load_n": _num(d.load_n),
        "corrected": d.corrected,
        "reference_time": d.reference_time.isoformat(),
        "repeats": [
            {
                "run": r.run_index,
                "tested_at": r.tested_at.isoformat(),
                "cornering_stiffness_n_per_deg": _num(r.cornering_stiffness_n_per_deg),
                "peak_friction": _num(r.peak_friction),
            }
            for r in d.repeats
        ],
        "metrics": [
            {"metric": m.metric, "per_hour_pct": _num(m.per_hour_pct), "over_session_pct": _num(m.over_session_pct)}
            for m in d.metrics
        ],
        "corrections": [
            {
                "run": c.run_index,
                "specimen": c.specimen,
                "tested_at": c.tested_at.isoformat(),
                "force_scale": _num(c.force_scale),
            }
            for c in d.corrections
        ],
    }


def _specimen_record(s, manifest: Manifest) -> dict:
    from ..evaluation.identity import specimen_identity

    ident = specimen_identity(s, manifest)
    return {
        "id": s.id,
        "role": s.role,
        "size": s.size,
        "construction": s.construction,
        "identity": {
            "section_width_mm": _num(ident.size.width_mm) if ident.size else None,
            "aspect_ratio_pct": _num(ident.size.aspect_pct) if ident.size else None,
            "rim_diameter_in": _num(ident.size.rim_in) if ident.size else None,
            "overall_diameter_mm": _num(ident.size.overall_diameter_mm) if ident.size else None,
            "load_index": ident.size.load_index if ident.size else None,
            "load_index_dual": ident.size.load_index_dual if ident.size else None,
            "rated_load_kg": ident.size.rated_load_kg if ident.size else None,
            "rated_load_n": _num(ident.rated_load_n),
            "rated_load_source": ident.rated_load_source,
            "speed_symbol": ident.size.speed_symbol if ident.size else None,
            "max_speed_kmh": ident.size.max_speed_kmh if ident.size else None,
            "tin": s.tin,
            "week": ident.date_code.week if ident.date_code else None,
            "year": ident.date_code.year if ident.date_code else None,
            "age_years_at_test": _num(ident.age_years),
            "test_loads": [{"load_n": _num(t.load_n), "pct_of_rated": _num(t.pct_of_rated)} for t in ident.test_loads],
            "findings": list(ident.findings),
        },
    }


def _coefficient_record(c) -> dict:
    return {
        "name": c.name,
        "value": _num(c.value),
        "unit": c.unit,
        "equation": c.equation,
        "status": c.status,
        "stderr": _num(c.stderr),
        "ci95": None if c.ci95 is None else [_num(c.ci95[0]), _num(c.ci95[1])],
        "at_bound": c.at_bound,
        "note": c.note,
    }


def _fit_record(f: ChannelFit) -> dict:
    return {
        "model": MODEL_NAME[f.channel],
        "channel": f.channel,
        "specimen": f.specimen,
        "fz0_n": _num(f.fz0_n),
        "p0_kpa": _num(f.p0_kpa),
        "r0_m": _num(f.r0_m) if f.channel == "mz" else None,
        "pressure_kpa": _num(f.p0_kpa),
        "camber_deg": 0.0,
        "load_range_n": [_num(f.load_range_n[0]), _num(f.load_range_n[1])],
        "slip_range": [_num(f.slip_range[0]), _num(f.slip_range[1])],
        "slip_unit": SLIP_UNIT[f.channel],
        "other_slip_range_deg": None
        if f.other_slip_range is None
        else [_num(f.other_slip_range[0]), _num(f.other_slip_range[1])],
        "camber_range_deg": [_num(f.camber_range_deg[0]), _num(f.camber_range_deg[1])],
        "pressure_range_kpa": [_num(f.pressure_range_kpa[0]), _num(f.pressure_range_kpa[1])],
        "statistics": {
            "n_points": f.statistics.n_points,
            "n_params": f.statistics.n_params,
            "dof": f.statistics.dof,
            "rmse": _num(f.statistics.rmse),
            "rmse_pct_of_peak": _num(f.statistics.rmse_pct_of_peak),
            "n_evaluations": f.statistics.n_evaluations,
            "restarts": f.statistics.restarts,
            "success": f.statistics.success,
        },
        "coefficients": [_coefficient_record(c) for c in f.coefficients],
        "correlation": {"names": list(f.fitted_names), "matrix": [[_num(v) for v in row] for row in f.correlation]},
        "leave_one_load_out": [
            {
                "load_n": _num(o.load_n),
                "rmse": _num(o.rmse),
                "rmse_pct_of_peak": _num(o.rmse_pct_of_peak),
                "extrapolated": o.extrapolated,
            }
            for o in f.load_out
        ],
        "warnings": list(f.warnings),
        "operating_points": [
            {"run": k[0], "load_n": _num(k[1]), "camber_deg": _num(k[2]), "pressure_kpa": _num(k[3])}
            for k in f.source_points
        ],
    }


def results_record(
    manifest: Manifest,
    conditioned: list[ConditionedRun],
    fits: list[ChannelFit],
    metrics: list[MetricValue],
    drift: DriftEstimate | None = None,
    offset_splits: Sequence[OffsetSplit] = (),
    verdicts=(),
    standings=(),
    recommendation=(None, ""),
    vehicle: VehicleResults = NO_VEHICLE,
    condition_metrics: Sequence[MetricValue] = (),
) -> dict:
    """Return the ``results.json`` content as plain data (`metrics`: at each specimen's nominal
    condition; `condition_metrics`: at the other conditions tested)."""
    d = manifest.document
    return {
        "schema_version": RESULTS_SCHEMA_VERSION,
        "software": {"name": "dossier", "version": __version__},
        "axis_convention": axes.INTERNAL,
        "document": {
            "title": d.title,
            "number": d.number,
            "revision": d.revision,
            "customer": d.customer,
            "program": d.program,
            "supplier": d.supplier,
            "authors": list(d.authors),
            "date": d.date.isoformat(),
            "status": manifest.signoff.status,
        },
        "specimens": [_specimen_record(s, manifest) for s in manifest.specimens],
        "inputs": [
            {
                "file": c.account.source_file,
                "sha256": c.account.sha256,
                "specimen": c.account.specimen,
                "run": c.account.run_index,
                "tested_at": _iso(manifest.runs[c.account.run_index].tested_at),
                "rolling_direction": manifest.runs[c.account.run_index].rolling_direction,
                "samples": c.account.n_samples,
                "samples_kept": c.account.n_kept,
                "dropped": dict(c.account.dropped),
                "operating_points": c.account.operating_points_found,
                "verdict": c.account.verdict,
                "verdict_reasons": list(c.account.verdict_reasons),
                "findings": [{"severity": f.severity, "text": f.text} for f in c.account.findings],
                "points": [_point(p) for p in c.points],
            }
            for c in conditioned
        ],
        "drift": _drift(drift),
        "offset_splits": [
            {
                "specimen": o.specimen,
                "load_n": _num(o.load_n),
                "camber_deg": _num(o.camber_deg),
                "fy_forward_n": _num(o.fy_forward_n),
                "fy_reverse_n": _num(o.fy_reverse_n),
                "conicity_fy_n": _num(o.conicity_fy_n),
                "ply_steer_fy_n": _num(o.ply_steer_fy_n),
                "conicity_mz_nm": _num(o.conicity_mz_nm),
                "ply_steer_mz_nm": _num(o.ply_steer_mz_nm),
            }
            for o in offset_splits
        ],
        "metric_definitions": [
            {
                "metric": m.name,
                "label": m.label,
                "unit": m.unit,
                "definition": m.definition,
                "computed": m.computed,
                "source": m.source,
                "channels": list(m.channels),
                "per_load": m.per_load,
            }
            for m in METRICS.values()
        ],
        "metrics": [
            {
                "metric": v.metric,
                "unit": v.unit,
                "specimen": v.specimen,
                "load_n": _num(v.load_n),
                "camber_deg": _num(v.camber_deg),
                "pressure_kpa": _num(v.pressure_kpa),
                "value": _num(v.value),
                "stderr": _num(v.stderr),
                "dof": _num(v.dof),
                "ci95": None if v.ci95 is None else [_num(v.ci95[0]), _num(v.ci95[1])],
                "uncertainty": _budget_record(v.budget),
                "basis": v.basis,
                "extrapolated": v.extrapolated,
                "note": v.note,
                "crosscheck": _num(v.crosscheck),
                "crosscheck_diff_pct": _num(v.crosscheck_diff_pct),
                "finding": v.finding,
                "nominal_condition": nominal,
            }
            for vs, nominal in ((metrics, True), (condition_metrics, False))
            for v in vs
        ],
        "fits": [_fit_record(f) for f in fits],
        "targets": [
            {
                "index": t.index,
                "metric": t.metric,
                "load_n": _num(t.load_n),
                "minimum": _num(t.minimum),
                "maximum": _num(t.maximum),
                "camber_deg": _num(t.camber_deg),
                "pressure_kpa": _num(t.pressure_kpa),
                "reference": t.reference,
            }
            for t in manifest.targets
        ],
        "verdicts": [
            {
                "target": v.target.index,
                "metric": v.target.metric,
                "specimen": v.specimen,
                "verdict": v.verdict,
                "value": _num(v.value),
                "ci95": None if v.ci95 is None else [_num(v.ci95[0]), _num(v.ci95[1])],
                "reason": v.reason,
                "camber_deg": _num(v.camber_deg),
                "pressure_kpa": _num(v.pressure_kpa),
            }
            for v in verdicts
        ],
        "comparison": [
            {
                "candidate": s.candidate,
                "meets": s.meets,
                "marginal": s.marginal,
                "fails": s.fails,
                "summary": s.text,
                "differences": [
                    {
                        "metric": d.metric,
                        "unit": d.unit,
                        "load_n": _num(d.load_n),
                        "baseline": d.baseline,
                        "diff": _num(d.diff),
                        "diff_ci95": None if d.diff_ci95 is None else [_num(d.diff_ci95[0]), _num(d.diff_ci95[1])],
                        "diff_pct": _num(d.diff_pct),
                        "repeatability_pct": _num(d.repeatability_pct),
                        "significant": d.significant,
                        "across_labs": d.across_labs or None,
                        "correlated_parts": d.correlation_note or None,
                    }
                    for d in s.differences
                ],
            }
            for s in standings
        ],
        "recommendation": {"candidate": recommendation[0], "reason": recommendation[1]},
        "vehicle": None if manifest.vehicle is None else _vehicle_record(manifest.vehicle, vehicle),
    }


def _estimate(e: Estimate | None) -> dict | None:
    if e is None:
        return None
    return {"value": _num(e.value), "ci95": None if e.ci95 is None else [_num(e.ci95[0]), _num(e.ci95[1])]}


def _vehicle_record(spec: VehicleSpec, vehicle: VehicleResults) -> dict:
    return {
        "name": spec.name,
        "mass_kg": _num(spec.mass_kg),
        "cg_from_front_m": _num(spec.cg_from_front_m),
        "cg_height_m": _num(spec.cg_height_m),
        "axles": [
            {
                "name": a.name,
                "position": a.position,
                "from_front_m": _num(a.from_front_m),
                "load_n": _num(a.load_n),
                "track_m": _num(a.track_m),
                "steered": a.steered,
            }
            for a in spec.axles
        ],
        "fitments": [
            {
                "name": f.name,
                "replaces": f.replaces,
                "axles": [
                    {
                        "axle": a.axle,
                        "specimen": a.specimen,
                        "assembly": a.assembly,
                        "tires": a.tires,
                        "tire_load_n": _num(a.tire_load_n),
                        "rated_load_kg": _num(a.rated_load_kg),
                        "load_index": a.load_index,
                        "over_rating": a.over_rating,
                        "cornering_stiffness_n_per_deg": _estimate(a.cornering_stiffness_n_per_deg),
                        "lateral_capacity_n": _estimate(a.lateral_capacity_n),
                        "aligning_stiffness_nm_per_deg": _estimate(a.aligning_stiffness_nm_per_deg),
                        "effective_track_m": _num(a.effective_track_m),
                        "extrapolated": a.extrapolated,
                    }
                    for a in f.axles
                ],
                "understeer_gradient_deg_per_g": _estimate(f.understeer_gradient_deg_per_g),
                "equivalent_wheelbase_m": _num(f.equivalent_wheelbase_m),
                "characteristic_speed_kmh": _num(f.characteristic_speed_kmh),
                "critical_speed_kmh": _num(f.critical_speed_kmh),
                "character": f.character,
                "static_rollover_threshold_g": _num(f.rollover_threshold_g),
                "findings": list(f.findings),
            }
            for f in vehicle.fitments
        ],
        "replacements": [
            {
                "fitment": r.fitment,
                "replaces": r.replaces,
                "axles": [
                    {
                        "axle": c.axle,
                        "before": {"specimen": c.before.specimen, "assembly": c.before.assembly},
                        "after": {"specimen": c.after.specimen, "assembly": c.after.assembly},
                        "cornering_stiffness_change_pct": _estimate(c.cornering_stiffness_pct),
                        "lateral_capacity_change_pct": _estimate(c.lateral_capacity_pct),
                        "aligning_stiffness_change_pct": _estimate(c.aligning_stiffness_pct),
                    }
                    for c in r.changes
                ],
                "understeer_gradient_change_deg_per_g": _estimate(r.understeer_gradient_change_deg_per_g),
                "static_rollover_threshold_change_g": _num(r.rollover_threshold_change_g),
            }
            for r in vehicle.replacements
        ],
        "not_evaluated": list(vehicle.not_evaluated),
    }


def coefficient_files(manifest: Manifest, conditioned: list[ConditionedRun], models) -> dict[str, bytes]:
    """Return the coefficient export: per specimen a self-describing JSON and a flat CSV.

    The layout is our own: every coefficient with value, standard error, 95 % interval, unit,
    equation reference and status, and beside it the specimen, the model's nominal values, the
    SHA-256 of every input file the fit used and the software version.
    """
    by_run = {c.account.run_index: c.account for c in conditioned}
    d = manifest.document
    files: dict[str, bytes] = {}
    for m in models:
        runs = sorted({k[0] for f in m.channels for k in f.source_points})
        inputs = [{"file": by_run[r].source_file, "sha256": by_run[r].sha256} for r in runs]
        data_hash = hashlib.sha256("".join(sorted(i["sha256"] for i in inputs)).encode()).hexdigest()
        doc = {
            "kind": "dossier coefficient set",
            "layout_version": "1",
            "software": {"name": "dossier", "version": __version__},
            "document": {"number": d.number, "revision": d.revision},
            "specimen": m.specimen,
            "axis_convention": axes.INTERNAL,
            "units": {
                "force": "N",
                "moment": "N·m",
                "slip_angle": "rad",
                "slip_ratio": "1",
                "inclination": "rad",
                "pressure": "kPa",
                "length": "m",
            },
            "inputs": inputs,
            "data_sha256": data_hash,
            "channels": [
                {
                    "channel": f.channel,
                    "model": MODEL_NAME[f.channel],
                    "reference": "Pacejka, Tire and Vehicle Dynamics (2006) §4.3.2; pressure terms Besselink, "
                    "Schmeitz & Pacejka (2010)",
                    "fz0_n": _num(f.fz0_n),
                    "p0_kpa": _num(f.p0_kpa),
                    "r0_m": _num(f.r0_m) if f.channel == "mz" else None,
                    "valid_load_range_n": [_num(f.load_range_n[0]), _num(f.load_range_n[1])],
                    "valid_slip_range": [_num(f.slip_range[0]), _num(f.slip_range[1])],
                    "slip_unit_of_range": SLIP_UNIT[f.channel],
                    "coefficients": [_coefficient_record(c) for c in f.coefficients],
                }
                for f in m.channels
            ],
        }
        slug = "".join(ch.lower() if ch.isalnum() else "-" for ch in m.specimen).strip("-")
        files[f"coefficients/{slug}.json"] = (json.dumps(doc, indent=2, ensure_ascii=False) + "\n").encode("utf-8")
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(
            [
                "specimen",
                "channel",
                "name",
                "value",
                "stderr",
                "ci95_low",
                "ci95_high",
                "unit",
                "equation",
                "status",
                "note",
                "fz0_n",
                "p0_kpa",
                "r0_m",
                "axis_convention",
                "data_sha256",
                "software_version",
                "document",
                "revision",
            ]
        )
        for f in m.channels:
            for c in f.coefficients:
                w.writerow(
                    [
                        m.specimen,
                        f.channel,
                        c.name,
                        repr(float(c.value)),
                        "" if c.stderr is None else repr(float(c.stderr)),
                        "" if c.ci95 is None else repr(float(c.ci95[0])),
                        "" if c.ci95 is None else repr(float(c.ci95[1])),
                        c.unit,
                        c.equation,
                        c.status,
                        c.note,
                        repr(float(f.fz0_n)),
                        repr(float(f.p0_kpa)),
                        repr(float(f.r0_m)) if f.channel == "mz" else "",
                        axes.INTERNAL,
                        data_hash,
                        __version__,
                        d.number,
                        d.revision,
                    ]
                )
        files[f"coefficients/{slug}.csv"] = buf.getvalue().encode("utf-8")
    return files


def conditioned_data_files(conditioned: list[ConditionedRun]) -> dict[str, bytes]:
    """The steady-state curves of every run as CSV (internal units, ISO 8855), one file per run."""
    files = {}
    for c in conditioned:
        a = c.account
        lines = [
            f"# conditioned steady-state curves of {a.source_file} (sha256 {a.sha256}); "
            "units N, N·m, deg, kPa; axes ISO 8855; slip is deg (slip angle) or 1 (slip ratio)",
            "load_setpoint_n,camber_deg,pressure_kpa,sweep,slip,fz_n,fy_n,mz_nm,fx_n,samples",
        ]
        for p in c.points:
            cv = p.curve
            for i in range(cv.n_points):

                def col(arr):
                    return "" if arr is None else repr(float(arr[i]))

                lines.append(
                    ",".join(
                        [
                            repr(p.load_n),
                            repr(p.camber_deg),
                            repr(p.pressure_kpa),
                            p.sweep,
                            repr(float(cv.x[i])),
                            repr(float(cv.fz_n[i])),
                            col(cv.fy_n),
                            col(cv.mz_nm),
                            col(cv.fx_n),
                            str(int(cv.samples_per_bin[i])),
                        ]
                    )
                )
        files[f"conditioned/run-{a.run_index:02d}.csv"] = ("\n".join(lines) + "\n").encode("utf-8")
    return files


def _budget_record(b: Budget | None) -> dict | None:
    """Every component of a metric's uncertainty budget, its combination and its expansion."""
    if b is None:
        return None
    return {
        "method": "GUM (JCGM 100:2008): independent components, Welch-Satterthwaite, k = t(0.975, nu_eff)",
        "components": [
            {
                "name": c.name,
                "type": c.kind,
                "standard_uncertainty": _num(c.u),
                "dof": _num(c.dof),
                "basis": c.basis,
                "shared": c.shared or None,
            }
            for c in b.components
        ],
        "combined_standard_uncertainty": _num(b.u_combined),
        "effective_dof": _num(b.dof_effective),
        "coverage_factor": _num(b.k),
        "expanded_uncertainty": _num(b.expanded),
        "coverage_probability": 0.95,
    }
