"""The PDF volumes: the print page of each volume rendered by WeasyPrint as a PDF/A-3u.

The PDF is rendered from the same section templates as the site, with the theme's print CSS;
its URL fetcher serves only the files of this build and fetches nothing from the network or
the disk.
"""

from __future__ import annotations

import datetime as dt
import io
import mimetypes
import re
from dataclasses import dataclass

import jinja2
import weasyprint
from weasyprint.urls import URLFetcher, URLFetcherResponse

from ..common.errors import StageError
from ..document import pdfa as pdf_archive
from .context import DossierContext
from .pages import downloads, page, require_cautions
from .volumes import Volume

SITE_BASE_URL = "https://dossier.invalid/site/"  # never fetched: the fetcher serves from memory


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


def pdf_job(
    ctx: DossierContext,
    env: jinja2.Environment,
    volume: Volume,
    site_files: dict[str, bytes],
    attachments: dict[str, bytes] | None = None,
) -> PdfJob:
    """The print page of `volume` with the files it refers to (pure: no rendering yet)."""
    attachments = dict(attachments or {})
    html = page(env, volume.template, ctx, current=volume.template, volume=volume, downloads=downloads(attachments))
    require_cautions({volume.template: html}, print_pages=(volume.template,))
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
    options = dict(
        pdf_identifier=f"{job.identifier} {job.volume.key}".encode(),
        pdf_variant="pdf/a-3u",
        uncompressed_pdf=False,
        pdf_tags=PDF_TAGS,
    )
    document = weasyprint.HTML(string=job.html.decode("utf-8"), base_url=SITE_BASE_URL, url_fetcher=fetcher).render(
        **options
    )
    # The print frame gives these too; set here, because a project's own frame may not (and the
    # Info dates and the XMP dates must agree, ISO 19005-1 §6.7.3).
    document.metadata.created = document.metadata.modified = pdf_archive.xmp_date(stamp)
    files = [
        weasyprint.Attachment(
            file_obj=io.BytesIO(data),
            name=pdf_archive.attachment_name(name),
            description=pdf_archive.attachment_description(name, job.identifier, job.revision),
            created=stamp,
            modified=stamp,
            relationship=pdf_archive.relationship(name),
        )
        # the name tree's keys must be sorted (ISO 32000-1 §7.9.6): sort by the name written
        for name, data in sorted(job.attachments.items(), key=lambda item: pdf_archive.attachment_name(item[0]))
    ]
    with pdf_archive.reproducible_fonts(stamp):
        pdf = document.write_pdf(attachments=files, finisher=pdf_archive.ArchiveFinisher(stamp), **options)
    if fetcher.refused:
        raise StageError(
            f"the PDF {job.volume.filename} asked for resources outside this build, refused: "
            + ", ".join(sorted(fetcher.refused))
        )
    return pdf


class _BuildFetcher(URLFetcher):
    """Serve only this build's files and inline data; refuse every other URL (network, disk)."""

    def __init__(self, files: dict[str, bytes]):
        super().__init__(allowed_protocols=("data",))
        self.files = files
        self.refused: set[str] = set()

    def fetch(self, url, headers=None):
        if url.startswith(SITE_BASE_URL):
            rel = url[len(SITE_BASE_URL) :].split("#")[0].split("?")[0]
            if rel in self.files:
                mime = mimetypes.guess_type(rel)[0] or "application/octet-stream"
                return URLFetcherResponse(url, self.files[rel], {"Content-Type": mime})
        if url.startswith("data:image/"):  # bitmaps that matplotlib embedded in our own SVG figures
            return super().fetch(url, headers)
        self.refused.add(url if len(url) < 120 else url[:117] + "...")
        raise ValueError(f"refused: {url}")
