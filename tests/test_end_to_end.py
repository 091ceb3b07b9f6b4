"""Build the demo project once and look at everything it wrote, as a reviewer would."""

import json
import re
import shutil
from pathlib import Path

import jsonschema
import pytest
from pypdf import PdfReader

from dossier.common.errors import OutputError, UserError
from dossier.document.cautions import CAUTIONS
from dossier.engine.build import build
from dossier.publish.layout import MARKER

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_project"


@pytest.fixture(scope="module")
def demo_out(demo_builds):
    return demo_builds["seed1"]  # built in a process of its own, without a cache (see conftest)


def test_site_pages_work_from_disk(demo_out):
    site = demo_out / "site"
    index = (site / "index.html").read_text(encoding="utf-8")
    for sid in ("CTL-1", "PRD-A", "CND-B", "CND-C"):
        page = site / f"specimen-{sid.lower()}.html"
        assert page.is_file()
        assert f'href="specimen-{sid.lower()}.html"' in index
    assert "http://" not in index and "https://" not in index  # nothing fetched from the network
    for img in (
        "figures/peak-lateral-friction-load.svg",
        "figures/stiffness-load.svg",
        "figures/stiffness-load-cnd-b.svg",
        "figures/fy-prd-a.svg",
        "figures/mz-prd-a.svg",
        "figures/fy-residuals-prd-a.svg",
        "static/common.css",
        "static/screen.css",
    ):
        assert (site / img).is_file()
    assert 'alt="' in index and '<th scope="col">' in index
    # the stiffness-against-load chart: on the summary for every specimen, on each specimen's page for it
    assert 'src="figures/stiffness-load.svg"' in index
    chart = (site / "figures/stiffness-load.svg").read_text(encoding="utf-8")
    assert all(s in chart for s in ("PRD-A", "CND-B", "CND-C", "Longitudinal slip stiffness", "Camber stiffness"))
    assert 'src="figures/stiffness-load-cnd-b.svg"' in (site / "specimen-cnd-b.html").read_text(encoding="utf-8")
    for title, _ in CAUTIONS:
        assert title in index


_READ: dict[Path, list[tuple[str, list[tuple[float, str]]]]] = {}


def _pages(path: Path) -> list[tuple[str, list[tuple[float, str]]]]:
    """Each page's text and where each piece of text starts (x in user space), read once per volume:
    text extraction is the slow part of these tests."""
    if path not in _READ:
        found = []
        for page in PdfReader(path).pages:
            placed: list[tuple[float, str]] = []

            def visit(text, cm, tm, font, size, placed=placed):
                placed.append((tm[4] * cm[0] + tm[5] * cm[2] + cm[4], text))  # the text origin (no rotation)

            found.append((page.extract_text(visitor_text=visit), placed))
        _READ[path] = found
    return _READ[path]


def test_pdf_volumes_have_their_sections_cautions_and_page_numbers(demo_out):
    expected = {
        "dossier.pdf": (
            "Contents",
            "Executive summary",
            "Conclusions",
            "Testing in brief",
            "Test notes",
            "Sign-off and revisions",
            "Annex A",
            "Annex D",
        ),
        "annex-a-results.pdf": (
            "Findings at the nominal load",
            "Candidates against the baseline",
            "What it means for the vehicle",
        ),
        "annex-b-specimens.pdf": ("Specimen PRD-A", "Specimen CND-C", "Fit report: lateral force Fy0"),
        "annex-c-rig-runs.pdf": (
            "Soundness of the rig data",
            "Verdict per run",
            "Drift seen on the control tire CTL-1",
            "Ply-steer and conicity",
        ),
        "annex-d-provenance.pdf": ("How the numbers were made", "Metric definitions", "Where every number came from"),
    }
    report = PdfReader(demo_out / "dossier.pdf")
    attached = report.attachments
    texts = {}
    for name, headings in expected.items():
        reader = PdfReader(demo_out / name)
        pages = [text for text, _ in _pages(demo_out / name)]
        text = texts[name] = "\n".join(pages)
        for heading in (*headings, "Safety cautions", "NTW-EVD-2026-031"):  # every volume carries the cautions
            assert heading in text, (name, heading)
        n = len(reader.pages)
        assert f"Page 2 of {n}" in pages[1]
        assert f"Page {n} of {n}" in pages[-1]
        titles = [o["/Title"] for o in reader.outline if isinstance(o, dict)]
        assert "Safety cautions" in titles
        if name != "dossier.pdf":
            # the report carries every annex, byte for byte as written beside it
            assert attached[name][0] == (demo_out / name).read_bytes()
    # the narrative (summary, conclusions, test notes) is in the report only, so that editing it
    # re-renders the report only
    for name, text in texts.items():
        if name != "dossier.pdf":
            assert "Test notes" not in text and "Conclusions" not in text, name


def test_results_json_follows_its_schema(demo_out):
    results = json.loads((demo_out / "results.json").read_text(encoding="utf-8"))
    schema = json.loads((ROOT / "dossier/schemas/results.schema.json").read_text(encoding="utf-8"))
    jsonschema.validate(results, schema)
    metrics = {m["metric"] for m in results["metrics"]}
    from dossier.project.catalogue import METRICS

    # the demo has lateral, aligning, camber and longitudinal data (no Mx or My channel: tests/test_moments.py)
    moments = {
        "overturning_moment_stiffness",
        "overturning_moment_at_zero_slip",
        "rolling_resistance_moment",
        "rolling_resistance_coefficient",
    }
    assert metrics == set(METRICS) - moments
    for m in results["metrics"]:
        assert m["ci95"] is None or m["ci95"][0] <= m["value"] <= m["ci95"][1]
    assert all(len(i["sha256"]) == 64 for i in results["inputs"])


def test_fit_recovers_the_demo_truth_within_3_percent(demo_out):
    """At every load, camber and pressure each specimen was tested at, labelled with that condition
    and no other, the values come within 3 % (2 % for friction) of the generator's true tire, and the
    true values lie inside the stated 95 % intervals (the budgets' expanded uncertainty)."""
    results = json.loads((demo_out / "results.json").read_text(encoding="utf-8"))
    doc = json.loads((DEMO / "truth/true_coefficients.json").read_text(encoding="utf-8"))
    truth = doc["specimens"]
    checked = 0
    for sid, t in truth.items():
        # Every run on the Harlow Ridge rig, the control's own repeats included, is drift-corrected
        # back to the start of the session; the Eisenau rig (no control) drifts little (within 1 %).
        for c in t["lateral_conditions"]:
            nominal = c["camber_deg"] == 0.0 and c["pressure_kpa"] == t["p0_kpa"]
            for load, true_cs, true_mu in zip(
                c["loads_n"], c["cornering_stiffness_n_per_deg"], c["peak_mu_mean_of_both_directions"]
            ):
                found = {
                    m["metric"]: m
                    for m in results["metrics"]
                    if m["specimen"] == sid
                    and m["load_n"] == load
                    and m["camber_deg"] == c["camber_deg"]
                    and abs(m["pressure_kpa"] - c["pressure_kpa"]) < 1.0
                }
                cs, mu = found["cornering_stiffness"], found["peak_lateral_friction"]
                assert cs["nominal_condition"] is nominal and not cs["extrapolated"], (sid, c["camber_deg"], load)
                assert cs["value"] == pytest.approx(true_cs, rel=0.03), (sid, c["camber_deg"], c["pressure_kpa"], load)
                assert mu["value"] == pytest.approx(true_mu, rel=0.02), (sid, c["camber_deg"], c["pressure_kpa"], load)
                assert cs["ci95"][0] <= true_cs <= cs["ci95"][1], (sid, c["camber_deg"], c["pressure_kpa"], load)
                assert mu["ci95"][0] <= true_mu <= mu["ci95"][1], (sid, c["camber_deg"], c["pressure_kpa"], load)
                checked += 1
    # 4 loads at 240 kPa and 0°, 2 at each of ±3°, 3 at 280 kPa, for three specimens; one for the control
    assert checked == 3 * (4 + 2 + 2 + 3) + 1


def test_rebuild_replaces_own_output_but_never_a_users_folder(demo_out, tmp_path):
    assert (demo_out / MARKER).is_file()
    users = tmp_path / "notes"
    users.mkdir()
    (users / "mine.txt").write_text("keep me", encoding="utf-8")
    with pytest.raises(OutputError, match="was not made by dossier"):
        build(DEMO, users, use_cache=False)
    assert (users / "mine.txt").read_text(encoding="utf-8") == "keep me"


def test_a_failing_build_leaves_the_previous_output_intact(demo_out, tmp_path):
    project = tmp_path / "proj"
    shutil.copytree(DEMO, project)
    out = tmp_path / "out"
    shutil.copytree(demo_out, out)
    before = (out / "results.json").read_bytes()
    manifest = project / "dossier.toml"
    manifest.write_text(
        manifest.read_text(encoding="utf-8").replace('revision = "A"', 'revison = "A"'), encoding="utf-8"
    )
    with pytest.raises(UserError, match="did you mean 'revision'"):
        build(project, out)
    assert (out / "results.json").read_bytes() == before
    assert not [p for p in tmp_path.iterdir() if "building" in p.name]


def test_demo_drift_and_offsets_match_the_generator(demo_out):
    results = json.loads((demo_out / "results.json").read_text(encoding="utf-8"))
    doc = json.loads((DEMO / "truth/true_coefficients.json").read_text(encoding="utf-8"))
    drift = results["drift"]
    assert drift["control"] == "CTL-1" and drift["corrected"] is True
    (mu,) = [m for m in drift["metrics"] if m["metric"] == "peak_friction"]
    true_drop_pct = -100.0 * doc["session"]["drift"]["drop_over_span"]
    assert mu["over_session_pct"] == pytest.approx(true_drop_pct, abs=0.5)  # stated tolerance: 0.5 points
    truth_factor = {r["file"]: r["drift_factor"] for r in doc["session"]["runs"]}
    files = {i["run"]: i["file"] for i in results["inputs"]}
    for c in drift["corrections"]:
        assert c["force_scale"] == pytest.approx(1.0 / truth_factor[files[c["run"]]], rel=3e-3)
    (split,) = results["offset_splits"]
    cp = doc["specimens"]["PRD-A"]["conicity_and_ply_steer"]
    assert split["conicity_fy_n"] == pytest.approx(cp["conicity_force_n"], abs=5.0)
    assert split["ply_steer_fy_n"] == pytest.approx(cp["ply_steer_force_n"], abs=5.0)
    verdicts = {i["file"]: i["verdict"] for i in results["inputs"]}
    assert verdicts["rig/HR-4470_CTL-1_1000.csv"] == "sound"
    assert verdicts["rig/HR-4471_PRD-A.csv"] == "usable with findings"  # 8 kN above the rated load


def test_every_number_derives_from_the_rig_files_and_the_drift_from_the_control_runs(demo_out):
    """W3C PROV (PROV-DM): follow wasDerivedFrom from each result back to the rig files' SHA-256."""
    from prov.model import ProvDocument

    text = (demo_out / "provenance.json").read_text(encoding="utf-8")
    assert ProvDocument.deserialize(content=text, format="json").get_records()  # parses as PROV-JSON
    raw = json.loads(text)
    derived = {}
    for r in raw["wasDerivedFrom"].values():
        derived.setdefault(r["prov:generatedEntity"], set()).add(r["prov:usedEntity"])

    def sources(entity):
        """The rig files (labels) an entity derives from, through any chain."""
        seen, todo, files = set(), [entity], set()
        while todo:
            e = todo.pop()
            if e in seen:
                continue
            seen.add(e)
            attrs = raw["entity"].get(e, {})
            if "d:sha256" in attrs and attrs["prov:label"].startswith("rig/"):
                files.add(attrs["prov:label"])
            todo.extend(derived.get(e, ()))
        return files

    results = json.loads((demo_out / "results.json").read_text(encoding="utf-8"))
    files_of = {}
    for i in results["inputs"]:
        files_of.setdefault(i["specimen"], set()).add(i["file"])
    control_files = {i["file"] for i in results["inputs"] if i["specimen"] == "CTL-1"}
    corrected = {c["specimen"] for c in results["drift"]["corrections"]}
    assert "CND-C" not in corrected  # its lab tested no control: drift is corrected per rig only
    kinds = {"metric": 0, "coefficient": 0, "verdict": 0, "difference": 0, "fitment": 0, "standing": 0}
    for ident in raw["entity"]:
        kind = ident.split(":", 1)[1].split("-", 1)[0]
        if kind not in kinds:
            continue
        kinds[kind] += 1
        found = sources(ident)
        assert found, ident
        if kind in ("metric", "coefficient"):
            specimen = ident.split("-")[1].replace("_", "-")
            mine = {f for f in files_of.get(specimen, ())}
            assert found & mine, ident
            if specimen == "CTL-1":
                continue
            if specimen in corrected:  # drift-corrected: also from the control tire's runs that scaled it
                assert found & control_files, ident
            else:  # tested on a rig without the control (Eisenau): nothing of the control enters
                assert not found & control_files, ident
    assert all(kinds.values()), kinds
    corrections = [e for i, e in raw["entity"].items() if i.startswith("d:drift_corrected-")]
    # every run on the control's rig (Harlow Ridge), its own repeats and the combined-slip run included:
    # 19 runs less the 4 at Eisenau
    assert len(corrections) == len(results["drift"]["corrections"]) == 15
    assert {"d:recommendation", "d:narrative-summary-rendered"} <= raw["entity"].keys()


# --- what a reader sees -----------------------------------------------------------------------


def _page_margin_right_pt() -> float:
    """The right page margin of the default theme's print stylesheet (its @page rule), in pt."""
    css = (ROOT / "themes/default/print.css").read_text(encoding="utf-8")
    top, right, bottom, left = re.search(r"@page\s*{[^}]*?margin:\s*([^;]+);", css).group(1).split()
    assert right.endswith("mm")
    return float(right[:-2]) / 25.4 * 72.0


def test_no_text_of_any_volume_starts_past_the_content_edge(demo_out):
    # A table wider than the page is clipped at the paper's edge: its last column's text then
    # starts past the right edge of the content box (A4 is 595.28 pt wide, ISO 216).
    right_edge_pt = 595.2756 - _page_margin_right_pt() + 1.0
    for name in (
        "dossier.pdf",
        "annex-a-results.pdf",
        "annex-b-specimens.pdf",
        "annex-c-rig-runs.pdf",
        "annex-d-provenance.pdf",
    ):
        beyond = [
            (n, round(x), text.strip()[:30])
            for n, (_, placed) in enumerate(_pages(demo_out / name), 1)
            for x, text in placed
            if text.strip() and x > right_edge_pt
        ]
        assert not beyond, (name, beyond[:5])


def test_the_candidates_at_a_glance_fit_one_page_after_the_summary(demo_out):
    pages = [text for text, _ in _pages(demo_out / "dossier.pdf")]
    (start,) = [i for i, t in enumerate(pages) if "Candidates at a glance\n" in t and "At 4.0 kN" in t]
    assert "Executive summary" in pages[start - 1] or "Executive summary" in pages[start - 2]
    page = pages[start]
    assert all(c in page for c in ("PRD-A", "CND-B", "CND-C", "Understeer gradient", "Targets: met"))
    assert "Details: the comparison" in page  # the whole comparison, chart included, on that one page


def test_running_text_has_no_dimensionless_unit_and_keeps_numbers_with_their_percent(demo_out):
    index = (demo_out / "site/index.html").read_text(encoding="utf-8")
    narrative = re.search(r'<div class="narrative" id="narrative-summary">(.*?)</div>', index, re.S).group(1)
    assert not re.search(r"\d[\s\u00a0]1(?![\d.,])", narrative), narrative  # "1.129 1 peak lateral friction"
    for page in ("index.html", "comparison.html", "specimen-cnd-b.html", "data-quality.html"):
        html = (demo_out / "site" / page).read_text(encoding="utf-8")
        assert not re.search(r"\d %", html), page  # a value and its % sign never part at a line end


def test_relaxation_lengths_recover_the_generators_tire(demo_out):
    # The generator lags the lateral slip by a first-order lag σ/V (σ = 0.45 m at 30 km/h) and Fx by
    # 0.02 s: σ = V·τ = 8.33 m/s × 0.02 s = 0.167 m (first-order relaxation, Pacejka 2006 §7.2).
    gen = json.loads((DEMO / "truth/true_coefficients.json").read_text(encoding="utf-8"))["generator"]
    speed_m_per_s = gen["speed_kmh"] / 3.6
    truth = {
        "relaxation_length_lateral": gen["relaxation_length_m"],
        "relaxation_length_longitudinal": speed_m_per_s * 0.02,
    }
    results = json.loads((demo_out / "results.json").read_text(encoding="utf-8"))
    found = [m for m in results["metrics"] if m["metric"] in truth]
    assert {m["metric"] for m in found} == set(truth)
    inside = 0
    for m in found:
        assert m["basis"] == "data" and m["unit"] == "m"
        assert m["value"] == pytest.approx(truth[m["metric"]], rel=0.08), m
        inside += m["ci95"][0] <= truth[m["metric"]] <= m["ci95"][1]
    # the intervals claim 95 %: over these tens of values, at most a few may miss
    assert inside >= 0.85 * len(found), (inside, len(found))
