"""Pages: the template environment and the rendering of one page, shared by the site and the PDF.

Templates come from the theme chain and the project's overrides as bytes held in memory (the
loader and the theme have read them); number formatting lives in the registered filters
(:mod:`dossier.document.numbers`), not in templates.
"""

from __future__ import annotations

import hashlib
import re

import jinja2

from ..common.errors import StageError
from ..conditioning import estimates
from ..conditioning.relaxation import TRAVEL_LAGS
from ..conditioning.steady_state import HELD_RATIO_TOLERANCE
from ..metrics.budget import LABELS as BUDGET_LABELS
from ..metrics.budget import ORDER as BUDGET_ORDER
from ..model.fit import CHANNEL_LABEL, CHANNEL_SYMBOL, CHANNEL_UNIT, MODEL_NAME
from ..project.catalogue import METRICS, MIN_PRESSURE_SPAN_KPA
from ..project.manifest import LAB_DEFAULTS
from .cautions import CAUTIONS_ID
from .context import DossierContext
from .numbers import fmt_camber, fmt_ci, fmt_fixed, fmt_kn, fmt_metric, fmt_sig
from .theme import Theme
from .volumes import ANNEXES, VOLUMES


def _metric_label(name: str) -> str:
    return METRICS[name].label


def make_environment(
    theme: Theme, project_templates: dict[str, bytes], compiled: jinja2.BytecodeCache | None = None
) -> jinja2.Environment:
    """The template environment over the bytes of the project's overrides (`project_templates`,
    keyed by path inside ``templates/``) and of the theme chain; `compiled` keeps compiled
    templates between builds (Jinja2's bytecode cache, keyed by each template's source)."""

    def source(name: str):
        if name in project_templates:
            return project_templates[name].decode("utf-8"), f"templates/{name}", lambda: True
        found = theme.source(name)
        if found is None:
            return None
        return found.decode("utf-8"), f"theme {theme.name}: {name}", lambda: True

    env = jinja2.Environment(
        loader=jinja2.FunctionLoader(source),
        bytecode_cache=compiled,
        autoescape=True,  # every manifest string is escaped
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters.update(
        metric=fmt_metric,
        ci=fmt_ci,
        sig=fmt_sig,
        kn=fmt_kn,
        fixed=fmt_fixed,
        camber=fmt_camber,
        metric_label=_metric_label,
    )
    env.globals.update(
        options=theme.options,
        channel_label=CHANNEL_LABEL,
        channel_symbol=CHANNEL_SYMBOL,
        channel_unit=CHANNEL_UNIT,
        model_name=MODEL_NAME,
        volume=None,
        annexes=ANNEXES,
        volumes=VOLUMES,
        volume_by_key={v.key: v for v in VOLUMES},
        budget_order=BUDGET_ORDER,
        method={
            "local_half_range_deg": estimates.LOCAL_HALF_RANGE_DEG,
            "local_half_range_ratio": estimates.LOCAL_HALF_RANGE_RATIO,
            "lab_defaults": LAB_DEFAULTS,
            "min_pressure_span_kpa": MIN_PRESSURE_SPAN_KPA,
            "travel_lags": TRAVEL_LAGS,
            "held_ratio_tolerance": HELD_RATIO_TOLERANCE,
        },
        budget_labels=BUDGET_LABELS,
    )
    return env


def downloads(files: dict[str, bytes]) -> list[tuple[str, int, str]]:
    return [(name, len(data), hashlib.sha256(data).hexdigest()) for name, data in sorted(files.items())]


_NUMBER_SPACE_PERCENT = re.compile(r"(\d) %")


def page(env, template: str, ctx: DossierContext, **extra) -> bytes:
    """A page of `template` as UTF-8 bytes; a number and its % sign are joined by a no-break space
    (ISO 80000-1 puts a space between a number and %, from memory; it must not become a line break)."""
    try:
        text = env.get_template(template).render(d=ctx, **extra)
        return _NUMBER_SPACE_PERCENT.sub("\\1\u00a0%", text).encode("utf-8")
    except jinja2.TemplateError as exc:
        where = getattr(exc, "filename", None) or template
        line = getattr(exc, "lineno", None)
        raise StageError(f"template {where}{f', line {line}' if line else ''}: {exc}") from None


def require_cautions(files: dict[str, bytes], print_pages: tuple[str, ...] = ()) -> None:
    marker = f'id="{CAUTIONS_ID}"'.encode()
    pages = [name for name in files if name.endswith(".html")]
    missing = [name for name in pages if marker not in files[name] and name in ("index.html", *print_pages)]
    if missing:
        raise StageError(
            f"the theme's {', '.join(missing)} lacks the safety cautions block (id '{CAUTIONS_ID}'); "
            "every dossier must carry it"
        )
