"""Plausibility findings of a specimen's identity: run pressures and test loads far from what the
size designation implies, and the unit mix-up a value looks like."""

import dataclasses
import tomllib
from pathlib import Path

import pytest

from dossier.evaluation.identity import LIGHT_TRUCK, PASSENGER, TRUCK_BUS, specimen_identity, tire_kind
from dossier.project.load import parse_manifest
from dossier.standards.sidewall import parse_size
from tests.projects import MANIFEST_HEAD, run_block, specimen_block

PSI_KPA = 6.894757  # NIST SP 811, Appendix B.8
LBF_N = 4.448222  # NIST SP 811, Appendix B.8
KGF_N = 9.80665  # NIST SP 811, Appendix B.8 (standard gravity)
LI94_N = 670 * KGF_N  # load index 94 = 670 kg (ISO 4000-1 / UN ECE R30 Annex 4; from memory, primer §7)


def manifest(size="225/45 R17 94W", loads=(3000, 4500), pressure="240", pressure_unit="kPa", load_unit="N"):
    """A one-specimen, one-run manifest parsed in memory (no rig file is read)."""
    text = MANIFEST_HEAD + specimen_block("A", size=size)
    text += run_block(
        "A", "rig/a.csv", list(loads), pressure=pressure, pressure_unit=pressure_unit, load_unit=load_unit
    )
    return parse_manifest(tomllib.loads(text), Path("/nonexistent-project"))


def findings(m, about):
    """Return the identity findings of the first specimen that mention `about`."""
    return [f for f in specimen_identity(m.specimens[0], m).findings if about in f]


def test_psi_typed_as_kpa():
    (f,) = findings(manifest(pressure="34.8"), "inflation pressure")
    # 34.8 psi × 6.894757 kPa/psi = 239.9 kPa (NIST SP 811 B.8); 150–450 kPa for a passenger tire (common practice)
    assert f == (
        "run 0 (rig/a.csv): inflation pressure 34.8 kPa is far below the 150–450 kPa usual for a passenger car "
        "tire; 34.8 psi = 240 kPa: the value looks like psi entered as kPa (manifest runs[0].pressure)"
    )
    assert round(34.8 * PSI_KPA) == 240  # NIST SP 811 B.8


def test_bar_typed_as_kpa():
    (f,) = findings(manifest(pressure="2.4"), "inflation pressure")
    # 1 bar = 100 kPa (NIST SP 811 B.8); 240 kPa lies in the passenger range (common practice)
    assert "inflation pressure 2.4 kPa is far below the 150–450 kPa usual for a passenger car tire" in f
    assert "2.4 bar = 240 kPa: the value looks like bar entered as kPa" in f
    assert "psi" not in f.split(";")[1]  # 2.4 psi = 16.5 kPa explains nothing (NIST SP 811 B.8)


def test_mpa_typed_as_kpa():
    (f,) = findings(manifest(pressure="0.24"), "inflation pressure")
    assert "0.24 MPa = 240 kPa: the value looks like MPa entered as kPa" in f  # 1 MPa = 1000 kPa (SI)


def test_kpa_declared_as_psi_reads_back():
    # 240 written with unit psi: 240 × 6.894757 = 1655 kPa (NIST SP 811 B.8), far above 450 (common practice)
    (f,) = findings(manifest(pressure="240", pressure_unit="psi"), "inflation pressure")
    assert "inflation pressure 1655 kPa is far above the 150–450 kPa" in f
    assert "is 6.895 times a plausible 240 kPa: the value looks like kPa entered as psi" in f


def test_a_plausible_pressure_has_no_finding():
    m = manifest(pressure="240")  # 240 kPa for a passenger tire (common practice)
    assert findings(m, "inflation pressure") == []
    assert findings(m, "rig test uses") == []  # 3 and 4.5 kN are 46 % and 68 % of 6.57 kN (primer §7)


def test_truck_tire_at_850_kpa_has_no_finding():
    # truck/bus tires run at about 700–900 kPa (common practice)
    m = manifest(size="295/80R22.5 152/148M", loads=(20000, 30000), pressure="850")
    assert specimen_identity(m.specimens[0], m).tire_kind == TRUCK_BUS
    assert findings(m, "inflation pressure") == []
    # The same pressure on a passenger tire is a finding: the range follows the kind (common practice).
    (f,) = findings(manifest(pressure="850"), "inflation pressure")
    assert "850 kPa is above the 150–450 kPa usual for a passenger car tire" in f


def test_truck_tire_in_psi_typed_as_kpa():
    (f,) = findings(manifest(size="295/80R22.5 152/148M", loads=(20000,), pressure="120"), "inflation pressure")
    # 120 psi = 827 kPa (NIST SP 811 B.8), inside 450–1000 kPa for a truck tire (common practice)
    assert "far below the 450–1000 kPa usual for a truck/bus tire; 120 psi = 827 kPa" in f


def test_no_mix_up_explains_it():
    (f,) = findings(manifest(pressure="20"), "inflation pressure")
    # 20 psi = 138 kPa, 20 bar = 2000 kPa, 20 MPa: none in 150–450 kPa (NIST SP 811 B.8; common practice)
    assert f.endswith("no mix-up with psi, bar or MPa explains it: check the manifest (runs[0].pressure)")


def test_kn_typed_as_n():
    m = manifest(loads=(3, 4.5))
    (f,) = findings(m, "rig test uses")
    # 4.5 kN / (670 kg × 9.80665 m/s²) = 68.5 % (primer §7, from memory; standard gravity, NIST SP 811 B.8)
    assert round(100 * 4500 / LI94_N, 1) == 68.5
    assert f == (
        "run 0 (rig/a.csv): test loads 3, 4.5 N are 0.0457–0.0685 % of the rated load 6.57 kN (load index 94), "
        "far below the 10–150 % a rig test uses; 3, 4.5 kN = 3000, 4500 N (45.7–68.5 %): the values look like "
        "kN entered as N (manifest runs[0].load_setpoints)"
    )


def test_lbf_or_kgf_typed_as_n_names_both():
    (f,) = findings(manifest(loads=(300,)), "rig test uses")
    # 300 lbf = 1334 N (20 %) and 300 kgf = 2942 N (45 %) of 6570 N both fit (NIST SP 811 B.8): name both
    assert round(300 * LBF_N) == 1334 and round(300 * KGF_N) == 2942
    assert "300 lbf = 1334 N (20.3 %), 300 kgf = 2942 N (44.8 %): the value looks like lbf or kgf entered as N" in f


def test_n_declared_as_kn_and_the_over_rated_finding_stays():
    m = manifest(loads=(4500,), load_unit="kN")
    ident = specimen_identity(m.specimens[0], m)
    # the finding on loads above the rated load is unchanged (primer §7: a finding, not an error)
    assert "test loads above the rated load: 4500.0 kN (68488 %)" in ident.findings
    (f,) = findings(m, "rig test uses")
    assert "test load 4500000 N is 68488 % of the rated load 6.57 kN (load index 94), far above the 10–150 %" in f
    assert "is 1000 times a plausible 4500 N (68.5 %): the value looks like N entered as kN" in f


def test_rated_load_from_the_manifest_is_named():
    m = manifest(loads=(4.5,))
    s = dataclasses.replace(m.specimens[0], rated_load_n=5000.0)
    (f,) = [x for x in specimen_identity(s, m).findings if "rig test uses" in x]
    assert "of the rated load 5.00 kN (as the manifest gives it)" in f
    assert "4.5 kN = 4500 N (90 %)" in f  # 4500 / 5000 (arithmetic)


def test_an_unreadable_size_uses_the_span_of_every_kind():
    m = manifest(pressure="34.8")
    s = dataclasses.replace(m.specimens[0], size="not a size")  # built in memory; the manifest would refuse it
    ident = specimen_identity(s, m)
    assert ident.tire_kind is None and ident.rated_load_n is None
    (f,) = [x for x in ident.findings if "inflation pressure" in x]
    assert "150–1000 kPa usual for a tire of any kind" in f and "34.8 psi = 240 kPa" in f


@pytest.mark.parametrize(
    "size, kind",
    [
        ("225/45 R17 94W", PASSENGER),  # primer §7
        ("P215/65R15 95H", PASSENGER),  # P prefix: passenger (common practice)
        ("LT265/75R16 123/120R", LIGHT_TRUCK),  # LT prefix (common practice)
        ("215/65 R16 109/107R", LIGHT_TRUCK),  # dual/single index: commercial van tire (common practice)
        ("295/75R22.5 144/141L", TRUCK_BUS),  # 22.5-in tubeless truck rim (common practice)
        ("445/50R22.5", TRUCK_BUS),  # wide-base truck tire (primer §7)
        ("245/70R17.5 136/134M", TRUCK_BUS),  # 17.5-in truck rim (common practice)
    ],
)
def test_tire_kind_from_the_size(size, kind):
    assert tire_kind(parse_size(size)) == kind
