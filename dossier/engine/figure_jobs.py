"""The figure stage of the build as independent jobs, drawn in the pool's workers."""

from __future__ import annotations

from ..project.catalogue import METRICS, STIFFNESS_METRICS
from .cache import MISSING, Cache, digest_each
from .specimens import points_of
from .workers import WorkerPool


def figure_tasks(models, points, conditioned, metrics, drifts, standings, vehicle, manifest, fz0_n, p0_kpa, style):
    """Every figure of the dossier as (place, function name, arguments): independent jobs."""
    tasks = []
    pure = [p for p in points if not p.combined]  # the comparison charts are of pure slip
    for m in models:
        for fit in m.channels:
            own = points_of(fit, points)
            if fit.combined:
                tasks.append((("specimen", m.specimen), "combined_figure", (fit, own, style)))
                if fit.channel == "fxc" and m.fyc is not None:
                    tasks.append((("specimen", m.specimen), "friction_ellipse_figure", (m, own, style)))
            else:
                tasks.append((("specimen", m.specimen), "channel_figure", (fit, own, style)))
                other = [p for p in own if not p.at_condition(fit.camber_deg, fit.pressure_kpa)]
                if other:
                    tasks.append((("specimen", m.specimen), "conditions_figure", (fit, other, style)))
            tasks.append((("specimen", m.specimen), "residual_figure", (fit, style)))
    if models and any(m.metric in STIFFNESS_METRICS for m in metrics):
        tasks.append((("summary",), "stiffness_load_figure", (models, metrics, style)))
        for m in models:
            if any(v.metric in STIFFNESS_METRICS and v.specimen == m.specimen for v in metrics):
                tasks.append((("specimen", m.specimen), "stiffness_load_figure", (models, metrics, style, m.specimen)))
    for name in ("peak_lateral_friction", "pneumatic_trail"):
        if any(m.metric == name for m in metrics):
            tasks.append(
                (
                    ("summary",),
                    "load_trend_figure",
                    (name, METRICS[name].label, METRICS[name].unit, [m for m in metrics if m.metric == name], style),
                )
            )
    for c in conditioned:
        tasks.append((("quality", c.account.run_index), "time_history_figure", (c, style)))
        lateral = [p for p in c.points if p.rising is not None and p.falling is not None]
        if lateral:
            nearest = min(lateral, key=lambda p: (abs(p.load_n - fz0_n), p.camber_deg != 0.0))
            tasks.append((("quality", c.account.run_index), "hysteresis_figure", (nearest, style)))
    for i, line in enumerate(drifts):  # one chart per rig that had a control line
        tasks.append((("drift",), "drift_figure", (line, style, i)))
    if models:
        tasks.append((("comparison", "comparison"), "overlay_figure", (models, pure, "fy", fz0_n, p0_kpa, style)))
        if any(m.mz for m in models):
            tasks.append((("comparison", "comparison"), "overlay_figure", (models, pure, "mz", fz0_n, p0_kpa, style)))
            tasks.append((("comparison", "comparison"), "gough_figure", (models, fz0_n, style)))
    if any(s.differences for s in standings):  # no chart with nothing to show
        tasks.append((("comparison", "comparison"), "difference_figure", (standings, style)))
    if vehicle.fitments and manifest.vehicle:
        tasks.append((("comparison", "vehicle"), "yaw_gain_figure", (vehicle.fitments, manifest.vehicle, style)))
    return tasks


def _render_task(task):
    from ..document import figures

    _, name, args = task
    return getattr(figures, name)(*args)


# Relative drawing time of each kind of figure (measured on the demo), to start the dearest first.
FIGURE_COST = {"time_history_figure": 1.5, "conditions_figure": 1.4, "residual_figure": 1.0, "channel_figure": 0.9}


def run_figure_tasks(tasks, pool: WorkerPool) -> list:
    """Render every figure in the pool's workers (the SVG bytes do not depend on their number)."""
    return pool.map(_render_task, tasks, cost=lambda task: FIGURE_COST.get(task[1], 1.0))


def draw_figures(tasks, style: bytes, cache: Cache, pool: WorkerPool) -> list:
    """Every figure of `tasks`, each cached on its own under what it is drawn from (its place, its
    function, its arguments and the theme's figure style): a change redraws only the figures it reaches."""
    keys = digest_each(
        [(place, name, tuple(a for a in args if a is not style)) for place, name, args in tasks], "figure", style
    )
    drawn = [cache.get(key) for key in keys]
    todo = [i for i, fig in enumerate(drawn) if fig is MISSING]
    for i, fig in zip(todo, run_figure_tasks([tasks[i] for i in todo], pool)):
        cache.put(keys[i], fig, f"figure {':'.join(map(str, tasks[i][0]))} {fig.filename}")
        drawn[i] = fig
    return drawn


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
