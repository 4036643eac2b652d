"""Conductor ampacity from the standards' tables, with their corrections.

AWG and kcmil sizes follow NFPA 70 (NEC):

- Table 310.16 (not more than three current-carrying conductors in raceway,
  cable or earth) or Table 310.17 (single conductors in free air), in the
  column of the insulation's temperature rating, 60, 75 or 90 °C;
- the ambient correction of Table 310.15(B)(1)(1), based on 30 °C;
- the adjustment of Table 310.15(C)(1) for more than three current-carrying
  conductors together;
- the termination limit of 110.14(C): the equipment's terminals, 75 °C unless
  it says otherwise, cap the table column the conductor may be used at.

Metric sizes follow IEC 60364-5-52: copper (1.5 to 300 mm²) and aluminium
(16 to 300 mm²), two loaded conductors (one DC circuit), PVC (70 °C) or
XLPE/EPR (90 °C), reference installation methods A1, A2, B1, B2, C and E, with the ambient factors of Table B.52.14 and the
grouping factors of Table B.52.17 (item 1). A DC circuit is two loaded
conductors, so conductors together count as half as many circuits.

Every table is a data file in ``data/ampacity/`` with a source beside each value.

A conductor is adequate for a circuit whose maximum current is I_max when
(NEC 690.8(B), 110.14(C)):

- 1.25 I_max ≤ the table value in the termination's column, uncorrected; and
- I_max ≤ the table value in the insulation's column × the corrections.

Together: 1.25 I_max ≤ min(termination value, 1.25 × corrected value), the
:attr:`Ampacity.limit_a` every check and size choice here compares with.

A metric size is chosen with its overcurrent protection, IEC 60364-4-43
433.1: I_B ≤ I_n ≤ I_z and I_2 ≤ 1.45 I_z, where I_n is the protective
device's rated current and I_2 its conventional operating current (I_2 = k2
I_n: 1.45 for gPV fuses of IEC 60269-6 and circuit-breakers of IEC 60898;
1.6 to 2.1 for gG fuses of IEC 60269-1). The design current I_B is 1.25
I_max, as for the NEC, and I_n is the next preferred rating at or above it
(``iec_rated_currents.csv``): there is no rounding up past the conductor as
NEC 240.4(B) allows. So the conductor's limit on 1.25 I_max is the largest
preferred rating I_n with k2 I_n ≤ 1.45 I_z (:func:`largest_protection_a`):
1.25 I_max fits under it exactly when the rating it needs does. A 20 A
circuit needs a 25 A device, and 1.5 mm² (I_z = 23 A, XLPE, method B1) cannot
sit behind it although 20 A ≤ 23 A.

References
----------
.. [1] NFPA 70, National Electrical Code (2023), 110.14(C), 310.15(B)(1),
   310.15(C)(1), Tables 310.16 and 310.17, 690.8(B).
.. [2] IEC 60364-5-52:2009, Low-voltage electrical installations, Part 5-52:
   Wiring systems, Annex B (Tables B.52.2, B.52.4, B.52.10, B.52.12, B.52.14, B.52.17).
.. [3] IEC 60364-7-712, Solar photovoltaic (PV) power supply systems.
.. [4] IEC 60364-4-43:2008, Protection for safety, Protection against
   overcurrent, 433.1 (coordination between conductors and overload
   protective devices); IEC 60269-1 and 60269-6 (fuses), IEC 60898-1 (circuit-breakers).
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from pathlib import Path

from pvsource.conductors import ConductorSize, material_properties, parse_size, standard_sizes
from pvsource.errors import InputError

_DATA = Path(__file__).parent / "data" / "ampacity"

#: Installation names: NEC's two tables, and the IEC reference methods.
NEC_INSTALLS = ("raceway", "free-air")
IEC_METHODS = ("A1", "A2", "B1", "B2", "C", "E")
#: What the two general names mean for a metric size (IEC reference method).
IEC_FOR_GENERAL = {"raceway": "B1", "free-air": "E"}
INSTALLS = NEC_INSTALLS + IEC_METHODS

#: Defaults, documented in the README. 90 °C: PV wire, USE-2, THWN-2 and
#: XLPE solar cable are rated for it (common practice). 30 °C: the base of both
#: standards' tables (give the site's design high for outdoor runs). Two
#: conductors: one DC circuit alone. 75 °C terminations: NEC 110.14(C)(1).
DEFAULT_INSULATION_C = 90.0
DEFAULT_AMBIENT_C = 30.0
DEFAULT_CONDUCTORS_TOGETHER = 2
DEFAULT_INSTALL = "raceway"
DEFAULT_TERMINATION_C = 75.0
#: The overcurrent device assumed for a metric size on the PV side (and in
#: quick mode): a gPV fuse (IEC 60269-6), whose I_2 = 1.45 I_n equals a
#: circuit-breaker's (IEC 60898), so I_n ≤ I_z.
DEFAULT_PROTECTION = "gpv"
#: The device assumed on the battery side (bank and interconnect runs): gPV
#: fuses are made for PV circuits, and a battery circuit's fuse is often a gG
#: fuse (common practice). Its I_2 = 1.6 I_n asks the most of the conductor,
#: so a conductor sized for it is also protected by a gPV fuse or a breaker.
DEFAULT_BATTERY_PROTECTION = "gg"
#: IEC 60364-4-43 433.1: the device's conventional operating current may be at most 1.45 I_z.
IEC_I2_LIMIT = 1.45
#: NEC 690.8(B)(1) and 215.2(A)(1): conductors carry 125 % of a continuous current.
CONTINUOUS_FACTOR = 1.25


def _read(name: str) -> list[dict[str, str]]:
    with open(_DATA / name, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


NEC_TABLES = {(r["install"], r["size"], r["material"], float(r["insulation_c"])): float(r["ampacity_a"])
              for r in _read("nec_310_16_17.csv")}
NEC_AMBIENT = sorted((float(r["insulation_c"]), float(r["ambient_max_c"]), float(r["factor"]))
                     for r in _read("nec_310_15_b1.csv"))
NEC_ADJUSTMENT = sorted((int(r["conductors_max"]), float(r["factor"])) for r in _read("nec_310_15_c1.csv"))
IEC_TABLES = {(metal, r["method"], float(r["insulation_c"]), float(r["area_mm2"])): float(r["ampacity_a"])
              for metal in ("copper", "aluminium") for r in _read(f"iec_60364_5_52_{metal}.csv")}
#: The metric sizes held per metal [mm2]: (smallest, largest).
IEC_SPAN_MM2 = {metal: (min(areas), max(areas)) for metal in ("copper", "aluminium")
                for areas in [[k[3] for k in IEC_TABLES if k[0] == metal]]}
IEC_AMBIENT = sorted((float(r["insulation_c"]), float(r["ambient_max_c"]), float(r["factor"]))
                     for r in _read("iec_60364_5_52_b52_14.csv"))
IEC_GROUPING = sorted((int(r["circuits_max"]), float(r["factor"])) for r in _read("iec_60364_5_52_b52_17.csv"))
#: NEC 240.4(D): the largest overcurrent protection of small conductors [A], by (label, material).
SMALL_CONDUCTOR_MAX_A = {(r["size"], r["material"]): float(r["max_protection_a"]) for r in _read("nec_240_4_d.csv")}
#: NEC 240.6(A) standard ampere ratings of fuses and inverse-time breakers [A].
STANDARD_RATINGS_A = tuple(sorted(float(r["rating_a"]) for r in _read("nec_240_6_a.csv")))
#: IEC preferred rated currents [A] by series: ``fuse`` (IEC 60269-1) and ``breaker`` (IEC 60898-1).
IEC_RATINGS_A = {series: tuple(sorted(float(r["rating_a"]) for r in _read("iec_rated_currents.csv")
                                      if r["series"] == series)) for series in ("fuse", "breaker")}
#: The overcurrent devices of a metric circuit, and the rated series each comes in.
PROTECTIONS = {"gpv": "fuse", "gg": "fuse", "breaker": "breaker"}
#: Conventional operating current I_2 / I_n by device: (device, band conditions, factor).
IEC_I2_FACTORS = [(r["device"], r["rated_current"].split(), float(r["i2_factor"]))
                  for r in _read("iec_conventional_current.csv")]
#: What sets a conductor's limit on 1.25 x I_max (:meth:`Ampacity.limit_by`), in words.
LIMIT_BY = {"device": "the largest device rating it may sit behind, IEC 60364-4-43 433.1",
            "terminations": "its terminations' column, NEC 110.14(C)",
            "ampacity": "1.25 x its corrected ampacity, NEC 690.8(B)",
            "rating": "the run's own ampacity_a"}
PROTECTION_WORDS = {"gpv": "gPV fuse (IEC 60269-6)", "gg": "gG fuse (IEC 60269-1)",
                    "breaker": "circuit-breaker (IEC 60898)"}


@dataclass(frozen=True)
class Installation:
    """How a run is installed, for its ampacity.

    Attributes
    ----------
    insulation_c : float
        Insulation temperature rating [°C]: 60, 75 or 90 (AWG); 70 (PVC) or 90 (XLPE) (metric).
    ambient_c : float
        Ambient air temperature around the run [°C].
    conductors_together : int
        Current-carrying conductors in the same raceway, cable or bundle (a DC circuit is two).
    install : str
        ``raceway`` or ``free-air``, or an IEC 60364-5-52 reference method for metric sizes.
    termination_c : float
        Temperature rating of the terminations [°C] (NEC 110.14(C)).
    protection : str or None
        The overcurrent device of a metric circuit, one of :data:`PROTECTIONS`
        (IEC 60364-4-43 433.1); AWG sizes follow NEC 240. None: by the
        circuit, :data:`DEFAULT_PROTECTION` on the PV side and
        :data:`DEFAULT_BATTERY_PROTECTION` on the battery side
        (:func:`pvsource.wiring.default_protection`).
    """

    insulation_c: float = DEFAULT_INSULATION_C
    ambient_c: float = DEFAULT_AMBIENT_C
    conductors_together: int = DEFAULT_CONDUCTORS_TOGETHER
    install: str = DEFAULT_INSTALL
    termination_c: float = DEFAULT_TERMINATION_C
    protection: str | None = None


def check_installation(inst: Installation, where: str, names: dict | None = None) -> Installation:
    """Refuse impossible installation values; ``names`` maps field to the name the user typed."""
    names = names or {}

    def fail(field, expected):
        raise InputError(where, names.get(field, field), expected)

    if inst.install not in INSTALLS:
        fail("install", f"expected one of {', '.join(INSTALLS)}, got {inst.install!r}")
    if inst.insulation_c not in (60.0, 70.0, 75.0, 90.0):
        fail("insulation_c", f"expected 60, 75 or 90 (NEC) or 70 or 90 (IEC), got {inst.insulation_c!r}")
    if inst.termination_c not in (60.0, 75.0, 90.0):
        fail("termination_c", f"expected 60, 75 or 90, got {inst.termination_c!r}")
    if inst.protection is not None and inst.protection not in PROTECTIONS:
        fail("protection", f"expected one of {', '.join(PROTECTIONS)}, got {inst.protection!r}")
    if not (math.isfinite(inst.ambient_c) and -50.0 <= inst.ambient_c <= 85.0):
        fail("ambient_c", f"expected -50 to 85 degC, got {inst.ambient_c!r}")
    n = inst.conductors_together
    if isinstance(n, bool) or int(n) != n or not 1 <= n <= 1000:
        fail("conductors_together", f"expected a whole number from 1 to 1000, got {n!r}")
    return inst


def check_series(series: str, given: dict, where: str, names: dict | None = None) -> None:
    """Refuse installation values the size's standard has no table for (``given``: field -> value)."""
    names = names or {}
    if series == "awg":
        if given.get("install") in IEC_METHODS:
            raise InputError(where, names.get("install", "install"),
                             f"{given['install']!r} is an IEC method; an AWG size takes raceway or free-air")
        if given.get("insulation_c", 90.0) not in (60.0, 75.0, 90.0):
            raise InputError(where, names.get("insulation_c", "insulation_c"),
                             "NEC 310.16 has 60, 75 and 90 degC columns for an AWG size")
        if "protection" in given:
            raise InputError(where, names.get("protection", "protection"),
                             "applies to metric sizes (IEC 60364-4-43); an AWG size's protection follows NEC 240")
    elif given.get("insulation_c", 90.0) not in (70.0, 90.0):
        raise InputError(where, names.get("insulation_c", "insulation_c"),
                         "IEC 60364-5-52 tabulates 70 (PVC) and 90 (XLPE) degC for a metric size")


@dataclass(frozen=True)
class Ampacity:
    """A size's ampacity in an installation.

    Attributes
    ----------
    table_a : float
        The table's value in the insulation's column [A].
    ambient_factor, grouping_factor : float
        The corrections [-].
    corrected_a : float
        ``table_a`` × the corrections: the conductor's ampacity [A].
    termination_a : float
        The table's value in the termination's column, uncorrected (NEC
        110.14(C)); infinite for metric sizes [A].
    basis : str
        The tables used, in words.
    protection : str or None
        For a metric size, the overcurrent device (:data:`PROTECTIONS`) the
        conductor is coordinated with (IEC 60364-4-43 433.1); None for NEC sizes.
    typed : bool
        Whether the rating is the run's own ``ampacity_a``, not a table's.
    """

    table_a: float
    ambient_factor: float
    grouping_factor: float
    corrected_a: float
    termination_a: float
    basis: str
    protection: str | None = None
    typed: bool = False

    def limit_for(self, conductors_in_parallel: int = 1) -> float:
        """The most that 1.25 × I_max may be with ``conductors_in_parallel`` such conductors [A].

        min(termination value, 1.25 × corrected), and for a metric size the
        largest preferred device rating that protects them together (433.1
        applies to the sum of the parallel conductors' I_z, 433.4.1).
        """
        n = conductors_in_parallel
        limit = n * min(self.termination_a, CONTINUOUS_FACTOR * self.corrected_a)
        if self.protection is not None:
            limit = min(limit, largest_protection_a(n * self.corrected_a, self.protection))
        return limit

    def limit_by(self, conductors_in_parallel: int = 1) -> str:
        """What sets :meth:`limit_for`: one of :data:`LIMIT_BY` (``device``, ``terminations``, ``ampacity``, ``rating``)."""
        n = conductors_in_parallel
        if self.protection is not None and self.limit_for(n) < n * min(self.termination_a,
                                                                       CONTINUOUS_FACTOR * self.corrected_a):
            return "device"
        if self.typed:
            return "rating"
        return "terminations" if self.termination_a <= CONTINUOUS_FACTOR * self.corrected_a else "ampacity"

    @property
    def limit_a(self) -> float:
        """The most that 1.25 × I_max may be for one conductor [A]; see :meth:`limit_for`."""
        return self.limit_for(1)

    @property
    def max_circuit_current_a(self) -> float:
        """The largest maximum circuit current I_max this conductor may carry [A]."""
        return self.limit_a / CONTINUOUS_FACTOR


def _band(rows, column: float, value: float) -> float | None:
    """The factor of the first band of ``column`` whose upper end reaches ``value``; None past the last."""
    for col, upper, factor in rows:
        if col == column and value <= upper:
            return factor
    return None


def _count(rows, n: int) -> float:
    for upper, factor in rows:
        if n <= upper:
            return factor
    return rows[-1][1]


def nec_ambient_factor(insulation_c: float, ambient_c: float) -> float:
    """NEC Table 310.15(B)(1)(1) factor for an ambient [°C] and insulation column; 0 past the table."""
    f = _band(NEC_AMBIENT, float(insulation_c), float(ambient_c))
    return 0.0 if f is None else f


def nec_adjustment_factor(conductors_together: int) -> float:
    """NEC Table 310.15(C)(1) factor; 1 for up to three current-carrying conductors."""
    return _count(NEC_ADJUSTMENT, int(conductors_together))


def iec_ambient_factor(insulation_c: float, ambient_c: float) -> float:
    """IEC 60364-5-52 Table B.52.14 factor, at the tabulated ambient at or above ``ambient_c``; 0 past it."""
    f = _band(IEC_AMBIENT, float(insulation_c), float(ambient_c))
    return 0.0 if f is None else f


def iec_grouping_factor(circuits: int) -> float:
    """IEC 60364-5-52 Table B.52.17 item 1, at the listed count at or above ``circuits``."""
    return _count(IEC_GROUPING, int(circuits))


def ampacity(size: str | ConductorSize, material: str, inst: Installation = Installation(),
             where: str = "ampacity") -> Ampacity:
    """The ampacity of one conductor of ``size`` in ``inst``.

    Raises
    ------
    InputError
        When the tables have no value for the size, metal, insulation or
        installation (the message says which; the caller says what the user can do).
    """
    s = parse_size(size, allow_nonstandard=True, where=where)
    mat = material_properties(material, where).name
    check_installation(inst, where)
    if s.series == "awg":
        if inst.install not in NEC_INSTALLS:
            raise InputError(where, "install", f"{inst.install!r} is an IEC method; an AWG size takes raceway or "
                                               "free-air (NEC 310.16 or 310.17)")
        if inst.insulation_c not in (60.0, 75.0, 90.0):
            raise InputError(where, "insulation_c", f"NEC 310.16 has 60, 75 and 90 degC columns, not {inst.insulation_c:g}")
        table = "310.16" if inst.install == "raceway" else "310.17"
        key = (inst.install, s.label, mat, inst.insulation_c)
        if key not in NEC_TABLES:
            raise InputError(where, "size", f"NEC Table {table} has no {inst.insulation_c:g} degC {mat} value for "
                                            f"{s.label}")
        col_t = min(inst.termination_c, inst.insulation_c)
        term = NEC_TABLES.get((inst.install, s.label, mat, col_t), 0.0)
        k_t = nec_ambient_factor(inst.insulation_c, inst.ambient_c)
        k_g = nec_adjustment_factor(inst.conductors_together)
        basis = (f"NEC Table {table} ({inst.insulation_c:g} degC column), 310.15(B)(1) ambient "
                 f"{inst.ambient_c:g} degC, 310.15(C)(1) for {inst.conductors_together} conductors, "
                 f"110.14(C) {col_t:g} degC terminations")
        return Ampacity(NEC_TABLES[key], k_t, k_g, NEC_TABLES[key] * k_t * k_g, term, basis)
    method = IEC_FOR_GENERAL.get(inst.install, inst.install)
    if inst.insulation_c not in (70.0, 90.0):
        raise InputError(where, "insulation_c", f"IEC 60364-5-52 tabulates 70 (PVC) and 90 (XLPE) degC, "
                                                f"not {inst.insulation_c:g}")
    key = (mat, method, inst.insulation_c, s.area_mm2)
    if key not in IEC_TABLES:
        low, high = IEC_SPAN_MM2[mat]
        raise InputError(where, "size", f"IEC 60364-5-52 {mat} as held here runs from {low:g} to {high:g} mm2, "
                                        f"not {s.label}")
    circuits = math.ceil(inst.conductors_together / 2)
    protection = inst.protection or DEFAULT_PROTECTION
    k_t = iec_ambient_factor(inst.insulation_c, inst.ambient_c)
    k_g = iec_grouping_factor(circuits)
    basis = (f"IEC 60364-5-52 {mat}, method {method} ({'XLPE' if inst.insulation_c == 90 else 'PVC'}, two loaded "
             f"conductors), Table B.52.14 ambient {inst.ambient_c:g} degC, Table B.52.17 for {circuits} circuit(s); "
             f"{protection_words(protection)}")
    return Ampacity(IEC_TABLES[key], k_t, k_g, IEC_TABLES[key] * k_t * k_g, math.inf, basis, protection)


def protection_words(protection: str) -> str:
    """How a metric conductor is coordinated with its device, in words."""
    return (f"protected by a {PROTECTION_WORDS[protection]}: I_n <= I_z and I_2 <= 1.45 I_z "
            "(IEC 60364-4-43 433.1)")


def conventional_factor(protection: str, rated_a: float) -> float:
    """k2 = I_2 / I_n of a device of ``rated_a`` [-] (``iec_conventional_current.csv``)."""
    ops = {">": float.__gt__, ">=": float.__ge__, "<": float.__lt__, "<=": float.__le__}
    for device, conditions, factor in IEC_I2_FACTORS:
        if device != protection:
            continue
        ok = True
        for cond in conditions:
            op = cond.rstrip("0123456789.")
            ok = ok and ops[op](float(rated_a), float(cond[len(op):]))
        if ok:
            return factor
    raise InputError("overcurrent protection", "protection", f"no conventional current for {protection!r} "
                                                            f"at {rated_a:g} A")


def largest_protection_a(capacity_a: float, protection: str = DEFAULT_PROTECTION) -> float:
    """Largest preferred rating I_n of ``protection`` that protects a conductor of I_z = ``capacity_a`` [A].

    IEC 60364-4-43 433.1: I_n ≤ I_z and k2 I_n ≤ 1.45 I_z. 0 when no
    preferred rating does.
    """
    fits = [r for r in IEC_RATINGS_A[PROTECTIONS[protection]]
            if r <= capacity_a * (1 + 1e-12)
            and conventional_factor(protection, r) * r <= IEC_I2_LIMIT * capacity_a * (1 + 1e-12)]
    return max(fits, default=0.0)


def next_protection_a(design_current_a: float, protection: str = DEFAULT_PROTECTION) -> float:
    """Smallest preferred rating I_n of ``protection`` at or above ``design_current_a`` (I_B ≤ I_n) [A]."""
    ratings = IEC_RATINGS_A[PROTECTIONS[protection]]
    for r in ratings:
        if r >= design_current_a - 1e-9:
            return r
    raise InputError("overcurrent protection", None, f"{design_current_a:.0f} A is above the largest preferred "
                                                     f"{PROTECTION_WORDS[protection]} rating, {ratings[-1]:g} A")


def needed_protection_a(design_current_a: float, protection: str = DEFAULT_PROTECTION) -> float | None:
    """:func:`next_protection_a`, or None when the design current is above the preferred series [A]."""
    try:
        return next_protection_a(design_current_a, protection)
    except InputError:
        return None


def smallest_size_for_current(max_circuit_current_a: float, series: str, material: str,
                              inst: Installation = Installation(), conductors_in_parallel: int = 1,
                              where: str = "ampacity"):
    """Smallest standard size of a series whose ampacity carries ``max_circuit_current_a`` (I_max) [A].

    Each of ``conductors_in_parallel`` conductors carries an equal share.
    Sizes the tables lack are skipped, and so are small conductors whose NEC
    240.4(D) protection limit is below the circuit's smallest fuse, and
    metric sizes whose I_z cannot be protected by the device rating the
    circuit needs (IEC 60364-4-43 433.1, :meth:`Ampacity.limit_for`).

    Returns
    -------
    tuple (ConductorSize, Ampacity)

    Raises
    ------
    InputError
        When no tabulated size is large enough.
    """
    share = max_circuit_current_a / conductors_in_parallel
    largest = None
    for s in standard_sizes(series):
        try:
            amp = ampacity(s, material, inst, where)
        except InputError as exc:
            if exc.field == "size":
                continue
            raise
        largest = (s, amp)
        # The circuit's fuse is at least 1.25 x I_max, rounded up (NEC 690.9(B), 240.6(A)); a small
        # conductor may not sit behind a fuse above its 240.4(D) limit, whatever its table ampacity.
        small = SMALL_CONDUCTOR_MAX_A.get((s.label, material))
        if small is not None and next_standard_rating(CONTINUOUS_FACTOR * share) > small:
            continue
        if CONTINUOUS_FACTOR * max_circuit_current_a <= amp.limit_for(conductors_in_parallel):
            return s, amp
    biggest = f"the largest tabulated, {largest[0].label}, carries {largest[1].max_circuit_current_a:.0f} A" \
        if largest else "no size is tabulated for this installation"
    raise InputError(where, "ampacity", f"no standard size carries {share:.1f} A per conductor: {biggest}; "
                                        "use conductors in parallel or a cooler installation")


def next_standard_rating(current_a: float) -> float:
    """Smallest NEC 240.6(A) standard rating at or above ``current_a`` [A]."""
    for r in STANDARD_RATINGS_A:
        if r >= current_a - 1e-9:
            return r
    raise InputError("overcurrent protection", None, f"{current_a:.0f} A is above the largest standard rating")
