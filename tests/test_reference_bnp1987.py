"""The published 1987 lateral parameter set, run through ingest → condition → fit → metrics.

Source: Bakker, Nyborg & Pacejka, SAE 870421 (1987), Tables 2-3 (as reproduced in the domain
primer §8). At Fz = 4 kN: BCD = 1027.3 N/deg, D = 3690.4 N.
"""

import bnp1987
import numpy as np
import projects as P
import pytest

from dossier.engine.build import check
from dossier.engine.specimens import fit_specimens
from dossier.metrics.evaluate import metric_values
from dossier.model.fit import SpecimenModel
from dossier.project.conditions import nominal_load_n
from dossier.project.load import load_project
from dossier.standards import units

LOADS_N = [2000, 4000, 6000, 8000]


def _fy_iso(slip_deg, fz_n):
    # The 1987 formula gives positive Fy for positive slip; ISO 8855 and SAE J670 both give
    # negative Fy for positive slip (domain primer §3), so the rig writes −y(α).
    return -bnp1987.lateral_force_n(slip_deg, np.asarray(fz_n) / 1000.0)


def _project(tmp_path, style):
    t, a, fz, fy = P.sweep_samples(LOADS_N, _fy_iso, noise_n=15.0, seed=7)
    if style == "sae-imperial":
        lbf = units.LBF_IN_N
        # SAE J670: slip angle, Fy and Fz change sign relative to ISO 8855
        P.write_csv(tmp_path / "rig/bnp.csv", ["TIME", "SLIP_ANGLE", "FZ", "FY"], [t, -a, -fz / lbf, -fy / lbf])
        run = P.run_block(
            "REF",
            "rig/bnp.csv",
            [v / 1000 for v in LOADS_N],
            load_unit="kN",
            convention="SAE J670",
            units={"fz": "lbf", "fy": "lbf"},
        )
    else:
        P.write_csv(
            tmp_path / "rig/bnp.csv",
            ["TIME", "SLIP_ANGLE", "FZ", "FY"],
            [t, a, fz / 1000, fy / 1000],
            delimiter=";",
            decimal=",",
        )
        run = P.run_block(
            "REF",
            "rig/bnp.csv",
            LOADS_N,
            convention="ISO 8855",
            delimiter=";",
            decimal=",",
            units={"fz": "kN", "fy": "kN"},
        )
    (tmp_path / "dossier.toml").write_text(
        P.MANIFEST_HEAD + P.specimen_block("REF") + run + "\n[fit]\nnominal_load_n = 4000\n", encoding="utf-8"
    )
    return tmp_path


@pytest.mark.parametrize("style", ["sae-imperial", "iso-metric-decimal-comma"])
def test_published_tire_is_recovered_through_the_whole_pipeline(tmp_path, style):
    project = load_project(_project(tmp_path, style))
    manifest, conditioned = project.manifest, check(project)
    points = [p for c in conditioned for p in c.points]
    assert len(points) == 4
    (model,), _ = fit_specimens(points, manifest, nominal_load_n(manifest))
    fit = model.fy
    values = {m.metric: m for m in metric_values(SpecimenModel("REF", fit, None, None), 4000.0)}
    B, C, D, E = bnp1987.coefficients(4.0)
    # SAE 870421 (1987) Tables 2-3: cornering stiffness BCD = 1027.3 N/deg at 4 kN
    assert values["cornering_stiffness"].value == pytest.approx(1027.3, rel=0.02)
    # ... and peak friction D/Fz = 3690.4/4000 (zero shifts, so both slip directions agree)
    assert values["peak_lateral_friction"].value == pytest.approx(D / 4000.0, rel=0.02)
    # the interval must be a real interval around the value
    lo, hi = values["cornering_stiffness"].ci95
    assert lo < values["cornering_stiffness"].value < hi
    assert values["cornering_coefficient"].value == pytest.approx(values["cornering_stiffness"].value / 4000.0)
