"""Figures: matplotlib figures built without pyplot's global state, returned as SVG bytes.

Nothing here writes files; the writer saves what this stage returns. SVG output is made
reproducible (fixed hash salt, no date) so that the same inputs give the same bytes.
"""

from __future__ import annotations

import contextlib
import io
import re

import matplotlib
import matplotlib.style
import numpy as np
from matplotlib.figure import Figure

from ..common.names import slug
from ..conditioning.drift import DriftEstimate
from ..conditioning.steady_state import ConditionedRun, OperatingPoint
from ..document.artifacts import FigureArtifact
from ..metrics.evaluate import COMPUTE, MetricValue
from ..model.fit import CHANNEL_SYMBOL, ChannelFit
from ..project.catalogue import METRICS, STIFFNESS_METRICS

matplotlib.use("Agg")

_REPRODUCIBLE = {"svg.hashsalt": "dossier", "svg.fonttype": "none", "axes.titley": 1.0}
RAW_POINTS_SHOWN = 1500  # thin the data cloud so files stay small


def _svg(fig: Figure) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="svg", dpi=150, metadata={"Date": None, "Creator": None})
    return buf.getvalue()


# Margins around the axes, in inches (left, right, bottom, top) and the gap between panels: fixed
# instead of measured from the drawn labels, which would cost a third of a figure's time.
MARGINS_IN = (0.85, 0.15, 0.55, 0.35)
PANEL_GAP_IN = 0.3


def style_settings(style: bytes) -> dict[str, str]:
    """The settings of a matplotlib style file's bytes (``key: value`` lines, ``#`` comments),
    read as matplotlib reads a style file: a ``#`` inside double quotes is not a comment, and
    double quotes around a value are removed."""
    settings = {}
    for line in style.decode("utf-8").splitlines():
        cut = next((m.start() for m in re.finditer("#", line) if line.count('"', 0, m.start()) % 2 == 0), None)
        line = (line if cut is None else line[:cut]).strip()
        if not line or ":" not in line:
            continue
        key, value = (part.strip() for part in line.split(":", 1))
        settings[key] = value[1:-1] if value.startswith('"') and value.endswith('"') else value
    return settings


def _style_context(style: bytes):
    """matplotlib's defaults, then the theme's style, then our reproducibility settings: what
    ``rc_context(fname=...)`` does with a style file, from its bytes."""
    if not style:
        return matplotlib.rc_context(rc=_REPRODUCIBLE)
    stack = contextlib.ExitStack()
    stack.enter_context(matplotlib.rc_context())  # everything below is undone on leaving
    stack.enter_context(matplotlib.style.context(style_settings(style), after_reset=True))
    stack.enter_context(matplotlib.rc_context(rc=_REPRODUCIBLE))
    return stack


def _render(style: bytes, draw, size=(7.0, 4.2), fit_labels: bool = False) -> bytes:
    """Draw and return SVG bytes; `fit_labels` measures the labels for the margins (long category labels)."""
    # The theme's style and our reproducibility settings apply only inside this context.
    with _style_context(style):
        fig = Figure(figsize=size)
        draw(fig)
        if fit_labels:
            fig.tight_layout()
        else:
            left, right, bottom, top = MARGINS_IN
            width_in, height_in = size
            fig.subplots_adjust(
                left=left / width_in,
                right=1 - right / width_in,
                bottom=bottom / height_in,
                top=1 - top / height_in,
                wspace=PANEL_GAP_IN / (width_in / 2),
                hspace=PANEL_GAP_IN / (height_in / 2),
            )
        return _svg(fig)


_AXIS = {
    "fy": ("Slip angle α [deg] (ISO 8855)", "Lateral force Fy [N]"),
    "mz": ("Slip angle α [deg] (ISO 8855)", "Aligning moment Mz [N·m]"),
    "fx": ("Slip ratio κ [1]", "Longitudinal force Fx [N]"),
    "fxc": ("Slip ratio κ [1]", "Longitudinal force Fx [N]"),
    "fyc": ("Slip ratio κ [1]", "Lateral force Fy [N]"),
}
_WORD = {
    "fy": "lateral force",
    "mz": "aligning moment",
    "fx": "longitudinal force",
    "fxc": "longitudinal force under combined slip",
    "fyc": "lateral force under combined slip",
}


DASHES = ("-", "--", "-.", ":")
MARKERS = "osD^v<>P*X"


def _distinct(i: int, colors: list[str]) -> tuple[str, str, str]:
    """Colour, line style and marker of the i-th curve of a figure: the colours of the theme's cycle
    first, then the same colours with the next dash, so that no two legend entries look alike."""
    return colors[i % len(colors)], DASHES[(i // len(colors)) % len(DASHES)], MARKERS[i % len(MARKERS)]


def _measured(p: OperatingPoint, channel: str):
    return {"fy": p.curve.fy_n, "mz": p.curve.mz_nm, "fx": p.curve.fx_n}[channel]


def channel_figure(fit: ChannelFit, points: list[OperatingPoint], style: bytes) -> FigureArtifact:
    """Measured and fitted curves at the condition the fit is read at (the specimen's nominal camber
    and pressure), per load."""
    nominal = sorted(
        (p for p in points if p.at_condition(fit.camber_deg, fit.pressure_kpa)), key=lambda q: (q.load_n, q.run_index)
    )
    shown = nominal or sorted(points, key=lambda q: q.load_n)
    xlabel, ylabel = _AXIS[fit.channel]

    def draw(fig):
        ax = fig.add_subplot()
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        lo, hi = fit.slip_range
        grid = np.linspace(lo, hi, 241)
        loads = sorted({p.load_n for p in shown})
        for p in shown:
            c = colors[loads.index(p.load_n) % len(colors)]
            if fit.channel != "mz":
                step = max(1, p.raw_x.size // (RAW_POINTS_SHOWN // max(len(shown), 1)))
                # Dense clouds are embedded as a bitmap inside the SVG (axes, text and curves stay
                # vector): thousands of vector markers make the PDF slow to render and to open.
                ax.plot(p.raw_x[::step], p.raw_main[::step], ".", ms=1.5, color=c, alpha=0.25, rasterized=True)
            ax.plot(p.curve.x, _measured(p, fit.channel), "o", ms=3.2, mfc="none", color=c, rasterized=True)
        for load in loads:
            c, line, _ = _distinct(loads.index(load), colors)
            ax.plot(grid, fit.predict(grid, load), line, lw=1.4, color=c, label=f"{load / 1000:.1f} kN")
        _origin_axes(ax, xlabel, ylabel)
        ax.legend(title="Nominal load", fontsize="small", title_fontsize="small")
        ax.set_title(f"{fit.specimen}: {_WORD[fit.channel]}, {fit.pressure_kpa:.0f} kPa, camber {fit.camber_deg:g}°")

    loads_txt = ", ".join(f"{v / 1000:.1f}" for v in sorted({p.load_n for p in shown}))
    return FigureArtifact(
        f"{fit.channel}-{slug(fit.specimen)}.svg",
        f"Measured and fitted {_WORD[fit.channel]}, {fit.specimen}",
        ("Dots: kept rig samples (thinned); " if fit.channel != "mz" else "")
        + f"circles: conditioned steady-state bins; lines: the fitted Magic Formula {CHANNEL_SYMBOL[fit.channel]} "
        "at the nominal condition.",
        f"Chart of {_WORD[fit.channel]} against {xlabel.split(' [')[0].lower()} for specimen {fit.specimen} "
        f"at loads {loads_txt} kN, measured points and fitted curves.",
        _render(style, draw),
    )


def conditions_figure(fit: ChannelFit, points: list[OperatingPoint], style: bytes) -> FigureArtifact:
    """Measured and fitted curves away from the nominal condition (camber, pressure)."""
    xlabel, ylabel = _AXIS[fit.channel]
    pts = sorted(points, key=lambda q: (q.camber_deg, q.pressure_kpa, q.load_n))

    def draw(fig):
        ax = fig.add_subplot()
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        lo, hi = fit.slip_range
        grid = np.linspace(lo, hi, 241)
        for i, p in enumerate(pts):
            c, line, mark = _distinct(i, colors)
            ax.plot(p.curve.x, _measured(p, fit.channel), mark, ms=2.8, mfc="none", color=c, rasterized=True)
            ax.plot(
                grid,
                fit.predict(grid, p.mean_load_n, p.camber_deg, p.pressure_kpa),
                line,
                lw=1.2,
                color=c,
                label=f"{p.load_n / 1000:.1f} kN, γ {p.camber_deg:+g}°, {p.pressure_kpa:.0f} kPa",
            )
        _origin_axes(ax, xlabel, ylabel)
        ax.legend(fontsize="x-small")
        ax.set_title(f"{fit.specimen}: {_WORD[fit.channel]} at other cambers and pressures")

    return FigureArtifact(
        f"{fit.channel}-conditions-{slug(fit.specimen)}.svg",
        f"Camber and pressure conditions, {_WORD[fit.channel]}, {fit.specimen}",
        "Circles: conditioned steady-state bins; lines: the same fitted model at each point's load, "
        "inclination and pressure.",
        f"Chart of {_WORD[fit.channel]} for specimen {fit.specimen} at {len(pts)} operating points away from "
        "the nominal camber and pressure, measured and fitted.",
        _render(style, draw),
    )


def _held_label(p: OperatingPoint) -> str:
    return f"α {p.held_slip:+g}°" if p.sweep == "slip_ratio" else f"κ {p.held_slip:+g}"


def combined_figure(fit: ChannelFit, points: list[OperatingPoint], style: bytes) -> FigureArtifact:
    """Combined slip: measured and fitted force against slip ratio at each held slip angle (or
    against slip angle at each held slip ratio), with the pure-slip curve it weights."""
    pts = sorted(points, key=lambda q: (q.load_n, q.held_slip or 0.0))
    xlabel, ylabel = _AXIS[fit.channel]
    lateral = fit.channel == "fyc"

    def draw(fig):
        ax = fig.add_subplot()
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        for i, p in enumerate(pts):
            c, line, mark = _distinct(i, colors)
            y = p.curve.fy_n if lateral else p.curve.fx_n
            held = np.full(p.curve.n_points, p.held_slip_mean or 0.0)
            kappa, alpha = (p.curve.x, held) if p.sweep == "slip_ratio" else (held, p.curve.x)
            ax.plot(kappa, y, mark, ms=2.8, mfc="none", color=c, rasterized=True)
            if p.sweep == "slip_ratio":  # the model along the swept slip ratio, at the held slip angle
                k_line = np.linspace(float(kappa.min()), float(kappa.max()), 201)
                a_line = np.full(k_line.size, p.held_slip_mean or 0.0)
            else:  # at the held slip ratio, along the swept slip angle
                order = np.argsort(alpha)
                k_line, a_line = kappa[order], alpha[order]
            ax.plot(
                k_line,
                fit.predict(k_line, p.mean_load_n, other=a_line),
                line,
                lw=1.3,
                color=c,
                label=f"{p.load_n / 1000:.1f} kN, {_held_label(p)}",
            )
        _origin_axes(ax, xlabel, ylabel)
        ax.legend(fontsize="x-small")
        ax.set_title(f"{fit.specimen}: {_WORD[fit.channel]}")

    return FigureArtifact(
        f"{fit.channel}-{slug(fit.specimen)}.svg",
        f"Measured and fitted {_WORD[fit.channel]}, {fit.specimen}",
        "Circles: conditioned steady-state bins of the combined-slip runs; lines: the fitted weighting "
        f"({CHANNEL_SYMBOL[fit.channel]}) times the pure-slip model, at each held slip.",
        f"Chart of {_WORD[fit.channel]} against slip ratio for specimen {fit.specimen} at {len(pts)} held slips, "
        "measured points and fitted curves.",
        _render(style, draw),
    )


def friction_ellipse_figure(model, points: list[OperatingPoint], style: bytes) -> FigureArtifact:
    """Fx against Fy at each held slip angle: the combined-slip envelope (the friction ellipse), measured
    and from the fitted weighting of both forces."""
    fxc, fyc = model.fxc, model.fyc
    pts = sorted((p for p in points if p.sweep == "slip_ratio"), key=lambda q: (q.load_n, q.held_slip or 0.0))

    def draw(fig):
        ax = fig.add_subplot()
        ax.set_aspect("equal", adjustable="datalim")
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        for i, p in enumerate(pts):
            c, line, mark = _distinct(i, colors)
            if p.curve.fx_n is not None and p.curve.fy_n is not None:
                ax.plot(p.curve.fy_n, p.curve.fx_n, mark, ms=2.8, mfc="none", color=c, rasterized=True)
            grid = np.linspace(float(p.curve.x.min()), float(p.curve.x.max()), 201)
            other = np.full(grid.size, p.held_slip_mean or 0.0)
            ax.plot(
                fyc.predict(grid, p.mean_load_n, other=other),
                fxc.predict(grid, p.mean_load_n, other=other),
                line,
                lw=1.3,
                color=c,
                label=f"{p.load_n / 1000:.1f} kN, {_held_label(p)}",
            )
        _origin_axes(ax, "Lateral force Fy [N] (ISO 8855)", "Longitudinal force Fx [N]")
        ax.legend(fontsize="x-small", title="Constant slip angle", title_fontsize="x-small")
        ax.set_title(f"{model.specimen}: longitudinal against lateral force at constant slip angle")

    return FigureArtifact(
        f"fxc-ellipse-{slug(model.specimen)}.svg",
        f"Friction ellipse, {model.specimen}",
        "Each curve: one held slip angle, traced by the slip-ratio sweep from braking (Fx < 0) to driving (Fx > 0); "
        "circles: conditioned bins; lines: the fitted combined-slip models of Fx and Fy. Equal scales on both axes.",
        f"Chart of longitudinal against lateral force of specimen {model.specimen} at {len(pts)} held slip angles, "
        "measured and fitted.",
        _render(style, draw, size=(7.0, 5.0)),
    )


def residual_figure(fit: ChannelFit, style: bytes) -> FigureArtifact:
    """Residuals (measured − fitted) against slip and against load."""
    xlabel, ylabel = _AXIS[fit.channel]
    unit = ylabel.split("[")[1].rstrip("]")

    def draw(fig):
        ax1, ax2 = fig.subplots(1, 2, sharey=True, gridspec_kw={"width_ratios": [2, 1]})
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        res = -fit.residual  # measured − fitted
        ax1.plot(fit.residual_x, res, ".", ms=2.5, color=colors[0], rasterized=True)
        ax1.axhline(0, lw=0.6, color="0.4")
        ax1.set_xlabel(xlabel)
        ax1.set_ylabel(f"Measured − fitted [{unit}]")
        loads = fit.residual_load_n / 1000.0
        jitter = (np.arange(loads.size) % 7 - 3) * 0.04
        ax2.plot(loads + jitter, res, ".", ms=2.5, color=colors[1], rasterized=True)
        ax2.axhline(0, lw=0.6, color="0.4")
        ax2.set_xlabel("Nominal load [kN]")
        symbol = CHANNEL_SYMBOL[fit.channel]
        fig.suptitle(
            f"{fit.specimen}: residuals of the {symbol} fit (RMSE {fit.statistics.rmse:.3g} {unit})", fontsize="medium"
        )

    return FigureArtifact(
        f"{fit.channel}-residuals-{slug(fit.specimen)}.svg",
        f"Residuals of the {_WORD[fit.channel]} fit, {fit.specimen}",
        "Every conditioned point used by the fit; a trend against slip or load shows what the model misses.",
        f"Scatter of {_WORD[fit.channel]} residuals against slip and against load for specimen {fit.specimen}.",
        _render(style, draw, size=(7.0, 3.4)),
    )


def load_trend_figure(metric: str, label: str, unit: str, values: list[MetricValue], style: bytes) -> FigureArtifact:
    """One metric against load for every specimen, with 95 % intervals."""
    specimens = list(dict.fromkeys(v.specimen for v in values))

    def draw(fig):
        ax = fig.add_subplot()
        markers = "osD^v<>"
        for i, s in enumerate(specimens):
            vs = sorted(
                (v for v in values if v.specimen == s and v.metric == metric and not v.extrapolated),
                key=lambda v: v.load_n,
            )
            x = np.array([v.load_n / 1000 for v in vs])
            y = np.array([v.value for v in vs])
            err = np.array([[v.value - v.ci95[0], v.ci95[1] - v.value] if v.ci95 else [0.0, 0.0] for v in vs]).T
            ax.errorbar(x, y, yerr=err, marker=markers[i % len(markers)], ms=5, capsize=3, lw=1.3, label=s)
        ax.set_xlabel("Normal load Fz [kN]")
        ax.set_ylabel(f"{label} [{unit}]")
        ax.legend(fontsize="small")
        ax.set_title(f"{label} against load")

    return FigureArtifact(
        f"{metric.replace('_', '-')}-load.svg",
        f"{label} against load",
        "Model values at the loads each specimen was measured at (no extrapolation); bars show 95 % intervals "
        "(expanded uncertainty of the budget).",
        f"Chart of {label.lower()} against normal load for specimens {', '.join(specimens)}.",
        _render(style, draw),
    )


LOAD_GRID_POINTS = 81
EXTRAPOLATION_SHOWN = 0.25  # the model drawn (dashed) this fraction of the fitted load span beyond each end


def stiffness_load_figure(
    models, values: list[MetricValue], style: bytes, specimen: str | None = None
) -> FigureArtifact:
    """Cornering, longitudinal slip and camber stiffness and the cornering coefficient against load:
    each specimen's model curve (solid over the fitted loads, dashed beyond), its values at the
    measured loads with their 95 % intervals, and the model-free estimates where there are any.
    `specimen`: that one alone (its own page); None: every specimen on one chart."""
    shown_models = [m for m in models if specimen is None or m.specimen == specimen]
    names = [
        n
        for n in STIFFNESS_METRICS
        if any(v.metric == n and v.specimen in {m.specimen for m in shown_models} for v in values)
    ]

    def curve(model, name):
        fits = [model.get(c) for c in METRICS[name].channels]
        if any(f is None for f in fits):
            return None
        lo = max(f.load_range_n[0] for f in fits)
        hi = min(f.load_range_n[1] for f in fits)
        span = max(hi - lo, 0.2 * hi)
        grid = np.linspace(
            max(lo - EXTRAPOLATION_SHOWN * span, 0.05 * hi), hi + EXTRAPOLATION_SHOWN * span, LOAD_GRID_POINTS
        )
        base = {c: model.get(c).values for c in ("fy", "mz", "fx") if model.get(c) is not None}
        ys = [COMPUTE[name](model, float(load), base) for load in grid]
        if any(y is None for y in ys):
            return None
        return grid, np.array(ys, dtype=float), lo, hi

    def draw(fig):
        rows = 1 if len(names) <= 2 else 2
        cols = 1 if len(names) == 1 else 2
        axes = np.atleast_1d(fig.subplots(rows, cols)).ravel()
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        markers = "osD^v<>P*"
        for ax, name in zip(axes, names):
            d = METRICS[name]
            for i, model in enumerate(shown_models):
                c, line, _ = _distinct(i, colors)
                found = curve(model, name)
                if found is not None:
                    grid, ys, lo, hi = found
                    inside = (grid >= lo * 0.999) & (grid <= hi * 1.001)
                    ax.plot(grid[inside] / 1000, ys[inside], line, lw=1.4, color=c, label=model.specimen)
                    for part in (grid < lo, grid > hi):
                        if part.any():
                            ax.plot(grid[part] / 1000, ys[part], "--", lw=1.0, color=c)
                vs = sorted(
                    (v for v in values if v.specimen == model.specimen and v.metric == name and not v.extrapolated),
                    key=lambda v: v.load_n,
                )
                if vs:
                    x = np.array([v.load_n / 1000 for v in vs])
                    y = np.array([v.value for v in vs])
                    err = np.array([[v.value - v.ci95[0], v.ci95[1] - v.value] if v.ci95 else [0.0, 0.0] for v in vs]).T
                    ax.errorbar(x, y, yerr=err, fmt=markers[i % len(markers)], ms=4, capsize=3, color=c, lw=1.0)
                    data = [(v.load_n / 1000, v.crosscheck) for v in vs if v.crosscheck is not None]
                    if data:
                        ax.plot(*zip(*data), markers[i % len(markers)], ms=7, mfc="none", color=c, alpha=0.7)
            ax.set_xlabel("Normal load Fz [kN]")
            ax.set_ylabel(f"{d.label} [{d.unit}]")
            ax.set_title(d.label, fontsize="medium")
        for ax in axes[len(names) :]:
            ax.set_visible(False)
        if axes.size and shown_models:
            axes[0].legend(fontsize="small")

    who = specimen or "all specimens"
    stem = "stiffness-load" if specimen is None else f"stiffness-load-{slug(specimen)}"
    height = 3.6 if len(names) <= 2 else 6.4
    return FigureArtifact(
        f"{stem}.svg",
        f"Stiffness against load, {who}",
        "Model curves over the fitted loads (solid) and beyond them (dashed: extrapolation); points with bars: the "
        "values at the measured loads with their 95 % intervals (expanded uncertainty of the budget); hollow "
        "markers: model-free estimates from the conditioned data.",
        f"Charts of {', '.join(METRICS[n].label.lower() for n in names)} against normal load for {who}.",
        _render(style, draw, size=(7.0, height), fit_labels=True),
    )


def time_history_figure(run: ConditionedRun, style: bytes) -> FigureArtifact:
    """Load and swept channel against time, kept samples dark, dropped ones grey, points shaded."""
    o = run.overview
    a = run.account
    lateral = not run.points or run.points[0].sweep == "slip_angle"

    def draw(fig):
        ax1, ax2 = fig.subplots(2, 1, sharex=True)
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        for ax, y, label in (
            (ax1, o.fz_n / 1000.0, "Normal load Fz [kN]"),
            (ax2, o.x, "Slip angle α [deg]" if lateral else "Slip ratio κ [1]"),
        ):
            # Lines (vector, and far cheaper to draw and to print than thousands of dots), broken
            # where the samples change class; a sample unlike both neighbours (a dropped spike)
            # would be a line of one point, so it gets a marker.
            for mine, color, name in ((~o.kept, "0.65", "dropped"), (o.kept, colors[0], "kept")):
                ax.plot(o.time_s, np.where(mine, y, np.nan), "-", lw=0.7, color=color, label=name)
                alone = _isolated(mine)
                if alone.any():
                    ax.plot(o.time_s[alone], y[alone], ".", ms=2.5, color=color)
            ax.set_ylabel(label)
            for i, p in enumerate(run.points):
                ax.axvspan(*p.time_span_s, color=colors[1 + i % (len(colors) - 1)], alpha=0.08, lw=0)
        for p in run.points:
            ax1.annotate(
                f"{p.load_n / 1000:.1f} kN",
                (0.5 * sum(p.time_span_s), p.mean_load_n / 1000.0),
                textcoords="offset points",
                xytext=(0, 6),
                ha="center",
                fontsize="x-small",
            )
        ax1.margins(y=0.15)  # room above the highest load for its label
        ax2.set_xlabel("Time [s]")
        ax1.legend(loc="upper left", fontsize="x-small")
        ax1.set_title(f"Run {a.run_index}: {a.source_file} ({a.specimen})")

    return FigureArtifact(
        f"run-{a.run_index}-history.svg",
        f"Time history of run {a.run_index} ({a.specimen})",
        "Grey: samples dropped by conditioning (transitions, settling, spikes; a lone dropped sample is a dot); "
        "shaded bands: the operating "
        "points found, labelled with their nominal load.",
        f"Two stacked time histories of run {a.run_index}: normal load and swept slip channel, kept and dropped "
        f"samples, {len(run.points)} operating points marked.",
        _render(style, draw, size=(7.0, 4.6)),
    )


def _isolated(mask: np.ndarray) -> np.ndarray:
    """True where `mask` is True and neither neighbour is."""
    mask = np.asarray(mask, dtype=bool)
    before = np.concatenate(([False], mask[:-1]))
    after = np.concatenate((mask[1:], [False]))
    return mask & ~before & ~after


def hysteresis_figure(p: OperatingPoint, style: bytes) -> FigureArtifact:
    """Rising and falling halves of one sweep and the steady-state curve formed from them."""

    def draw(fig):
        ax = fig.add_subplot()
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        ax.plot(p.rising.x, p.rising.main, "-", lw=1.2, color=colors[1], label="rising slip")
        ax.plot(p.falling.x, p.falling.main, "-", lw=1.2, color=colors[2], label="falling slip")
        ax.plot(p.curve.x, p.curve.main, "--", lw=1.0, color=colors[0], label="steady state (lag removed)")
        _origin_axes(
            ax,
            "Slip angle α [deg]" if p.sweep == "slip_angle" else "Slip ratio κ [1]",
            "Lateral force Fy [N]" if p.sweep == "slip_angle" else "Longitudinal force Fx [N]",
        )
        if p.hysteresis and p.hysteresis.slip_lag is not None:
            ax.text(
                0.02,
                0.04,
                f"difference at zero slip {p.hysteresis.force_diff_n:+.0f} N, "
                f"equivalent slip lag {p.hysteresis.slip_lag:+.3f}" + ("°" if p.sweep == "slip_angle" else ""),
                transform=ax.transAxes,
                fontsize="small",
            )
        ax.legend(fontsize="small")
        ax.set_title(f"Run {p.run_index} ({p.specimen}) at {p.load_n / 1000:.1f} kN: sweep directions")

    return FigureArtifact(
        f"run-{p.run_index}-hysteresis.svg",
        f"Sweep directions of run {p.run_index} at {p.load_n / 1000:.1f} kN",
        "Bin means of the rising and falling halves of the slip sweep; the steady-state curve used for fitting "
        "bins both halves after shifting each back by the equivalent slip lag.",
        f"Hysteresis loop of lateral force against slip angle for run {p.run_index} at {p.load_n / 1000:.1f} kN.",
        _render(style, draw),
    )


def drift_figure(d: DriftEstimate, style: bytes, index: int = 0) -> FigureArtifact:
    """The control tire's model-free metrics against session time, as % of the first repeat."""

    def draw(fig):
        ax = fig.add_subplot()
        hours = np.array([(r.tested_at - d.reference_time).total_seconds() / 3600.0 for r in d.repeats])
        labels = {"cornering_stiffness_n_per_deg": "cornering stiffness", "peak_friction": "peak lateral friction"}
        for name, marker in (("cornering_stiffness_n_per_deg", "o"), ("peak_friction", "s")):
            y = np.array([getattr(r, name) for r in d.repeats], dtype=float)
            rel = 100.0 * (y / y[0] - 1.0)
            ax.plot(hours, rel, marker, ms=6, label=labels[name])
            k = np.polyfit(hours, rel, 1)
            hh = np.linspace(hours.min(), hours.max(), 20)
            ax.plot(hh, np.polyval(k, hh), "-", lw=1.0, color=ax.lines[-1].get_color())
        for c in d.corrections:
            h = (c.tested_at - d.reference_time).total_seconds() / 3600.0
            ax.axvline(h, lw=0.6, ls=":", color="0.4")
            ax.annotate(
                c.specimen,
                (h, 0.02),
                xycoords=("data", "axes fraction"),
                fontsize="x-small",
                rotation=90,
                va="bottom",
                ha="right",
            )
        ax.axhline(0, lw=0.5, color="0.5")
        ax.set_xlabel(f"Hours after the first control run ({d.reference_time:%Y-%m-%d %H:%M})")
        ax.set_ylabel("Change from first repeat [%]")
        ax.legend(fontsize="small")
        ax.set_title(f"Control tire {d.control} at {d.load_n / 1000:.1f} kN through the session")

    lab, rig = d.station
    where = f" at {lab or 'the lab'}{', rig ' + rig if rig else ''}" if (lab or rig) else ""
    return FigureArtifact(
        "drift-control.svg" if index == 0 else f"drift-control-{index + 1}.svg",
        f"Drift of the control tire {d.control}{where}",
        "Model-free metrics of each control repeat (points) and the straight line in time used as the drift; "
        "dotted lines mark when the other runs were tested.",
        f"Chart of the control tire's cornering stiffness and peak friction change against session time, "
        f"{len(d.repeats)} repeats.",
        _render(style, draw),
    )


def overlay_figure(models, points, channel: str, load_n: float, p0_kpa: float, style: bytes) -> FigureArtifact:
    """Every specimen's fitted curve (and measured bins) of one channel at the nominal load."""
    xlabel, ylabel = _AXIS[channel]

    def draw(fig):
        ax = fig.add_subplot()
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        for i, m in enumerate(models):
            fit = getattr(m, channel)
            if fit is None:
                continue
            c, line, _ = _distinct(i, colors)
            grid = np.linspace(*fit.slip_range, 241)
            ax.plot(grid, fit.predict(grid, load_n), line, lw=1.5, color=c, label=m.specimen)
            for p in points:
                if (
                    p.specimen == m.specimen
                    and p.load_n == load_n
                    and p.sweep == "slip_angle"
                    and p.rolling_direction == "forward"
                    and p.at_condition(fit.camber_deg, fit.pressure_kpa)
                ):
                    ax.plot(p.curve.x, _measured(p, channel), "o", ms=2.5, mfc="none", color=c, rasterized=True)
        _origin_axes(ax, xlabel, ylabel)
        ax.legend(fontsize="small")
        fits = [getattr(m, channel) for m in models if getattr(m, channel) is not None]
        conditions = {(round(f.camber_deg, 2), round(f.pressure_kpa)) for f in fits}
        if len(conditions) == 1:
            camber, pressure = next(iter(conditions))
            where = f"{pressure:.0f} kPa, camber {camber:g}°"
        else:
            where = "each at its own nominal pressure and camber"
        ax.set_title(f"All specimens: {_WORD[channel]} at {load_n / 1000:.1f} kN, {where}")

    return FigureArtifact(
        f"overlay-{channel}.svg",
        f"All specimens: {_WORD[channel]} at the nominal load",
        "Lines: each specimen's fitted model; circles: its conditioned bins at this load.",
        f"Overlay chart of {_WORD[channel]} against slip angle for every specimen at {load_n / 1000:.1f} kN.",
        _render(style, draw),
    )


def gough_figure(models, load_n: float, style: bytes) -> FigureArtifact:
    """Aligning moment against lateral force over the slip sweep (a Gough-type plot), per specimen."""

    def draw(fig):
        ax = fig.add_subplot()
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        for i, m in enumerate(models):
            if m.fy is None or m.mz is None:
                continue
            a = np.linspace(*m.fy.slip_range, 241)
            ax.plot(
                m.fy.predict(a, load_n),
                m.mz.predict(a, load_n),
                _distinct(i, colors)[1],
                lw=1.5,
                color=_distinct(i, colors)[0],
                label=m.specimen,
            )
        ax.axhline(0, lw=0.5, color="0.5")
        ax.axvline(0, lw=0.5, color="0.5")
        ax.set_xlabel("Lateral force Fy [N]")
        ax.set_ylabel("Aligning moment Mz [N·m]")
        ax.legend(fontsize="small")
        ax.set_title(f"Aligning moment against lateral force at {load_n / 1000:.1f} kN (slip angle as parameter)")

    return FigureArtifact(
        "gough-mz-fy.svg",
        "Aligning moment against lateral force",
        "Fitted models over the measured slip range at the nominal load; the slope near the origin is the pneumatic "
        "trail, the loop's collapse shows where the trail runs out before the lateral force peaks.",
        f"Chart of aligning moment against lateral force for every specimen at {load_n / 1000:.1f} kN.",
        _render(style, draw),
    )


def difference_figure(standings, style: bytes) -> FigureArtifact:
    """Each candidate's differences from the baseline in % of the baseline's value, with 95 % intervals:
    one scaling for every metric, so that no metric squashes the others."""
    rows = [(s.candidate, d) for s in standings for d in s.differences if d.baseline_value]

    def pct(d, x):
        return 100.0 * x / abs(d.baseline_value)

    def draw(fig):
        ax = fig.add_subplot()
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        markers = "osD^v<>"
        cands = list(dict.fromkeys(c for c, _ in rows))
        labels = list(dict.fromkeys(METRICS[d.metric].label for _, d in rows))
        ax.axvline(0, color="0.3", lw=0.8)
        for j, c in enumerate(cands):
            first = True
            for c2, d in rows:
                if c2 != c:
                    continue
                y = labels.index(METRICS[d.metric].label) + (j - (len(cands) - 1) / 2) * 0.22
                x = pct(d, d.diff)
                err = None
                if d.diff_ci95:
                    err = [[x - pct(d, d.diff_ci95[0])], [pct(d, d.diff_ci95[1]) - x]]
                ax.errorbar(
                    [x],
                    [y],
                    xerr=err,
                    fmt=markers[j % len(markers)],
                    mfc=None if d.significant else "white",
                    color=colors[j % len(colors)],
                    capsize=3,
                    ms=6,
                    label=c if first else None,
                )
                first = False
        ax.set_yticks(range(len(labels)))
        ax.set_yticklabels(labels, fontsize="small")
        ax.invert_yaxis()
        ax.set_xlabel("Candidate − baseline [% of the baseline's value]")
        ax.legend(fontsize="small", title="filled: a real difference", title_fontsize="x-small")
        ax.set_title("Differences from the baseline at the nominal load, % of the baseline")

    return FigureArtifact(
        "differences.svg",
        "Candidates against the baseline",
        "Each marker is a candidate's difference from the baseline in % of the baseline's value (one scale for every "
        "metric); bars are the 95 % intervals of the difference from both uncertainty budgets. Filled markers: a real "
        "difference (see the comparison).",
        "Dot chart of each candidate's metric differences from the baseline in percent, with interval bars.",
        _render(style, draw, size=(7.0, 0.3 * max(4, len({d.metric for _, d in rows})) + 1.4), fit_labels=True),
    )


def yaw_gain_figure(fitments, vehicle, style: bytes) -> FigureArtifact:
    """Yaw-rate gain against speed for every declared fitment, each with its equivalent wheelbase."""
    from ..evaluation.vehicle import yaw_rate_gain_per_s

    def draw(fig):
        ax = fig.add_subplot()
        v = np.array(vehicle.speeds_kmh, dtype=float)
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        for i, f in enumerate(fitments):
            c, _, mark = _distinct(i, colors)
            k = f.understeer_gradient_deg_per_g.value
            # Each curve its own dash and marker, thinner as it comes later, so that two fitments of
            # equal gradient are both seen (the later one drawn over the earlier).
            ax.plot(
                v,
                [yaw_rate_gain_per_s(x, k, f.equivalent_wheelbase_m) for x in v],
                DASHES[i % len(DASHES)],
                marker=mark,
                markevery=max(1, v.size // 8),
                ms=4,
                color=c,
                lw=max(2.4 - 0.5 * i, 0.9),
                label=f"{f.name} (K = {k:+.2f} deg/g)",
            )
        length = fitments[0].equivalent_wheelbase_m
        ax.plot(v, (v / 3.6) / length, ":", color="0.5", lw=1.0, label=f"neutral steer, L = {length:.2f} m")
        ax.set_xlabel("Speed [km/h]")
        ax.set_ylabel("Yaw-rate gain r/δ [1/s]")
        ax.set_ylim(0, None)
        ax.legend(fontsize="small")
        ax.set_title(f"{vehicle.name}: steady-state yaw-rate gain")

    return FigureArtifact(
        "yaw-gain.svg",
        "Yaw-rate gain against speed",
        "Linear single-track model of each declared fitment at its static tire loads, with its equivalent "
        "wheelbase; the dotted line is a neutral-steer vehicle of the first fitment's wheelbase.",
        "Chart of steady-state yaw-rate gain against speed for each declared fitment.",
        _render(style, draw),
    )


def _origin_axes(ax, xlabel: str, ylabel: str) -> None:
    """Thin zero lines through the origin and the axis labels (slip plots)."""
    ax.axhline(0, lw=0.5, color="0.5")
    ax.axvline(0, lw=0.5, color="0.5")
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
