"""Hostile and broken inputs, interrupted builds: nothing lost, no one let in."""

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import projects as P
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from test_document import make_project

from dossier.common.errors import ManifestError, RigDataError, StageError
from dossier.engine.build import build
from dossier.ingest.rig_table import parse_run
from dossier.model.fit import fit_channel
from dossier.project.load import load_project
from dossier.project.manifest import FitSettings

HEADER = "TIME,SLIP_ANGLE,FZ,FY"


def _manifest(root, body, **kw):
    (root / "rig").mkdir(parents=True, exist_ok=True)
    (root / "rig/a.csv").write_bytes(body)
    (root / "dossier.toml").write_text(
        P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", [4000], **kw), encoding="utf-8"
    )
    return load_project(root).manifest


# --- the rig-file reader: any bytes load or fail with one clear message -------------------------


@settings(
    max_examples=150, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(
    body=st.one_of(
        st.binary(max_size=400),
        st.lists(
            st.lists(
                st.one_of(
                    st.floats(allow_nan=True, allow_infinity=True).map(repr),
                    st.text(max_size=6),
                    st.integers().map(str),
                ),
                min_size=0,
                max_size=6,
            ),
            max_size=12,
        ).map(lambda rows: (HEADER + "\n" + "\n".join(",".join(r) for r in rows)).encode("utf-8", "replace")),
    )
)
def test_any_rig_file_loads_or_fails_clearly(tmp_path, body):
    m = _manifest(tmp_path, body)
    try:
        run = parse_run((Path(tmp_path) / m.runs[0].file).read_bytes(), m.runs[0])
    except RigDataError as exc:
        assert str(exc).startswith("rig/a.csv")
        return
    for v in run.channels.values():
        assert np.all(np.isfinite(v))


# --- a corpus of real-world nastiness ----------------------------------------------------------


def _sweep_lines(sep=",", dec=".", n=60):
    rows = []
    for i in range(n):
        a = -6 + 12 * i / (n - 1)
        rows.append(sep.join(f"{v:.4f}".replace(".", dec) for v in (0.04 * i, -a, -4000.0, 600.0 * a)))
    return rows


CORPUS = {
    # name: (bytes, manifest overrides, None if it loads, else a phrase of the error)
    "bom": (("\ufeff" + HEADER + "\n" + "\n".join(_sweep_lines())).encode("utf-8"), {}, None),
    "crlf-and-lf": (
        (HEADER + "\r\n" + "\r\n".join(_sweep_lines()[:30]) + "\n" + "\n".join(_sweep_lines()[30:])).encode(),
        {},
        None,
    ),
    "decimal-comma": (
        ("TIME;SLIP_ANGLE;FZ;FY\n" + "\n".join(_sweep_lines(";", ","))).encode(),
        dict(delimiter=";", decimal=","),
        None,
    ),
    "thousands-separator": (
        (HEADER.replace(",", ";") + "\n0;1;-4.000;1.234,5\n").encode(),
        dict(delimiter=";", decimal=","),
        "found '-4.000' in a file with decimal comma",
    ),
    "units-in-header": (
        ("TIME [s],SLIP_ANGLE [deg],FZ [N],FY [N]\n" + "\n".join(_sweep_lines())).encode(),
        {},
        "no column named 'TIME'",
    ),
    "duplicated-column": ((b"TIME,SLIP_ANGLE,FZ,FY,FY\n0,0,-4000,0,0\n"), {}, "appears 2 times"),
    "empty": (b"", {}, "the file is empty; expected a header on line 1"),
    "header-only": ((HEADER + "\n").encode(), {}, "has a header but no data rows"),
    "truncated-last-line": ((HEADER + "\n" + "\n".join(_sweep_lines()) + "\n0.1,2").encode(), {}, "truncated line?"),
    "excel-quoting": (
        (
            '"TIME","SLIP_ANGLE","FZ","FY"\n'
            + "\n".join(",".join(f'"{c}"' for c in r.split(",")) for r in _sweep_lines())
        ).encode(),
        {},
        None,
    ),
    "huge-values": ((HEADER + "\n0,1,-4000,1e308\n0.04,2,-4000,1e309\n").encode(), {}, "expected a finite number"),
    "nan": ((HEADER + "\n0,1,-4000,nan\n").encode(), {}, "expected a finite number"),
    "inf": ((HEADER + "\n0,1,-4000,-inf\n").encode(), {}, "expected a finite number"),
    "time-backwards": (
        (HEADER + "\n" + "\n".join(_sweep_lines()[:3] + ["0.0,1,-4000,10"])).encode(),
        {},
        "time goes backwards",
    ),
    "wrong-fy-sign": (
        (
            HEADER
            + "\n"
            + "\n".join(r.rsplit(",", 1)[0] + "," + str(-float(r.rsplit(",", 1)[1])) for r in _sweep_lines())
        ).encode(),
        {},
        "lateral force rises with slip angle",
    ),
    "iso-loads-negative": (
        (HEADER + "\n" + "\n".join(_sweep_lines())).encode(),
        dict(convention="ISO 8855"),
        "probably in SAE J670",
    ),
    "radians-labelled-degrees": (
        (HEADER + "\n0,-0.1,-4000,-60\n0.04,0.1,-4000,60\n").encode(),
        {},
        "probably in radians",
    ),
}


@pytest.mark.parametrize("name", sorted(CORPUS))
def test_corpus(tmp_path, name):
    body, kw, error = CORPUS[name]
    (tmp_path / "corpus").mkdir()
    (tmp_path / "corpus" / f"{name}.csv").write_bytes(body)  # keep what was tested next to the failure
    m = _manifest(tmp_path, body, **kw)
    if error is None:
        run = parse_run((Path(tmp_path) / m.runs[0].file).read_bytes(), m.runs[0])
        assert run.n_samples >= 30 and np.all(np.diff(run.channels["time"]) >= 0)
    else:
        with pytest.raises(RigDataError, match=error):
            parse_run((Path(tmp_path) / m.runs[0].file).read_bytes(), m.runs[0])


# --- hostile text -----------------------------------------------------------------------------


def test_html_in_manifest_strings_is_escaped(tmp_path):
    root = make_project(tmp_path / "p")
    text = (root / "dossier.toml").read_text(encoding="utf-8")
    text = text.replace('title = "Test dossier"', 'title = "<script>alert(1)</script><img src=x onerror=alert(2)>"')
    (root / "dossier.toml").write_text(text, encoding="utf-8")
    build(root, tmp_path / "o", use_cache=False, workers=1)
    for page in (tmp_path / "o/site").glob("*.html"):
        html = page.read_text(encoding="utf-8")
        assert "<script>" not in html and "<img src=x" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in (tmp_path / "o/site/index.html").read_text(encoding="utf-8")


def test_narrative_cannot_pull_files_or_run_script(tmp_path):
    root = make_project(
        tmp_path / "p",
        narrative=(
            "<script>alert(1)</script>\n\n[click](javascript:alert(1)) and [file](file:///etc/passwd)\n\n"
            "![secret](file:///etc/passwd) ![remote](https://example.invalid/x.png)\n"
        ),
    )
    build(root, tmp_path / "o", use_cache=False, workers=1)
    html = (tmp_path / "o/site/index.html").read_text(encoding="utf-8")
    assert "<script>alert" not in html
    assert 'href="javascript:' not in html and 'href="file:' not in html
    assert "<img" not in html.split('id="narrative-summary"')[1].split("</div>")[0]


def test_the_pdf_fetches_nothing_outside_the_build(tmp_path):
    root = make_project(tmp_path / "p")
    (root / "templates").mkdir()
    (root / "templates/_cautions.html").write_text(
        '<section id="{{ d.cautions_id }}"><img src="file:///etc/passwd"><img src="https://example.invalid/a.png">'
        "{% for t, x in d.cautions %}<p>{{ t }} {{ x }}</p>{% endfor %}</section>\n",
        encoding="utf-8",
    )
    with pytest.raises(StageError, match="refused: .*(file:///etc/passwd|example.invalid)"):
        build(root, tmp_path / "o", use_cache=False, workers=1)


def test_symlinks_out_of_the_project_are_refused(tmp_path):
    outside = tmp_path / "outside.csv"
    outside.write_text(HEADER + "\n0,0,-4000,0\n", encoding="utf-8")
    root = tmp_path / "p"
    (root / "rig").mkdir(parents=True)
    os.symlink(outside, root / "rig/a.csv")
    (root / "dossier.toml").write_text(
        P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", [4000]), encoding="utf-8"
    )
    with pytest.raises(ManifestError, match=r"runs\[0\]\.file: resolves outside the project folder"):
        load_project(root)


# --- bounded resources and interrupted builds -------------------------------------------------


def test_a_pathological_fit_stops_with_a_clear_message():
    rng = np.random.default_rng(0)
    x = np.linspace(-12, 12, 49)
    pts = [P.operating_point(x, L, fy=2000 * rng.standard_normal(x.size)) for L in (2000.0, 4000.0, 6000.0)]
    with pytest.raises(StageError, match="did not converge within 60 evaluations"):
        fit_channel(pts, "fy", FitSettings(max_evaluations=60), 4000.0, 250.0)


def test_an_absurdly_large_file_is_refused_before_reading(tmp_path, monkeypatch):
    import dossier.project.load as loader

    _manifest(tmp_path, (HEADER + "\n" + "\n".join(_sweep_lines())).encode())
    monkeypatch.setattr(loader, "MAX_FILE_BYTES", 100)
    with pytest.raises(ManifestError, match=r"runs\[0\]\.file: .* MB; the limit is"):
        loader.load_project(tmp_path)


def test_a_killed_build_leaves_the_previous_output_intact(tmp_path):
    import shutil

    root = make_project(tmp_path / "p")
    out = tmp_path / "o"
    build(root, out, use_cache=False, workers=1)
    before = {p.relative_to(out): p.read_bytes() for p in out.rglob("*") if p.is_file()}
    # A build long enough to be killed mid-way for sure: the demo project (tens of seconds).
    demo = tmp_path / "demo"
    shutil.copytree(
        Path(__file__).resolve().parents[1] / "demo_project",
        demo,
        ignore=shutil.ignore_patterns(".dossier-cache", "dossier-out"),
    )
    code = (
        f"from dossier.cli import main; main(['build', r'{demo}', '--out', r'{out}', '--no-cache', '--workers', '1'])"
    )
    proc = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    time.sleep(6.0)  # past ingest, inside fitting or rendering
    assert proc.poll() is None, "the build finished before it could be killed"
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    after = {p.relative_to(out): p.read_bytes() for p in out.rglob("*") if p.is_file()}
    assert after == before
    # the next build clears anything the killed one left and completes
    (root / "notes/summary.md").write_text("Changed.\n", encoding="utf-8")
    build(root, out, use_cache=False, workers=1)
    assert not list(tmp_path.glob(".o.building-*"))
    assert "Changed." in (out / "site/index.html").read_text(encoding="utf-8")
