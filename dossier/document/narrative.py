"""Narrative: the engineer's Markdown, with live values from the build, rendered safely.

Each narrative file (summary, test notes, conclusions) is first rendered as a template in
Jinja2's *sandbox* (no access to Python internals; undefined names are errors), then as Markdown
with markdown-it-py with raw HTML off (any HTML in the text is shown as text, and unsafe link
schemes such as ``javascript:`` are refused by the parser). Values come only through the few
functions below, formatted exactly as in the tables, so a number in the text always equals the
number in the tables.

Functions available in the text::

    {{ value("CND-B", "cornering_stiffness") }}            → "1 537 N/deg" (at the nominal load)
    {{ value("CND-B", "cornering_stiffness", 6000) }}      → at 6 kN
    {{ interval("CND-B", "peak_lateral_friction") }}      → "1.040 … 1.041"
    {{ verdict("CND-C", "pneumatic_trail") }}              → "does not meet"
    {{ difference("CND-B", "cornering_stiffness") }}       → "+10.2 %" (against the baseline)
    {{ recommended }}                                      → "CND-B" (or "none")
    {{ metrics_table("CND-B") }}                           → a Markdown table of the headline metrics
    {{ document.number }}, {{ document.revision }}, ...
"""

from __future__ import annotations

import math
import traceback

import jinja2
from jinja2.sandbox import ImmutableSandboxedEnvironment
from markdown_it import MarkdownIt

from ..common.errors import NarrativeError
from ..project.catalogue import METRICS
from .numbers import fmt_ci, fmt_metric


class _Unknown(Exception):
    pass


def render_markdown(text: str) -> str:
    """Markdown → HTML with raw HTML off and images off (CommonMark plus tables)."""
    md = MarkdownIt("commonmark", {"html": False, "linkify": False, "typographer": False}).enable("table")
    md.disable("image")  # figures come from the build, not from paths in the text (no files pulled in)
    return md.render(text)


def render_narrative(name: str, text: str, ctx) -> str:
    """Render one narrative file (template, then Markdown) against the dossier context `ctx`.

    Raises NarrativeError naming the file and line of an unknown reference or syntax error.
    """
    # A loader that names the file, so that errors inside the text point at its own lines.
    loader = jinja2.FunctionLoader(lambda n: (text, name, lambda: True) if n == name else None)
    env = ImmutableSandboxedEnvironment(undefined=jinja2.StrictUndefined, autoescape=False, loader=loader)
    env.globals.update(_functions(ctx))
    try:
        rendered = env.get_template(name).render()
    except jinja2.TemplateSyntaxError as exc:
        raise NarrativeError(f"{name}, line {exc.lineno}: template syntax: {exc.message}") from None
    except (jinja2.UndefinedError, _Unknown, jinja2.exceptions.SecurityError, TypeError) as exc:
        line = _template_line(exc, name)
        where = f"{name}, line {line}" if line else name
        raise NarrativeError(f"{where}: {exc}") from None
    return render_markdown(rendered)


def _template_line(exc: BaseException, name: str) -> int | None:
    for frame in reversed(traceback.extract_tb(exc.__traceback__)):
        if frame.filename == name or frame.filename.endswith(name):
            return frame.lineno
    return None


def _functions(ctx) -> dict:
    ids = [v.specimen.id for v in ctx.specimens]

    def metric_value(specimen, metric, load_n=None):
        if specimen not in ids:
            raise _Unknown(f"unknown specimen {specimen!r}; specimens are {', '.join(ids)}")
        if metric not in METRICS:
            raise _Unknown(f"unknown metric {metric!r}; metric names are in the glossary")
        view = next(v for v in ctx.specimens if v.specimen.id == specimen)
        load = ctx.nominal_load_n if load_n is None else float(load_n)
        if METRICS[metric].per_load:
            m = view.metric(metric, load)
        else:
            m = next((x for x in view.specimen_level if x.metric == metric), None)
        if m is None:
            raise _Unknown(
                f"no value of {metric!r} for {specimen!r} at {load / 1000:.1f} kN "
                "(not measured, or not a load the dossier reports)"
            )
        return m

    def value(specimen, metric, load_n=None):
        m = metric_value(specimen, metric, load_n)
        return f"{fmt_metric(m.value, m.unit)} {m.unit}"

    def interval(specimen, metric, load_n=None):
        m = metric_value(specimen, metric, load_n)
        return fmt_ci(m.ci95, m.unit)

    def verdict(specimen, metric, load_n=None):
        found = [
            v
            for v in ctx.verdicts
            if v.specimen == specimen
            and v.target.metric == metric
            and (load_n is None or math.isclose(v.target.load_n, float(load_n)))
        ]
        if not found:
            raise _Unknown(f"no target on {metric!r} judged for {specimen!r}")
        return found[0].verdict

    def difference(candidate, metric):
        for s in ctx.standings:
            if s.candidate == candidate:
                for d in s.differences:
                    if d.metric == metric:
                        return f"{d.diff_pct:+.1f} %"
        raise _Unknown(f"no comparison of {metric!r} for candidate {candidate!r}")

    def metrics_table(specimen):
        rows = ["| Metric | Value | 95 % interval |", "|---|---:|---:|"]
        for d in ctx.headline:
            try:
                m = metric_value(specimen, d.name)
            except _Unknown:
                continue
            rows.append(f"| {d.label} [{d.unit}] | {fmt_metric(m.value, m.unit)} | {fmt_ci(m.ci95, m.unit)} |")
        return "\n".join(rows) + "\n"

    return {
        "value": value,
        "interval": interval,
        "verdict": verdict,
        "difference": difference,
        "metrics_table": metrics_table,
        "recommended": ctx.recommendation[0] or "none",
        "document": ctx.document,
    }


def narrative_texts(narrative: dict[str, str], files: dict[str, bytes]) -> dict[str, tuple[str, str]]:
    """The narrative files the manifest names (`narrative`: part -> relative path), decoded from
    the bytes the loader read (`files`): part -> (relative path, text)."""
    out = {}
    for part, rel in narrative.items():
        try:
            out[part] = (rel, files[rel].decode("utf-8-sig"))
        except UnicodeDecodeError as exc:
            raise NarrativeError(f"{rel}: cannot be read as UTF-8 text ({exc})") from None
    return out
