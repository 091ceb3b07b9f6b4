"""Render: one typed context, the theme's templates, an HTML site and a PDF from the same pages.

Pure apart from reading templates: returns file contents (bytes) keyed by output path; the
writer puts them on disk. Number formatting lives in the registered filters below, not in
templates. The PDF is rendered by WeasyPrint from the same section templates as the site, with
the theme's print CSS; its URL fetcher serves only the files of this build and fetches nothing
from the network or the disk.
"""

from __future__ import annotations

import io
import math
import mimetypes
import re
from dataclasses import dataclass, field
from pathlib import Path

import datetime as dt
import hashlib

import jinja2
from markupsafe import Markup
import weasyprint
from weasyprint.urls import URLFetcher, URLFetcherResponse

from . import __version__, axes, pdf_archive
from .cautions import CAUTIONS, CAUTIONS_ID
from .condition import ConditionedRun, ConditioningAccount
from .drift import DriftEstimate
from .errors import StageError
from .artifacts import FigureArtifact
from .fit import CHANNEL_LABEL, CHANNEL_UNIT, MODEL_NAME, ChannelFit
from .manifest import Manifest, RunSpec, Specimen
from .metrics import METRICS, MetricDefinition, MetricValue
from .identity import SpecimenIdentity, specimen_identity
from .offsets import OffsetSplit
from .theme import STATIC_FILES, Theme
from .vehicle import SIMPLIFICATIONS

SITE_BASE_URL = "https://dossier.invalid/site/"  # never fetched: the fetcher serves from memory

DECIMALS = {"N/deg": 0, "1/deg": 4, "1": 3, "deg": 2, "mm": 1, "N·m/deg": 2, "N·m": 1, "N": 0, "1/kN": 4}


@dataclass(frozen=True)
class SpecimenView:
    specimen: Specimen
    page: str
    accounts: tuple[ConditioningAccount, ...]
    fits: tuple[ChannelFit, ...]  # fy, mz, fx as available
    metrics: tuple[MetricValue, ...]
    figures: tuple[FigureArtifact, ...]

    identity: SpecimenIdentity | None = None

    def metric(self, name: str, load_n: float) -> MetricValue | None:
        return next((m for m in self.metrics if m.metric == name and math.isclose(m.load_n, load_n)), None)

    @property
    def loads(self) -> list[float]:
        return sorted({m.load_n for m in self.metrics if METRICS[m.metric].per_load})

    @property
    def specimen_level(self) -> list[MetricValue]:
        return [m for m in self.metrics if not METRICS[m.metric].per_load]

    @property
    def findings(self) -> list[str]:
        return [f"{METRICS[m.metric].label} at {m.load_n / 1000:.1f} kN: {m.finding}" for m in self.metrics if m.finding]

    @property
    def fit(self) -> ChannelFit | None:
        """The lateral-force fit, which the metrics come from."""
        return next((f for f in self.fits if f.channel == "fy"), None)

    def figures_of(self, channel: str) -> list[FigureArtifact]:
        return [f for f in self.figures if f.filename.startswith(channel + "-")]


@dataclass(frozen=True)
class RunView:
    """One rig run as the data-quality section shows it."""

    run: ConditionedRun
    spec: RunSpec
    figures: tuple[FigureArtifact, ...]

    @property
    def account(self) -> ConditioningAccount:
        return self.run.account


@dataclass(frozen=True)
class DossierContext:
    """Everything a template may use. Templates get this one object as ``d``."""

    manifest: Manifest
    software_version: str
    axis_convention: str
    specimens: tuple[SpecimenView, ...]
    summary_figures: tuple[FigureArtifact, ...]
    metric_definitions: tuple[MetricDefinition, ...]
    cautions: tuple[tuple[str, str], ...]
    cautions_id: str
    nominal_load_n: float
    runs: tuple[RunView, ...] = ()
    drift: DriftEstimate | None = None
    drift_figures: tuple[FigureArtifact, ...] = ()
    offset_splits: tuple[OffsetSplit, ...] = ()
    quality_page: str = "data-quality.html"
    comparison_page: str = "comparison.html"
    vehicle_page: str = "vehicle.html"
    verdicts: tuple = ()
    standings: tuple = ()
    recommendation: tuple = (None, "")
    fitments: tuple = ()
    comparison_figures: dict = field(default_factory=dict)
    vehicle_simplifications: tuple[str, ...] = SIMPLIFICATIONS
    narrative: dict = field(default_factory=dict)  # part -> rendered HTML (Markup)
    downloads_page: str = "downloads.html"

    @property
    def signoff(self):
        return self.manifest.signoff

    @property
    def status_label(self) -> str:
        return {"draft": "DRAFT", "in review": "IN REVIEW", "released": "RELEASED"}[self.signoff.status]

    @property
    def vehicle(self):
        return self.manifest.vehicle

    @property
    def targets(self):
        return self.manifest.targets

    def verdict(self, target, specimen_id):
        return next((v for v in self.verdicts if v.target is target and v.specimen == specimen_id), None)

    @property
    def judged_specimens(self) -> list[str]:
        return list(dict.fromkeys(v.specimen for v in self.verdicts))

    def fitment(self, front: str, rear: str):
        return next((b for b in self.fitments if b.front == front and b.rear == rear), None)

    @property
    def fitment_ids(self) -> list[str]:
        return list(dict.fromkeys(b.front for b in self.fitments))

    @property
    def open_findings(self) -> list[str]:
        """Everything a reviewer should see before signing, gathered from every stage."""
        out = []
        for v in self.verdicts:
            if v.verdict in ("marginal", "does not meet"):
                out.append(f"{v.specimen}: {METRICS[v.target.metric].label.lower()} at {v.target.load_n / 1000:.1f} kN "
                           f"{v.verdict} the target {v.target.window} {v.unit} ({v.target.reference}): {v.reason}")
        for view in self.specimens:
            if view.identity:
                out += [f"{view.specimen.id}: {f}" for f in view.identity.findings]
            out += [f"{view.specimen.id}: {f}" for f in view.findings]
            warnings = sum(len(f.warnings) for f in view.fits)
            if warnings:
                out.append(f"{view.specimen.id}: {warnings} fit warning(s) (poorly determined or correlated coefficients); "
                           "see the fit reports")
        for r in self.runs:
            if r.account.verdict != "sound":
                out.append(f"run {r.account.run_index} ({r.account.source_file}): {r.account.verdict}")
        if self.drift:
            mu = next((m for m in self.drift.metrics if m.metric == "peak_friction"), None)
            if mu and abs(mu.over_session_pct) > 1.0:
                out.append(f"the rig's force level drifted {mu.over_session_pct:+.1f} % over the session "
                           f"({'corrected' if self.drift.corrected else 'not corrected'})")
        return out

    @property
    def document(self):
        return self.manifest.document

    @property
    def headline(self) -> list[MetricDefinition]:
        return [m for m in self.metric_definitions if m.headline]

    @property
    def headline_groups(self) -> list[tuple[str, list[MetricDefinition]]]:
        """The headline metrics in two tables, so that each fits a page width."""
        titles = {"cornering": "Cornering and aligning", "camber_longitudinal": "Camber and longitudinal"}
        out = []
        for key, title in titles.items():
            defs = [m for m in self.headline if m.group == key]
            if defs:
                out.append((title, defs))
        return out

    def summary_metrics(self, specimen_id: str, definitions=None) -> list[MetricValue | None]:
        """Headline metrics of a specimen at the nominal load, in registry order (None: not measured)."""
        view = next(v for v in self.specimens if v.specimen.id == specimen_id)
        return [view.metric(m.name, self.nominal_load_n) for m in (definitions or self.headline)]


def with_narrative(ctx: DossierContext, texts: dict[str, tuple[str, str]]) -> DossierContext:
    """Return `ctx` with the narrative parts rendered (sandboxed template, then Markdown)."""
    from dataclasses import replace

    from .narrative import render_narrative

    rendered = {part: Markup(render_narrative(rel, text, ctx)) for part, (rel, text) in texts.items()}
    return replace(ctx, narrative=rendered)


def make_context(manifest: Manifest, conditioned: list[ConditionedRun], models, metrics, specimen_figures,
                 summary_figures, nominal_load_n: float, quality_figures=None, drift=None, drift_figures=(),
                 offset_splits=(), judged=(), standings=(), recommendation=(None, ""), fitments=(),
                 comparison_figures=None) -> DossierContext:
    accounts = [c.account for c in conditioned]
    quality_figures = quality_figures or {}
    runs = tuple(RunView(c, manifest.runs[c.account.run_index], tuple(quality_figures.get(c.account.run_index, ())))
                 for c in conditioned)
    views = []
    for s in manifest.specimens:
        views.append(SpecimenView(
            specimen=s, page=f"specimen-{_slug(s.id)}.html",
            accounts=tuple(a for a in accounts if a.specimen == s.id),
            fits=tuple(next((m.channels for m in models if m.specimen == s.id), ())),
            metrics=tuple(m for m in metrics if m.specimen == s.id),
            figures=tuple(specimen_figures.get(s.id, ())),
            identity=specimen_identity(s, manifest),
        ))
    return DossierContext(manifest, __version__, axes.INTERNAL, tuple(views), tuple(summary_figures),
                          tuple(METRICS.values()), CAUTIONS, CAUTIONS_ID, nominal_load_n, runs, drift,
                          tuple(drift_figures), tuple(offset_splits), verdicts=tuple(judged),
                          standings=tuple(standings), recommendation=recommendation, fitments=tuple(fitments),
                          comparison_figures=dict(comparison_figures or {}))


# --- filters ---------------------------------------------------------------------------------

def _fmt_metric(value: float | None, unit: str) -> str:
    if value is None or not math.isfinite(value):
        return "–"
    return f"{value:,.{DECIMALS.get(unit, 3)}f}".replace(",", "\u2009")


def _fmt_ci(ci, unit: str) -> str:
    if not ci:
        return "not estimable"
    return f"{_fmt_metric(ci[0], unit)} … {_fmt_metric(ci[1], unit)}"


def _fmt_sig(value: float | None, digits: int = 4) -> str:
    if value is None or not math.isfinite(value):
        return "–"
    return f"{value:.{digits}g}"


def _fmt_kn(value_n: float) -> str:
    return f"{value_n / 1000:.1f}"


def _fmt_fixed(value: float | None, decimals: int = 1, signed: bool = False) -> str:
    if value is None or not math.isfinite(value):
        return "–"
    return f"{value:{'+' if signed else ''}.{decimals}f}".replace("-", "−")


def _metric_label(name: str) -> str:
    return METRICS[name].label


def make_environment(theme: Theme, project_templates: Path | None,
                     compiled_dir: Path | None = None) -> jinja2.Environment:
    """The template environment; with `compiled_dir`, compiled templates are kept there between
    builds (Jinja2's bytecode cache, keyed by each template's source)."""
    search = ([str(project_templates)] if project_templates and project_templates.is_dir() else [])
    search += [str(f) for f in theme.folders]
    compiled = None
    if compiled_dir is not None:
        try:
            compiled_dir.mkdir(parents=True, exist_ok=True)
            compiled = jinja2.FileSystemBytecodeCache(str(compiled_dir))
        except OSError:
            compiled = None  # a cache that cannot be written only costs time
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(search),
        bytecode_cache=compiled,
        autoescape=True,  # every manifest string is escaped
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters.update(metric=_fmt_metric, ci=_fmt_ci, sig=_fmt_sig, kn=_fmt_kn, fixed=_fmt_fixed,
                       metric_label=_metric_label)
    env.globals.update(options=theme.options, channel_label=CHANNEL_LABEL, channel_unit=CHANNEL_UNIT,
                       model_name=MODEL_NAME, volume=None, annexes=ANNEXES, volumes=VOLUMES,
                       volume_by_key={v.key: v for v in VOLUMES})
    return env


def render_site(ctx: DossierContext, env: jinja2.Environment, theme: Theme,
                data_files: dict[str, bytes] | None = None) -> dict[str, bytes]:
    """Return the site's files, keyed by path relative to the site folder.

    `data_files` are the machine-readable outputs written beside the site; the downloads page
    lists them with their SHA-256.
    """
    files: dict[str, bytes] = {}
    files["index.html"] = _page(env, "index.html", ctx, current="index.html")
    for view in ctx.specimens:
        files[view.page] = _page(env, "specimen.html", ctx, current=view.page, view=view)
    files[ctx.quality_page] = _page(env, "quality.html", ctx, current=ctx.quality_page)
    files[ctx.comparison_page] = _page(env, "comparison.html", ctx, current=ctx.comparison_page)
    if ctx.vehicle:
        files[ctx.vehicle_page] = _page(env, "vehicle.html", ctx, current=ctx.vehicle_page)
    files["provenance.html"] = _page(env, "provenance.html", ctx, current="provenance.html")
    files[ctx.downloads_page] = _page(env, "downloads.html", ctx, current=ctx.downloads_page,
                                      downloads=_downloads(data_files or {}))
    figures = list(ctx.summary_figures) + list(ctx.drift_figures)
    figures += [f for group in ctx.comparison_figures.values() for f in group]
    figures += [f for v in ctx.specimens for f in v.figures] + [f for r in ctx.runs for f in r.figures]
    for fig in figures:
        files[f"figures/{fig.filename}"] = fig.svg
    for name in STATIC_FILES:
        # A child theme's stylesheet adds to its parent's: parent rules first, the child's after.
        parts = [f / name for f in reversed(theme.folders) if (f / name).is_file()]
        if parts:
            files[f"static/{name}"] = b"\n".join(p.read_bytes() for p in parts)
    _require_cautions(files)
    return files


@dataclass(frozen=True)
class Volume:
    """One PDF of the dossier, rendered and cached on its own.

    The report is short: what a reviewer reads and signs (executive summary with the verdicts
    and the recommendation, conclusions, test notes, sign-off, cautions). It attaches the annexes
    and the data; the annexes hold the results in detail and the evidence. Only the report holds
    the narrative, so a change to it re-renders the report alone.
    """

    key: str
    filename: str
    template: str
    label: str
    title: str
    scope: str = ""

    @property
    def is_annex(self) -> bool:
        return self.key != REPORT_KEY


REPORT_KEY = "report"
REPORT = Volume(REPORT_KEY, "dossier.pdf", "print.html", "Report", "Report")
ANNEXES = (
    Volume("results", "annex-a-results.pdf", "print-results.html", "Annex A", "Results in detail",
           "Findings at the nominal load, every candidate against the baseline, and what the differences mean "
           "for vehicle balance"),
    Volume("specimens", "annex-b-specimens.pdf", "print-specimens.html", "Annex B", "Specimens and fit reports",
           "Identity from the sidewall, rig files, metrics by load and the fit report of every channel"),
    Volume("rig-runs", "annex-c-rig-runs.pdf", "print-rig-runs.html", "Annex C", "Rig runs and conditioning",
           "The verdict of every run; its operating points, dropped data, hysteresis, offsets, drift and coverage"),
    Volume("provenance", "annex-d-provenance.pdf", "print-provenance.html", "Annex D",
           "Method, definitions and provenance",
           "How the numbers were made, what each metric means and the source lines behind every fit"),
)
VOLUMES = (REPORT, *ANNEXES)


@dataclass(frozen=True)
class PdfJob:
    """Everything WeasyPrint needs for one volume: plain data, so that it can run in another process."""

    volume: Volume
    html: bytes
    resources: dict  # site path -> bytes: the stylesheets and figures the page refers to
    attachments: dict  # file name -> bytes
    identifier: str  # the document number
    revision: str
    date: dt.date


def pdf_job(ctx: DossierContext, env: jinja2.Environment, volume: Volume, site_files: dict[str, bytes],
            attachments: dict[str, bytes] | None = None) -> PdfJob:
    """The print page of `volume` with the files it refers to (pure: no rendering yet)."""
    attachments = dict(attachments or {})
    html = _page(env, volume.template, ctx, current=volume.template, volume=volume,
                 downloads=_downloads(attachments))
    _require_cautions({volume.template: html}, print_pages=(volume.template,))
    html = unlink_missing_anchors(html)
    referenced = set(re.findall(rb'(?:src|href)="((?:figures|static)/[^"#?]+)"', html))
    resources = {name: data for name, data in site_files.items() if name.encode() in referenced}
    return PdfJob(volume, html, resources, attachments, ctx.document.number, ctx.document.revision, ctx.document.date)


_ANCHOR_LINK = re.compile(rb'<a\b([^>]*?)\shref="#([^"]*)"([^>]*)>(.*?)</a>', re.S)


def unlink_missing_anchors(html: bytes) -> bytes:
    """Turn links to anchors that this page does not hold into plain text (a ``span`` with the
    link's other attributes): in a PDF volume they point into another volume, where no PDF
    viewer can follow them (and laying them out as links costs time for nothing)."""
    ids = set(re.findall(rb'\sid="([^"]*)"', html))

    def plain(m: re.Match) -> bytes:
        before, anchor, after, text = m.groups()
        return m.group(0) if anchor in ids else b"<span" + before + after + b">" + text + b"</span>"

    return _ANCHOR_LINK.sub(plain, html)


# Tagged PDF (structure tree: headings, tables, figures with their alternative text), on because
# it is cheap: a cold demo build, one process, counted by valgrind --tool=cachegrind
# --trace-children=yes, ran 175.7e9 instructions untagged and 182.7e9 tagged (+4.0 %; the
# specimens annex alone +8.8 %, the results annex +3.8 %).
PDF_TAGS = True


def render_pdf(job: PdfJob) -> bytes:
    """Render one volume as a PDF/A-3u with its attachments.

    Every date in it (Info, XMP, the attachments' and, through fontTools, the embedded fonts')
    is the document date at 12:00 UTC, so that the same inputs give the same bytes.
    """
    fetcher = _BuildFetcher(job.resources)
    stamp = pdf_archive.document_stamp(job.date)
    options = dict(pdf_identifier=f"{job.identifier} {job.volume.key}".encode("utf-8"), pdf_variant="pdf/a-3u",
                   uncompressed_pdf=False, pdf_tags=PDF_TAGS)
    document = weasyprint.HTML(string=job.html.decode("utf-8"), base_url=SITE_BASE_URL,
                               url_fetcher=fetcher).render(**options)
    # The print frame gives these too; set here, because a project's own frame may not (and the
    # Info dates and the XMP dates must agree, ISO 19005-1 §6.7.3).
    document.metadata.created = document.metadata.modified = pdf_archive.xmp_date(stamp)
    files = [weasyprint.Attachment(file_obj=io.BytesIO(data), name=pdf_archive.attachment_name(name),
                                   description=pdf_archive.attachment_description(name, job.identifier, job.revision),
                                   created=stamp, modified=stamp, relationship=pdf_archive.relationship(name))
             # the name tree's keys must be sorted (ISO 32000-1 §7.9.6): sort by the name written
             for name, data in sorted(job.attachments.items(), key=lambda item: pdf_archive.attachment_name(item[0]))]
    with pdf_archive.reproducible_fonts(stamp):
        pdf = document.write_pdf(attachments=files, finisher=pdf_archive.ArchiveFinisher(stamp), **options)
    if fetcher.refused:
        raise StageError(f"the PDF {job.volume.filename} asked for resources outside this build, refused: "
                         + ", ".join(sorted(fetcher.refused)))
    return pdf


def _downloads(files: dict[str, bytes]) -> list[tuple[str, int, str]]:
    return [(name, len(data), hashlib.sha256(data).hexdigest()) for name, data in sorted(files.items())]


def _page(env, template: str, ctx: DossierContext, **extra) -> bytes:
    try:
        return env.get_template(template).render(d=ctx, **extra).encode("utf-8")
    except jinja2.TemplateError as exc:
        where = getattr(exc, "filename", None) or template
        line = getattr(exc, "lineno", None)
        raise StageError(f"template {where}{f', line {line}' if line else ''}: {exc}") from None


def _require_cautions(files: dict[str, bytes], print_pages: tuple[str, ...] = ()) -> None:
    marker = f'id="{CAUTIONS_ID}"'.encode()
    pages = [name for name in files if name.endswith(".html")]
    missing = [name for name in pages if marker not in files[name] and name in ("index.html", *print_pages)]
    if missing:
        raise StageError(f"the theme's {', '.join(missing)} lacks the safety cautions block (id '{CAUTIONS_ID}'); "
                         "every dossier must carry it")


class _BuildFetcher(URLFetcher):
    """Serve only this build's files and inline data; refuse every other URL (network, disk)."""

    def __init__(self, files: dict[str, bytes]):
        super().__init__(allowed_protocols=("data",))
        self.files = files
        self.refused: set[str] = set()

    def fetch(self, url, headers=None):
        if url.startswith(SITE_BASE_URL):
            rel = url[len(SITE_BASE_URL):].split("#")[0].split("?")[0]
            if rel in self.files:
                mime = mimetypes.guess_type(rel)[0] or "application/octet-stream"
                return URLFetcherResponse(url, self.files[rel], {"Content-Type": mime})
        if url.startswith("data:image/"):  # bitmaps that matplotlib embedded in our own SVG figures
            return super().fetch(url, headers)
        self.refused.add(url if len(url) < 120 else url[:117] + "...")
        raise ValueError(f"refused: {url}")


def _slug(text: str) -> str:
    return "".join(ch.lower() if ch.isalnum() else "-" for ch in text).strip("-")
