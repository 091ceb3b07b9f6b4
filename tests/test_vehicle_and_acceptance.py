"""Vehicle balance against a worked textbook example and a hand-computed truck; verdict edges."""

import math
import tomllib

import projects as P
import pytest

from dossier.evaluation.acceptance import FAILS, MARGINAL, MEETS, NOT_MEASURED, judge
from dossier.evaluation.vehicle import (
    AxleFitment,
    as_fitted,
    balance,
    character,
    characteristic_speed_kmh,
    critical_speed_kmh,
    understeer_gradient_deg_per_g,
    yaw_rate_gain_per_s,
)
from dossier.metrics.evaluate import MetricValue
from dossier.project.manifest import Target
from dossier.standards import units

DEG_PER_RAD = 180.0 / math.pi


def test_wong_worked_example_in_us_units():
    # Wong, Theory of Ground Vehicles, ch. 5 problem, recomputed from its inputs (domain primer §6):
    # W = 4520 lb, L = 10.5 ft, CG 0.45 L behind the front axle, Cα per tire 8750 lb/rad front, 8600 rear.
    w_lbf, wheelbase_ft = 4520.0, 10.5
    wf_lbf, wr_lbf = w_lbf * 0.55, w_lbf * 0.45  # 2486 lb and 2034 lb
    assert (wf_lbf, wr_lbf) == pytest.approx((2486.0, 2034.0))
    cf = 2 * 8750.0 / DEG_PER_RAD  # lb/deg per axle
    cr = 2 * 8600.0 / DEG_PER_RAD
    k = understeer_gradient_deg_per_g(wf_lbf, wr_lbf, cf, cr)  # the ratio is unit-free: lb/(lb/deg)
    assert k == pytest.approx(1.364, abs=0.001)  # deg/g
    assert k / DEG_PER_RAD == pytest.approx(0.02380, abs=0.00001)  # rad/g
    v = characteristic_speed_kmh(k, wheelbase_ft * units.FOOT_IN_M)
    assert v == pytest.approx(130.7, abs=0.1)
    assert v / 3.6 / units.FOOT_IN_M == pytest.approx(119.1, abs=0.1)  # ft/s


def test_wong_worked_example_in_si_units_through_a_fitment():
    lbf, ft = units.LBF_IN_N, units.FOOT_IN_M
    front_n, rear_n = 4520 * lbf * 0.55, 4520 * lbf * 0.45
    per_tire = {"F": 8750 * lbf / DEG_PER_RAD, "R": 8600 * lbf / DEG_PER_RAD}  # N/deg
    b = balance(
        AxleFitment("F", 2, "single"),
        AxleFitment("R", 2, "single"),
        front_n,
        rear_n,
        10.5 * ft,
        lambda sid, load: (per_tire[sid], None, None),
    )
    assert b.understeer_gradient_deg_per_g == pytest.approx(1.364, abs=0.001)
    assert b.characteristic_speed_kmh == pytest.approx(130.7, abs=0.1)
    assert b.critical_speed_kmh is None and b.character == "understeer"


def test_dual_axle_against_wide_base_single_hand_computed():
    # A 6×2 tractor's drive axle: 11 500 kg on four duals (2 875 kg each) or two wide-base singles
    # (5 750 kg each). Front axle 6 500 kg on two singles. Tire stiffness in N/deg at its own load
    # (invented, linear in load for the check): dual 2 000 + 0.05·Fz, wide-base 3 500 + 0.06·Fz.
    g = 9.80665
    front, rear = 6500 * g, 11500 * g

    def stiffness(sid, load):
        return {"steer": 2500 + 0.06 * load, "dual": 2000 + 0.05 * load, "wide": 3500 + 0.06 * load}[sid], None, None

    dual = balance(AxleFitment("steer", 2, "single"), AxleFitment("dual", 4, "dual"), front, rear, 3.8, stiffness)
    wide = balance(
        AxleFitment("steer", 2, "single"), AxleFitment("wide", 2, "wide-base single"), front, rear, 3.8, stiffness
    )
    # by hand: steer tire 31 871.6 N → 4 412.30 N/deg per tire, 8 824.59 per axle; dual tire 28 194.1 N →
    # 3 409.71 N/deg, 13 638.82 per axle; K = 63 743.2/8 824.59 − 112 776.5/13 638.82 = −1.0454 deg/g
    caf = 2 * (2500 + 0.06 * 6500 * g / 2)
    car_dual = 4 * (2000 + 0.05 * 11500 * g / 4)  # 4 tires at 28 194 N
    car_wide = 2 * (3500 + 0.06 * 11500 * g / 2)  # 2 tires at 56 388 N
    assert dual.rear_tire_load_n == pytest.approx(11500 * g / 4)
    assert dual.rear_axle_stiffness_n_per_deg == pytest.approx(car_dual)
    assert dual.understeer_gradient_deg_per_g == pytest.approx(front / caf - rear / car_dual)
    assert wide.understeer_gradient_deg_per_g == pytest.approx(front / caf - rear / car_wide)
    assert dual.understeer_gradient_deg_per_g == pytest.approx(-1.0454, abs=1e-4)
    assert dual.character == "oversteer" and wide.understeer_gradient_deg_per_g > dual.understeer_gradient_deg_per_g


def test_a_wide_base_single_on_an_axle_declared_as_duals_is_counted_as_one_tire_per_pair():
    # A wide-base single replaces a dual pair (common practice): on a drive axle declared as four tires
    # in duals, a 445/50 R22.5 is two tires at half the axle load each, a 315/80 R22.5 four at a quarter.
    g = 9.80665
    front, rear = 6500 * g, 11500 * g
    declared = AxleFitment("W", 4, "dual")
    wide, note = as_fitted(declared, "445/50 R22.5 161L", "rear")
    assert (wide.tires, wide.kind) == (2, "wide-base single") and "wide-base single" in note
    dual, none = as_fitted(AxleFitment("D", 4, "dual"), "315/80 R22.5 156/150L", "rear")
    assert dual == AxleFitment("D", 4, "dual") and none is None
    assert as_fitted(AxleFitment("W", 2, "single"), "445/50 R22.5 161L", "front") == (
        AxleFitment("W", 2, "single"),
        None,
    )

    def stiffness(sid, load):
        return {"S": 2500 + 0.06 * load, "D": 2000 + 0.05 * load, "W": 3500 + 0.06 * load}[sid], None, None

    b = balance(AxleFitment("S", 2, "single"), wide, front, rear, 3.8, stiffness)
    assert b.rear_tire_load_n == pytest.approx(rear / 2)  # 56 388 N per tire, not 28 194 N
    # by hand: rear axle 2 × (3 500 + 0.06 × 56 388.2) = 13 766.6 N/deg
    assert b.rear_axle_stiffness_n_per_deg == pytest.approx(2 * (3500 + 0.06 * rear / 2))
    assert b.rear_axle_stiffness_n_per_deg == pytest.approx(13766.6, abs=0.1)


def test_speeds_and_yaw_gain():
    # r/δ = (V/L)/(1 + K V²/(57.3 L g)): neutral steer gives V/L; at the characteristic speed the
    # gain is half the neutral one (Gillespie 1992, ch. 6).
    L = 2.7
    assert yaw_rate_gain_per_s(100.0, 0.0, L) == pytest.approx(100 / 3.6 / L)
    vch = characteristic_speed_kmh(2.0, L)
    assert yaw_rate_gain_per_s(vch, 2.0, L) == pytest.approx(0.5 * vch / 3.6 / L)
    assert critical_speed_kmh(-2.0, L) == pytest.approx(vch)
    assert (character(1.0), character(0.01), character(-0.5)) == ("understeer", "neutral", "oversteer")


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
