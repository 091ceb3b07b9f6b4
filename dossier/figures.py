"""Figures: matplotlib figures built without pyplot's global state, returned as SVG bytes.

Nothing here writes files; the writer saves what this stage returns. SVG output is made
reproducible (fixed hash salt, no date) so that the same inputs give the same bytes.
"""

from __future__ import annotations

import io
from dataclasses import dataclass
from pathlib import Path

import matplotlib
import numpy as np
from matplotlib.figure import Figure

from .condition import OperatingPoint
from .fit import LateralFit
from .metrics import MetricValue

matplotlib.use("Agg")

_REPRODUCIBLE = {"svg.hashsalt": "dossier", "svg.fonttype": "none"}
RAW_POINTS_SHOWN = 1500  # thin the data cloud so files stay small


@dataclass(frozen=True)
class FigureArtifact:
    """A finished figure: file name, caption, alt text for screen readers, and SVG bytes."""

    filename: str
    title: str
    caption: str
    alt: str
    svg: bytes


def _svg(fig: Figure) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None})
    return buf.getvalue()


def _render(style: Path | None, draw) -> bytes:
    # The theme's style and our reproducibility settings apply only inside this context.
    with matplotlib.rc_context(rc=_REPRODUCIBLE, fname=None if style is None else str(style)):
        fig = Figure(figsize=(7.0, 4.2))
        draw(fig)
        fig.tight_layout()
        return _svg(fig)


def lateral_force_figure(fit: LateralFit, points: list[OperatingPoint], style: Path | None) -> FigureArtifact:
    """Fy against slip angle for every load: data cloud, conditioned bins and fitted curve."""

    def draw(fig):
        ax = fig.add_subplot()
        colors = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
        lo, hi = fit.slip_range_deg
        grid = np.linspace(lo, hi, 241)
        for i, p in enumerate(sorted(points, key=lambda q: q.load_n)):
            c = colors[i % len(colors)]
            step = max(1, p.raw_slip_angle_deg.size // (RAW_POINTS_SHOWN // max(len(points), 1)))
            ax.plot(p.raw_slip_angle_deg[::step], p.raw_fy_n[::step], ".", ms=1.5, color=c, alpha=0.25)
            ax.plot(p.curve.slip_angle_deg, p.curve.fy_n, "o", ms=3.2, mfc="none", color=c)
            ax.plot(grid, fit.predict_fy_n(grid, p.mean_load_n), "-", lw=1.4, color=c,
                    label=f"{p.load_n / 1000:.1f} kN")
        ax.axhline(0, lw=0.5, color="0.5")
        ax.axvline(0, lw=0.5, color="0.5")
        ax.set_xlabel("Slip angle α [deg] (ISO 8855)")
        ax.set_ylabel("Lateral force Fy [N]")
        ax.legend(title="Nominal load", fontsize="small", title_fontsize="small")
        ax.set_title(f"{fit.specimen}: lateral force, {fit.pressure_kpa:.0f} kPa, camber {fit.camber_deg:g}°")

    loads = ", ".join(f"{p.load_n / 1000:.1f}" for p in sorted(points, key=lambda q: q.load_n))
    return FigureArtifact(
        f"fy-slip-{_slug(fit.specimen)}.svg",
        f"Lateral force against slip angle, {fit.specimen}",
        "Dots: kept rig samples (thinned); circles: conditioned slip-bin means; lines: fitted Magic Formula Fy0.",
        f"Line chart of lateral force against slip angle for specimen {fit.specimen} at loads {loads} kN, "
        f"measured points with the fitted Magic Formula curves.",
        _render(style, draw))


def load_trend_figure(metric: str, label: str, unit: str, values: list[MetricValue], style: Path | None) -> FigureArtifact:
    """One metric against load for every specimen, with 95 % intervals."""
    specimens = list(dict.fromkeys(v.specimen for v in values))

    def draw(fig):
        ax = fig.add_subplot()
        markers = "osD^v<>"
        for i, s in enumerate(specimens):
            vs = sorted((v for v in values if v.specimen == s and v.metric == metric), key=lambda v: v.load_n)
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
        "Model values at the nominal loads; bars show 95 % intervals from the fit covariance.",
        f"Chart of {label.lower()} against normal load for specimens {', '.join(specimens)}.",
        _render(style, draw))


def _slug(text: str) -> str:
    return "".join(ch.lower() if ch.isalnum() else "-" for ch in text).strip("-")
