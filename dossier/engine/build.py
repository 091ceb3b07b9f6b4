"""The build, as a recipe: gather everything first, then write.

load the project → condition → drift → offsets → fit and metrics → judge and compare → vehicle fitments →
figures → context and narrative → results and provenance → site → PDF volumes (annexes, then the
report that attaches them) → integrity manifest → write.

:func:`assemble` is the pure core: it returns every file of the dossier as bytes and writes
nothing (its cache is a memo of results it could recompute). :func:`build` is the loader, that
core and the atomic writer. Every stage's results are cached by content (:mod:`.cache`), and the
fits, metrics, figures and volumes are shared with worker processes (:mod:`.workers`).
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

from ..common.errors import StageError
from ..conditioning.drift import DriftEstimate, correct_points, estimate_drifts
from ..conditioning.offsets import split_offsets
from ..conditioning.steady_state import UNUSABLE, ConditionedRun, condition_run
from ..document.context import make_context, with_narrative
from ..document.narrative import narrative_texts
from ..document.pages import make_environment
from ..document.pdf import pdf_job, render_pdf
from ..document.site import render_site
from ..document.theme import Theme, load_theme
from ..document.volumes import ANNEXES, REPORT
from ..evaluation.acceptance import verdicts as judge_targets
from ..evaluation.comparison import compare_candidates
from ..evaluation.vehicle import VehicleResults, evaluate_vehicle
from ..ingest.rig_table import parse_run
from ..metrics.budget import BudgetInputs, attach_budgets
from ..metrics.measured import measured_values, moment_values
from ..project.conditions import nominal_load_n, nominal_pressure_kpa, rated_load_n, unloaded_radius_m
from ..project.load import Project, load_project
from ..publish.environment import embedded_font_record, environment_record
from ..publish.integrity import manifest_bytes, with_manifest
from ..publish.layout import (
    ATTACHED_MANIFEST,
    BUILD_KEY,
    ENVIRONMENT_NAME,
    FONTS_NAME,
    INPUTS,
    PROVENANCE_NAME,
    RESULTS_NAME,
)
from ..publish.provenance import Evidence, provenance_bytes, provenance_record
from ..publish.results import coefficient_files, conditioned_data_files, results_record
from ..publish.writer import json_bytes, refuse_foreign, write_dossier
from .cache import CACHE_DIR, MISSING, Cache, digest, digest_each, with_content_key
from .figure_jobs import draw_figures, figure_tasks, place_figures
from .freshness import build_key, output_is_current
from .specimens import fit_specimens, split_nominal
from .workers import WorkerPool


@dataclass(frozen=True)
class Dossier:
    """Every file of a dossier (relative path -> bytes), as :func:`assemble` made them."""

    files: dict[str, bytes]
    n_fits: int
    n_metrics: int


@dataclass(frozen=True)
class BuildSummary:
    out_dir: Path
    n_files: int
    n_fits: int
    n_metrics: int
    reused: bool = False  # nothing changed: the output was left as it was
    cache_hits: int = 0
    cache_misses: int = 0
    computed: tuple[str, ...] = ()  # what was computed, not taken from the cache ("run 0", "figure …", "pdf …")


def check(project: Project, cache: Cache | None = None) -> list[ConditionedRun]:
    """Parse and condition every rig file of the loaded `project`, without fitting or writing.

    With a `cache`, a run whose file bytes, run entry, conditioning settings and rated load are
    unchanged is taken from the cache instead of parsed again.
    """
    manifest = project.manifest
    cache = cache or Cache(None)

    def conditioned_run(spec) -> ConditionedRun:
        rated = rated_load_n(manifest.specimen(spec.specimen))
        raw, sha = project.files[spec.file], project.sha256[spec.file]
        key = digest("conditioned", spec, manifest.conditioning, rated, sha)
        run = cache.get_or_compute(
            key, lambda: condition_run(parse_run(raw, spec, sha), manifest.conditioning, rated), f"run {spec.index}"
        )
        return with_content_key(run, key)

    conditioned = [conditioned_run(spec) for spec in manifest.runs]
    for c in conditioned:
        if c.account.verdict == UNUSABLE:
            a = c.account
            raise StageError(
                f"{a.source_file}: unusable after conditioning: {'; '.join(a.verdict_reasons)} "
                f"(dropped: {_dropped_text(a.dropped)}); check runs[{a.run_index}].load_setpoints "
                "and the [conditioning] settings"
            )
    return conditioned


def build(
    project: Path | Project,
    out_dir: Path | None = None,
    theme_name: str = "default",
    *,
    use_cache: bool = True,
    workers: int | None = None,
) -> BuildSummary:
    """Build the dossier of `project` (a folder with ``dossier.toml``, or a loaded project) into `out_dir`.

    With `use_cache`, results of unchanged stages come from ``PROJECT/.dossier-cache`` and a
    rebuild whose every input, theme file and code file is unchanged leaves the output as it is.
    `workers` processes (this one included; default: one per CPU) share the fits, metrics,
    figures and PDF volumes; the output does not depend on their number.
    """
    if not isinstance(project, Project):
        project = load_project(project)
    out_dir = Path(out_dir) if out_dir else project.folder / "dossier-out"
    refuse_foreign(out_dir)  # before any work: a folder that is not ours is never replaced
    theme = load_theme(theme_name)
    key = build_key(project.sha256, theme.files, theme_name)
    if use_cache and output_is_current(out_dir, key):
        return BuildSummary(out_dir, -1, -1, -1, reused=True)
    cache = Cache(project.folder / CACHE_DIR if use_cache else None)
    with WorkerPool(workers or os.cpu_count() or 1) as pool:
        if cache.folder is None or not cache.folder.is_dir():
            pool.warm_up()  # nothing cached: every stage has work for the workers
        dossier = assemble(project, theme, cache=cache, pool=pool)
    # Start writing files now that all data is gathered.
    write_dossier(out_dir, dossier.files, extra={BUILD_KEY: (key + "\n").encode()})
    cache.prune()
    return BuildSummary(
        out_dir,
        len(dossier.files),
        dossier.n_fits,
        dossier.n_metrics,
        cache_hits=cache.hits,
        cache_misses=cache.misses,
        computed=tuple(cache.computed),
    )


@dataclass(frozen=True)
class Evaluation:
    """Everything the dossier says, before it is drawn and written: the stages from conditioning to
    the fitment matrix."""

    conditioned: tuple[ConditionedRun, ...]
    points: tuple  # operating points after drift correction
    fz0_n: float
    p0_kpa: float
    drift: DriftEstimate | None  # the first rig's line (results.json and the comparison page quote it)
    drifts: tuple[DriftEstimate, ...]  # every rig's line
    offset_splits: tuple
    models: tuple
    metrics: tuple  # at each specimen's nominal camber and pressure
    condition_metrics: tuple  # at every other camber × pressure tested, and the targets' conditions
    judged: tuple
    standings: tuple
    recommendation: tuple
    vehicle: VehicleResults  # every declared fitment and replacement
    combined_points: tuple = ()  # the combined-slip operating points, drift-corrected like the rest


def _radius_or_none(manifest, specimen_id: str) -> float | None:
    """The unloaded radius of a specimen, or None where neither the manifest nor its size gives one."""
    try:
        return unloaded_radius_m(manifest, specimen_id)
    except StageError:
        return None


def evaluate(project: Project, *, cache: Cache | None = None, pool: WorkerPool | None = None) -> Evaluation:
    """Condition, correct drift, fit, evaluate with uncertainty budgets, judge and compare: no
    figures, no documents, nothing written."""
    manifest = project.manifest
    cache = cache or Cache(None)
    pool = pool or WorkerPool(1)
    conditioned = check(project, cache)
    every_point = [p for c in conditioned for p in c.points]
    measured = [p for p in every_point if not p.combined]  # pure slip: every stage but the combined-slip fits
    detected = [float(v) for c in conditioned if c.account.levels_detected for v in c.account.load_levels_n]
    fz0_n = nominal_load_n(manifest, detected)
    stations = {r.index: r.station for r in manifest.runs}
    drifts = estimate_drifts(measured, manifest.drift.control, fz0_n, stations) if manifest.drift else ()
    if manifest.drift and manifest.drift.correct:
        applied = []
        for line in drifts:  # each rig's line corrects that rig's runs only, combined slip included
            every_point, line = correct_points(every_point, line, stations)
            applied.append(line)
        drifts = tuple(applied)
    points = [p for p in every_point if not p.combined]
    combined = [p for p in every_point if p.combined]
    drift: DriftEstimate | None = (
        drifts[0] if drifts else None
    )  # results.json and the comparison page quote the first line; the data-quality page shows every one
    offset_splits = split_offsets(points)
    p0_kpa = nominal_pressure_kpa(manifest)
    # each at its own condition; the combined-slip fits on top of the pure-slip ones
    models, every = fit_specimens(points + combined, manifest, fz0_n, cache=cache, pool=pool)
    corrected = bool(manifest.drift and manifest.drift.correct)
    every = attach_budgets(
        every, points, BudgetInputs(stations, {d.station: d for d in drifts}, corrected, manifest.lab)
    )
    fitted = {m.specimen for m in models}
    every += [v for v in measured_values(points) if v.specimen in fitted]  # relaxation lengths
    radius = {s.id: _radius_or_none(manifest, s.id) for s in manifest.specimens}
    inputs = BudgetInputs(stations, {d.station: d for d in drifts}, corrected, manifest.lab)
    every += [v for v in moment_values(points, radius, inputs) if v.specimen in fitted]  # Mx, My
    metrics, condition_metrics = split_nominal(models, every)
    own_pressure = {m.specimen: m.channels[0].pressure_kpa for m in models}
    judged = judge_targets(
        manifest.targets, [s.id for s in manifest.specimens if s.role != "control"], every, own_pressure
    )
    standings, recommendation = compare_candidates(manifest, metrics, fz0_n, drift, judged)
    vehicle = evaluate_vehicle(manifest, models)

    return Evaluation(
        tuple(conditioned),
        tuple(points),
        fz0_n,
        p0_kpa,
        drift,
        drifts,
        tuple(offset_splits),
        tuple(models),
        tuple(metrics),
        tuple(condition_metrics),
        tuple(judged),
        tuple(standings),
        recommendation,
        vehicle,
        tuple(combined),
    )


def assemble(project: Project, theme: Theme, *, cache: Cache | None = None, pool: WorkerPool | None = None) -> Dossier:
    """Every file of the dossier of `project` with `theme`, as bytes; nothing is written."""
    manifest = project.manifest
    cache = cache or Cache(None)
    pool = pool or WorkerPool(1)
    e = evaluate(project, cache=cache, pool=pool)
    conditioned, points, fz0_n, p0_kpa, drift = list(e.conditioned), list(e.points), e.fz0_n, e.p0_kpa, e.drift
    offset_splits, models, metrics = list(e.offset_splits), list(e.models), list(e.metrics)
    judged, standings, recommendation, vehicle = list(e.judged), list(e.standings), e.recommendation, e.vehicle

    style = theme.figure_style
    tasks = figure_tasks(
        models,
        points + list(e.combined_points),
        conditioned,
        metrics,
        e.drifts,
        standings,
        vehicle,
        manifest,
        fz0_n,
        p0_kpa,
        style,
    )
    rendered = draw_figures(tasks, style, cache, pool)
    specimen_figures, summary_figures, quality_figures, drift_figures, comparison_figures = place_figures(
        tasks, rendered
    )
    facts = make_context(
        manifest,
        conditioned,
        models,
        metrics,
        specimen_figures,
        summary_figures,
        fz0_n,
        quality_figures,
        drift,
        drift_figures,
        offset_splits,
        judged=judged,
        standings=standings,
        recommendation=recommendation,
        vehicle=vehicle,
        comparison_figures=comparison_figures,
        condition_metrics=e.condition_metrics,
        drifts=e.drifts,
    )  # without the narrative: what the annexes show
    ctx = with_narrative(facts, narrative_texts(manifest.narrative, project.files))
    all_fits = [f for m in models for f in m.channels]
    results = results_record(
        manifest,
        conditioned,
        all_fits,
        metrics,
        drift,
        offset_splits,
        judged,
        standings,
        recommendation,
        vehicle,
        list(e.condition_metrics),
    )
    evidence = Evidence(
        tuple(conditioned),
        tuple(points),
        tuple(models),
        tuple(metrics),
        drift,
        tuple(offset_splits),
        tuple(judged),
        tuple(standings),
        recommendation,
        vehicle,
        dict(project.sha256),
        tuple(e.condition_metrics),
    )
    provenance = provenance_bytes(provenance_record(manifest, evidence))
    data_files = {
        RESULTS_NAME: json_bytes(results),
        PROVENANCE_NAME: provenance,
        ENVIRONMENT_NAME: json_bytes(environment_record(theme.name)),
        **coefficient_files(manifest, conditioned, models),
        **conditioned_data_files(conditioned),
    }
    env = make_environment(theme, project.templates, cache.compiled_templates())
    site = render_site(ctx, env, theme, data_files)
    annexes = render_volumes(ANNEXES, facts, env, site, cache, pool)
    archived = {f"{INPUTS}/{k}": v for k, v in project.files.items()}
    # The report carries every other file of the dossier but the site, and the integrity manifest
    # of what it carries, so that the PDF alone can be checked and rebuilt from. The site is a
    # rendering of the same content for the screen: the folder's manifest and its seal cover it,
    # and the report does not depend on it (a screen-only change re-renders no PDF).
    carried = {**data_files, **annexes, **archived}
    report = render_volumes(
        (REPORT,), ctx, env, site, cache, pool, {**carried, ATTACHED_MANIFEST: manifest_bytes(carried)}
    )
    files = {**{f"site/{k}": v for k, v in site.items()}, **carried, **report}
    files[FONTS_NAME] = json_bytes(embedded_font_record({**annexes, **report}))
    return Dossier(with_manifest(files), len(all_fits), len(metrics))


def render_volumes(
    volumes,
    ctx,
    env,
    site: dict[str, bytes],
    cache: Cache,
    pool: WorkerPool,
    attachments: dict[str, bytes] | None = None,
) -> dict[str, bytes]:
    """Render PDF volumes from `ctx`; file name -> bytes.

    Each volume is cached under exactly what WeasyPrint is given for it (its :class:`PdfJob`: the
    page's HTML, the stylesheets and figures that page refers to, its attachments and metadata), so
    a change reaches a volume only through something that volume shows, uses or carries: an edit of
    a template that a volume does not include, or of the screen stylesheet, renders no PDF. Only
    volumes missing from the cache have their pages laid out, in the pool's workers.
    """
    jobs = [pdf_job(ctx, env, v, site, attachments) for v in volumes]
    keys = digest_each(jobs, "pdf")
    out = {job.volume.filename: cache.get(key) for job, key in zip(jobs, keys)}
    todo = [(job, key) for job, key in zip(jobs, keys) if out[job.volume.filename] is MISSING]
    rendered = pool.map(render_pdf, [job for job, _ in todo], cost=lambda job: len(job.html))
    for (job, key), pdf in zip(todo, rendered):
        cache.put(key, pdf, f"pdf {job.volume.filename}")
        out[job.volume.filename] = pdf
    return out


def _dropped_text(dropped: dict[str, int]) -> str:
    return ", ".join(f"{v} {k}" for k, v in dropped.items() if v) or "none"
