"""Sidewall identity against the standards' tables and rules."""

import datetime as dt

import pytest

from dossier.standards.sidewall import LOAD_INDEX_KG, SPEED_SYMBOL_KMH, SidewallError, parse_size, parse_tin

# ISO 4000-1 / UN ECE R30 Annex 4 / R54 Annex IV load-index values as listed in the domain
# primer §7 (from memory, matching several secondary tables).
PRIMER_LOAD_INDEX = {
    60: 250,
    70: 335,
    75: 387,
    80: 450,
    83: 487,
    85: 515,
    90: 600,
    91: 615,
    94: 670,
    95: 690,
    100: 800,
    105: 925,
    110: 1060,
    115: 1215,
    120: 1400,
    125: 1650,
    130: 1900,
    135: 2180,
    140: 2500,
    144: 2800,
    145: 2900,
    150: 3350,
    155: 3875,
    160: 4500,
}


@pytest.mark.parametrize("li, kg", sorted(PRIMER_LOAD_INDEX.items()))
def test_load_index_table(li, kg):
    assert LOAD_INDEX_KG[li] == kg  # from memory (domain primer §7)


def test_load_index_follows_the_geometric_series():
    # Property check (domain primer §7): kg ≈ 45·10^(LI/80) within about 2 %; and strictly increasing.
    for li, kg in LOAD_INDEX_KG.items():
        assert kg == pytest.approx(45 * 10 ** (li / 80), rel=0.02), li
    values = [LOAD_INDEX_KG[i] for i in sorted(LOAD_INDEX_KG)]
    assert values == sorted(values) and len(set(values)) == len(values)
    assert sorted(LOAD_INDEX_KG) == list(range(0, 280))


# Further load-index values as the published tables give them (ISO 4000-1 / UN ECE R30 Annex 4 and
# R54 Annex IV, ETRTO); from memory: the light end in tenths of a kilogram, the truck end whole.
PUBLISHED_ENDS = {0: 45, 1: 46.2, 3: 48.7, 19: 77.5, 35: 121, 50: 190, 59: 243, 161: 4625, 163: 4875,
                  170: 6000, 180: 8000, 190: 10600, 200: 14000, 240: 45000, 279: 136000}  # fmt: skip


@pytest.mark.parametrize("li, kg", sorted(PUBLISHED_ENDS.items()))
def test_load_index_table_over_its_whole_range(li, kg):
    assert LOAD_INDEX_KG[li] == kg  # from memory (ISO 4000-1 / UN ECE R30, R54 tables)


def test_the_table_is_one_series_ten_times_per_80_indices():
    # The load-index series repeats by decades: the capacity at LI + 80 is ten times that at LI, within
    # the published rounding (ISO 4000-1 tables; from memory).
    for li in range(0, 200):
        step = 1.0 if LOAD_INDEX_KG[li] >= 100 else 0.1  # the published precision of the lower entry
        assert 0 <= LOAD_INDEX_KG[li + 80] - 10 * LOAD_INDEX_KG[li] < 10 * step + 1e-9, li


def test_speed_symbols():
    # ISO 4000-1 / UN ECE R30 and R54 speed symbols: the primer's table (§7) from L up; the slow-moving
    # A1-A8 and B to K from memory.
    slow = {f"A{i}": 5 * i for i in range(1, 9)} | {"B": 50, "C": 60, "D": 65, "E": 70, "F": 80, "G": 90}
    assert (
        slow
        | {
            "J": 100,
            "K": 110,
            "L": 120,
            "M": 130,
            "N": 140,
            "P": 150,
            "Q": 160,
            "R": 170,
            "S": 180,
            "T": 190,
            "U": 200,
            "H": 210,
            "V": 240,
            "W": 270,
            "Y": 300,
        }
        == SPEED_SYMBOL_KMH
    )


@pytest.mark.parametrize(
    "text, width, aspect, rim, li, dual, speed, reinforced, kmh",
    [
        ("225/45 R17 94W", 225, 45, 17, 94, None, "W", False, 270),
        ("P215/65R15 95H", 215, 65, 15, 95, None, "H", False, 210),
        ("LT265/75R16 123/120R", 265, 75, 16, 123, 120, "R", False, 170),
        ("255/35ZR19 96Y XL", 255, 35, 19, 96, None, "Y", True, 300),
        ("295/75R22.5 144/141L", 295, 75, 22.5, 144, 141, "L", False, 120),
        ("445/50R22.5", 445, 50, 22.5, None, None, None, False, None),
        ("245/40 ZR18 97(Y)", 245, 40, 18, 97, None, "(Y)", False, 300),
        ("205/55 R16 91V reinforced", 205, 55, 16, 91, None, "V", True, 240),
        # truck, low-section and wide-base sizes (ISO 4000-2 / ETRTO designations; common practice)
        ("315/80 R22.5 156/150L", 315, 80, 22.5, 156, 150, "L", False, 120),
        ("385/65R22.5 160K", 385, 65, 22.5, 160, None, "K", False, 110),
        ("445/45R19.5 160J", 445, 45, 19.5, 160, None, "J", False, 100),
        ("445/50 R22.5 161L", 445, 50, 22.5, 161, None, "L", False, 120),
        # numeric (inch) sizes: width in inches, no aspect ratio in the designation
        ("11R22.5 146/143L", 11 * 25.4, None, 22.5, 146, 143, "L", False, 120),
        ("12R22.5 152/148M", 12 * 25.4, None, 22.5, 152, 148, "M", False, 130),
        ("11.00R20 150/146K", 11 * 25.4, None, 20, 150, 146, "K", False, 110),
        # the service description in brackets, ZR with a service description, C, LT load range
        ("255/40 ZR19 (101Y)", 255, 40, 19, 101, None, "Y", False, 300),
        ("255/40ZR19 (101Y) XL", 255, 40, 19, 101, None, "Y", True, 300),
        ("215/65 R16C 109/107R", 215, 65, 16, 109, 107, "R", False, 170),
        ("LT265/75R16 123/120S LRE", 265, 75, 16, 123, 120, "S", False, 180),
        ("LT245/75R16 120/116Q Load Range E", 245, 75, 16, 120, 116, "Q", False, 160),
    ],
)
def test_size_designations(text, width, aspect, rim, li, dual, speed, reinforced, kmh):
    s = parse_size(text)
    assert (
        s.width_mm,
        s.aspect_pct,
        s.rim_in,
        s.load_index,
        s.load_index_dual,
        s.speed_symbol,
        s.reinforced,
        s.max_speed_kmh,
    ) == (width, aspect, rim, li, dual, speed, reinforced, kmh)


def test_nominal_dimensions_follow_the_designation_arithmetic():
    s = parse_size("225/45 R17 94W")
    # overall diameter = rim × 25.4 + 2 × width × aspect/100 (domain primer §7)
    assert s.overall_diameter_mm == pytest.approx(17 * 25.4 + 2 * 225 * 0.45)
    assert s.sidewall_height_mm == pytest.approx(101.25)
    assert s.revolutions_per_km == pytest.approx(1e6 / (3.141592653589793 * 634.3), rel=1e-9)
    assert s.rated_load_n == pytest.approx(670 * 9.80665)
    assert parse_size("295/75R22.5 144/141L").rated_load_dual_kg == 2575  # LI 141, from memory
    assert "above 300" in parse_size("245/40 ZR18 97(Y)").speed_note
    assert parse_size("not a size") is None
    assert parse_size("225/45 R17 94X") is None  # X is no speed symbol
    assert parse_size("225/45 R17 (94W") is None  # an unbalanced bracket


def test_a_twin_load_index_rates_the_tire_single_and_in_a_dual_pair():
    # 146/143: 146 fitted single, 143 in a dual pair (ISO 4000-2 / ETRTO; common practice); kg from memory
    s = parse_size("11R22.5 146/143L")
    assert (s.rated_load_kg_as("single"), s.rated_load_kg_as("dual")) == (3000, 2725)
    wide = parse_size("445/50 R22.5 161L")  # a wide-base single has one index
    assert wide.rated_load_kg_as("dual") == wide.rated_load_kg == 4625


def test_numeric_and_bracketed_sizes_say_what_they_cannot_give():
    s = parse_size("11R22.5 146/143L")
    assert s.overall_diameter_mm is None and s.unloaded_radius_m is None  # no aspect ratio stated
    assert "above 300" in parse_size("255/40 ZR19 (101Y)").speed_note
    assert parse_size("215/65 R16C 109/107R").commercial and parse_size("LT265/75R16 123/120S LRE").load_range == "E"


@pytest.mark.parametrize(
    "tin, week, year",
    [
        ("DOT N7RV 4K2X 2319", 23, 2019),  # 49 CFR 574.5: since 2000, four digits, week then year
        ("DOT 4B 2T 1207", 12, 2007),
        ("DOTXY12ABC0125", 1, 2025),
        ("DOT XY12 ABC 279", 27, 1999),  # before 2000: three digits, week then the year's last digit
    ],
)
def test_tin_date_codes(tin, week, year):
    code = parse_tin(tin)
    assert (code.week, code.year) == (week, year)


def test_tin_errors_say_what_was_expected():
    with pytest.raises(SidewallError, match="week 54; expected a week from 01 to 53"):
        parse_tin("DOT N7RV 4K2X 5419")
    with pytest.raises(SidewallError, match="4-digit date code"):
        parse_tin("DOT N7RV 4K2X")


def test_age_at_test_date():
    code = parse_tin("DOT N7RV 4K2X 2319")
    # week 23 of 2019 starts on Monday 2019-06-03 (ISO 8601 week date)
    assert code.age_years(dt.date(2025, 6, 3)) == pytest.approx(6.0, abs=0.01)
