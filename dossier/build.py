"""The build, as a recipe: gather everything first, then write.

load project → ingest → condition → drift → offsets → fit → metrics → figures → render site →
render PDF → write.
Each step is one call into its own module; only ``load_manifest``/``read_run`` read and only
``write_dossier`` writes.
"""

from __future__ import annotations

import statistics
from dataclasses import dataclass
from pathlib import Path

from .condition import UNUSABLE, ConditionedRun, OperatingPoint, condition_run
from .drift import DriftEstimate, correct_points, estimate_drift
from .errors import StageError
from .figures import (drift_figure, hysteresis_figure, lateral_force_figure, load_trend_figure,
                      time_history_figure)
from .fit import LateralFit, fit_lateral
from .ingest import read_run
from .manifest import Manifest, load_manifest
from .metrics import METRICS, MetricValue, metric_values
from .offsets import split_offsets
from .output import json_bytes, write_dossier
from .render import make_context, make_environment, render_pdf, render_site
from .results import results_record
from .theme import load_theme

PDF_NAME = "dossier.pdf"
RESULTS_NAME = "results.json"


@dataclass(frozen=True)
class BuildSummary:
    out_dir: Path
    n_files: int
    n_fits: int
    n_metrics: int


def check(project_dir: Path) -> tuple[Manifest, list[ConditionedRun]]:
    """Validate the manifest and read and condition every rig file, without fitting or writing."""
    manifest = load_manifest(project_dir)
    runs = [read_run(manifest.project_dir, spec) for spec in manifest.runs]
    conditioned = [condition_run(run, manifest.conditioning, manifest.specimen(run.spec.specimen).rated_load_n)
                   for run in runs]
    for c in conditioned:
        if c.account.verdict == UNUSABLE:
            a = c.account
            raise StageError(f"{a.source_file}: unusable after conditioning: {'; '.join(a.verdict_reasons)} "
                             f"(dropped: {_dropped_text(a.dropped)}); check runs[{a.run_index}].load_setpoints "
                             "and the [conditioning] settings")
    return manifest, conditioned


def build(project_dir: Path, out_dir: Path | None = None, theme_name: str = "default") -> BuildSummary:
    """Build the dossier of the project in `project_dir` into `out_dir`."""
    manifest, conditioned = check(project_dir)
    out_dir = Path(out_dir) if out_dir else manifest.project_dir / "dossier-out"
    theme = load_theme(theme_name)

    measured = [p for c in conditioned for p in c.points]
    fz0_n = nominal_load_n(manifest)
    drift: DriftEstimate | None = None
    if manifest.drift:
        drift = estimate_drift(measured, manifest.drift.control, fz0_n)
    points = measured
    if drift and manifest.drift.correct:
        points, drift = correct_points(measured, drift)
    offset_splits = split_offsets(points)
    fits = fit_specimens(points, manifest, fz0_n)
    metrics = [m for f in fits for load in _fitted_loads(f, points) for m in metric_values(f, load)]

    specimen_figures = {f.specimen: [lateral_force_figure(f, _points_of(f, points), theme.figure_style)]
                        for f in fits}
    summary_figures = [load_trend_figure(name, METRICS[name].label, METRICS[name].unit, metrics, theme.figure_style)
                       for name in ("cornering_coefficient", "peak_lateral_friction")]
    quality_figures = {c.account.run_index: _quality_figures(c, fz0_n, theme.figure_style) for c in conditioned}
    drift_figures = [drift_figure(drift, theme.figure_style)] if drift else []
    ctx = make_context(manifest, conditioned, fits, metrics, specimen_figures, summary_figures, fz0_n,
                       quality_figures, drift, drift_figures, offset_splits)
    env = make_environment(theme, manifest.project_dir / "templates")
    site = render_site(ctx, env, theme)
    pdf = render_pdf(ctx, env, site)
    results = results_record(manifest, conditioned, fits, metrics, drift, offset_splits)

    # Start writing files now that all data is gathered.
    files = {f"site/{k}": v for k, v in site.items()}
    files[PDF_NAME] = pdf
    files[RESULTS_NAME] = json_bytes(results)
    write_dossier(out_dir, files)
    return BuildSummary(out_dir, len(files), len(fits), len(metrics))


def nominal_load_n(manifest: Manifest) -> float:
    """Fz0: the manifest's choice, else the median of all nominal load set-points."""
    if manifest.fit.nominal_load_n:
        return manifest.fit.nominal_load_n
    return float(statistics.median(load for r in manifest.runs for load in r.load_setpoints_n))


def fit_specimens(points: list[OperatingPoint], manifest: Manifest, fz0_n: float) -> list[LateralFit]:
    """Fit one lateral model per specimen and pressure, on the zero-camber forward slip-angle points."""
    groups: dict[tuple[str, float], list[OperatingPoint]] = {}
    for p in points:
        if p.camber_deg == 0.0 and p.sweep == "slip_angle" and p.rolling_direction == "forward":
            groups.setdefault((p.specimen, p.pressure_kpa), []).append(p)
    fits = []
    for s in manifest.specimens:
        for (sid, _), pts in sorted(groups.items()):
            if sid == s.id:
                fits.append(fit_lateral(pts, manifest.fit, fz0_n))
    return fits


def _quality_figures(c: ConditionedRun, fz0_n: float, style):
    figs = [time_history_figure(c, style)]
    lateral = [p for p in c.points if p.rising is not None and p.falling is not None]
    if lateral:
        nearest = min(lateral, key=lambda p: (abs(p.load_n - fz0_n), p.camber_deg != 0.0))
        figs.append(hysteresis_figure(nearest, style))
    return figs


def _points_of(fit: LateralFit, points: list[OperatingPoint]) -> list[OperatingPoint]:
    keys = set(fit.source_points)
    return [p for p in points if p.key in keys]


def _fitted_loads(fit: LateralFit, points: list[OperatingPoint]) -> list[float]:
    return sorted({p.load_n for p in _points_of(fit, points)})


def _dropped_text(dropped: dict[str, int]) -> str:
    return ", ".join(f"{v} {k}" for k, v in dropped.items() if v) or "none"
