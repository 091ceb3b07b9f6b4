"""The site: every HTML page of the dossier, its figures and stylesheets, as bytes."""

from __future__ import annotations

import jinja2

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
    return files
