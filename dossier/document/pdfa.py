"""The PDF volumes as archives take them: PDF/A-3u details WeasyPrint leaves open, and reading back
what a finished volume holds (its fonts, its attachments).

The fixes are made on WeasyPrint's own pydyf objects by a finisher, before the trailer is written,
so that pydyf stays the only library that writes the bytes (re-writing the file with pikepdf would
make qpdf a second one). Reading back uses pikepdf. Nothing here imports WeasyPrint or pikepdf at
import time: `font_subsetter` is asked for the environment record before any heavy import.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import io
import os
import re
import zlib
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager
from dataclasses import dataclass
from importlib import metadata
from pathlib import PurePosixPath

from ..common.errors import StageError

# Between an attachment's original relative path and the rest of its description: the PDF file
# name cannot hold the folders (it is the path with "/" replaced by "_"), the description can.
PATH_SEPARATOR = " — "

# The attachments' MIME types (ISO 19005-3 §6.8: every embedded file stream names one), from this
# table alone: WeasyPrint falls back to the machine's mime.types for what the standard library does
# not know (.md, .toml), so the same inputs would give other bytes on another machine.
MIME_TYPES = {
    ".pdf": "application/pdf",
    ".json": "application/json",
    ".csv": "text/csv",
    ".txt": "text/plain",
    ".md": "text/markdown",  # RFC 7763
    ".toml": "application/toml",
    ".html": "text/html",
    ".css": "text/css",
    ".svg": "image/svg+xml",
    ".png": "image/png",
    ".xml": "application/xml",
}
UNKNOWN_MIME_TYPE = "application/octet-stream"

_ROLE = {"Source": "source file", "Supplement": "annex", "Data": "data file"}


# --- names, dates, relationships (pure) --------------------------------------------------------


def document_stamp(date: dt.date) -> dt.datetime:
    """Return the time every date in a volume carries: the document date at 12:00 UTC."""
    return dt.datetime.combine(date, dt.time(12, 0), tzinfo=dt.UTC)


def xmp_date(stamp: dt.datetime) -> str:
    """Format `stamp` as an XMP (ISO 8601) date in UTC, which WeasyPrint also turns into the Info date."""
    return stamp.astimezone(dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def relationship(name: str) -> str:
    """Return the /AFRelationship of an attachment (ISO 32000-2 §7.11.3) from its relative path."""
    if name.startswith("inputs/") or name == "integrity/manifest-sha256.txt":
        return "Source"  # what the results were made from, and the list that pins it down
    if name.endswith(".pdf"):
        return "Supplement"  # the annexes
    return "Data"


def attachment_name(name: str) -> str:
    """Return the PDF file name of the attachment at relative path `name`."""
    return name.replace("/", "_")


def attachment_description(name: str, identifier: str, revision: str) -> str:
    """Describe an attachment, starting with its relative path so that a reader can recover it."""
    return f"{name}{PATH_SEPARATOR}{_ROLE[relationship(name)]} of {identifier} rev. {revision}"


def original_path(description: str, file_name: str) -> str:
    """Return the relative path an attachment's description starts with (the one that gives `file_name`)."""
    start = 0
    while (at := description.find(PATH_SEPARATOR, start)) >= 0:
        candidate = description[:at]
        if attachment_name(candidate) == file_name:
            return candidate
        start = at + 1
    raise ValueError(
        f"attachment {file_name!r}: its description {description!r} does not start with the "
        f"relative path it was attached from (expected 'PATH{PATH_SEPARATOR}...')"
    )


def mime_type(name: str) -> str:
    """Return the MIME type of an attachment from the suffix of its name (our table, not the machine's)."""
    return MIME_TYPES.get(PurePosixPath(name).suffix.lower(), UNKNOWN_MIME_TYPE)


# --- fonts: one subsetter, one clock ------------------------------------------------------------


def font_subsetter() -> str:
    """Name the font subsetter that `reproducible_fonts` makes WeasyPrint use, with its version."""
    return f"fontTools {metadata.version('fonttools')}"


@contextmanager
def reproducible_fonts(stamp: dt.datetime):
    """Within the block, WeasyPrint subsets fonts with fontTools, stamped with `stamp`, not the clock.

    WeasyPrint uses the system's HarfBuzz-Subset when it finds the library and fontTools
    otherwise, and the two give different bytes. We choose fontTools on every machine: it is a
    Python package whose version is pinned and recorded with the others, while HarfBuzz-Subset is a
    system library that is there or not, in whatever version the machine has. fontTools writes the
    current time into each font's head.modified unless SOURCE_DATE_EPOCH is set
    (fontTools.misc.timeTools.timestampNow), so it is set to `stamp` for the block and restored
    after (a process renders one PDF at a time).
    """
    from weasyprint.pdf import fonts

    # WeasyPrint takes the fontTools path exactly when this module global is None, as it is on a
    # machine without the library; a WeasyPrint that no longer works this way must not silently
    # switch subsetters.
    if not hasattr(fonts, "harfbuzz_subset") or not hasattr(getattr(fonts, "Font", None), "_fonttools_subset"):
        import weasyprint

        raise StageError(
            f"WeasyPrint {weasyprint.__version__} no longer offers the choice of the fontTools "
            "font subsetter that dossier relies on for byte-stable PDFs; use WeasyPrint 70"
        )
    saved_library, saved_epoch = fonts.harfbuzz_subset, os.environ.get("SOURCE_DATE_EPOCH")
    fonts.harfbuzz_subset = None
    os.environ["SOURCE_DATE_EPOCH"] = str(int(stamp.timestamp()))
    try:
        yield
    finally:
        fonts.harfbuzz_subset = saved_library
        if saved_epoch is None:
            os.environ.pop("SOURCE_DATE_EPOCH", None)
        else:
            os.environ["SOURCE_DATE_EPOCH"] = saved_epoch


# --- the finisher: edits of WeasyPrint's pydyf objects before the trailer -----------------------


@dataclass(frozen=True)
class ArchiveFinisher:
    """WeasyPrint finisher: what an archive's PDF/A-3 intake checks beyond what WeasyPrint 70 writes."""

    stamp: dt.datetime

    def __call__(self, document, pdf) -> None:
        _no_interpolation(pdf)
        _associate_attachments(pdf)
        _metadata_date(pdf, self.stamp)
        _deflate_attachments_once(pdf)  # last: no key may be added to a stream's dictionary after it


# Attachments at least this large (a large project's rig files and conditioned curves) are
# deflated at level 1: about 12 times as fast as pydyf's level 9 on rig data, and about a sixth
# larger (measured on a 65 MB, 1 million-row rig file: 86 against 7 MB/s, 0.46 against 0.39 of
# the size). The level depends on the size alone, so the same inputs give the same bytes.
LARGE_ATTACHMENT_BYTES = 4 << 20


def _deflate_attachments_once(pdf) -> None:
    """Deflate each attached file once, here, in threads (zlib releases the GIL).

    pydyf deflates a stream, at level 9, every time its bytes are asked for, and writing a
    document asks twice (once for the document's identifier, once for the file). Deflated here
    with pydyf's settings (level 9 below LARGE_ATTACHMENT_BYTES) and the /Filter key added where
    pydyf adds it (after the others, before /Length), a file is byte for byte what pydyf writes.
    """
    import pydyf

    streams = [
        stream
        for _, stream in _attached_files(pdf)
        if isinstance(stream, pydyf.Stream) and stream.compress and all(isinstance(i, bytes) for i in stream.stream)
    ]
    if not streams:
        return

    def deflate(stream) -> bytes:
        data = b"\n".join(stream.stream)
        packer = zlib.compressobj(level=9 if len(data) < LARGE_ATTACHMENT_BYTES else 1)
        return packer.compress(data) + packer.flush()

    with ThreadPoolExecutor(max(1, min(len(streams), os.cpu_count() or 1))) as threads:
        packed = list(threads.map(deflate, streams))
    for stream, data in zip(streams, packed):
        stream.stream = [data]
        stream.compress = False
        stream.extra["Filter"] = "/FlateDecode"


def _object(pdf, reference):
    """Return the pydyf object that `reference` (b"N 0 R") points to."""
    if isinstance(reference, (bytes, str)):
        return pdf.objects[int(reference.split()[0])]
    return reference


def _attached_files(pdf) -> list:
    """(file specification, embedded file stream) of every attachment in the catalog's name tree."""
    names = pdf.catalog.get("Names", {})
    if "EmbeddedFiles" not in names:
        return []
    tree = _object(pdf, names["EmbeddedFiles"])
    specs = [_object(pdf, reference) for reference in tree["Names"][1::2]]
    return [(spec, _object(pdf, spec["EF"]["F"])) for spec in specs]


def _no_interpolation(pdf) -> None:
    """Mark every image (and soft mask) not to be interpolated.

    ISO 19005-2 §6.2.8 forbids /Interpolate true. The bitmaps are matplotlib's rasterized layers
    inside our SVG figures: WeasyPrint reads `image-rendering` from the SVG's own <image>
    element, which no stylesheet of the HTML page reaches, and writes true when it is absent.
    """
    import pydyf

    for obj in pdf.objects:
        if isinstance(obj, pydyf.Stream) and obj.extra.get("Subtype") == "/Image":
            obj.extra["Interpolate"] = "false"


def _associate_attachments(pdf) -> None:
    """List each attachment once in the catalog's /AF, with its relationship and MIME type.

    ISO 19005-3 §6.8. WeasyPrint 70 lists each file specification twice (once from the name tree,
    once from the objects) and finds relationships by MD5, which two identical files share.
    """
    import pydyf

    if "EmbeddedFiles" not in pdf.catalog.get("Names", {}):
        pdf.catalog.pop("AF", None)
        return
    listed = pydyf.Array()
    for spec, stream in _attached_files(pdf):
        file_name = spec["UF"].string
        try:
            original = original_path(spec["Desc"].string, file_name)
        except ValueError:  # not attached by render_pdf (a template's own <link rel="attachment">)
            original = file_name
        spec["AFRelationship"] = "/" + relationship(original)
        stream.extra["Subtype"] = "/" + mime_type(original).replace("/", "#2f")
        listed.append(spec.reference)
    pdf.catalog["AF"] = listed


def _metadata_date(pdf, stamp: dt.datetime) -> None:
    """Add xmp:MetadataDate to the XMP packet, the same time as xmp:ModifyDate.

    WeasyPrint writes it only for PDF/X-4. The packet is one rdf:RDF, so the property goes in a
    description of its own inside it (not after it, where WeasyPrint puts extra XMP).
    """
    stream = _object(pdf, pdf.catalog["Metadata"])
    packet = b"".join(part if isinstance(part, bytes) else str(part).encode() for part in stream.stream)
    if b"xmp:MetadataDate" in packet:
        return
    description = (
        '<rdf:Description rdf:about="" xmlns:xmp="http://ns.adobe.com/xap/1.0/">'
        f"<xmp:MetadataDate>{xmp_date(stamp)}</xmp:MetadataDate></rdf:Description>"
    ).encode()
    end = packet.rindex(b"</rdf:RDF>")
    stream.stream = [packet[:end] + description + packet[end:]]


# --- reading a finished volume back (pure: bytes in, records out) -------------------------------


@dataclass(frozen=True, order=True)
class EmbeddedFont:
    """One font program embedded in a PDF, as the environment record lists it."""

    name: str  # full name from the program's name table (name ID 4), or the CFF/Type 1 font name
    version: str  # version string (name ID 5), or the CFF/Type 1 version
    sha256: str  # of the embedded program's bytes, filters removed
    base_font: str  # the PDF's /BaseFont, subset tag included


_FONT_FILES = ("/FontFile", "/FontFile2", "/FontFile3")


def embedded_fonts(pdf_bytes: bytes) -> tuple[EmbeddedFont, ...]:
    """Return the font programs embedded in a PDF, sorted and without repeats."""
    import pikepdf

    records = set()
    with pikepdf.open(io.BytesIO(pdf_bytes)) as pdf:
        for obj in pdf.objects:
            if not isinstance(obj, pikepdf.Dictionary) or obj.get("/Type") != "/Font" or "/FontDescriptor" not in obj:
                continue  # a Type 0 font's program is in its descendant, which is visited on its own
            descriptor = obj.FontDescriptor
            key = next((k for k in _FONT_FILES if k in descriptor), None)
            if key is None:
                continue
            stream = descriptor[key]
            program = stream.read_bytes()
            name, version = _font_program_name(program, key, str(stream.get("/Subtype", "")))
            records.add(EmbeddedFont(name, version, hashlib.sha256(program).hexdigest(), str(obj.BaseFont)[1:]))
    return tuple(sorted(records))


def _font_program_name(program: bytes, key: str, subtype: str) -> tuple[str, str]:
    """Return (name, version) of an embedded font program."""
    if key == "/FontFile":  # Type 1: the clear-text part names it
        head = program[:4096].decode("latin-1")
        name = re.search(r"/FontName\s*/(\S+)", head)
        version = re.search(r"/version\s*\(([^)]*)\)", head)
        return (name.group(1) if name else "", version.group(1) if version else "")
    if key == "/FontFile3" and subtype in ("/Type1C", "/CIDFontType0C"):  # bare CFF
        from fontTools.cffLib import CFFFontSet

        cff = CFFFontSet()
        cff.decompile(io.BytesIO(program), otFont=None)
        top = cff[cff.fontNames[0]]
        return cff.fontNames[0], str(getattr(top, "version", ""))
    from fontTools.ttLib import TTFont

    font = TTFont(io.BytesIO(program), lazy=True)
    names = font["name"]
    name = names.getDebugName(4) or names.getDebugName(6) or names.getDebugName(1) or ""
    return name, names.getDebugName(5) or ""


def attachments(pdf_bytes: bytes) -> dict[str, bytes]:
    """Return the files embedded in a PDF by the relative path each was attached from.

    Raises ValueError when an attachment's description does not give its path, gives an unsafe
    one (absolute, or with ".."), or repeats one.
    """
    import pikepdf

    out: dict[str, bytes] = {}
    with pikepdf.open(io.BytesIO(pdf_bytes)) as pdf:
        for key, spec in pdf.attachments.items():
            file_name = str(spec.obj.get("/UF", key))  # /F drops what is not ASCII, /UF keeps it
            name = original_path(spec.description or "", file_name)
            path = PurePosixPath(name)
            if path.is_absolute() or ".." in path.parts or "\\" in name or not name:
                raise ValueError(f"attachment {file_name!r}: unsafe path {name!r} in its description")
            if name in out:
                raise ValueError(f"attachment {file_name!r}: path {name!r} is attached twice")
            # The bytes as they are: whether they are the ones attached is for the integrity
            # manifest to say (a /CheckSum can be forged along with them).
            out[name] = spec.obj.EF.F.read_bytes()
    return out
