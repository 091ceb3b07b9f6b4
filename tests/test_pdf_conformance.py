"""PDF/A-3u conformance of the PDF volumes, checked with pikepdf (no full PDF/A validator is installed).

Each check names the clause of ISO 19005-3:2012 it implements, or the clause of ISO 19005-2:2011
that part 3 inherits. The clause numbers are recalled, not read from the standards' text: each
carries "from memory". What these checks cannot see (content-stream operators, colour use inside
content streams, glyph widths against the font programs, inline images) needs a full validator.
"""

from __future__ import annotations

import base64
import datetime as dt
import hashlib
import io
import os
import pickle
import subprocess
import sys
import textwrap

import pikepdf
import projects as P
import pytest
from pikepdf.models.metadata import decode_pdf_date
from test_document import LOADS, tire

from dossier.engine.build import build

ATTACHED_ONLY = "integrity/manifest-sha256.txt"  # the report's own manifest (every file but itself): no file beside it
AUTHORS = ["A. Tester", "B. Prüfer"]  # two people, one name outside ASCII
DOCUMENT_DATE = dt.date(2026, 11, 20)  # projects.MANIFEST_HEAD
VOLUMES = (
    "dossier.pdf",
    "annex-a-results.pdf",
    "annex-b-specimens.pdf",
    "annex-c-rig-runs.pdf",
    "annex-d-provenance.pdf",
)
# ISO 32000-1:2008 §12.6.4 action types that ISO 19005-2 §6.5.1 forbids (from memory)
FORBIDDEN_ACTIONS = {
    "/Launch",
    "/Sound",
    "/Movie",
    "/ResetForm",
    "/ImportData",
    "/Hide",
    "/SetOCGState",
    "/Rendition",
    "/Trans",
    "/GoTo3DView",
    "/JavaScript",
    "/SetState",
    "/NoOp",
}
# ISO 32000-1:2008 §11.3.5 Tables 136 and 137: the standard blend modes
BLEND_MODES = {
    "/Normal",
    "/Compatible",
    "/Multiply",
    "/Screen",
    "/Overlay",
    "/Darken",
    "/Lighten",
    "/ColorDodge",
    "/ColorBurn",
    "/HardLight",
    "/SoftLight",
    "/Difference",
    "/Exclusion",
    "/Hue",
    "/Saturation",
    "/Color",
    "/Luminosity",
}
# ISO 32000-2:2020 §7.11.3 Table 43 (AFRelationship values), as ISO 19005-3 §6.8 allows them (from memory)
RELATIONSHIPS = {
    "/Source",
    "/Data",
    "/Alternative",
    "/Supplement",
    "/EncryptedPayload",
    "/FormData",
    "/Schema",
    "/Unspecified",
}


def _expected_relationship(name: str) -> str:
    """Our convention for the report's attachments (see the PDF section of DEVELOPERS.md)."""
    if name.startswith("inputs/") or name == "integrity/manifest-sha256.txt":
        return "/Source"
    return "/Supplement" if name.endswith(".pdf") else "/Data"


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    """One small project with two authors, built once: its output folder and the five PDFs' bytes."""
    root = tmp_path_factory.mktemp("conformance") / "proj"
    t, a, fz, fy = P.sweep_samples(LOADS, tire(), noise_n=10.0, seed=4)
    P.write_csv(root / "rig/a.csv", ["TIME", "SLIP_ANGLE", "FZ", "FY"], [t, -a, -fz, -fy])
    head = P.MANIFEST_HEAD.replace(
        'authors = ["A. Tester"]', "authors = [" + ", ".join(f'"{n}"' for n in AUTHORS) + "]"
    )
    assert head != P.MANIFEST_HEAD
    text = (
        head
        + P.specimen_block("A")
        + P.run_block("A", "rig/a.csv", LOADS)
        + "\n[fit]\nnominal_load_n = 4000\nleave_one_load_out = false\n"
    )
    (root / "dossier.toml").write_text(text, encoding="utf-8")
    out = root.parent / "out"
    build(root, out, use_cache=False)
    return out, {name: (out / name).read_bytes() for name in VOLUMES}


@pytest.fixture(scope="module")
def opened(built):
    _, data = built
    return {name: pikepdf.open(io.BytesIO(pdf)) for name, pdf in data.items()}


def _dicts(pdf: pikepdf.Pdf):
    """Every dictionary of the file: indirect objects (stream dictionaries included) and the
    direct dictionaries nested in them (an annotation's /A action, for instance)."""

    def walk(obj, depth):
        if isinstance(obj, (pikepdf.Dictionary, pikepdf.Stream)):
            yield obj
            children = [obj[key] for key in obj.keys()]  # noqa: SIM118 - pikepdf objects
        elif isinstance(obj, pikepdf.Array):
            children = list(obj)
        else:
            return
        for child in children:
            if depth < 8 and isinstance(child, (pikepdf.Dictionary, pikepdf.Array)) and not child.is_indirect:
                yield from walk(child, depth + 1)

    for obj in pdf.objects:
        yield from walk(obj, 0)


def _metadata(pdf: pikepdf.Pdf):
    return pdf.open_metadata(set_pikepdf_as_editor=False, update_docinfo=False)


def _xmp_date(text: str) -> dt.datetime:
    value = dt.datetime.fromisoformat(text)
    assert value.tzinfo is not None, f"XMP date {text!r} has no time zone"  # ISO 8601 as XMP dates are, own rule
    return value


@pytest.mark.parametrize("name", VOLUMES)
def test_header_and_binary_comment(built, name):
    data = built[1][name]
    # ISO 19005-2 §6.1.2 (from memory): "%PDF-1.n" then a comment line of at least four bytes above 127
    first, second = data.split(b"\n", 2)[:2]
    assert first.rstrip(b"\r") in (b"%PDF-1.4", b"%PDF-1.5", b"%PDF-1.6", b"%PDF-1.7"), first
    assert second.startswith(b"%") and sum(byte > 127 for byte in second[1:5]) == 4, second


@pytest.mark.parametrize("name", VOLUMES)
def test_trailer_has_an_identifier_and_no_encryption(opened, name):
    pdf = opened[name]
    # ISO 19005-2 §6.1.3 (from memory): the trailer holds /ID, two strings; /Encrypt is absent
    ids = pdf.trailer.get("/ID")
    assert ids is not None and len(ids) == 2 and all(isinstance(x, pikepdf.String) and len(bytes(x)) for x in ids)
    assert "/Encrypt" not in pdf.trailer and not pdf.is_encrypted


@pytest.mark.parametrize("name", VOLUMES)
def test_output_intent_embeds_an_icc_profile(opened, name):
    pdf = opened[name]
    # ISO 19005-2 §6.2.2 (from memory): a PDF/A output intent (/GTS_PDFA1) with an embedded ICC
    # profile of an output or display device; several output intents must share one profile
    intents = [oi for oi in pdf.Root.get("/OutputIntents", []) if oi.get("/S") == "/GTS_PDFA1"]
    assert len(intents) >= 1
    profiles = {oi.DestOutputProfile.objgen for oi in intents}
    assert len(profiles) == 1
    icc = intents[0].DestOutputProfile.read_bytes()
    # ICC.1:2010 §7.2: size at 0, version at 8, device class at 12, colour space at 16, 'acsp' at 36
    assert icc[36:40] == b"acsp" and int.from_bytes(icc[0:4], "big") == len(icc)
    assert icc[12:16] in (b"mntr", b"prtr") and icc[8] < 5  # ICC v5 (iccMAX) profiles are not allowed
    channels = {b"RGB ": 3, b"GRAY": 1, b"CMYK": 4}[icc[16:20]]
    assert int(intents[0].DestOutputProfile.N) == channels


@pytest.mark.parametrize("name", VOLUMES)
def test_xmp_identifies_pdf_a_3u(opened, name):
    pdf = opened[name]
    # ISO 19005-2 §6.6.2.1 (from memory): the catalog's /Metadata is an XMP stream, /Type /Metadata /Subtype /XML
    stream = pdf.Root.Metadata
    assert stream.Type == "/Metadata" and stream.Subtype == "/XML"
    packet = stream.read_bytes()
    # ISO 19005-2 §6.6.2.1 (from memory): the packet header carries neither "bytes" nor "encoding"
    header = packet[: packet.index(b"?>")]
    assert header.startswith(b"<?xpacket begin=") and b"bytes=" not in header and b"encoding=" not in header
    # ISO 19005-3 §6.6.4 (from memory): pdfaid:part 3, pdfaid:conformance U
    meta = _metadata(pdf)
    assert meta.get("pdfaid:part") == "3" and meta.get("pdfaid:conformance") == "U"


@pytest.mark.parametrize("name", VOLUMES)
def test_xmp_agrees_with_the_information_dictionary(opened, name):
    pdf = opened[name]
    meta, info = _metadata(pdf), pdf.docinfo
    # ISO 19005-1 §6.7.3 (Table 1), kept by ISO 19005-2 §6.6.3 (from memory): every Info entry has
    # its XMP property with an equivalent value
    assert str(info.Title) == meta.get("dc:title")
    assert str(info.Subject) == meta.get("dc:description")
    assert str(info.Creator) == meta.get("xmp:CreatorTool")
    assert str(info.Producer) == meta.get("pdf:Producer")
    assert str(info.Author) == ", ".join(meta.get("dc:creator"))  # Info holds one string for all authors
    created, modified = decode_pdf_date(str(info.CreationDate)), decode_pdf_date(str(info.ModDate))
    assert created == _xmp_date(meta.get("xmp:CreateDate"))
    assert modified == _xmp_date(meta.get("xmp:ModifyDate"))
    # XMP Specification Part 1 (2012) §8.4 (from memory): MetadataDate, the last change of the
    # metadata, is not before the modification; ours are all the document date at 12:00 UTC
    # (our rule: the same inputs give the same bytes, so the clock never enters the PDF)
    assert _xmp_date(meta.get("xmp:MetadataDate")) >= modified >= created
    noon = dt.datetime.combine(DOCUMENT_DATE, dt.time(12, 0), tzinfo=dt.UTC)
    assert created == modified == _xmp_date(meta.get("xmp:MetadataDate")) == noon


@pytest.mark.parametrize("name", VOLUMES)
def test_one_creator_entry_per_author(opened, name):
    # XMP Specification Part 1 (2012) §8.3 (from memory): dc:creator is an ordered array
    # (rdf:Seq) of the authors' names, one entry each
    assert _metadata(opened[name]).get("dc:creator") == AUTHORS


def test_no_image_is_interpolated(opened):
    # ISO 19005-2 §6.2.8 (from memory), inherited by 19005-3: no image dictionary has /Interpolate true
    # (soft masks are image XObjects too)
    images = 0
    for name, pdf in opened.items():
        for obj in pdf.objects:
            if isinstance(obj, pikepdf.Stream) and obj.get("/Subtype") == "/Image":
                images += 1
                assert obj.get("/Interpolate", False) is False, f"{name}: image {obj.objgen} is interpolated"
                # ISO 19005-2 §6.2.8 (from memory): no /Alternates, no /OPI
                assert "/Alternates" not in obj and "/OPI" not in obj
    assert images > 0, "no bitmap in the volumes: the check above tested nothing"  # fit figures have some


@pytest.mark.parametrize("name", VOLUMES)
def test_every_font_is_embedded_and_maps_to_unicode(opened, name):
    pdf = opened[name]
    fonts = [
        o
        for o in pdf.objects
        if isinstance(o, pikepdf.Dictionary)
        and o.get("/Type") == "/Font"
        and o.get("/Subtype") not in ("/CIDFontType0", "/CIDFontType2")
    ]  # descendants: through their Type 0
    assert fonts, "no font: the checks below tested nothing"
    for font in fonts:
        subtype = font.Subtype
        # ISO 19005-2 §6.2.11.4.1 (from memory): the program of every font used for rendering is embedded
        if subtype == "/Type0":
            descriptor = font.DescendantFonts[0].FontDescriptor
        elif subtype != "/Type3":  # a Type 3 font's glyphs are content streams in the file
            descriptor = font.FontDescriptor
        if subtype != "/Type3":
            assert any(k in descriptor for k in ("/FontFile", "/FontFile2", "/FontFile3")), str(font.get("/BaseFont"))
        # ISO 19005-2 §6.2.11.7.2 (from memory), level U: a /ToUnicode CMap for every font, whose
        # values are never U+0000, U+FEFF or U+FFFE
        assert "/ToUnicode" in font, str(font.get("/BaseFont"))
        cmap = font.ToUnicode.read_bytes()
        assert b"beginbfchar" in cmap or b"beginbfrange" in cmap
        for target in (b"<0000>", b"<feff>", b"<fffe>"):
            assert b"> " + target not in cmap.lower()


@pytest.mark.parametrize("name", VOLUMES)
def test_no_javascript_launch_or_other_forbidden_actions(opened, name):
    pdf = opened[name]
    # ISO 19005-2 §6.5.1 (from memory): no forbidden action type anywhere, no JavaScript name tree
    for obj in _dicts(pdf):
        if "/S" in obj and ("/Type" not in obj or obj.get("/Type") == "/Action"):
            assert str(obj.S) not in FORBIDDEN_ACTIONS, f"{name}: action {obj.S}"
        assert "/JS" not in obj
    assert "/JavaScript" not in pdf.Root.get("/Names", {})
    # ISO 19005-2 §6.5.2 (from memory): no additional actions on the catalog or the pages
    assert "/AA" not in pdf.Root
    for page in pdf.pages:
        assert "/AA" not in page.obj
        # ISO 19005-2 §6.3.2 (from memory): annotations print (flag 3) and are neither hidden (2),
        # invisible (1) nor no-view (6)
        for annot in page.obj.get("/Annots", []):
            flags = int(annot.get("/F", 0))
            assert flags & 4 and not flags & (1 | 2 | 32), f"{name}: annotation flags {flags}"


@pytest.mark.parametrize("name", VOLUMES)
def test_transparency_uses_standard_blend_modes_and_the_output_intent(opened, name):
    pdf = opened[name]
    transparent = False
    for obj in _dicts(pdf):
        if "/BM" in obj:
            # ISO 19005-2 §6.2.10 (from memory): only the standard blend modes of ISO 32000-1 §11.3.5
            modes = obj.BM if isinstance(obj.BM, pikepdf.Array) else [obj.BM]
            assert all(str(m) in BLEND_MODES for m in modes), f"{name}: blend mode {obj.BM}"
        if "/CA" in obj or "/ca" in obj or "/SMask" in obj:
            transparent = transparent or "/SMask" in obj or float(obj.get("/CA", 1)) < 1 or float(obj.get("/ca", 1)) < 1
        group = obj.get("/Group") if "/Group" in obj else None
        if group is not None and group.get("/S") == "/Transparency":
            transparent = True
            # ISO 19005-2 §6.2.10 (from memory): a transparency group's blending colour space is
            # given (/CS) unless the file has a PDF/A output intent
            assert "/CS" in group or "/OutputIntents" in pdf.Root
    if transparent:
        assert any(oi.get("/S") == "/GTS_PDFA1" for oi in pdf.Root.OutputIntents)


def test_each_attachment_is_associated_once_with_its_relationship(built, opened):
    out, _ = built
    pdf = opened["dossier.pdf"]
    specs = [pdf.attachments[key].obj for key in pdf.attachments]
    assert len(specs) >= 5  # the annexes and the data files
    af = list(pdf.Root.get("/AF", []))
    # ISO 19005-3 §6.8 (from memory): every embedded file's specification is associated with the
    # document through the catalog's /AF, and /AF lists file specifications only; listed once
    # each: our reading, since a second entry says nothing more
    assert sorted(o.objgen for o in af) == sorted(o.objgen for o in specs)
    assert len({o.objgen for o in af}) == len(af)
    names = set()
    for spec in specs:
        # ISO 19005-3 §6.8 (from memory): /F and /UF, an /AFRelationship from ISO 32000-2 Table 43
        assert "/F" in spec and "/UF" in spec and str(spec.get("/AFRelationship")) in RELATIONSHIPS
        stream = spec.EF.F
        # ISO 19005-3 §6.8 (from memory): the embedded file stream has a MIME type as /Subtype
        # (RFC 2046 type/subtype) and /Params /ModDate, a PDF date (ISO 32000-1 §7.9.4)
        mime = str(stream.Subtype)[1:]
        assert mime.count("/") == 1 and all(mime.split("/")), mime
        assert decode_pdf_date(str(stream.Params.ModDate)).tzinfo is not None
        # our rule: the description starts with the original relative path and " — "
        original = str(spec.Desc).split(" — ", 1)[0]
        assert str(spec.Desc).startswith(original + " — "), str(spec.Desc)
        assert original == ATTACHED_ONLY or (out / original).is_file(), original
        assert str(spec.UF) == original.replace("/", "_")
        assert str(spec.AFRelationship) == _expected_relationship(original), original
        names.add(original)
    assert {"annex-a-results.pdf", "results.json"} <= names
    for annex in VOLUMES[1:]:
        assert "/AF" not in opened[annex].Root and len(opened[annex].attachments) == 0


def test_attachments_come_back_by_their_original_paths(built):
    from dossier.document.pdfa import attachments

    out, data = built
    files = attachments(data["dossier.pdf"])
    assert files and all(files[name] == (out / name).read_bytes() for name in files if name != ATTACHED_ONLY)
    assert set(VOLUMES[1:]) <= set(files)


def test_embedded_fonts_are_recorded_by_program_hash(built, opened):
    from dossier.document.pdfa import embedded_fonts

    for name in VOLUMES:
        records = embedded_fonts(built[1][name])
        assert records == tuple(sorted(set(records))) and records
        pdf = opened[name]
        programs = {}
        for font in (o for o in pdf.objects if isinstance(o, pikepdf.Dictionary) and o.get("/Type") == "/Font"):
            if font.Subtype == "/Type0":
                descriptor = font.DescendantFonts[0].FontDescriptor
                program = next(descriptor[k] for k in ("/FontFile", "/FontFile2", "/FontFile3") if k in descriptor)
                programs[str(font.BaseFont)[1:]] = hashlib.sha256(program.read_bytes()).hexdigest()
        assert {(r.base_font, r.sha256) for r in records} == set(programs.items())
        assert all(r.name and r.version for r in records)


# --- one volume rendered in separate processes: the bytes depend on neither clock nor hash seed --


def _png_2x2() -> bytes:
    from PIL import Image

    image = Image.new("RGB", (2, 2), (31, 74, 87))
    image.putpixel((0, 0), (200, 60, 30))
    buf = io.BytesIO()
    image.save(buf, format="PNG")
    return buf.getvalue()


def _small_job():
    from dossier.document.pdf import PdfJob
    from dossier.document.volumes import REPORT

    png = base64.b64encode(_png_2x2()).decode()
    svg = (
        f'<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink" width="120" '
        f'height="60" viewBox="0 0 120 60"><rect width="120" height="60" fill="#fff"/><image x="10" y="10" '
        f'width="40" height="40" xlink:href="data:image/png;base64,{png}"/></svg>'
    ).encode()
    html = (
        '<!DOCTYPE html><html lang="en"><head><meta charset="utf-8"><title>Small volume</title>'
        + "".join(f'<meta name="author" content="{n}">' for n in AUTHORS)
        + "</head><body><h1>Small volume</h1><p>Text in a font that gets subset: Fy, Mz, α.</p>"
        '<img src="figures/f.svg" alt="a figure with a bitmap layer"></body></html>'
    ).encode()
    shared = b"same bytes in two files\n"
    attached = {
        "inputs/rig/a.csv": b"t,fy\n0,1\n",
        "inputs/dossier.toml": b"[document]\n",
        "inputs/notes/s.md": b"# s\n",
        "integrity/manifest-sha256.txt": b"00  results.json\n",
        "annex-z.pdf": b"%PDF-1.7\n",
        "results.json": shared,
        "conditioned/run-00.csv": shared,
    }
    return PdfJob(REPORT, html, {"figures/f.svg": svg}, attached, "T-0001", "A", DOCUMENT_DATE)


CHILD = textwrap.dedent("""
    import pickle, sys, time
    job_path, out_path, offset_s = sys.argv[1], sys.argv[2], float(sys.argv[3])
    real = time.time
    time.time = lambda: real() + offset_s  # another wall clock: fontTools stamps fonts with it
    from dossier.document.pdf import render_pdf
    with open(job_path, "rb") as f:
        job = pickle.load(f)
    with open(out_path, "wb") as f:
        f.write(render_pdf(job))
""")


@pytest.fixture(scope="module")
def small_renders(tmp_path_factory):
    """The same small volume rendered by two processes (hash seeds 1 and 2, clocks 40 days apart)."""
    folder = tmp_path_factory.mktemp("small-job")
    job = _small_job()
    (folder / "job.pickle").write_bytes(pickle.dumps(job))
    env = {k: v for k, v in os.environ.items() if k != "SOURCE_DATE_EPOCH"}
    procs = [
        subprocess.Popen(
            [sys.executable, "-c", CHILD, str(folder / "job.pickle"), str(folder / f"{seed}.pdf"), str(offset)],
            env={**env, "PYTHONHASHSEED": str(seed)},
            stderr=subprocess.PIPE,
        )
        for seed, offset in ((1, 0.0), (2, 40 * 86400.0))
    ]
    for proc in procs:
        _, err = proc.communicate()
        assert proc.returncode == 0, err.decode()
    return job, (folder / "1.pdf").read_bytes(), (folder / "2.pdf").read_bytes()


def test_a_volume_is_byte_identical_across_processes_and_clocks(small_renders, monkeypatch):
    from dossier.document.pdf import render_pdf

    job, first, second = small_renders
    assert first == second  # fonts subset by fontTools carry head.modified: not the clock's
    # a SOURCE_DATE_EPOCH already set changes nothing and is given back
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1")
    assert render_pdf(job) == first
    assert os.environ["SOURCE_DATE_EPOCH"] == "1"


def test_small_volume_attachments_follow_the_naming_rules(small_renders):
    from dossier.document.pdfa import attachments

    job, pdf_bytes, _ = small_renders
    pdf = pikepdf.open(io.BytesIO(pdf_bytes))
    by_original = {str(pdf.attachments[k].obj.Desc).split(" — ", 1)[0]: pdf.attachments[k].obj for k in pdf.attachments}
    assert set(by_original) == set(job.attachments)
    for name, spec in by_original.items():
        assert str(spec.AFRelationship) == _expected_relationship(name), name  # the two identical files too
    assert len(pdf.Root.AF) == len(job.attachments)
    # MIME types from our own table, not the machine's mime.types (RFC 7763 text/markdown;
    # application/toml as registered with IANA, from memory)
    mime = {name: str(spec.EF.F.Subtype) for name, spec in by_original.items()}
    assert mime["inputs/notes/s.md"] == "/text/markdown" and mime["inputs/dossier.toml"] == "/application/toml"
    assert attachments(pdf_bytes) == job.attachments
    for obj in pdf.objects:
        if isinstance(obj, pikepdf.Stream) and obj.get("/Subtype") == "/Image":
            assert obj.get("/Interpolate", False) is False  # ISO 19005-2 §6.2.8 (from memory)


def test_the_path_comes_back_even_when_the_separator_is_in_it():
    from dossier.document.pdfa import attachment_description, attachment_name, original_path

    for name in ("inputs/rig/a — b.csv", "results.json", "annex-a-results.pdf"):
        described = attachment_description(name, "T — 1", "A")
        assert described.startswith(name + " — ")  # our rule: the relative path first
        assert original_path(described, attachment_name(name)) == name
    with pytest.raises(ValueError, match="does not start with the relative path"):
        original_path("results.json of T-0001", "results.json")


@pytest.mark.parametrize("name", VOLUMES)
def test_volumes_are_tagged_with_headings_tables_and_described_figures(opened, name):
    pdf = opened[name]
    # ISO 32000-1 §14.7 and §14.8 (logical structure, tagged PDF): a structure tree, /MarkInfo
    # /Marked true; ISO 32000-1 §14.9.3: a Figure element carries its alternative text in /Alt
    assert "/StructTreeRoot" in pdf.Root and bool(pdf.Root.MarkInfo.Marked)
    kinds, figures = set(), []

    def walk(element, depth=0):
        if isinstance(element, pikepdf.Dictionary) and "/S" in element and depth < 60:
            kinds.add(str(element.S))
            if element.S == "/Figure":
                figures.append(element)
            kids = element.get("/K")
            for kid in kids if isinstance(kids, pikepdf.Array) else [kids]:
                walk(kid, depth + 1)

    walk(pdf.Root.StructTreeRoot.K[0])
    assert {"/H1", "/H2", "/Table"} <= kinds, kinds
    assert all(str(f.get("/Alt", "")).strip() for f in figures)
