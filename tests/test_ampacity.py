"""Tests for pvsource.ampacity against the NEC and IEC 60364-5-52 tables and worked examples."""

from __future__ import annotations

import csv
import math

import pytest

from pvsource import ampacity as amp
from pvsource.ampacity import Installation
from pvsource.errors import InputError

# NFPA 70 (NEC 2023) Table 310.16, 30 °C, not more than three conductors in
# raceway or cable: (60, 75, 90 °C) [A]. Values from memory; they agree with
# a published transcription of the table.
NEC_310_16_COPPER = {
    "14 AWG": (15, 20, 25), "12 AWG": (20, 25, 30), "10 AWG": (30, 35, 40), "8 AWG": (40, 50, 55),
    "6 AWG": (55, 65, 75), "4 AWG": (70, 85, 95), "2 AWG": (95, 115, 130), "1/0 AWG": (125, 150, 170),
    "2/0 AWG": (145, 175, 195), "4/0 AWG": (195, 230, 260), "250 kcmil": (215, 255, 290),
    "350 kcmil": (260, 310, 350), "500 kcmil": (320, 380, 430),
}
NEC_310_16_ALUMINIUM = {
    "12 AWG": (15, 20, 25), "10 AWG": (25, 30, 35), "6 AWG": (40, 50, 55), "2 AWG": (75, 90, 100),
    "4/0 AWG": (150, 180, 205), "250 kcmil": (170, 205, 230), "500 kcmil": (260, 310, 350),
}
# NEC Table 310.17, single conductors in free air, 30 °C; from memory.
NEC_310_17_COPPER = {"10 AWG": (40, 50, 55), "4/0 AWG": (300, 360, 405), "500 kcmil": (515, 620, 700)}
# NEC Table 310.15(C)(1) (from memory): more than three current-carrying conductors.
NEC_310_15_C1 = [(3, 1.0), (4, 0.8), (6, 0.8), (7, 0.7), (9, 0.7), (10, 0.5), (20, 0.5), (21, 0.45), (30, 0.45),
                 (31, 0.4), (40, 0.4), (41, 0.35), (60, 0.35)]
# IEC 60364-5-52 Table B.52.4 (XLPE, copper, two loaded conductors, 30 °C),
# methods B1 and C [A]; from memory.
IEC_B52_4 = {1.5: (23, 24), 2.5: (31, 33), 4: (42, 45), 6: (54, 58), 10: (75, 80), 16: (100, 107), 25: (133, 138),
             35: (164, 171), 50: (198, 209), 95: (306, 328)}
# IEC 60364-5-52 Table B.52.2 (PVC, copper, two loaded conductors), method C; from memory.
IEC_B52_2_C = {1.5: 19.5, 2.5: 27, 4: 36, 6: 46, 10: 63, 16: 85, 25: 112}


def _at(size, material, col, install="raceway", **kw):
    # A 90 °C termination so that the table column itself is read.
    inst = Installation(insulation_c=col, install=install, termination_c=90.0 if col == 90 else col, **kw)
    return amp.ampacity(size, material, inst)


@pytest.mark.parametrize("table, material", [(NEC_310_16_COPPER, "copper"), (NEC_310_16_ALUMINIUM, "aluminium")])
def test_nec_310_16_columns(table, material):
    # NEC Table 310.16 (from memory): each column at 30 °C, three conductors or fewer.
    for size, cols in table.items():
        for col, ref in zip((60.0, 75.0, 90.0), cols):
            a = _at(size, material, col)
            assert a.corrected_a == ref and a.table_a == ref


def test_nec_310_17_free_air():
    # NEC Table 310.17 (from memory): single conductors in free air.
    for size, cols in NEC_310_17_COPPER.items():
        for col, ref in zip((60.0, 75.0, 90.0), cols):
            assert _at(size, "cu", col, install="free-air").corrected_a == ref


@pytest.mark.parametrize("col", [60.0, 75.0, 90.0])
def test_nec_ambient_table_follows_the_310_15_b_formula(col):
    # NEC 310.15(B) formula: I' = I sqrt((Tc - Ta') / (Tc - Ta)), Ta = 30 °C. The
    # table's factors are it at each band's warm end, rounded to 0.01.
    for ambient in range(-10, int(col)):
        f = amp.nec_ambient_factor(col, ambient)
        if f == 0.0:
            continue
        warm_end = max(10, 5 * math.ceil(ambient / 5))
        assert f == pytest.approx(math.sqrt((col - warm_end) / (col - 30.0)), abs=0.0051)


def test_nec_ambient_factors_worked():
    # NEC Table 310.15(B)(1)(1) (from memory): 40 °C is 0.82 / 0.88 / 0.91;
    # 60 °C conductors stop at 55 °C, 75 °C ones at 70 °C.
    assert [amp.nec_ambient_factor(c, 40.0) for c in (60, 75, 90)] == [0.82, 0.88, 0.91]
    assert amp.nec_ambient_factor(90, 30.0) == 1.0 and amp.nec_ambient_factor(90, 30.5) == 0.96
    assert amp.nec_ambient_factor(60, 56.0) == 0.0 and amp.nec_ambient_factor(75, 71.0) == 0.0


@pytest.mark.parametrize("n, factor", NEC_310_15_C1)
def test_nec_adjustment_for_more_than_three(n, factor):
    # NEC Table 310.15(C)(1) (from memory).
    assert amp.nec_adjustment_factor(n) == factor


def test_nec_worked_bundle():
    # Worked by hand from NEC 310.16 and 310.15(C)(1): six 10 AWG 90 °C copper
    # conductors in one conduit at 40 °C: 40 A x 0.91 x 0.80 = 29.12 A.
    a = amp.ampacity("10 AWG", "cu", Installation(90, 40.0, 6, "raceway", 75))
    assert a.corrected_a == pytest.approx(29.12)
    # 110.14(C): 75 °C terminations cap 1.25 x I_max at the 75 °C column, 35 A.
    assert a.termination_a == 35
    assert a.limit_a == pytest.approx(min(35, 1.25 * 29.12))


def test_nec_690_8_pv_source_circuit_example():
    # NEC 690.8 worked by hand: Isc 10 A gives I_max = 12.5 A and 15.6 A for the
    # conductor. 14 AWG 90 °C copper at 40 °C: the 75 °C termination column
    # holds 20 A >= 15.6 A (690.8(B)(1)), and 25 A x 0.91 = 22.75 A >= 12.5 A
    # (690.8(B)(2)), but its fuse, at least 15.6 A and so 20 A (690.9(B), 240.6(A)), is above 14 AWG's
    # 15 A of 240.4(D) (from memory). 12 AWG (20 A limit) takes it: 30 A x 0.91 = 27.3 A.
    size, a = amp.smallest_size_for_current(12.5, "awg", "copper", Installation(90, 40.0, 2, "raceway", 75))
    assert size.label == "12 AWG" and a.corrected_a == pytest.approx(27.3)
    # 32 A maximum current (40 A for the conductor) in a 75 °C column: 8 AWG (50 A),
    # since 10 AWG's 35 A falls short.
    size, _ = amp.smallest_size_for_current(32.0, "awg", "copper", Installation(90, 30.0, 2, "raceway", 75))
    assert size.label == "8 AWG"


def test_termination_rule_limits_hot_conductors():
    # NEC 110.14(C): with 60 °C terminations a 90 °C conductor is used at the
    # 60 °C column. 6 AWG copper: 55 A there, against 75 A in its own column.
    a = amp.ampacity("6 AWG", "cu", Installation(90, 30.0, 2, "raceway", 60))
    assert (a.table_a, a.termination_a) == (75, 55)
    assert a.max_circuit_current_a == pytest.approx(55 / 1.25)


@pytest.mark.parametrize("area", list(IEC_B52_4))
def test_iec_b52_4_methods(area):
    # IEC 60364-5-52 Table B.52.4 (from memory), methods B1 and C, 30 °C, one circuit.
    for method, ref in zip(("B1", "C"), IEC_B52_4[area]):
        a = amp.ampacity(f"{area:g} mm2", "cu", Installation(90, 30.0, 2, method))
        assert a.corrected_a == ref and math.isinf(a.termination_a)
    # The general name "raceway" is method B1 for a metric size.
    assert amp.ampacity(f"{area:g} mm2", "cu", Installation(90, 30.0, 2, "raceway")).table_a == IEC_B52_4[area][0]


def test_iec_b52_2_pvc():
    # IEC 60364-5-52 Table B.52.2 (from memory), PVC, method C.
    for area, ref in IEC_B52_2_C.items():
        assert amp.ampacity(f"{area:g} mm2", "cu", Installation(70, 30.0, 2, "C")).table_a == ref


@pytest.mark.parametrize("ins, ambients", [(70.0, (10, 20, 35, 40, 50, 60)), (90.0, (10, 25, 40, 55, 70, 80))])
def test_iec_ambient_factors_follow_their_formula(ins, ambients):
    # IEC 60364-5-52 Table B.52.14 (from memory) is sqrt((θp − θa) / (θp − 30))
    # rounded to 0.01; checked at tabulated ambients.
    for t in ambients:
        assert amp.iec_ambient_factor(ins, t) == pytest.approx(math.sqrt((ins - t) / (ins - 30.0)), abs=0.0051)


def test_iec_grouping_and_worked_example():
    # IEC 60364-5-52 Table B.52.17 item 1 (from memory): 2 circuits 0.80, 3 0.70, 6 0.57, 9 0.50.
    assert [amp.iec_grouping_factor(n) for n in (1, 2, 3, 6, 9, 10)] == [1.0, 0.8, 0.7, 0.57, 0.5, 0.45]
    # Worked by hand: 6 mm2 XLPE, method C, 40 °C, four conductors (two DC
    # circuits) together: 58 A x 0.91 x 0.80 = 42.22 A.
    a = amp.ampacity("6 mm2", "cu", Installation(90, 40.0, 4, "C"))
    assert a.corrected_a == pytest.approx(42.224)


def test_iec_712_string_cable_example():
    # IEC 60364-7-712 asks I_z >= 1.25 Isc for a string cable. Isc 11 A gives
    # 13.75 A; at 70 °C (solar cable behind modules), XLPE method E: 1.5 mm2
    # carries 26 x 0.58 = 15.1 A, enough; at 75 °C the factor falls to 0.50 and
    # 13 A is not, so 2.5 mm2 (36 x 0.50 = 18 A) is needed.
    size, _ = amp.smallest_size_for_current(13.75, "metric", "cu", Installation(90, 70.0, 2, "free-air"))
    assert size.label == "1.5 mm2"
    size, _ = amp.smallest_size_for_current(13.75, "metric", "cu", Installation(90, 75.0, 2, "free-air"))
    assert size.label == "2.5 mm2"


def test_nec_240_6_a_standard_ratings():
    # NEC 240.6(A) (from memory): 15, 20, 25, 30, 35, 40, 45, 50, 60, 70, ... and
    # 1, 3, 6, 10 A for fuses.
    assert [amp.next_standard_rating(x) for x in (0.5, 2.0, 9.0, 15.3, 15.0, 46.0, 61.0, 105.0, 501.0)] == \
        [1, 3, 10, 20, 15, 50, 70, 110, 600]


def test_gaps_are_named():
    with pytest.raises(InputError, match="ampacity_a"):
        amp.ampacity("6 mm2", "al", Installation())
    with pytest.raises(InputError, match="IEC method"):
        amp.ampacity("10 AWG", "cu", Installation(install="C"))
    with pytest.raises(InputError, match="70 \\(PVC\\)"):
        amp.ampacity("6 mm2", "cu", Installation(insulation_c=75))
    with pytest.raises(InputError, match="parallel"):
        amp.smallest_size_for_current(5000.0, "awg", "cu")
    with pytest.raises(InputError, match="conductors_together"):
        amp.check_installation(Installation(conductors_together=0), "x")


def test_every_table_value_has_a_source():
    # The project's rule for standards data: a source beside every value.
    for path in amp._DATA.glob("*.csv"):
        with open(path, newline="", encoding="utf-8") as fh:
            rows = list(csv.DictReader(fh))
        assert rows and all(r["source"].strip() for r in rows), path.name


def test_size_by_ampacity_keeps_small_conductors_behind_their_240_4_d_fuse():
    # NEC 2023 240.4(D) (from memory): 14 AWG Cu at most 15 A, 12 AWG Cu 20 A, 10 AWG Cu 30 A. A 20 A PV
    # circuit needs a fuse of at least 1.25 x 20 = 25 A (690.9(B), 240.6(A)). In free air, 310.17's 75 degC
    # column gives 14 AWG Cu 30 A, enough for 1.25 x 20 A, yet 14 and 12 AWG cannot sit behind a 25 A fuse.
    free_air = Installation(90, 30.0, 2, "free-air", 75)
    size, _ = amp.smallest_size_for_current(20.0, "awg", "copper", free_air)
    assert size.label == "10 AWG"
    # 8 A needs a 10 A fuse, within 14 AWG's 15 A: the small size stays allowed.
    size, _ = amp.smallest_size_for_current(8.0, "awg", "copper", free_air)
    assert size.label == "14 AWG"
