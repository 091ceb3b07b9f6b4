"""Reproducible everywhere the inputs and the software are the same: separate processes, any
hash seed, any number of workers, with or without the cache; and a rebuild that says what
differs when it does not reproduce."""

import json
import shutil

import pytest
from test_document import make_project

from dossier.cli import main
from dossier.engine import rebuild
from dossier.publish import archive
from dossier.publish.integrity import MANIFEST, with_manifest
from dossier.publish.layout import ENVIRONMENT_NAME


def test_three_builds_in_separate_processes_are_byte_identical_file_by_file(demo_builds):
    folders = [archive.read_folder(demo_builds[k]) for k in ("seed1", "seed2", "seed3")]
    assert folders[0].keys() == folders[1].keys() == folders[2].keys()
    for name in folders[0]:
        assert folders[0][name] == folders[1][name] == folders[2][name], name
    assert {"dossier.pdf", "provenance.json", MANIFEST, ENVIRONMENT_NAME, "site/downloads.html"} <= folders[0].keys()


def test_the_output_records_its_theme_and_the_versions_that_shape_its_bytes(demo_builds):
    env = json.loads((demo_builds["seed1"] / ENVIRONMENT_NAME).read_text(encoding="utf-8"))
    assert env["theme"] == "default"
    for name in ("weasyprint", "pydyf", "fonttools", "matplotlib", "numpy", "scipy"):
        assert env["software"][name] not in ("", "not installed"), name
    assert {"pango", "harfbuzz", "zlib"} <= env["text_libraries"].keys()
    fonts = json.loads((demo_builds["seed1"] / "pdf-fonts.json").read_text(encoding="utf-8"))
    assert set(fonts) == {
        "dossier.pdf",
        "annex-a-results.pdf",
        "annex-b-specimens.pdf",
        "annex-c-rig-runs.pdf",
        "annex-d-provenance.pdf",
    }
    for records in fonts.values():
        assert records and all(len(f["sha256"]) == 64 and f["name"] for f in records)


def test_verify_rebuild_of_the_untouched_demo_output_passes(demo_builds, capsys):
    assert main(["verify", str(demo_builds["seed1"]), "--rebuild"]) == 0
    out = capsys.readouterr().out
    assert "every file reproduced byte for byte" in out and "environment differs" not in out


def test_rebuild_uses_the_recorded_theme_and_names_the_version_that_differs(tmp_path):
    root = make_project(tmp_path / "p")
    out = tmp_path / "o"
    assert main(["build", str(root), "--out", str(out), "--theme", "plain", "--no-cache"]) == 0
    assert rebuild.rebuild_and_compare(out).reproduced  # rebuilt with "plain", as recorded
    # the same folder as if it had been built with another NumPy: the rebuild names the version
    files = archive.read_folder(out)
    env = json.loads(files[ENVIRONMENT_NAME])
    env["software"]["numpy"] = "0.0.1"
    files[ENVIRONMENT_NAME] = (json.dumps(env, indent=2) + "\n").encode()
    files = with_manifest({k: v for k, v in files.items() if k != MANIFEST})
    shutil.rmtree(out)
    for name, data in files.items():
        (out / name).parent.mkdir(parents=True, exist_ok=True)
        (out / name).write_bytes(data)
    rebuilt = rebuild.rebuild_and_compare(out)
    assert any(line.startswith("numpy: 0.0.1 → ") for line in rebuilt.environment)
    assert [d.split(" ")[0] for d in rebuilt.differing] == [ENVIRONMENT_NAME, MANIFEST]


@pytest.fixture(scope="module")
def two_pdfs(tmp_path_factory):
    root = make_project(tmp_path_factory.mktemp("pdfdiff") / "p")
    out = root.parent / "o"
    assert main(["build", str(root), "--out", str(out), "--no-cache"]) == 0
    return (out / "annex-a-results.pdf").read_bytes()


def test_a_pdf_difference_is_told_apart_from_a_font_bytes_difference(two_pdfs):
    import io

    import pikepdf

    from dossier.publish.pdf_compare import pdf_difference

    def edited(change):
        with pikepdf.open(io.BytesIO(two_pdfs)) as pdf:
            change(pdf)
            buf = io.BytesIO()
            pdf.save(buf)
            return buf.getvalue()

    def font_program(pdf):
        for obj in pdf.objects:
            if isinstance(obj, pikepdf.Dictionary) and obj.get("/Type") == "/FontDescriptor" and "/FontFile2" in obj:
                data = bytearray(obj.FontFile2.read_bytes())
                data[-1] ^= 0x01  # one byte of the font program (what a different subsetter changes)
                obj.FontFile2.write(bytes(data))
                return

    def page_text(pdf):
        pdf.pages[0].contents_add(pikepdf.Stream(pdf, b"BT ET"), prepend=False)  # one more drawing step

    assert pdf_difference(two_pdfs, two_pdfs) == "identical"
    assert "only the embedded font programs differ" in pdf_difference(two_pdfs, edited(font_program))
    assert pdf_difference(two_pdfs, edited(page_text)).startswith("numbers or text differ on page(s) 1")
