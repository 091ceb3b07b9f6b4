"""The machine-readable result (``results.json``): one record per metric and per coefficient.

Its layout is documented by ``dossier/schemas/results.schema.json``; tests validate every
build against it. This module only assembles a plain dict; the writer serialises it.
"""

from __future__ import annotations

import math

from . import __version__, axes
from .condition import ConditioningAccount
from .fit import LateralFit
from .manifest import Manifest
from .metrics import METRICS, MetricValue

RESULTS_SCHEMA_VERSION = "1"


def _num(x: float | None) -> float | None:
    if x is None or not math.isfinite(x):
        return None
    return float(f"{x:.10g}")


def results_record(manifest: Manifest, accounts: list[ConditioningAccount], fits: list[LateralFit],
                   metrics: list[MetricValue]) -> dict:
    """Return the ``results.json`` content as plain data."""
    d = manifest.document
    return {
        "schema_version": RESULTS_SCHEMA_VERSION,
        "software": {"name": "dossier", "version": __version__},
        "axis_convention": axes.INTERNAL,
        "document": {
            "title": d.title, "number": d.number, "revision": d.revision, "customer": d.customer,
            "program": d.program, "supplier": d.supplier, "authors": list(d.authors), "date": d.date.isoformat(),
        },
        "specimens": [
            {"id": s.id, "role": s.role, "size": s.size, "construction": s.construction} for s in manifest.specimens
        ],
        "inputs": [
            {"file": a.source_file, "sha256": a.sha256, "specimen": a.specimen, "run": a.run_index,
             "samples": a.n_samples, "samples_kept": a.n_kept, "dropped": dict(a.dropped),
             "operating_points": a.operating_points_found}
            for a in accounts
        ],
        "metric_definitions": [
            {"metric": m.name, "label": m.label, "unit": m.unit, "definition": m.definition,
             "computed": m.computed, "source": m.source}
            for m in METRICS.values()
        ],
        "metrics": [
            {"metric": v.metric, "unit": v.unit, "specimen": v.specimen, "load_n": _num(v.load_n),
             "camber_deg": _num(v.camber_deg), "pressure_kpa": _num(v.pressure_kpa), "value": _num(v.value),
             "stderr": _num(v.stderr), "ci95": None if v.ci95 is None else [_num(v.ci95[0]), _num(v.ci95[1])],
             "basis": v.basis, "extrapolated": v.extrapolated, "note": v.note}
            for v in metrics
        ],
        "fits": [
            {"model": "Magic Formula 2002 pure-slip lateral force Fy0",
             "specimen": f.specimen, "pressure_kpa": _num(f.pressure_kpa), "camber_deg": _num(f.camber_deg),
             "fz0_n": _num(f.fz0_n),
             "load_range_n": [_num(f.load_range_n[0]), _num(f.load_range_n[1])],
             "slip_range_deg": [_num(f.slip_range_deg[0]), _num(f.slip_range_deg[1])],
             "statistics": {"n_points": f.statistics.n_points, "n_params": f.statistics.n_params,
                            "dof": f.statistics.dof, "rmse_n": _num(f.statistics.rmse_n),
                            "rmse_pct_of_peak": _num(f.statistics.rmse_pct_of_peak),
                            "n_evaluations": f.statistics.n_evaluations, "restarts": f.statistics.restarts,
                            "success": f.statistics.success},
             "coefficients": [
                 {"name": c.name, "value": _num(c.value), "unit": c.unit, "equation": c.equation,
                  "status": c.status, "stderr": _num(c.stderr),
                  "ci95": None if c.ci95 is None else [_num(c.ci95[0]), _num(c.ci95[1])],
                  "at_bound": c.at_bound, "note": c.note}
                 for c in f.coefficients
             ],
             "warnings": list(f.warnings),
             "operating_points": [
                 {"load_n": _num(k[1]), "camber_deg": _num(k[2]), "pressure_kpa": _num(k[3])} for k in f.source_points
             ]}
            for f in fits
        ],
    }
