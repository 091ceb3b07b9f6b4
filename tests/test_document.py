"""The dossier as a document: reproducible bytes, PDF/A with attachments, narrative, themes, sign-off."""

import re

import numpy as np
import projects as P
import pytest
from pypdf import PdfReader

from dossier.common.errors import NarrativeError, StageError, UserError
from dossier.document.narrative import render_markdown
from dossier.engine.build import build

LOADS = [2000, 4000, 6000]
RELEASED = """
[signoff]
status = "released"
[[signoff.people]]
name = "A. Approver"
role = "approver"
date = 2026-11-25
"""


def tire(scale=1.0):
    def fy(slip_deg, fz_n):
        return scale * -1.0 * fz_n * np.sin(1.4 * np.arctan(0.25 * np.asarray(slip_deg)))

    return fy


def make_project(root, scale=1.0, narrative="Stiffness {{ value('A', 'cornering_stiffness') }}.\n", extra=""):
    t, a, fz, fy = P.sweep_samples(LOADS, tire(scale), noise_n=10.0, seed=4)
    P.write_csv(root / "rig/a.csv", ["TIME", "SLIP_ANGLE", "FZ", "FY"], [t, -a, -fz, -fy])
    (root / "notes").mkdir(parents=True, exist_ok=True)
    (root / "notes/summary.md").write_text(narrative, encoding="utf-8")
    text = (
        P.MANIFEST_HEAD
        + P.specimen_block("A")
        + P.run_block("A", "rig/a.csv", LOADS)
        + '\n[narrative]\nsummary = "notes/summary.md"\n[fit]\nnominal_load_n = 4000\nleave_one_load_out = false\n'
        + extra
    )
    (root / "dossier.toml").write_text(text, encoding="utf-8")
    return root


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    root = make_project(tmp_path_factory.mktemp("small") / "proj")
    out = root.parent / "out"
    build(root, out)
    return root, out


def _all_files(folder):
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def test_two_builds_are_byte_identical(small, tmp_path):
    root, out = small
    again = tmp_path / "again"
    build(root, again)
    first, second = _all_files(out), _all_files(again)
    assert first.keys() == second.keys()
    for name in first:
        assert first[name] == second[name], name
    assert any(n.endswith(".svg") for n in first) and "dossier.pdf" in first


def test_pdf_is_pdf_a_3u_with_the_data_attached(small):
    _, out = small
    reader = PdfReader(out / "dossier.pdf")
    xmp = reader.trailer["/Root"]["/Metadata"].get_object().get_data().decode("utf-8")
    assert re.search(r'pdfaid:part(="|>)3', xmp) and re.search(r'pdfaid:conformance(="|>)U', xmp)
    names = set(reader.attachments)
    assert {"results.json", "coefficients_a.json", "coefficients_a.csv", "conditioned_run-00.csv"} <= names
    attached = reader.attachments["results.json"][0]
    assert attached == (out / "results.json").read_bytes()
    assert reader.metadata["/Title"].startswith("Test dossier")
    assert reader.metadata["/CreationDate"].startswith("D:20261120")  # the manifest's date, not the clock
    for annex in ("annex-a-results.pdf", "annex-b-specimens.pdf", "annex-c-rig-runs.pdf", "annex-d-provenance.pdf"):
        part = PdfReader(out / annex)
        xmp = part.trailer["/Root"]["/Metadata"].get_object().get_data().decode("utf-8")
        assert re.search(r'pdfaid:part(="|>)3', xmp) and re.search(r'pdfaid:conformance(="|>)U', xmp), annex
        assert reader.attachments[annex][0] == (out / annex).read_bytes()


def test_narrative_follows_the_data(small, tmp_path):
    _, out = small
    html = (out / "site/index.html").read_text(encoding="utf-8")
    value = re.search(r"Stiffness ([\d\u2009]+)\u00a0N/deg", html).group(1)  # a no-break space before the unit
    root2 = make_project(tmp_path / "p2", scale=1.1)
    build(root2, tmp_path / "o2")
    html2 = (tmp_path / "o2/site/index.html").read_text(encoding="utf-8")
    value2 = re.search(r"Stiffness ([\d\u2009]+)\u00a0N/deg", html2).group(1)
    as_int = lambda s: int(s.replace("\u2009", ""))
    assert as_int(value2) == pytest.approx(1.1 * as_int(value), rel=0.01)
    # the same number appears in the tables
    assert f">{value}<br>" in html.replace("\n", "") or f">{value}<" in html


def test_unknown_reference_names_file_and_line(tmp_path):
    root = make_project(tmp_path / "p", narrative="First line.\n\nSee {{ value('A', 'cornering_stiffnes') }}.\n")
    with pytest.raises(NarrativeError, match=r"notes/summary.md, line 3: unknown metric 'cornering_stiffnes'"):
        build(root, tmp_path / "o")
    root = make_project(tmp_path / "q", narrative="{{ nonsense }}\n")
    with pytest.raises(NarrativeError, match=r"notes/summary.md, line 1: 'nonsense' is undefined"):
        build(root, tmp_path / "o2")
    assert not (tmp_path / "o").exists() and not (tmp_path / "o2").exists()


def test_narrative_cannot_reach_python_internals(tmp_path):
    root = make_project(tmp_path / "p", narrative="{{ value.__globals__ }}\n")
    with pytest.raises(NarrativeError):
        build(root, tmp_path / "o")


def test_markdown_keeps_html_as_text_and_refuses_script_links():
    html = render_markdown("<script>alert(1)</script>\n\n[x](javascript:alert(1))\n")
    assert "<script>" not in html and "&lt;script&gt;" in html
    assert 'href="javascript:' not in html


def test_project_override_without_cautions_fails(tmp_path):
    root = make_project(tmp_path / "p")
    (root / "templates").mkdir()
    (root / "templates/_cautions.html").write_text("<p>no cautions here</p>\n", encoding="utf-8")
    with pytest.raises(StageError, match="lacks the safety cautions block"):
        build(root, tmp_path / "o")


def test_plain_theme_inherits_from_default(small, tmp_path):
    root, _ = small
    build(root, tmp_path / "plain", theme_name="plain")
    css = (tmp_path / "plain/site/static/common.css").read_text(encoding="utf-8")
    assert css.index("dossier default theme") < css.index("plain theme")  # parent rules first
    assert "Evaluation dossier (monochrome)" in (tmp_path / "plain/site/index.html").read_text(encoding="utf-8")
    with pytest.raises(UserError, match="theme 'nope' not found"):
        build(root, tmp_path / "x", theme_name="nope")


def test_draft_mark_and_released_signoff(tmp_path):
    draft = make_project(tmp_path / "d")
    build(draft, tmp_path / "od")
    assert "DRAFT: not released" in (tmp_path / "od/site/index.html").read_text(encoding="utf-8")
    released = make_project(tmp_path / "r", extra=RELEASED)
    build(released, tmp_path / "or")
    html = (tmp_path / "or/site/index.html").read_text(encoding="utf-8")
    assert "not released" not in html and "A. Approver" in html and "2026-11-25" in html
    # the manifest's line is the supplier's word: until the approver countersigns, every place that
    # names the approver says the customer's approval is not signed
    assert "Approved by" not in html and html.count("ustomer approval: not signed") == 2
    unsigned = make_project(
        tmp_path / "u", extra='\n[signoff]\nstatus = "released"\n[[signoff.people]]\nname = "X"\nrole = "approver"\n'
    )
    with pytest.raises(UserError, match="a released revision needs an approver with a date"):
        build(unsigned, tmp_path / "ou")


def test_links_into_another_volume_become_plain_text():
    from dossier.document.pdf import unlink_missing_anchors

    page = (
        b'<h2 id="fit">Fit</h2><a href="#fit">here</a> '
        b'<a class="prov-link" href="#prov-fit-A-fy" title="source">pDy1</a> <a href="site.html#x">site</a>'
    )
    out = unlink_missing_anchors(page)
    assert b'<a href="#fit">here</a>' in out  # the anchor is in this volume: still a link
    assert b'<span class="prov-link" title="source">pDy1</span>' in out  # in another volume: text
    assert b'<a href="site.html#x">site</a>' in out  # not an in-page link: untouched


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ('{{ value("A", "cornering_stiffness", "abc") }}', "line 1: the load must be a number in N"),
        ("ok\n{{ 1/0 }}", "line 2: ZeroDivisionError"),
        ("{% for i in range(10**9) %}x{% endfor %}", "range of 1000000000 items is beyond the limit"),
        ("{{ 'x' * 10**9 }}", "beyond 1000000 items"),
        ("{{ 2 ** 100000 }}", "an exponent of 100000 is beyond the limit"),
        (
            "{% for i in range(10000) %}{% for j in range(10000) %}{% for k in range(100) %}{% endfor %}"
            "{% endfor %}{% endfor %}",
            "rendering took longer than 5 s",
        ),
        ("{% for i in range(10000) %}{{ 'y' * 1000 }}{% endfor %}", "exceeds 1000000 characters"),
    ],
)
def test_a_narrative_expression_that_fails_or_runs_away_is_a_narrative_error(tmp_path, text, message):
    # every failure of the engineer's text names the file and line, within the rendering budget
    root = make_project(tmp_path / "p", narrative=text)
    with pytest.raises(NarrativeError, match="notes/summary.md") as exc:
        build(root, tmp_path / "o", use_cache=False, workers=1)
    assert message in str(exc.value)
    assert not (tmp_path / "o").exists()  # nothing half-written


@pytest.mark.parametrize(
    "markup",
    [
        '<script src="https://tracker.invalid/x.js"></script>',
        '<img src="//cdn.invalid/logo.png">',
        '<link rel="stylesheet" href="file:///etc/style.css">',
        "<style>@import 'https://fonts.invalid/a.css';</style>",
        '<img src="../../outside.png">',
        '<meta http-equiv="refresh" content="0; url=https://elsewhere.invalid/">',
    ],
)
def test_a_site_template_override_may_not_load_anything_from_outside(tmp_path, markup):
    root = make_project(tmp_path / "p")
    (root / "templates").mkdir()
    (root / "templates" / "quality.html").write_text(
        '{% extends "base.html" %}{% block main %}' + markup + "{% endblock %}", encoding="utf-8"
    )
    with pytest.raises(StageError, match="would load resources from outside the dossier"):
        build(root, tmp_path / "o", use_cache=False, workers=1)
    assert not (tmp_path / "o").exists()


def test_the_longest_id_allowed_lays_out_in_every_pdf(tmp_path):
    # an id of the full 120 characters (project/schema.py MAX_ID_CHARS), with spaces to wrap at:
    # contents entries, headers and tables must take it (a wrapping contents entry once crashed)
    long_id = ("CND-B belt 27deg + full-width_nylon_cap_ply_NT-S47_compound_lot4126 " * 2)[:120].strip()
    root = make_project(tmp_path / "p", narrative="x\n")
    text = (root / "dossier.toml").read_text(encoding="utf-8")
    (root / "dossier.toml").write_text(text.replace('"A"', f'"{long_id}"'), encoding="utf-8")
    build(root, tmp_path / "o", use_cache=False, workers=1)
    for pdf in sorted((tmp_path / "o").glob("*.pdf")):
        assert long_id[:40] in "".join(page.extract_text() for page in PdfReader(pdf).pages), pdf.name


def test_no_comparison_chart_without_a_candidate(small):
    # One specimen, nothing to compare: no empty difference chart is drawn or shown.
    root, out = small
    assert not (out / "site/figures/differences.svg").exists()
    assert "differences.svg" not in (out / "site/comparison.html").read_text(encoding="utf-8")


def test_no_two_curves_of_one_figure_look_alike():
    # Up to 24 curves in one figure (loads, conditions, specimens) keep distinct colour-and-dash pairs.
    from dossier.document.figures import _distinct

    colors = ["1f4a57", "c0692a", "5b8c3a", "8a4f9e", "9c3b22", "3f7fa6"]  # the default theme's cycle
    looks = [_distinct(i, colors)[:2] for i in range(24)]
    assert len(set(looks)) == 24


def test_large_attachments_are_deflated_fast_and_read_back_whole(small, tmp_path, monkeypatch):
    # Attachments of LARGE_ATTACHMENT_BYTES or more are deflated at level 1 instead of pydyf's 9:
    # other bytes, the same files when read back, still marked Flate-encoded.
    import dossier.document.pdfa as A

    root, out = small
    monkeypatch.setattr(A, "LARGE_ATTACHMENT_BYTES", 1000)
    build(root, tmp_path / "fast", use_cache=False, workers=1)
    fast, usual = PdfReader(tmp_path / "fast/dossier.pdf"), PdfReader(out / "dossier.pdf")
    assert (tmp_path / "fast/dossier.pdf").read_bytes() != (out / "dossier.pdf").read_bytes()
    assert set(fast.attachments) == set(usual.attachments)
    for name in fast.attachments:
        assert fast.attachments[name] == usual.attachments[name], name
    files = fast.trailer["/Root"]["/Names"]["/EmbeddedFiles"]["/Names"][1::2]
    streams = [f.get_object()["/EF"]["/F"].get_object() for f in files]
    assert all(s["/Filter"] == "/FlateDecode" for s in streams)
    assert any(len(s.get_data()) >= 1000 for s in streams)
