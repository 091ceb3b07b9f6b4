"""The truck example (demo_project/truck): a 6×4 tractor whose drive tandem carries dual pairs or
wide-base singles, built as a user would, then read as its reviewer would: the declared fitments
with the right tires per axle, the replacement at equal axle load, values against the generator's truth."""

import json
import re
import shutil

import numpy as np
import pytest
from conftest import DEMO, run_dossier

from dossier.evaluation.vehicle import steady_turning
from dossier.standards import units

TRUCK = DEMO / "truck"
G = units.STANDARD_GRAVITY_M_PER_S2


@pytest.fixture(scope="module")
def truck(tmp_path_factory):
    base = tmp_path_factory.mktemp("truck")
    project = base / "project"
    shutil.copytree(TRUCK, project, ignore=shutil.ignore_patterns(".dossier-cache", "dossier-out"))
    code, out, err = run_dossier("build", project, "--out", base / "out", "--workers", "2", hash_seed=5)
    assert code == 0, err
    results = json.loads((base / "out/results.json").read_text(encoding="utf-8"))
    truth = json.loads((TRUCK / "truth/true_coefficients.json").read_text(encoding="utf-8"))
    return base / "out", results, truth


def _text(html: str) -> str:
    return re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", html)).replace("&nbsp;", " ").replace("\u00a0", " ")


def test_the_vehicle_page_shows_the_declared_fitments_with_the_tires_per_axle(truck):
    out, results, _ = truck
    page = _text((out / "site/vehicle.html").read_text(encoding="utf-8"))
    assert "Production: duals on the drive tandem" in page and "Wide-base singles on the drive tandem" in page
    assert page.count("DRV-D, dual, 4 tires") >= 2 and page.count("WBS-W, wide-base single, 2 tires") >= 2
    assert "DRV-D, single, 2 tires" in page  # the steer axle
    assert "upper-bound indicator" in page
    fitments = {f["name"]: f for f in results["vehicle"]["fitments"]}
    assert len(fitments) == 2  # only what was declared: no wide-base tire on the steer axle
    duals, wide = fitments["Production: duals on the drive tandem"], fitments["Wide-base singles on the drive tandem"]
    assert [(a["axle"], a["specimen"], a["tires"]) for a in duals["axles"]] == [
        ("steer", "DRV-D", 2),
        ("drive-1", "DRV-D", 4),
        ("drive-2", "DRV-D", 4),
    ]
    assert [a["tires"] for a in wide["axles"]] == [2, 2, 2]
    # 9 000 kg on a drive axle: 2 250 kg per dual tire, against the dual index 150 (3 350 kg); 4 500 kg
    # per wide-base single against 161 (4 625 kg) (ISO 4000-1 / ETRTO load index table; from memory).
    d1, w1 = duals["axles"][1], wide["axles"][1]
    assert d1["tire_load_n"] == pytest.approx(2250 * G) and (d1["load_index"], d1["rated_load_kg"]) == (150, 3350)
    assert w1["tire_load_n"] == pytest.approx(4500 * G) and (w1["load_index"], w1["rated_load_kg"]) == (161, 4625)
    assert not d1["over_rating"] and not w1["over_rating"]


def test_the_replacement_is_compared_axle_for_axle_at_equal_axle_load(truck):
    out, results, truth = truck
    (r,) = results["vehicle"]["replacements"]
    assert [a["axle"] for a in r["axles"]] == ["drive-1", "drive-2"]
    change = r["axles"][0]["cornering_stiffness_change_pct"]
    # Tire for tire at the same load the wide-base single is stiffer; axle for axle (one wide-base
    # single at twice the load of a dual tire) it is softer: the replacement question's answer.
    standing = next(s for s in results["comparison"] if s["candidate"] == "WBS-W")
    tire_for_tire = next(d for d in standing["differences"] if d["metric"] == "cornering_stiffness")
    assert tire_for_tire["diff_pct"] > 10.0 and change["value"] < 0.0
    lo, hi = change["ci95"]
    assert hi < 0.0  # the interval excludes no change

    # Against the truth: the true tires' stiffness at the fitted loads, from the generator's own
    # coefficients, through the same axle sums (the truth file's loads bracket the fitment loads).
    def true_c(sid, load_n):
        rows = truth["specimens"][sid]["at_loads"]
        xs = [row["load_n"] for row in rows]
        ys = [row["cornering_stiffness_n_per_deg"] for row in rows]
        return float(np.interp(load_n, xs, ys))

    dual_axle = 4 * true_c("DRV-D", 2250 * G)
    wide_axle = 2 * true_c("WBS-W", 4500 * G)
    expected = 100 * (wide_axle / dual_axle - 1)
    assert expected == pytest.approx(change["value"], abs=1.5)  # linear interpolation of the truth: ±1.5 points
    page = _text((out / "site/comparison.html").read_text(encoding="utf-8"))
    assert "Replacements at equal axle load" in page and "Wide-base singles on the drive tandem in place of" in page
    summary = _text((out / "site/index.html").read_text(encoding="utf-8"))
    assert "Wide-base singles on the drive tandem in place of Production: duals on the drive tandem" in summary


def test_the_truck_fit_comes_close_to_the_true_tires(truck):
    _, results, truth = truck
    for sid, spec in truth["specimens"].items():
        for row in spec["at_loads"]:
            fitted = [
                m
                for m in results["metrics"]
                if m["specimen"] == sid and m["metric"] == "cornering_stiffness" and m["load_n"] == row["load_n"]
            ]
            if fitted:
                assert fitted[0]["value"] == pytest.approx(row["cornering_stiffness_n_per_deg"], rel=0.02)


def test_the_understeer_change_follows_from_the_axle_stiffnesses(truck):
    _, results, _ = truck
    v = results["vehicle"]
    loads = [a["load_n"] for a in v["axles"]]
    where = [a["from_front_m"] for a in v["axles"]]
    steer = [a["steered"] for a in v["axles"]]
    ks = []
    for f in v["fitments"]:
        c = [a["cornering_stiffness_n_per_deg"]["value"] for a in f["axles"]]
        k, _ = steady_turning(loads, where, steer, c)
        assert f["understeer_gradient_deg_per_g"]["value"] == pytest.approx(k, rel=1e-6)
        ks.append(k)
    (r,) = v["replacements"]
    assert r["understeer_gradient_change_deg_per_g"]["value"] == pytest.approx(ks[1] - ks[0], rel=1e-6)
