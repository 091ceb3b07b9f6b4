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
    {{ verdict("CND-C", "pneumatic_trail") }}              → "does not meet" (several targets on one
                                                             metric: name load_n, camber_deg or pressure_kpa)
    {{ difference("CND-B", "cornering_stiffness") }}       → "+10.2 %" (against the baseline)
    {{ recommended }}                                      → "CND-B" (or "none")
    {{ metrics_table("CND-B") }}                           → a Markdown table of the headline metrics
    {{ document.number }}, {{ document.revision }}, ...
"""

from __future__ import annotations

import contextlib
import math
import signal
import threading
import time
import traceback

import jinja2
from jinja2.sandbox import ImmutableSandboxedEnvironment
from markdown_it import MarkdownIt

from ..common.errors import NarrativeError
from ..project.catalogue import METRICS
from .numbers import fmt_ci, fmt_metric, with_unit


class _Unknown(Exception):
    pass


class _OverBudget(Exception):
    pass


# A narrative is a page of text with a few values in it; these bounds are far above any such page
# and far below what would stall a build or exhaust its memory.
MAX_SECONDS = 5.0  # to render one narrative file
MAX_OUTPUT_CHARS = 1_000_000  # of one rendered narrative file
MAX_RANGE = 10_000  # items of one range(...)
MAX_POWER = 1_000  # largest exponent of `**`


class _Sandbox(ImmutableSandboxedEnvironment):
    """Jinja2's immutable sandbox with bounded ranges, repetitions and powers."""

    intercepted_binops = frozenset({"*", "**"})

    def call_binop(self, context, operator, left, right):
        if operator == "**" and isinstance(right, (int, float)) and abs(right) > MAX_POWER:
            raise _OverBudget(f"an exponent of {right!r} is beyond the limit of {MAX_POWER}")
        if operator == "*":
            for seq, times in ((left, right), (right, left)):
                if (
                    isinstance(seq, (str, list, tuple))
                    and isinstance(times, int)
                    and len(seq) * times > MAX_OUTPUT_CHARS
                ):
                    raise _OverBudget(f"repeating {len(seq)} items {times} times is beyond {MAX_OUTPUT_CHARS} items")
        return super().call_binop(context, operator, left, right)


def _bounded_range(*args):
    r = range(*args)
    if len(r) > MAX_RANGE:
        raise _OverBudget(f"range of {len(r)} items is beyond the limit of {MAX_RANGE}")
    return r


@contextlib.contextmanager
def _time_budget(seconds: float):
    """Raise _OverBudget in the rendering code after `seconds` (a timer signal: main thread only;
    elsewhere the output loop checks the clock between pieces of output)."""
    if threading.current_thread() is not threading.main_thread() or not hasattr(signal, "setitimer"):
        yield
        return

    def expire(signum, frame):
        raise _OverBudget(f"rendering took longer than {seconds:g} s")

    previous = signal.signal(signal.SIGALRM, expire)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


def render_markdown(text: str) -> str:
    """Markdown → HTML with raw HTML off and images off (CommonMark plus tables)."""
    md = MarkdownIt("commonmark", {"html": False, "linkify": False, "typographer": False}).enable("table")
    md.disable("image")  # figures come from the build, not from paths in the text (no files pulled in)
    return md.render(text)


def render_narrative(name: str, text: str, ctx) -> str:
    """Render one narrative file (template, then Markdown) against the dossier context `ctx`.

    Raises NarrativeError naming the file and line of an unknown reference, a syntax error, a
    failing expression (a wrong argument, a division by zero), or a text over its budgets
    (:data:`MAX_SECONDS`, :data:`MAX_OUTPUT_CHARS`, :data:`MAX_RANGE`).
    """
    # A loader that names the file, so that errors inside the text point at its own lines.
    loader = jinja2.FunctionLoader(lambda n: (text, name, lambda: True) if n == name else None)
    env = _Sandbox(undefined=jinja2.StrictUndefined, autoescape=False, loader=loader)
    env.globals.update(_functions(ctx), range=_bounded_range)
    try:
        template = env.get_template(name)
        rendered = _render_bounded(template)
    except jinja2.TemplateSyntaxError as exc:
        raise NarrativeError(f"{name}, line {exc.lineno}: template syntax: {exc.message}") from None
    except RecursionError:
        raise NarrativeError(f"{name}: nested too deeply to render") from None
    except Exception as exc:
        line = _template_line(exc, name)
        where = f"{name}, line {line}" if line else name
        kind = "" if isinstance(exc, (jinja2.UndefinedError, _Unknown, _OverBudget)) else f"{type(exc).__name__}: "
        raise NarrativeError(f"{where}: {kind}{exc}") from None
    return render_markdown(rendered)


def _render_bounded(template) -> str:
    """Render within the time and output budgets."""
    parts, size = [], 0
    deadline = time.monotonic() + MAX_SECONDS
    with _time_budget(MAX_SECONDS):
        for piece in template.generate():
            size += len(piece)
            if size > MAX_OUTPUT_CHARS:
                raise _OverBudget(f"the rendered text exceeds {MAX_OUTPUT_CHARS} characters")
            if time.monotonic() > deadline:
                raise _OverBudget(f"rendering took longer than {MAX_SECONDS:g} s")
            parts.append(piece)
    return "".join(parts)


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
        if load_n is not None and (isinstance(load_n, bool) or not isinstance(load_n, (int, float))):
            raise _Unknown(f"the load must be a number in N, e.g. 6000; got {load_n!r}")
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
        return with_unit(fmt_metric(m.value, m.unit), m.unit)

    def interval(specimen, metric, load_n=None):
        m = metric_value(specimen, metric, load_n)
        return fmt_ci(m.ci95, m.unit)

    def verdict(specimen, metric, load_n=None, camber_deg=None, pressure_kpa=None):
        found = [
            v
            for v in ctx.verdicts
            if v.specimen == specimen
            and v.target.metric == metric
            and (load_n is None or math.isclose(v.target.load_n, float(load_n)))
            and (camber_deg is None or math.isclose(v.camber_deg, float(camber_deg)))
            and (pressure_kpa is None or (v.pressure_kpa is not None and round(v.pressure_kpa) == round(pressure_kpa)))
        ]
        if not found:
            raise _Unknown(f"no target on {metric!r} judged for {specimen!r}")
        if len({v.target.index for v in found}) > 1:
            where = "; ".join(
                f"{v.target.load_n:g} N, {v.camber_deg:g}°, {v.pressure_kpa:.0f} kPa"
                if v.pressure_kpa
                else f"{v.target.load_n:g} N"
                for v in found
            )
            raise _Unknown(
                f"several targets on {metric!r} for {specimen!r} ({where}): name load_n, camber_deg or pressure_kpa"
            )
        return found[0].verdict

    def difference(candidate, metric):
        for s in ctx.standings:
            if s.candidate == candidate:
                for d in s.differences:
                    if d.metric == metric:
                        return f"{d.diff_pct:+.1f}\u00a0%".replace("-", "−")
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
