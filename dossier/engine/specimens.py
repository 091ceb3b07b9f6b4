"""The fit-and-metrics stage of the build as jobs: one specimen's fits, then its metrics per load
and condition tested.

Each specimen is one job keyed by its own data and settings, so that a change to one run refits
only that run's specimen; jobs missing from the cache run in the pool's workers.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from ..conditioning.steady_state import OperatingPoint, same_condition
from ..metrics.evaluate import MetricValue, metric_values, specimen_metrics
from ..model.fit import ChannelFit, SpecimenModel, fit_channel, fit_combined, leave_one_load_out
from ..project.conditions import specimen_camber_deg, specimen_pressure_kpa, unloaded_radius_m
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
    p0_kpa: float  # the specimen's nominal pressure
    camber0_deg: float  # the specimen's nominal camber
    r0_m: float | None  # unloaded radius, for the aligning moment
    metric_settings: MetricSettings
    extra_loads_n: tuple[float, ...]  # asked-for metric and target loads, at the nominal condition
    extra_conditions: tuple[Condition, ...]  # targets' (load, camber, pressure) away from the nominal one


Condition = tuple[float, float, float]  # (load N, camber deg, pressure kPa)


def fit_specimens(
    points: list[OperatingPoint],
    manifest: Manifest,
    fz0_n: float,
    p0_kpa: float | None = None,
    cache: Cache | None = None,
    pool: WorkerPool | None = None,
) -> tuple[list[SpecimenModel], list[MetricValue]]:
    """Fit Fy0, then Mz0 (with the fitted Fy0), and Fx0 for every specimen from its forward runs,
    and evaluate its metrics at every condition it was tested at (`split_nominal` tells the values
    at its nominal condition from the others).

    Each specimen is one job keyed by its own data and settings: a change to one run refits only
    that run's specimen. Jobs missing from the cache run in the pool's workers. The models come back
    read at each specimen's nominal camber and pressure.
    """
    cache = cache or Cache(None)
    extra_loads = tuple(sorted(set(manifest.metrics.loads_n)))
    jobs = []
    for s in manifest.specimens:
        own = tuple(p for p in points if p.specimen == s.id)
        pure = [p for p in own if not p.combined]
        has_mz = any(p.sweep == "slip_angle" and p.curve.mz_nm is not None for p in pure)
        r0 = unloaded_radius_m(manifest, s.id) if has_mz else None
        own_p0 = specimen_pressure_kpa(manifest, s.id) if p0_kpa is None else p0_kpa
        camber0 = specimen_camber_deg(manifest, s.id, [p.camber_deg for p in pure])
        at_nominal, elsewhere = [], []
        for t in manifest.targets:
            if t.specimens and s.id not in t.specimens:
                continue
            wanted = (t.camber_deg, own_p0 if t.pressure_kpa is None else t.pressure_kpa)
            if same_condition(wanted, (camber0, own_p0)):
                at_nominal.append(t.load_n)
            else:
                elsewhere.append((t.load_n, *wanted))
        loads = tuple(sorted(set(extra_loads) | set(at_nominal)))
        job = SpecimenJob(
            s.id, own, manifest.fit, fz0_n, own_p0, camber0, r0, manifest.metrics, loads, tuple(sorted(set(elsewhere)))
        )
        jobs.append(job)
    keys = [digest("specimen", job) for job in jobs]
    results = {key: cache.get(key) for key in keys}
    todo = [(key, job) for key, job in zip(keys, jobs) if results[key] is MISSING]
    pool = pool or WorkerPool(1)
    if todo:
        pool.warm_up()  # new fits mean new figures and PDF volumes: the workers will be needed
    # Two rounds of jobs, so that the processes share the work evenly: the fits of each specimen,
    # then its metrics, one job per load and condition.
    models = pool.map(
        _fit_one_specimen, [job for _, job in todo], cost=lambda job: sum(p.curve.n_points for p in job.points)
    )
    metric_jobs = [
        (
            key,
            (
                model.at(camber, pressure),
                tuple(p for p in job.points if p.load_n == load and not p.combined),
                job.metric_settings,
                load,
                kind == "measured",
            ),
        )
        for (key, job), model in zip(todo, models)
        if model is not None
        for load, camber, pressure, kind in metric_conditions(model, job)
    ] + [
        (key, (model, (), job.metric_settings, None, False))
        for (key, job), model in zip(todo, models)
        if model is not None
    ]
    values: dict[str, list[MetricValue]] = {}
    for (key, _), found in zip(metric_jobs, pool.map(_metrics_job, [mj for _, mj in metric_jobs])):
        values.setdefault(key, []).extend(found)
    for (key, job), model in zip(todo, models):
        results[key] = None if model is None else (model, values[key])
        cache.put(key, results[key], f"specimen {job.specimen}")
    for key in keys:
        if results[key] is not None:  # each fit is fully determined by its job's key
            for fit in results[key][0].channels:
                with_content_key(fit, f"{key}:{fit.channel}")
    found = [results[k] for k in keys if results[k] is not None]
    return [model for model, _ in found], [m for _, vs in found for m in vs]


def split_nominal(
    models: list[SpecimenModel], values: list[MetricValue]
) -> tuple[list[MetricValue], list[MetricValue]]:
    """The values at each specimen's nominal camber and pressure (the headline ones), and the rest."""
    nominal = {m.specimen: (m.channels[0].camber_deg, m.channels[0].pressure_kpa) for m in models}
    here = [v for v in values if same_condition((v.camber_deg, v.pressure_kpa), nominal[v.specimen])]
    return here, [v for v in values if not same_condition((v.camber_deg, v.pressure_kpa), nominal[v.specimen])]


def _fit_one_specimen(job: SpecimenJob) -> SpecimenModel | None:
    settings, fz0_n, p0 = job.fit_settings, job.fz0_n, job.p0_kpa
    forward = [p for p in job.points if p.rolling_direction == "forward" and not p.combined]
    lateral = [p for p in forward if p.sweep == "slip_angle" and p.curve.fy_n is not None]
    longitudinal = [p for p in forward if p.sweep == "slip_ratio" and p.curve.fx_n is not None]
    combined = [p for p in job.points if p.rolling_direction == "forward" and p.combined]
    fy = mz = fx = fxc = fyc = None
    if lateral:
        fy = _with_load_out(fit_channel(lateral, "fy", settings, fz0_n, p0), lateral, settings)
        with_mz = [p for p in lateral if p.curve.mz_nm is not None]
        if with_mz:
            mz = _with_load_out(fit_channel(with_mz, "mz", settings, fz0_n, p0, job.r0_m, fy.values), with_mz, settings)
    if longitudinal:
        fx = _with_load_out(fit_channel(longitudinal, "fx", settings, fz0_n, p0), longitudinal, settings)
    # Combined slip weights the pure-slip models, so it needs both: Fx0 and Fy0 as fitted.
    if fx is not None and fy is not None:
        with_fx = [p for p in combined if p.curve.fx_n is not None]
        with_fy = [p for p in combined if p.curve.fy_n is not None]
        fxc = fit_combined(with_fx, "fxc", fx, settings, fz0_n, p0) if with_fx else None
        fyc = fit_combined(with_fy, "fyc", fy, settings, fz0_n, p0) if with_fy else None
    if not (fy or fx):
        return None
    if combined and not (fx and fy):
        missing = "Fx0" if fx is None else "Fy0"
        why = (
            f"combined-slip runs not evaluated: they weight the pure-slip Fx0 and Fy0 fits, and no {missing} was fitted"
        )
        if fy is not None:
            fy = replace(fy, warnings=(*fy.warnings, why))
        if fx is not None:
            fx = replace(fx, warnings=(*fx.warnings, why))
    return SpecimenModel(job.specimen, fy, mz, fx, fxc, fyc).at(job.camber0_deg, p0)


def _with_load_out(fit: ChannelFit, points, settings) -> ChannelFit:
    return leave_one_load_out(fit, points, settings) if settings.leave_one_load_out else fit


def metric_conditions(model: SpecimenModel, job: SpecimenJob) -> list[tuple[float, float, float, str]]:
    """The (load, camber, pressure, kind) a specimen's metrics are given at: at its nominal camber
    and pressure ("nominal"), every load measured there, the nominal load and any asked-for load; at
    every other camber × pressure it was tested at, each load measured there ("measured": only the
    metrics whose channels were measured there are given); and the targets' conditions ("target")."""
    camber0, p0 = job.camber0_deg, job.p0_kpa
    measured: dict[tuple[float, float], tuple[tuple[float, float], set[float]]] = {}
    for fit in model.channels:
        if fit.combined:  # the metrics come from the pure-slip fits
            continue
        for p in points_of(fit, list(job.points)):
            key = (round(p.camber_deg, 2), float(round(p.pressure_kpa)))
            measured.setdefault(key, (p.condition, set()))[1].add(p.load_n)
    nominal_loads = {job.fz0_n, *job.extra_loads_n}
    wanted: list[tuple[float, float, float, str]] = []
    for condition, loads in measured.values():
        if same_condition(condition, (camber0, p0)):
            nominal_loads |= loads
        else:
            wanted += [(load, *condition, "measured") for load in loads]
    wanted += [(load, camber0, p0, "nominal") for load in nominal_loads]
    wanted += [(*c, "target") for c in job.extra_conditions]
    out: dict[tuple, tuple[float, float, float, str]] = {}  # one per load and condition (the first named wins)
    for c in wanted:
        out.setdefault((round(c[1], 2), round(c[2]), c[0]), c)
    return [out[k] for k in sorted(out)]


def _metrics_job(job) -> list[MetricValue]:
    """One specimen's metrics at one load (`load` None: the per-specimen metrics), from its model
    read at the condition and its points at that load (for the model-free cross-check); at a tested
    condition away from the nominal one, only the values inside the measured ranges."""
    model, own, settings, load, measured_only = job
    if load is None:
        return specimen_metrics(model)
    found = metric_values(model, load, list(own), settings.crosscheck_threshold_pct)
    return [v for v in found if not v.extrapolated] if measured_only else found


def points_of(fit: ChannelFit, points: list[OperatingPoint]) -> list[OperatingPoint]:
    keys = set(fit.source_points)
    return [p for p in points if p.key in keys]
