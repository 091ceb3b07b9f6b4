"""Vehicle balance: worked textbook examples, a hand-computed three-axle tractor checked against a direct
solution of the same linear equations, declared fitments and replacements at equal axle load, the
rollover indicator, load ratings as fitted, the interval's claimed coverage, located manifest errors."""

import math
import tomllib

import numpy as np
import projects as P
import pytest

from dossier.evaluation.vehicle import (
    TireInput,
    character,
    characteristic_speed_kmh,
    critical_speed_kmh,
    evaluate_fitments,
    static_rollover_threshold_g,
    steady_turning,
    understeer_gradient_deg_per_g,
    yaw_rate_gain_per_s,
)
from dossier.project.load import ManifestError, parse_manifest
from dossier.project.manifest import AxleSpec, FitmentSpec, Mounting, VehicleSpec
from dossier.standards import units

DEG_PER_RAD = 180.0 / math.pi
G = units.STANDARD_GRAVITY_M_PER_S2


class TableTires:
    """Tire quantities from formulas of the tire load (invented, for hand checks)."""

    def __init__(self, formulas: dict, stderr_pct: float | None = None, dof: float = 1e6):
        self.formulas, self.stderr_pct, self.dof = formulas, stderr_pct, dof

    def has(self, specimen):
        return specimen in self.formulas

    def quantity(self, specimen, metric, load_n):
        f = self.formulas[specimen].get(metric)
        if f is None:
            return None
        v = f(load_n)
        sd = None if self.stderr_pct is None else abs(v) * self.stderr_pct / 100.0
        return TireInput(specimen, v, sd, None if sd is None else self.dof)

    def extrapolated(self, specimen, load_n):
        return False


def _axle(name, position, x, load_n, track=None):
    return AxleSpec(name, position, x, load_n, track, position == "steer")


def _vehicle(axles, *fitments, cg_height=None):
    return VehicleSpec("test vehicle", tuple(axles), tuple(fitments), (50.0, 100.0), cg_height)


def _fitment(i, name, mountings, replaces=None):
    return FitmentSpec(i, name, tuple(Mounting(*m) for m in mountings), replaces)


# --- two axles: the textbook ------------------------------------------------------------------------


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


def test_wong_worked_example_through_the_n_axle_model_and_a_declared_fitment():
    # The same vehicle in SI, through the single-track model with any number of axles: with two axles
    # it must give Gillespie's K and the wheelbase itself (Gillespie 1992, ch. 6).
    lbf, ft = units.LBF_IN_N, units.FOOT_IN_M
    front_n, rear_n = 4520 * lbf * 0.55, 4520 * lbf * 0.45
    per_tire = {"F": 8750 * lbf / DEG_PER_RAD, "R": 8600 * lbf / DEG_PER_RAD}  # N/deg
    k, length = steady_turning(
        [front_n, rear_n], [0.0, 10.5 * ft], [True, False], [2 * per_tire["F"], 2 * per_tire["R"]]
    )
    assert k == pytest.approx(1.364, abs=0.001) and length == pytest.approx(10.5 * ft, rel=1e-12)
    v = _vehicle(
        [_axle("front", "steer", 0.0, front_n), _axle("rear", "drive", 10.5 * ft, rear_n)],
        _fitment(0, "F/R", [("front", "F", "single"), ("rear", "R", "single")]),
    )
    tires = TableTires({s: {"cornering_stiffness": lambda load, c=c: c} for s, c in per_tire.items()})
    f = evaluate_fitments(v, tires, {}).fitments[0]
    assert f.understeer_gradient_deg_per_g.value == pytest.approx(1.364, abs=0.001)
    assert f.characteristic_speed_kmh == pytest.approx(130.7, abs=0.1)
    assert f.critical_speed_kmh is None and f.character == "understeer"
    assert f.understeer_gradient_deg_per_g.ci95 is None  # no standard errors given: no interval claimed


@pytest.mark.parametrize("seed", range(5))
def test_two_axles_reduce_to_gillespie(seed):
    rng = np.random.default_rng(seed)
    wf, wr = rng.uniform(3000, 60000, 2)
    cf, cr = rng.uniform(500, 20000, 2)
    length = rng.uniform(2.0, 6.0)
    k, l_eq = steady_turning([wf, wr], [0.0, length], [True, False], [cf, cr])
    assert k == pytest.approx(wf / cf - wr / cr, rel=1e-10, abs=1e-12)  # Gillespie 1992, ch. 6
    assert l_eq == pytest.approx(length, rel=1e-12)


def test_speeds_and_yaw_gain():
    # r/δ = (V/L)/(1 + K V²/(57.3 L g)): neutral steer gives V/L; at the characteristic speed the
    # gain is half the neutral one (Gillespie 1992, ch. 6).
    L = 2.7
    assert yaw_rate_gain_per_s(100.0, 0.0, L) == pytest.approx(100 / 3.6 / L)
    vch = characteristic_speed_kmh(2.0, L)
    assert yaw_rate_gain_per_s(vch, 2.0, L) == pytest.approx(0.5 * vch / 3.6 / L)
    assert critical_speed_kmh(-2.0, L) == pytest.approx(vch)
    assert (character(1.0), character(0.01), character(-0.5)) == ("understeer", "neutral", "oversteer")


# --- three axles: a 6×4 tractor by hand ------------------------------------------------------------


def test_three_axle_tractor_by_hand_and_against_a_direct_solution():
    # The equivalent-wheelbase treatment (Winkler 1998; from memory), computed by hand from the formulas
    # in dossier.evaluation.vehicle with axle stiffnesses in N/deg (then K comes out in deg/g directly):
    # steer at 0 m, 60 kN, 6 000 N/deg; drive-1 at 3.60 m and drive-2 at 4.90 m, 50 kN and 8 000 N/deg each.
    #   CG = (50 000·3.60 + 50 000·4.90)/160 000 = 2.65625 m; x = +2.65625, −0.94375, −2.24375 m
    #   A = 22 000; B = 15 937.5 − 7 550 − 17 950 = −9 562.5; D = 42 333.984 + 7 125.313 + 40 275.313 = 89 734.609
    #   S = 6 000; T = 15 937.5; B·S − A·T = −57 375 000 − 350 625 000 = −408 000 000
    #   K = W·B/(B·S − A·T) = 160 000 · 9 562.5 / 408 000 000 = 3.75 deg/g
    #   L_eq = (B² − A·D)/(B·S − A·T) = (91 441 406.25 − 1 974 161 406.25)/(−408 000 000) = 4.614 510 m
    loads, where, steer, stiffness = (
        [60000.0, 50000.0, 50000.0],
        [0.0, 3.6, 4.9],
        [True, False, False],
        [6000.0, 8000.0, 8000.0],
    )
    k, l_eq = steady_turning(loads, where, steer, stiffness)
    assert k == pytest.approx(3.75, rel=1e-12)
    assert l_eq == pytest.approx(1_882_720_000 / 408_000_000, rel=1e-12)
    assert 4.25 < l_eq < 4.9  # beyond the tandem's centre: the tandem resists the turn (Winkler 1998; from memory)

    # The same equations solved directly with numpy's linear solver (a general-purpose reference):
    # ΣC(sδ − β − xρ) = m·a_y, ΣC·x(sδ − β − xρ) = 0, for (δ, β) at given (ρ, a_y).
    c = np.array(stiffness) * DEG_PER_RAD
    s = np.array(steer, dtype=float)
    cg = sum(w * p for w, p in zip(loads, where)) / sum(loads)
    x = cg - np.array(where)
    m = sum(loads) / G

    def delta_rad(rho, ay):
        lhs = np.array([[(c * s).sum(), -c.sum()], [(c * x * s).sum(), -(c * x).sum()]])
        rhs = np.array([m * ay + (c * x).sum() * rho, (c * x * x).sum() * rho])
        return np.linalg.solve(lhs, rhs)[0]

    assert delta_rad(1.0, 0.0) == pytest.approx(l_eq, rel=1e-10)  # δ per unit curvature
    assert delta_rad(0.0, G) * DEG_PER_RAD == pytest.approx(k, rel=1e-10)  # δ per g, deg


def test_a_tandem_at_one_position_is_a_two_axle_vehicle():
    # Two rear axles at the same place act as one axle of their summed stiffness (common practice).
    k3, l3 = steady_turning(
        [60000.0, 50000.0, 50000.0], [0.0, 4.25, 4.25 + 1e-9], [True, False, False], [6000.0, 8000.0, 8000.0]
    )
    k2, l2 = steady_turning([60000.0, 100000.0], [0.0, 4.25], [True, False], [6000.0, 16000.0])
    assert (k3, l3) == pytest.approx((k2, l2), rel=1e-6)
    assert k2 == pytest.approx(60000 / 6000 - 100000 / 16000)  # Gillespie 1992, ch. 6


# --- declared fitments and replacements -------------------------------------------------------------

STEER, DRIVE1, DRIVE2 = 7100 * G, 9500 * G, 9500 * G  # a 6×4 tractor at its axle limits (invented)
TRACTOR_TIRES = {  # N/deg and N·m/deg against the tire load in N (invented, linear in load for the check)
    "S": {"cornering_stiffness": lambda z: 1500 + 0.05 * z, "peak_lateral_friction": lambda z: 0.80},
    "D": {"cornering_stiffness": lambda z: 1200 + 0.05 * z, "peak_lateral_friction": lambda z: 0.78},
    "W": {"cornering_stiffness": lambda z: 2000 + 0.04 * z, "peak_lateral_friction": lambda z: 0.74},
}
SIZES = {"S": "385/65 R22.5 160K", "D": "315/80 R22.5 156/150L", "W": "445/45 R19.5 160J"}


def _tractor(cg_height=None):
    axles = [
        _axle("steer", "steer", 0.0, STEER, 2.05),
        _axle("drive-1", "drive", 3.60, DRIVE1, 1.82),
        _axle("drive-2", "drive", 4.92, DRIVE2, 1.82),
    ]
    duals = _fitment(
        0,
        "duals",
        [("steer", "S", "single"), ("drive-1", "D", "dual", 0.35), ("drive-2", "D", "dual", 0.35)],
    )
    wide = _fitment(
        1,
        "wide-base",
        [
            ("steer", "S", "single"),
            ("drive-1", "W", "wide-base single", None, 2.00),
            ("drive-2", "W", "wide-base single", None, 2.00),
        ],
        replaces="duals",
    )
    return _vehicle(axles, duals, wide, cg_height=cg_height)


def test_a_wide_base_single_replaces_a_dual_pair_at_twice_the_load_axle_for_axle():
    result = evaluate_fitments(_tractor(), TableTires(TRACTOR_TIRES), SIZES)
    duals, wide = result.fitments
    d1, w1 = duals.axle("drive-1"), wide.axle("drive-1")
    assert (d1.tires, w1.tires) == (4, 2)
    assert d1.tire_load_n == pytest.approx(DRIVE1 / 4) and w1.tire_load_n == pytest.approx(DRIVE1 / 2)
    # by hand: dual tire 23 290.8 N → 2 364.54 N/deg, axle 9 458.2; wide-base tire 46 581.6 N → 3 863.26, axle 7 726.5
    assert d1.cornering_stiffness_n_per_deg.value == pytest.approx(4 * (1200 + 0.05 * DRIVE1 / 4))
    assert d1.cornering_stiffness_n_per_deg.value == pytest.approx(9458.2, abs=0.1)
    assert w1.cornering_stiffness_n_per_deg.value == pytest.approx(7726.5, abs=0.1)
    assert w1.lateral_capacity_n.value == pytest.approx(0.74 * DRIVE1)  # two tires at half the axle load
    (replacement,) = result.replacements
    assert (replacement.fitment, replacement.replaces) == ("wide-base", "duals")
    assert [c.axle for c in replacement.changes] == ["drive-1", "drive-2"]  # the steer axle is unchanged
    change = replacement.changes[0]
    assert change.cornering_stiffness_pct.value == pytest.approx(100 * (7726.5 / 9458.2 - 1), abs=0.01)  # −18.3 %
    assert change.lateral_capacity_pct.value == pytest.approx(100 * (0.74 / 0.78 - 1))
    assert change.aligning_stiffness_pct is None  # a drive axle
    loads, where, steer = [STEER, DRIVE1, DRIVE2], [0.0, 3.60, 4.92], [True, False, False]
    cs = 2 * (1500 + 0.05 * STEER / 2)
    k_duals = steady_turning(loads, where, steer, [cs, 4 * (1200 + 0.05 * DRIVE1 / 4), 4 * (1200 + 0.05 * DRIVE2 / 4)])[
        0
    ]
    k_wide = steady_turning(loads, where, steer, [cs, 2 * (2000 + 0.04 * DRIVE1 / 2), 2 * (2000 + 0.04 * DRIVE2 / 2)])[
        0
    ]
    assert duals.understeer_gradient_deg_per_g.value == pytest.approx(k_duals)
    assert replacement.understeer_gradient_change_deg_per_g.value == pytest.approx(k_wide - k_duals)
    assert k_wide < k_duals  # a softer drive tandem: less understeer, towards oversteer (Gillespie 1992, ch. 6)


def test_the_rollover_indicator_from_the_effective_tracks():
    # a_y/g = t/(2h) (Gillespie 1992, ch. 9). By hand with h = 1.90 m: duals tip about the outer tires,
    # t = 1.82 + 0.35 = 2.17 m; effective track (7 100·2.05 + 2·9 500·2.17)/26 100 = 2.1374 m → 0.5625 g;
    # wide-base singles at 2.00 m: (7 100·2.05 + 19 000·2.00)/26 100 = 2.0136 m → 0.5299 g.
    assert static_rollover_threshold_g(1.50, 0.55) == pytest.approx(1.364, abs=0.001)  # a car: t/2h
    duals, wide = evaluate_fitments(_tractor(cg_height=1.90), TableTires(TRACTOR_TIRES), SIZES).fitments
    assert duals.axle("drive-1").effective_track_m == pytest.approx(2.17)
    assert duals.rollover_threshold_g == pytest.approx((7100 * 2.05 + 19000 * 2.17) / 26100 / 3.80)
    assert duals.rollover_threshold_g == pytest.approx(0.5625, abs=1e-4)
    assert wide.rollover_threshold_g == pytest.approx(0.5299, abs=1e-4)
    assert evaluate_fitments(_tractor(), TableTires(TRACTOR_TIRES), SIZES).fitments[0].rollover_threshold_g is None


def test_each_tire_is_rated_as_it_is_fitted():
    # ISO 4000-1 / ETRTO load index table: 156 = 4 000 kg, 150 = 3 350 kg, 160 = 4 500 kg (from memory).
    # The dual tire carries 9 500/4 = 2 375 kg against its dual index 150 (3 350 kg), not 156; the
    # wide-base single 4 750 kg against 160 (4 500 kg): overloaded, a finding on its fitment.
    duals, wide = evaluate_fitments(_tractor(), TableTires(TRACTOR_TIRES), SIZES).fitments
    d1 = duals.axle("drive-1")
    assert (d1.load_index, d1.rated_load_kg, d1.over_rating) == (150, 3350.0, False)
    w1 = wide.axle("drive-1")
    assert (w1.load_index, w1.rated_load_kg) == (160, 4500.0)
    assert w1.tire_load_kg == pytest.approx(4750.0) and w1.over_rating
    assert any("drive-1 axle: 4750 kg per tire is above the 4500 kg of load index 160" in x for x in wide.findings)
    assert not duals.findings


def test_the_interval_of_the_understeer_gradient_covers_as_claimed():
    # The delta-method interval claims 95 %. Monte Carlo over the tires' stiffnesses (each specimen's
    # errors independent, its axles fully correlated as the module states) must fall inside it 95 % of the time.
    tires = TableTires(TRACTOR_TIRES, stderr_pct=2.0)
    f = evaluate_fitments(_tractor(), tires, SIZES).fitments[1]
    lo, hi = f.understeer_gradient_deg_per_g.ci95
    rng = np.random.default_rng(7)
    loads, where, steer = [STEER, DRIVE1, DRIVE2], [0.0, 3.60, 4.92], [True, False, False]
    s0, w0 = 2 * (1500 + 0.05 * STEER / 2), 2 * (2000 + 0.04 * DRIVE1 / 2)
    draws = []
    for _ in range(4000):
        es, ew = rng.normal(1.0, 0.02, 2)
        draws.append(steady_turning(loads, where, steer, [s0 * es, w0 * ew, w0 * ew])[0])
    inside = np.mean([(lo <= k <= hi) for k in draws])
    assert 0.935 <= inside <= 0.965  # 4 000 draws: binomial standard error 0.35 %


def test_a_replacement_on_a_steer_axle_reports_the_aligning_stiffness():
    tires = {
        "A": {"cornering_stiffness": lambda z: 1000 + 0.2 * z, "aligning_stiffness": lambda z: 30 + 0.01 * z},
        "B": {"cornering_stiffness": lambda z: 1100 + 0.2 * z, "aligning_stiffness": lambda z: 33 + 0.01 * z},
    }
    v = _vehicle(
        [_axle("front", "steer", 0.0, 9000.0), _axle("rear", "drive", 2.7, 7000.0)],
        _fitment(0, "A", [("front", "A", "single"), ("rear", "A", "single")]),
        _fitment(1, "B front", [("front", "B", "single"), ("rear", "A", "single")], replaces="A"),
    )
    (r,) = evaluate_fitments(v, TableTires(tires, stderr_pct=1.0), {}).replacements
    (c,) = r.changes
    assert c.axle == "front" and c.aligning_stiffness_pct.value == pytest.approx(100 * (3 / (30 + 0.01 * 4500)))
    assert c.lateral_capacity_pct is None  # no peak friction given: nothing claimed
    assert r.understeer_gradient_change_deg_per_g.value < 0  # a stiffer front tire: less understeer
    lo, hi = r.understeer_gradient_change_deg_per_g.ci95
    assert lo < r.understeer_gradient_change_deg_per_g.value < hi


# --- the manifest ----------------------------------------------------------------------------------

TRUCK_HEAD = (
    P.MANIFEST_HEAD
    + P.specimen_block("D", size="315/80 R22.5 156/150L")
    + P.specimen_block("W", role="candidate", size="445/50 R22.5 161L")
    + P.run_block("D", "rig/a.csv", [4000])
    + P.run_block("W", "rig/a.csv", [4000])
)
TRUCK = """
[vehicle]
name = "tractor"
cg_height = { value = 1.9, unit = "m" }
[[vehicle.axles]]
name = "steer"
position = "steer"
from_front = { value = 0, unit = "m" }
load = { value = 7100, unit = "kgf" }
track = { value = 2.05, unit = "m" }
[[vehicle.axles]]
name = "drive-1"
position = "drive"
from_front = { value = 3.6, unit = "m" }
load = { value = 9500, unit = "kgf" }
track = { value = 1.82, unit = "m" }
[[vehicle.axles]]
name = "drive-2"
position = "drive"
from_front = { value = 4.92, unit = "m" }
load = { value = 9500, unit = "kgf" }
track = { value = 1.82, unit = "m" }
[[vehicle.fitments]]
name = "duals"
[vehicle.fitments.mounted]
steer = { specimen = "D" }
drive-1 = { specimen = "D", assembly = "dual", dual_spacing = { value = 350, unit = "mm" } }
drive-2 = { specimen = "D", assembly = "dual", dual_spacing = { value = 350, unit = "mm" } }
[[vehicle.fitments]]
name = "wide-base"
replaces = "duals"
[vehicle.fitments.mounted]
steer = { specimen = "D" }
drive-1 = { specimen = "W", assembly = "wide-base single" }
drive-2 = { specimen = "W", assembly = "wide-base single" }
"""


def _problems(text, tmp_path):
    (tmp_path / "rig").mkdir(exist_ok=True)
    (tmp_path / "rig/a.csv").write_text("x\n")
    with pytest.raises(ManifestError) as e:
        parse_manifest(tomllib.loads(text), tmp_path)
    return str(e.value)


def test_a_three_axle_vehicle_reads_with_its_fitments(tmp_path):
    (tmp_path / "rig").mkdir()
    (tmp_path / "rig/a.csv").write_text("x\n")
    v = parse_manifest(tomllib.loads(TRUCK_HEAD + TRUCK), tmp_path).vehicle
    assert [a.name for a in v.axles] == ["steer", "drive-1", "drive-2"]
    assert [a.steered for a in v.axles] == [True, False, False]
    assert v.axles[1].load_n == pytest.approx(9500 * G)  # kgf: the standard gravity (NIST SP 811)
    duals = v.fitment("duals")
    assert duals.on("drive-1") == Mounting("drive-1", "D", "dual", pytest.approx(0.35), None)
    assert duals.on("drive-1").tires == 4 and v.fitment("wide-base").on("drive-2").tires == 2
    assert v.fitment("wide-base").replaces == "duals" and v.cg_height_m == 1.9


@pytest.mark.parametrize(
    ("edit", "expected"),
    [
        (
            lambda t: t.replace(
                'drive-1 = { specimen = "W", assembly = "wide-base single" }',
                'drive-1 = { specimen = "W", assembly = "dual" }',
            ),
            "vehicle.fitments[1].mounted.drive-1.assembly: W (445/50 R22.5 161L) is a wide-base single",
        ),
        (
            lambda t: t.replace(
                'drive-2 = { specimen = "W", assembly = "wide-base single" }', 'drive-3 = { specimen = "W" }'
            ),
            "vehicle.fitments[1].mounted.drive-3: no axle named 'drive-3'",
        ),
        (
            lambda t: t.replace('drive-2 = { specimen = "W", assembly = "wide-base single" }', ""),
            "vehicle.fitments[1].mounted: names no mounting for axle(s) 'drive-2'",
        ),
        (
            lambda t: t.replace('replaces = "duals"', 'replaces = "dual"'),
            "vehicle.fitments[1].replaces: must name another fitment; got 'dual'",
        ),
        (
            lambda t: t.replace(
                'steer = { specimen = "D" }\ndrive-1 = { specimen = "W"',
                'steer = { specimen = "X" }\ndrive-1 = { specimen = "W"',
            ),
            "vehicle.fitments[1].mounted.steer.specimen: no specimen with id 'X'",
        ),
        (
            lambda t: t.replace("value = 4.92", "value = 3.0"),
            "vehicle.axles[2].from_front: axles go front to back: must be more than 3.600 m (axle 1); got 3.000 m",
        ),
        (
            lambda t: t.replace(
                'name = "tractor"',
                'name = "tractor"\nmass = { value = 26100, unit = "kg" }\ncg_to_front_axle = { value = 2, unit = "m" }',
            ),
            "vehicle.mass: gives axle loads for two axles only; got 3 axles",
        ),
        (lambda t: t.replace('load = { value = 7100, unit = "kgf" }\n', ""), "vehicle.axles[0].load: is required"),
        (
            lambda t: t.replace('name = "wide-base"', 'name = "Duals"'),
            "vehicle.fitments[1].name: 'Duals' and 'duals' differ only in punctuation or case",
        ),
        (lambda t: t.replace('position = "steer"', 'position = "drive"'), "vehicle.axles: no axle steers"),
        (lambda t: t.replace('position = "steer"', 'position = "front"'), "vehicle.axles[0].position:"),
    ],
)
def test_vehicle_mistakes_are_located(tmp_path, edit, expected):
    assert expected in _problems(TRUCK_HEAD + edit(TRUCK), tmp_path)
