"""The site: every HTML page of the dossier, its figures and stylesheets, as bytes."""

from __future__ import annotations

import re

import jinja2

from ..common.errors import StageError
from .context import DossierContext
from .pages import downloads, page, require_cautions
from .theme import STATIC_FILES, Theme


def render_site(
    ctx: DossierContext, env: jinja2.Environment, theme: Theme, data_files: dict[str, bytes] | None = None
) -> dict[str, bytes]:
    """Return the site's files, keyed by path relative to the site folder.

    `data_files` are the machine-readable outputs written beside the site; the downloads page
    lists them with their SHA-256.
    """
    files: dict[str, bytes] = {}
    files["index.html"] = page(env, "index.html", ctx, current="index.html")
    for view in ctx.specimens:
        files[view.page] = page(env, "specimen.html", ctx, current=view.page, view=view)
    files[ctx.quality_page] = page(env, "quality.html", ctx, current=ctx.quality_page)
    files[ctx.comparison_page] = page(env, "comparison.html", ctx, current=ctx.comparison_page)
    if ctx.vehicle:
        files[ctx.vehicle_page] = page(env, "vehicle.html", ctx, current=ctx.vehicle_page)
    files["provenance.html"] = page(env, "provenance.html", ctx, current="provenance.html")
    files[ctx.downloads_page] = page(
        env, "downloads.html", ctx, current=ctx.downloads_page, downloads=downloads(data_files or {})
    )
    figures = list(ctx.summary_figures) + list(ctx.drift_figures)
    figures += [f for group in ctx.comparison_figures.values() for f in group]
    figures += [f for v in ctx.specimens for f in v.figures] + [f for r in ctx.runs for f in r.figures]
    for fig in figures:
        files[f"figures/{fig.filename}"] = fig.svg
    for name in STATIC_FILES:
        sheet = theme.stylesheet(name)
        if sheet is not None:
            files[f"static/{name}"] = sheet
    require_cautions(files)
    refuse_external(files)
    return files


# What a page loads when it is opened (not what a reader may follow by clicking a link).
_LOADED = re.compile(
    rb"<(?:img|script|link|iframe|frame|source|video|audio|embed|object|track|input|image|use)\b[^>]*?"
    rb"\s(?:src|href|data|srcset|poster|xlink:href)\s*=\s*[\"']?([^\"'\s>]+)",
    re.I,
)
_CSS_URL = re.compile(rb"(?:url\(\s*[\"']?|@import\s+[\"'])([^\"')\s]+)", re.I)
_REFRESH = re.compile(rb"<meta\b[^>]*http-equiv\s*=\s*[\"']?refresh", re.I)


def refuse_external(files: dict[str, bytes]) -> None:
    """A dossier opens offline and shows only what it holds: no page or stylesheet may load
    anything from outside the output (another site, the disk, a parent folder)."""
    found = []
    for name, data in sorted(files.items()):
        if not name.endswith((".html", ".css", ".svg")):
            continue
        urls = _CSS_URL.findall(data) + (_LOADED.findall(data) if not name.endswith(".css") else [])
        found += [f"{name}: {u.decode('utf-8', 'replace')[:100]}" for u in urls if _outside(u)]
        if name.endswith(".html") and _REFRESH.search(data):
            found.append(f"{name}: a meta refresh")
    if found:
        raise StageError(
            "the site would load resources from outside the dossier (a template override?), refused: "
            + "; ".join(found[:5])
            + (f"; and {len(found) - 5} more" if len(found) > 5 else "")
        )


def _outside(url: bytes) -> bool:
    u = url.strip().lower()
    if u.startswith((b"#", b"data:image/")):
        return False
    return b":" in u.split(b"/")[0] or u.startswith((b"/", b"\\")) or b"../" in u or u.startswith(b"..")
