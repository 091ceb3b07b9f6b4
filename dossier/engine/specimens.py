"""The fit-and-metrics stage of the build as jobs: one specimen's fits, then its metrics per load.

Each specimen is one job keyed by its own data and settings, so that a change to one run refits
only that run's specimen; jobs missing from the cache run in the pool's workers.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..conditioning.steady_state import OperatingPoint
from ..metrics.evaluate import MetricValue, metric_values, specimen_metrics
from ..model.fit import ChannelFit, SpecimenModel, fit_channel, leave_one_load_out
from ..project.conditions import specimen_pressure_kpa, unloaded_radius_m
from ..project.manifest import FitSettings, Manifest, MetricSettings
from .cache import MISSING, Cache, digest, with_content_key
from .workers import WorkerPool


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


def fit_specimens(
    points: list[OperatingPoint],
    manifest: Manifest,
    fz0_n: float,
    p0_kpa: float | None = None,
    cache: Cache | None = None,
    pool: WorkerPool | None = None,
) -> tuple[list[SpecimenModel], list[MetricValue]]:
    """Fit Fy0, then Mz0 (with the fitted Fy0), and Fx0 for every specimen from its forward runs,
    and evaluate its metrics.

    Each specimen is one job keyed by its own data and settings: a change to one run refits only
    that run's specimen. Jobs missing from the cache run in the pool's workers.
    """
    cache = cache or Cache(None)
    extra_loads = tuple(sorted(set(manifest.metrics.loads_n) | {t.load_n for t in manifest.targets}))
    jobs = []
    for s in manifest.specimens:
        own = tuple(p for p in points if p.specimen == s.id)
        has_mz = any(p.sweep == "slip_angle" and p.curve.mz_nm is not None for p in own)
        r0 = unloaded_radius_m(manifest, s.id) if has_mz else None
        own_p0 = specimen_pressure_kpa(manifest, s.id) if p0_kpa is None else p0_kpa
        jobs.append(SpecimenJob(s.id, own, manifest.fit, fz0_n, own_p0, r0, manifest.metrics, extra_loads))
    keys = [digest("specimen", job) for job in jobs]
    results = {key: cache.get(key) for key in keys}
    todo = [(key, job) for key, job in zip(keys, jobs) if results[key] is MISSING]
    pool = pool or WorkerPool(1)
    if todo:
        pool.warm_up()  # new fits mean new figures and PDF volumes: the workers will be needed
    # Two rounds of jobs, so that the processes share the work evenly: the fits of each specimen,
    # then its metrics, one job per load.
    models = pool.map(
        _fit_one_specimen, [job for _, job in todo], cost=lambda job: sum(p.curve.n_points for p in job.points)
    )
    metric_jobs = [
        (key, (model, tuple(p for p in job.points if p.load_n == load), job.metric_settings, load))
        for (key, job), model in zip(todo, models)
        if model is not None
        for load in [*metric_loads(model, job.points, job.extra_loads_n), None]
    ]
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
            mz = _with_load_out(fit_channel(with_mz, "mz", settings, fz0_n, p0, job.r0_m, fy.values), with_mz, settings)
    if longitudinal:
        fx = _with_load_out(fit_channel(longitudinal, "fx", settings, fz0_n, p0), longitudinal, settings)
    return SpecimenModel(job.specimen, fy, mz, fx) if (fy or fx) else None


def _with_load_out(fit: ChannelFit, points, settings) -> ChannelFit:
    return leave_one_load_out(fit, points, settings) if settings.leave_one_load_out else fit


def metric_loads(model: SpecimenModel, points: list[OperatingPoint], extra_loads_n) -> list[float]:
    """The loads a specimen's metrics are given at: every load measured at the nominal condition,
    the nominal load and any asked-for load (`extra_loads_n`: the manifest's metric and target loads)."""
    ref = model.fy or model.fx
    return sorted(set(_fitted_loads(ref, points)) | {ref.fz0_n} | set(extra_loads_n))


def _metrics_job(job) -> list[MetricValue]:
    """One specimen's metrics at one load (`load` None: the per-specimen metrics), from its model
    and its points at that load (for the model-free cross-check)."""
    model, own, settings, load = job
    if load is None:
        return specimen_metrics(model)
    return metric_values(model, load, list(own), settings.crosscheck_threshold_pct)


def points_of(fit: ChannelFit, points: list[OperatingPoint]) -> list[OperatingPoint]:
    keys = set(fit.source_points)
    return [p for p in points if p.key in keys]


def _fitted_loads(fit: ChannelFit, points: list[OperatingPoint]) -> list[float]:
    """Loads measured at the nominal condition (zero camber, nominal pressure)."""
    return sorted({p.load_n for p in points_of(fit, points) if p.at_nominal(fit.p0_kpa)})
