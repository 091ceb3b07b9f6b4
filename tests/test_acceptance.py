"""Verdict edges, targets at their own condition, a recommendation only from evidence."""

import math
import tomllib

import projects as P
import pytest

from dossier.evaluation.acceptance import FAILS, MARGINAL, MEETS, NOT_MEASURED, judge
from dossier.metrics.evaluate import MetricValue
from dossier.project.manifest import Target

DEG_PER_RAD = 180.0 / math.pi


def _target(minimum=None, maximum=None, camber=0.0, pressure=None):
    return Target(0, "cornering_stiffness", 4000.0, minimum, maximum, camber, pressure, "spec §1", None)


def _value(v, ci, extrapolated=False):
    return MetricValue(
        "cornering_stiffness",
        "N/deg",
        "S",
        4000.0,
        0.0,
        240.0,
        v,
        None if ci is None else 1.0,
        ci,
        "model",
        extrapolated,
    )


@pytest.mark.parametrize(
    "target, value, verdict",
    [
        (_target(1000, 1200), _value(1100, (1050, 1150)), MEETS),
        (_target(1000, 1200), _value(1100, (1000, 1200)), MEETS),  # interval touching both limits: inside
        (_target(1000, 1200), _value(1190, (1150, 1230)), MARGINAL),  # straddles the maximum
        (_target(1000, 1200), _value(1010, (990, 1030)), MARGINAL),  # straddles the minimum
        (_target(1000, 1200), _value(1250, (1201, 1299)), FAILS),
        (_target(minimum=1000), _value(999, (998, 1000)), MARGINAL),  # touches from below: not a bare pass
        (_target(minimum=1000), _value(1100, None), MARGINAL),  # no interval: never a bare pass
        (_target(maximum=1000), _value(900, (850, 950)), MEETS),
        (_target(1000, 1200), None, NOT_MEASURED),  # missing metric
        (_target(1000, 1200), _value(1100, (1050, 1150), extrapolated=True), NOT_MEASURED),  # outside the load range
    ],
)
def test_verdict_edges(target, value, verdict):
    assert judge(target, value)[0] == verdict


def test_targets_are_judged_at_their_own_camber_and_pressure():
    """A target naming a camber or pressure takes the value there, never the nominal one; one that
    names no pressure takes the specimen's own nominal pressure."""
    from dataclasses import replace

    from dossier.evaluation.acceptance import verdicts

    nominal = _value(1100, (1050, 1150))  # 0°, 240 kPa: inside 1000–1200
    cambered = replace(nominal, camber_deg=-2.0, value=950.0, ci95=(900.0, 990.0))  # outside
    soft = replace(nominal, pressure_kpa=200.0, value=1190.0, ci95=(1150.0, 1230.0))  # straddles
    values = [nominal, cambered, soft]
    found = verdicts(
        (_target(1000, 1200), _target(1000, 1200, camber=-2.0), _target(1000, 1200, pressure=200.0)),
        ["S"],
        values,
        {"S": 240.0},
    )
    assert [v.verdict for v in found] == [MEETS, FAILS, MARGINAL]
    assert [(v.camber_deg, v.pressure_kpa) for v in found] == [(0.0, 240.0), (-2.0, 240.0), (0.0, 200.0)]
    missing = verdicts((_target(1000, 1200, pressure=300.0),), ["S"], values, {"S": 240.0})
    assert missing[0].verdict == NOT_MEASURED  # nothing evaluated at 300 kPa


# --- a recommendation only from evidence ---------------------------------------------------------


def _standing(candidate, meets, marginal=0, fails=0, stiffness_pct=0.0):
    from dossier.evaluation.comparison import Difference, Standing

    d = Difference(
        "cornering_stiffness", "N/deg", 4000.0, candidate, "BASE", 1.0, 1.0, 0.0, None, stiffness_pct, None, False
    )
    return Standing(candidate, (d,), meets, marginal, fails, "")


def test_no_target_judged_means_no_recommendation():
    from dossier.evaluation.comparison import recommend

    best, why = recommend([_standing("CND-B", 0), _standing("CND-C", 0)])
    assert best is None and why.startswith("no recommendation: no target was judged")


def test_a_tie_is_reported_as_a_tie_with_what_would_separate_it():
    from dossier.evaluation.comparison import recommend

    best, why = recommend([_standing("CND-C", 3, stiffness_pct=3.1), _standing("CND-B", 3, stiffness_pct=10.2)])
    assert best is None  # never broken by the order of the ids
    assert why.startswith("no recommendation: CND-C and CND-B tie (3 target(s) met, 0 marginal)")
    assert (
        "they differ most in cornering stiffness (CND-C +3.1\u00a0%, CND-B +10.2\u00a0% against the baseline)" in why
    )  # no-break spaces
    best, why = recommend([_standing("CND-C", 3), _standing("CND-B", 2)])
    assert best == "CND-C" and why.startswith("CND-C meets 3 target(s)")


def test_the_default_nominal_load_is_a_measured_one(tmp_path):
    # 2, 4, 6, 8 kN: the median (5 kN) was never measured; the set-point nearest it, the lower of
    # the two, is taken
    from dossier.project.conditions import nominal_load_n
    from dossier.project.load import parse_manifest

    text = P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", [2000, 4000, 6000, 8000])
    manifest = parse_manifest(tomllib.loads(text), tmp_path)
    assert nominal_load_n(manifest) == 4000.0
