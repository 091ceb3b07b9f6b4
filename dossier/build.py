"""The build, as a recipe: gather everything first, then write.

load project → ingest → condition → drift → offsets → fit and metrics → figures → render site →
render the PDF volumes (annexes, then the report that attaches them) → write.
Each step is one call into its own module; only ``load_manifest``/``read_run`` read and only
``write_dossier`` writes. Every stage's results are cached by content (:mod:`dossier.cache`), and
the fits, metrics, figures and volumes are shared with worker processes (:mod:`dossier.workers`).
"""

from __future__ import annotations

import os
import statistics
from dataclasses import dataclass
from pathlib import Path

from .condition import UNUSABLE, ConditionedRun, OperatingPoint, condition_run
from .drift import DriftEstimate, correct_points, estimate_drift
from .errors import StageError
from .fit import ChannelFit, fit_channel, leave_one_load_out
from .archive import ATTACHED_MANIFEST, FONTS_NAME, INPUTS
from .cache import CACHE_DIR, MISSING, Cache, digest, with_content_key
from .freshness import BUILD_KEY, build_key, output_is_current, theme_files
from .ingest import read_project_files, read_run
from .environment import ENVIRONMENT_NAME, environment_record
from .integrity import manifest_bytes, with_manifest, sha256
from .provenance import Evidence, provenance_bytes, provenance_record
from .manifest import FitSettings, Manifest, MetricSettings, load_manifest
from .acceptance import verdicts as judge_targets
from .comparison import compare, recommend
from .metrics import METRICS, Models, MetricValue, metric_values, single_metric, specimen_metrics
from .vehicle import AxleFitment, balance
from .workers import WorkerPool
from .offsets import split_offsets
from .output import json_bytes, refuse_sealed, write_dossier
from .narrative import read_narrative_texts
from .render import (ANNEXES, REPORT, make_context, make_environment, pdf_job, render_pdf,
                     render_site, with_narrative)
from .results import coefficient_files, results_record
from .sidewall import parse_size
from .theme import load_theme

RESULTS_NAME = "results.json"
PROVENANCE_NAME = "provenance.json"


@dataclass(frozen=True)
class SpecimenModel:
    """The fitted channels of one specimen (None where the data had none)."""

    specimen: str
    fy: ChannelFit | None
    mz: ChannelFit | None
    fx: ChannelFit | None

    @property
    def channels(self) -> list[ChannelFit]:
        return [f for f in (self.fy, self.mz, self.fx) if f is not None]


@dataclass(frozen=True)
class BuildSummary:
    out_dir: Path
    n_files: int
    n_fits: int
    n_metrics: int
    reused: bool = False  # nothing changed: the output was left as it was
    cache_hits: int = 0
    cache_misses: int = 0


def check(project_dir: Path, cache: Cache | None = None,
          project_files: dict[str, bytes] | None = None) -> tuple[Manifest, list[ConditionedRun]]:
    """Validate the manifest and read and condition every rig file, without fitting or writing.

    With a `cache` and the `project_files` as read, a run whose file bytes, run entry, conditioning
    settings and rated load are unchanged is taken from the cache instead of read again.
    """
    manifest = load_manifest(project_dir)
    cache = cache or Cache(None)

    def conditioned_run(spec) -> ConditionedRun:
        rated = rated_load_n(manifest.specimen(spec.specimen))
        raw = (project_files or {}).get(spec.file)
        if raw is None:
            return condition_run(read_run(manifest.project_dir, spec), manifest.conditioning, rated)
        key = digest("conditioned", spec, manifest.conditioning, rated, raw)
        run = cache.get_or_compute(key, lambda: condition_run(read_run(manifest.project_dir, spec),
                                                             manifest.conditioning, rated))
        return with_content_key(run, key)

    conditioned = [conditioned_run(spec) for spec in manifest.runs]
    for c in conditioned:
        if c.account.verdict == UNUSABLE:
            a = c.account
            raise StageError(f"{a.source_file}: unusable after conditioning: {'; '.join(a.verdict_reasons)} "
                             f"(dropped: {_dropped_text(a.dropped)}); check runs[{a.run_index}].load_setpoints "
                             "and the [conditioning] settings")
    return manifest, conditioned


def build(project_dir: Path, out_dir: Path | None = None, theme_name: str = "default", *,
          use_cache: bool = True, workers: int | None = None) -> BuildSummary:
    """Build the dossier of the project in `project_dir` into `out_dir`.

    With `use_cache`, results of unchanged stages come from ``PROJECT/.dossier-cache`` and a
    rebuild whose every input, theme file and code file is unchanged leaves the output as it is.
    `workers` processes (this one included; default: one per CPU) share the fits, metrics,
    figures and PDF volumes; the output does not depend on their number.
    """
    manifest = load_manifest(project_dir)
    out_dir = Path(out_dir) if out_dir else manifest.project_dir / "dossier-out"
    refuse_sealed(out_dir)
    theme = load_theme(theme_name)
    project_files = read_project_files(manifest)
    theme_bytes = theme_files(theme)
    key = build_key(project_files, theme_bytes, theme_name)
    if use_cache and output_is_current(out_dir, key):
        return BuildSummary(out_dir, -1, -1, -1, reused=True)
    cache = Cache(manifest.project_dir / CACHE_DIR if use_cache else None)
    with WorkerPool(workers or os.cpu_count() or 1) as pool:
        if cache.folder is None or not cache.folder.is_dir():
            pool.warm_up()  # nothing cached: every stage has work for the workers
        return _build(manifest, project_dir, out_dir, theme, theme_name, theme_bytes, project_files, key, cache, pool)


def _build(manifest, project_dir, out_dir, theme, theme_name, theme_bytes, project_files, key, cache,
           pool) -> BuildSummary:
    """The recipe proper: every stage in order, then one write."""
    manifest, conditioned = check(project_dir, cache, project_files)
    measured = [p for c in conditioned for p in c.points]
    fz0_n = nominal_load_n(manifest)
    drift: DriftEstimate | None = None
    if manifest.drift:
        drift = estimate_drift(measured, manifest.drift.control, fz0_n)
    points = measured
    if drift and manifest.drift.correct:
        points, drift = correct_points(measured, drift)
    offset_splits = split_offsets(points)
    p0_kpa = nominal_pressure_kpa(manifest)
    models, metrics = fit_specimens(points, manifest, fz0_n, p0_kpa, cache=cache, pool=pool)
    judged = judge_targets(manifest.targets, [s.id for s in manifest.specimens if s.role != "control"], metrics, p0_kpa)
    standings, recommendation = compare_candidates(manifest, metrics, fz0_n, drift, judged)
    fitments = fitment_matrix(manifest, models)

    style = theme.figure_style
    tasks = figure_tasks(models, points, conditioned, metrics, drift, standings, fitments, manifest, fz0_n, p0_kpa,
                         style)
    style_bytes = style.read_bytes() if style else b""
    rendered = cache.get_or_compute(digest("figures", [(place, name, args[:-1]) for place, name, args in tasks],
                                           style_bytes),
                                    lambda: run_figure_tasks(tasks, pool))
    specimen_figures, summary_figures, quality_figures, drift_figures, comparison_figures = place_figures(tasks, rendered)
    ctx = make_context(manifest, conditioned, models, metrics, specimen_figures, summary_figures, fz0_n,
                       quality_figures, drift, drift_figures, offset_splits,
                       judged=judged, standings=standings, recommendation=recommendation, fitments=fitments,
                       comparison_figures=comparison_figures)
    facts = ctx  # the context without the narrative: what the annexes are rendered from
    ctx = with_narrative(facts, read_narrative_texts(manifest))
    all_fits = [f for m in models for f in m.channels]
    results = results_record(manifest, conditioned, all_fits, metrics, drift, offset_splits, judged, standings,
                             recommendation, fitments)
    evidence = Evidence(tuple(conditioned), tuple(points), tuple(models), tuple(metrics), drift,
                        tuple(offset_splits), tuple(judged), tuple(standings), recommendation, tuple(fitments),
                        {name: sha256(data) for name, data in project_files.items()})
    provenance = provenance_bytes(provenance_record(manifest, evidence))
    data_files = {RESULTS_NAME: json_bytes(results), PROVENANCE_NAME: provenance,
                  ENVIRONMENT_NAME: json_bytes(environment_record(theme_name)),
                  **coefficient_files(manifest, conditioned, models), **conditioned_data_files(conditioned)}
    env = make_environment(theme, manifest.project_dir / "templates",
                           cache.folder / "templates" if cache.folder else None)
    site = render_site(ctx, env, theme, data_files)
    templates = {**theme_bytes, **{k: v for k, v in project_files.items() if k.startswith("templates/")}}
    annexes = render_volumes(ANNEXES, facts, env, site, templates, cache, pool)
    archived = {f"{INPUTS}/{k}": v for k, v in project_files.items()}
    # The report carries every other file of the dossier but the site, and the integrity manifest
    # of all of them, so that the PDF alone can be checked and rebuilt from.
    carried = {**data_files, **annexes, **archived}
    others = {**{f"site/{k}": v for k, v in site.items()}, **carried}
    report = render_volumes((REPORT,), ctx, env, site, templates, cache, pool,
                            {**carried, ATTACHED_MANIFEST: manifest_bytes(others)})

    # Start writing files now that all data is gathered.
    files = {**others, **report}
    files[FONTS_NAME] = json_bytes(embedded_font_record({**annexes, **report}))
    files = with_manifest(files)
    write_dossier(out_dir, files, extra={BUILD_KEY: (key + "\n").encode()})
    cache.prune()
    return BuildSummary(out_dir, len(files), len(all_fits), len(metrics), cache_hits=cache.hits,
                        cache_misses=cache.misses)


def embedded_font_record(pdfs: dict[str, bytes]) -> dict:
    """The fonts each PDF volume embedded (name, version, SHA-256 of the embedded program)."""
    from dataclasses import asdict

    from .pdf_archive import embedded_fonts

    return {name: [asdict(f) for f in embedded_fonts(data)] for name, data in sorted(pdfs.items())}


def nominal_load_n(manifest: Manifest) -> float:
    """Fz0: the manifest's choice, else the median of all nominal load set-points."""
    if manifest.fit.nominal_load_n:
        return manifest.fit.nominal_load_n
    return float(statistics.median(load for r in manifest.runs for load in r.load_setpoints_n))


def rated_load_n(specimen) -> float | None:
    """The rated load per tire: the manifest's value, else from the load index of the size."""
    if specimen.rated_load_n:
        return specimen.rated_load_n
    size = parse_size(specimen.size)
    return None if size is None else size.rated_load_n


def metric_loads(model: SpecimenModel, points: list[OperatingPoint], extra_loads_n) -> list[float]:
    """The loads a specimen's metrics are given at: every load measured at the nominal condition,
    the nominal load and any asked-for load (`extra_loads_n`: the manifest's metric and target loads)."""
    ref = model.fy or model.fx
    return sorted(set(_fitted_loads(ref, points)) | {ref.fz0_n} | set(extra_loads_n))


def _metrics_job(job) -> list[MetricValue]:
    """One specimen's metrics at one load (`load` None: the per-specimen metrics), from its model
    and its points at that load (for the model-free cross-check)."""
    model, own, settings, load = job
    ms = Models(model.specimen, model.fy, model.mz, model.fx)
    if load is None:
        return specimen_metrics(ms)
    return metric_values(ms, load, list(own), settings.crosscheck_threshold_pct)


def conditioned_data_files(conditioned: list[ConditionedRun]) -> dict[str, bytes]:
    """The steady-state curves of every run as CSV (internal units, ISO 8855), one file per run."""
    files = {}
    for c in conditioned:
        a = c.account
        lines = [f"# conditioned steady-state curves of {a.source_file} (sha256 {a.sha256}); "
                 "units N, N·m, deg, kPa; axes ISO 8855; slip is deg (slip angle) or 1 (slip ratio)",
                 "load_setpoint_n,camber_deg,pressure_kpa,sweep,slip,fz_n,fy_n,mz_nm,fx_n,samples"]
        for p in c.points:
            cv = p.curve
            for i in range(cv.n_points):
                def col(arr):
                    return "" if arr is None else repr(float(arr[i]))
                lines.append(",".join([repr(p.load_n), repr(p.camber_deg), repr(p.pressure_kpa), p.sweep,
                                       repr(float(cv.x[i])), repr(float(cv.fz_n[i])), col(cv.fy_n), col(cv.mz_nm),
                                       col(cv.fx_n), str(int(cv.samples_per_bin[i]))]))
        files[f"conditioned/run-{a.run_index:02d}.csv"] = ("\n".join(lines) + "\n").encode("utf-8")
    return files


def compare_candidates(manifest: Manifest, metrics, fz0_n, drift, judged):
    """Every candidate against the baseline at the nominal load, and the recommended candidate."""
    base = next((s.id for s in manifest.specimens if s.role == "baseline"), None)
    candidates = [s.id for s in manifest.specimens if s.role == "candidate"]
    if base is None or not candidates:
        return [], (None, "no baseline and candidates to compare")
    standings = compare(base, candidates, metrics, fz0_n, drift, judged)
    return standings, recommend(standings)


def fitment_matrix(manifest: Manifest, models: list[SpecimenModel]) -> list:
    """Understeer gradient of every front × rear pairing of the fitted specimens (no controls)."""
    v = manifest.vehicle
    if v is None:
        return []
    by_id = {m.specimen: Models(m.specimen, m.fy, m.mz, m.fx) for m in models if m.fy is not None}
    ids = [s.id for s in manifest.specimens if s.role != "control" and s.id in by_id]

    def stiffness(sid, load):
        mv = single_metric(by_id[sid], "cornering_stiffness", load)
        return mv.value, mv.stderr

    def extrapolated(sid, load):
        lo, hi = by_id[sid].fy.load_range_n
        return not (0.98 * lo <= load <= 1.02 * hi)

    return [balance(AxleFitment(f, v.front.tires, v.front.kind), AxleFitment(r, v.rear.tires, v.rear.kind),
                    v.front_axle_load_n, v.rear_axle_load_n, v.wheelbase_m, stiffness, extrapolated)
            for f in ids for r in ids]


def nominal_pressure_kpa(manifest: Manifest) -> float:
    """p0: the manifest's choice, else the most common run pressure (to 1 kPa; ties: the lowest)."""
    if manifest.fit.nominal_pressure_kpa:
        return manifest.fit.nominal_pressure_kpa
    rounded = [round(r.pressure_kpa) for r in manifest.runs]
    best = max(sorted(set(rounded)), key=rounded.count)
    return float(next(r.pressure_kpa for r in manifest.runs if round(r.pressure_kpa) == best))


def unloaded_radius_m(manifest: Manifest, specimen_id: str) -> float:
    """R0 of a specimen: the manifest's value, else from its size designation."""
    s = manifest.specimen(specimen_id)
    if s.unloaded_radius_m:
        return s.unloaded_radius_m
    size = parse_size(s.size)
    if size is None:
        i = manifest.specimens.index(s)
        raise StageError(f"specimens[{i}].size: cannot read a size from {s.size!r} to get the unloaded radius "
                         f"for the aligning-moment model; set specimens[{i}].unloaded_radius_m")
    return size.unloaded_radius_m


@dataclass(frozen=True)
class SpecimenJob:
    """What one specimen's fits and metrics are made from (its cache key digests all of it)."""

    specimen: str
    points: tuple[OperatingPoint, ...]  # all of the specimen's points; the fits use the forward runs
    fit_settings: FitSettings
    fz0_n: float
    p0_kpa: float
    r0_m: float | None  # unloaded radius, for the aligning moment
    metric_settings: MetricSettings
    extra_loads_n: tuple[float, ...]  # asked-for metric and target loads


def fit_specimens(points: list[OperatingPoint], manifest: Manifest, fz0_n: float, p0_kpa: float | None = None,
                  cache: Cache | None = None, pool: WorkerPool | None = None
                  ) -> tuple[list[SpecimenModel], list[MetricValue]]:
    """Fit Fy0, then Mz0 (with the fitted Fy0), and Fx0 for every specimen from its forward runs,
    and evaluate its metrics.

    Each specimen is one job keyed by its own data and settings: a change to one run refits only
    that run's specimen. Jobs missing from the cache run in the pool's workers.
    """
    p0 = p0_kpa if p0_kpa is not None else nominal_pressure_kpa(manifest)
    cache = cache or Cache(None)
    extra_loads = tuple(sorted(set(manifest.metrics.loads_n) | {t.load_n for t in manifest.targets}))
    jobs = []
    for s in manifest.specimens:
        own = tuple(p for p in points if p.specimen == s.id)
        has_mz = any(p.sweep == "slip_angle" and p.curve.mz_nm is not None for p in own)
        r0 = unloaded_radius_m(manifest, s.id) if has_mz else None
        jobs.append(SpecimenJob(s.id, own, manifest.fit, fz0_n, p0, r0, manifest.metrics, extra_loads))
    keys = [digest("specimen", job) for job in jobs]
    results = {key: cache.get(key) for key in keys}
    todo = [(key, job) for key, job in zip(keys, jobs) if results[key] is MISSING]
    pool = pool or WorkerPool(1)
    if todo:
        pool.warm_up()  # new fits mean new figures and PDF volumes: the workers will be needed
    # Two rounds of jobs, so that the processes share the work evenly: the fits of each specimen,
    # then its metrics, one job per load.
    models = pool.map(_fit_one_specimen, [job for _, job in todo],
                      cost=lambda job: sum(p.curve.n_points for p in job.points))
    metric_jobs = [(key, (model, tuple(p for p in job.points if p.load_n == load), job.metric_settings, load))
                   for (key, job), model in zip(todo, models) if model is not None
                   for load in [*metric_loads(model, job.points, job.extra_loads_n), None]]
    values: dict[str, list[MetricValue]] = {}
    for (key, _), found in zip(metric_jobs, pool.map(_metrics_job, [mj for _, mj in metric_jobs])):
        values.setdefault(key, []).extend(found)
    for (key, _), model in zip(todo, models):
        results[key] = None if model is None else (model, values[key])
        cache.put(key, results[key])
    for key in keys:
        if results[key] is not None:  # each fit is fully determined by its job's key
            for fit in results[key][0].channels:
                with_content_key(fit, f"{key}:{fit.channel}")
    found = [results[k] for k in keys if results[k] is not None]
    return [model for model, _ in found], [m for _, vs in found for m in vs]


def _fit_one_specimen(job: SpecimenJob) -> SpecimenModel | None:
    settings, fz0_n, p0 = job.fit_settings, job.fz0_n, job.p0_kpa
    forward = [p for p in job.points if p.rolling_direction == "forward"]
    lateral = [p for p in forward if p.sweep == "slip_angle" and p.curve.fy_n is not None]
    longitudinal = [p for p in forward if p.sweep == "slip_ratio" and p.curve.fx_n is not None]
    fy = mz = fx = None
    if lateral:
        fy = _with_load_out(fit_channel(lateral, "fy", settings, fz0_n, p0), lateral, settings)
        with_mz = [p for p in lateral if p.curve.mz_nm is not None]
        if with_mz:
            mz = _with_load_out(fit_channel(with_mz, "mz", settings, fz0_n, p0, job.r0_m, fy.values), with_mz,
                                settings)
    if longitudinal:
        fx = _with_load_out(fit_channel(longitudinal, "fx", settings, fz0_n, p0), longitudinal, settings)
    return SpecimenModel(job.specimen, fy, mz, fx) if (fy or fx) else None


def render_volumes(volumes, ctx, env, site: dict[str, bytes], templates: dict[str, bytes], cache: Cache,
                   pool: WorkerPool, attachments: dict[str, bytes] | None = None) -> dict[str, bytes]:
    """Render PDF volumes from `ctx`; file name -> bytes.

    Each volume is cached under everything it is made from: the volume, the context (whose
    figures carry their bytes), the template and stylesheet files and the attachments. Only
    volumes missing from the cache have their pages rendered, in the pool's workers.
    """
    made_from = digest("pdf", ctx, templates, attachments or {})
    keys = {v.filename: digest("pdf", v, made_from) for v in volumes}
    out = {name: cache.get(key) for name, key in keys.items()}
    todo = [pdf_job(ctx, env, v, site, attachments) for v in volumes if out[v.filename] is MISSING]
    for job, pdf in zip(todo, pool.map(render_pdf, todo, cost=lambda job: len(job.html))):
        cache.put(keys[job.volume.filename], pdf)
        out[job.volume.filename] = pdf
    return out


def _with_load_out(fit: ChannelFit, points, settings) -> ChannelFit:
    return leave_one_load_out(fit, points, settings) if settings.leave_one_load_out else fit


def figure_tasks(models, points, conditioned, metrics, drift, standings, fitments, manifest, fz0_n, p0_kpa, style):
    """Every figure of the dossier as (place, function name, arguments): independent jobs."""
    tasks = []
    for m in models:
        for fit in m.channels:
            own = _points_of(fit, points)
            tasks.append((("specimen", m.specimen), "channel_figure", (fit, own, style)))
            other = [p for p in own if not p.at_nominal(fit.p0_kpa)]
            if other:
                tasks.append((("specimen", m.specimen), "conditions_figure", (fit, other, style)))
            tasks.append((("specimen", m.specimen), "residual_figure", (fit, style)))
    for name in ("cornering_coefficient", "peak_lateral_friction", "pneumatic_trail"):
        if any(m.metric == name for m in metrics):
            tasks.append((("summary",), "load_trend_figure",
                          (name, METRICS[name].label, METRICS[name].unit, [m for m in metrics if m.metric == name], style)))
    for c in conditioned:
        tasks.append((("quality", c.account.run_index), "time_history_figure", (c, style)))
        lateral = [p for p in c.points if p.rising is not None and p.falling is not None]
        if lateral:
            nearest = min(lateral, key=lambda p: (abs(p.load_n - fz0_n), p.camber_deg != 0.0))
            tasks.append((("quality", c.account.run_index), "hysteresis_figure", (nearest, style)))
    if drift:
        tasks.append((("drift",), "drift_figure", (drift, style)))
    if models:
        tasks.append((("comparison", "comparison"), "overlay_figure", (models, points, "fy", fz0_n, p0_kpa, style)))
        if any(m.mz for m in models):
            tasks.append((("comparison", "comparison"), "overlay_figure", (models, points, "mz", fz0_n, p0_kpa, style)))
            tasks.append((("comparison", "comparison"), "gough_figure", (models, fz0_n, style)))
    if standings:
        tasks.append((("comparison", "comparison"), "difference_figure", (standings, style)))
    if fitments and manifest.vehicle:
        tasks.append((("comparison", "vehicle"), "yaw_gain_figure", (fitments, manifest.vehicle, style)))
    return tasks


def _render_task(task):
    from . import figures

    _, name, args = task
    return getattr(figures, name)(*args)


# Relative drawing time of each kind of figure (measured on the demo), to start the dearest first.
FIGURE_COST = {"time_history_figure": 1.5, "conditions_figure": 1.4, "residual_figure": 1.0, "channel_figure": 0.9}


def run_figure_tasks(tasks, pool: WorkerPool) -> list:
    """Render every figure in the pool's workers (the SVG bytes do not depend on their number)."""
    return pool.map(_render_task, tasks, cost=lambda task: FIGURE_COST.get(task[1], 1.0))


def place_figures(tasks, rendered):
    specimen, summary, quality, drift, comparison = {}, [], {}, [], {"comparison": [], "vehicle": []}
    for (place, _, _), fig in zip(tasks, rendered):
        if place[0] == "specimen":
            specimen.setdefault(place[1], []).append(fig)
        elif place[0] == "summary":
            summary.append(fig)
        elif place[0] == "quality":
            quality.setdefault(place[1], []).append(fig)
        elif place[0] == "drift":
            drift.append(fig)
        else:
            comparison[place[1]].append(fig)
    return specimen, summary, quality, drift, comparison


def _points_of(fit: ChannelFit, points: list[OperatingPoint]) -> list[OperatingPoint]:
    keys = set(fit.source_points)
    return [p for p in points if p.key in keys]


def _fitted_loads(fit: ChannelFit, points: list[OperatingPoint]) -> list[float]:
    """Loads measured at the nominal condition (zero camber, nominal pressure)."""
    return sorted({p.load_n for p in _points_of(fit, points)
                   if p.at_nominal(fit.p0_kpa)})


def _dropped_text(dropped: dict[str, int]) -> str:
    return ", ".join(f"{v} {k}" for k, v in dropped.items() if v) or "none"
