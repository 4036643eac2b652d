"""Conductor sizes, DC resistance, loop resistance and voltage drop.

A size's resistance comes, by default, from the table of its standard: IEC
60228 (the maximum DC resistance at 20 °C for the conductor's class and metal)
for metric sizes, NEC Chapter 9 Table 8 (at 75 °C) for AWG and kcmil, each
moved to the conductor temperature by its standard's linear law. Both tables
are data files in ``data/conductors/`` with a source beside every value. The
first-principles value (resistivity and temperature coefficient of the metal,
the nominal cross-section and a stranding factor for the lay of the wires)
stays available as the ``"computed"`` basis, and is what a size without a
table row gets. Numeric functions are vectorised (numpy in, numpy out) and
raise :class:`~pvsource.errors.InputError` naming the offending argument.

References
----------
.. [1] IEC 60028, International standard of resistance for copper.
.. [2] IEC 60889, Hard-drawn aluminium wire for overhead line conductors.
.. [3] IEC 60228, Conductors of insulated cables (Tables 1, 2 and 3).
.. [4] ASTM B258, Nominal diameters and cross-sectional areas of AWG sizes of
   solid round wires used as electrical conductors.
.. [5] ASTM B8, Concentric-lay-stranded copper conductors.
.. [6] NFPA 70, National Electrical Code, Chapter 9 Table 8.
.. [7] IEC 60228, Annex B: temperature correction factors for resistance.
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass
from pathlib import Path
from typing import NamedTuple

import numpy as np

from pvsource.errors import InputError

_DATA = Path(__file__).parent / "data" / "conductors"

#: Default conductor temperature [°C]. Common practice for PV DC circuits:
#: the 75 °C column of NFPA 70 (NEC), at which Chapter 9 Table 8 is tabulated.
DEFAULT_CONDUCTOR_TEMP_C = 75.0

#: One kcmil (1000 circular mils) [mm²].
KCMIL_MM2 = 0.506707

#: IEC 60228 nominal cross-sections [mm²].
IEC_60228_SIZES_MM2 = (0.5, 0.75, 1, 1.5, 2.5, 4, 6, 10, 16, 25, 35, 50, 70,
                       95, 120, 150, 185, 240, 300, 400, 500, 630)
#: AWG numbers of the "awg" series: the building-wire sizes of NEC Chapter 9
#: Table 8, 18 to 1 without the odd sizes below 4, then 1/0 (n = 0) to 4/0
#: (n = -3). Odd sizes still parse; they are rarely stocked.
AWG_STANDARD = (18, 16, 14, 12, 10, 8, 6, 4, 3, 2, 1, 0, -1, -2, -3)
#: kcmil sizes of the "awg" series above 4/0.
KCMIL_STANDARD = (250, 300, 350, 400, 500, 600, 750, 1000)
# NEC Chapter 9 Table 8 lists these too, so they parse without the flag, but
# they are rarely stocked and so stay out of the stepping series.
_KCMIL_TABLE8 = KCMIL_STANDARD + (700, 800, 900, 1250, 1500, 1750, 2000)

_ALIASES = {"copper": "copper", "cu": "copper", "aluminium": "aluminium",
            "aluminum": "aluminium", "al": "aluminium"}


@dataclass(frozen=True)
class Material:
    """Metal constants; values and sources in ``data/conductors/materials.csv``.

    Attributes
    ----------
    name : str
        ``"copper"`` or ``"aluminium"``.
    rho20_ohm_mm2_per_m, alpha20_per_k : float
        Resistivity [ohm·mm²/m] and temperature coefficient [1/K] at 20 °C.
    alpha75_nec_per_k : float
        Coefficient referred to 75 °C, as in the NEC Table 8 note [1/K].
    density_kg_per_m3 : float
        Density [kg/m³].
    """

    name: str
    rho20_ohm_mm2_per_m: float
    alpha20_per_k: float
    alpha75_nec_per_k: float
    density_kg_per_m3: float


def _read_csv(name: str) -> list[dict[str, str]]:
    with open(_DATA / name, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def _load_materials() -> dict[str, Material]:
    q: dict[str, dict[str, float]] = {}
    for row in _read_csv("materials.csv"):
        q.setdefault(row["material"], {})[row["quantity"]] = float(row["value"])
    return {m: Material(m, v["resistivity_20c"], v["alpha_20c"], v["alpha_75c_nec"], v["density"])
            for m, v in q.items()}


#: Copper and aluminium, by canonical name.
MATERIALS = _load_materials()
#: Resistance multiplier per IEC 60228 conductor class: 1 solid 1.00, 2 stranded
#: 1.02, 5 flexible 1.09; sources in ``data/conductors/stranding.csv``.
STRANDING_FACTORS = {int(r["conductor_class"]): float(r["factor"]) for r in _read_csv("stranding.csv")}


#: How a size's resistance is found: its standard's table, or first principles.
RESISTANCE_BASES = ("table", "computed")
_M_PER_KFT = 304.8


def _load_iec60228() -> dict[tuple[int, str, float], float]:
    return {(int(r["conductor_class"]), r["material"], float(r["area_mm2"])): float(r["max_ohm_per_km_20c"])
            for r in _read_csv("iec60228.csv")}


def _load_table8() -> dict[tuple[str, str, str], float]:
    return {(r["size"], r["construction"], r["material"]): float(r["ohm_per_kft_75c"])
            for r in _read_csv("nec_chapter9_table8.csv")}


#: IEC 60228 maximum DC resistance at 20 °C [ohm/km], by (class, material, area_mm2).
IEC_60228_OHM_PER_KM = _load_iec60228()
#: NEC Chapter 9 Table 8 DC resistance at 75 °C [ohm/kft], by (label, "solid"|"stranded", material).
NEC_TABLE8_OHM_PER_KFT = _load_table8()


def material_properties(material: str | Material, where: str = "material") -> Material:
    """Constants of ``copper``/``cu`` or ``aluminium``/``aluminum``/``al``; InputError otherwise."""
    if isinstance(material, Material):
        return material
    key = _ALIASES.get(str(material).strip().lower()) if material is not None else None
    if key is None:
        raise InputError(where, "material", f"expected one of {sorted(_ALIASES)}; got {material!r}")
    return MATERIALS[key]


def _check(x, name: str, where: str, *, allow_zero: bool = False, signed: bool = False) -> np.ndarray:
    try:
        arr = np.asarray(x, dtype=float)
    except (TypeError, ValueError):
        raise InputError(where, name, f"expected numbers; got {x!r}") from None
    if not np.all(np.isfinite(arr)):
        raise InputError(where, name, f"expected finite numbers; got {x!r}")
    bad = np.zeros(arr.shape, bool) if signed else (arr < 0 if allow_zero else arr <= 0)
    if np.any(bad):
        rule = ">= 0" if allow_zero else "> 0"
        raise InputError(where, name, f"expected values {rule}; got {arr[bad].flat[0]!r}")
    return arr


def _out(arr):
    # A caller who passed scalars wants a scalar back, not a 0-d array.
    arr = np.asarray(arr)
    return arr[()] if arr.ndim == 0 else arr


def _check_temp(temp_c, mat: Material, where: str, name: str = "temp_c") -> np.ndarray:
    t = _check(temp_c, name, where, signed=True)
    # The linear law reaches zero resistance at 20 - 1/alpha (-234.5 °C for
    # copper) and is meaningless below it.
    t_zero = 20.0 - 1.0 / mat.alpha20_per_k
    if np.any(t <= t_zero):
        raise InputError(where, name, f"expected temperatures above {t_zero:.1f} °C; got {t.min()!r}")
    return t


def _check_parallel(n, where: str) -> np.ndarray:
    arr = None if np.asarray(n).dtype == bool else _check(n, "conductors_in_parallel", where)
    if arr is None or np.any(arr != np.round(arr)):
        raise InputError(where, "conductors_in_parallel", f"expected whole numbers >= 1; got {n!r}")
    return arr


@dataclass(frozen=True)
class ConductorSize:
    """A conductor size: canonical ``label`` (``"10 AWG"``, ``"2/0 AWG"``,
    ``"250 kcmil"``, ``"6 mm2"``), ``series`` (``"awg"`` for AWG and kcmil,
    ``"metric"`` for IEC 60228) and nominal cross-section ``area_mm2`` [mm²]."""

    label: str
    series: str
    area_mm2: float


def awg_area_mm2(gauge):
    """Nominal cross-section [mm²] of AWG number ``gauge`` by ASTM B258 geometry.

    d = 0.005 in · 92^((36 − n)/39), A = π/4 · d²; 1/0 is n = 0, 2/0 is n = −1,
    and so on. Stranded conductors carry the same nominal area.
    """
    d_mm = 0.005 * 25.4 * 92.0 ** ((36.0 - np.asarray(gauge, dtype=float)) / 39.0)
    return _out(np.pi / 4.0 * d_mm**2)


def _awg(n: int) -> ConductorSize:
    return ConductorSize(f"{1 - n}/0 AWG" if n <= 0 else f"{n} AWG", "awg", float(awg_area_mm2(n)))


_FORMS = ("accepted forms: AWG '10 AWG', '10awg', '#10', '10 ga', '1/0' to '4/0' "
          "(or '0' to '0000' AWG), gauges 4/0 to 40; kcmil '250 kcmil', '250 MCM'; "
          "metric '6 mm2', '6mm²', '6 sq mm', '6 sqmm', '6 mm^2' (IEC 60228 sections)")
_RE_AWG = re.compile(r"^(?P<p>#|no\.?|awg)?\s*(?P<g>[1-9]\d*/0|0+|\d+)\s*(?P<u>awg|ga|gauge)?$")
_RE_KCMIL = re.compile(r"^(?P<v>\d+(?:\.\d+)?)\s*(?:kcmil|mcm)$")
_RE_MM2 = re.compile(r"^(?P<v>\d+(?:[.,]\d+)?)\s*(?:mm2|mm\^2|sq\.?\s*mm|sqmm)$")


def parse_size(text: str | ConductorSize, *, allow_nonstandard: bool = False,
               where: str = "conductor size") -> ConductorSize:
    """Read a conductor size in any common spelling.

    Parameters
    ----------
    text : str or ConductorSize
        e.g. ``"10 AWG"``, ``"#10"``, ``"2/0"``, ``"0000 AWG"``, ``"250 MCM"``, ``"6 mm²"``.
        A bare number other than ``"n/0"`` or ``"00"``..``"0000"`` is refused as
        ambiguous between AWG and mm².
    allow_nonstandard : bool
        Also accept metric sections outside IEC 60228 and kcmil sizes
        outside NEC Chapter 9 Table 8.
    where : str
        Context for error messages.

    Raises
    ------
    InputError
        For anything else; the message lists the accepted forms.
    """
    if isinstance(text, ConductorSize):
        return text
    s = " ".join(str(text).lower().replace("²", "2").split()) if text is not None else ""

    def fail(why: str) -> InputError:
        return InputError(where, None, f"{why} {text!r}; {_FORMS}")

    if m := _RE_AWG.match(s):
        g = m["g"]
        n = 1 - int(g[:-2]) if g.endswith("/0") else 1 - len(g) if set(g) == {"0"} else int(g)
        if not (m["p"] or m["u"] or g.endswith("/0") or g.startswith("00")):
            raise fail("a bare number is ambiguous (AWG or mm²?):")
        if not -3 <= n <= 40:
            raise fail("AWG sizes run from 4/0 to 40, not")
        return _awg(n)
    if m := _RE_KCMIL.match(s):
        v = float(m["v"])
        if v <= 0:
            raise fail("a size must be greater than zero, not")
        if v not in _KCMIL_TABLE8 and not allow_nonstandard:
            raise fail("not an NEC kcmil size (allow_nonstandard=True forces it):")
        return ConductorSize(f"{v:g} kcmil", "awg", v * KCMIL_MM2)
    if m := _RE_MM2.match(s):
        v = float(m["v"].replace(",", "."))
        if v <= 0:
            raise fail("a size must be greater than zero, not")
        if v not in IEC_60228_SIZES_MM2 and not allow_nonstandard:
            raise fail("not an IEC 60228 nominal section (allow_nonstandard=True forces it):")
        return ConductorSize(f"{v:g} mm2", "metric", v)
    raise fail("a size cannot be negative:" if s.startswith("-") else "cannot read conductor size")


def standard_sizes(series: str) -> list[ConductorSize]:
    """Standard sizes of a series, smallest first.

    ``"awg"``: 18 AWG to 4/0 AWG, then 250 to 1000 kcmil; ``"metric"``:
    the IEC 60228 nominal sections, 0.5 to 630 mm².
    """
    key = str(series).strip().lower()
    if key == "awg":
        return ([_awg(n) for n in AWG_STANDARD]
                + [ConductorSize(f"{k} kcmil", "awg", k * KCMIL_MM2) for k in KCMIL_STANDARD])
    if key == "metric":
        return [ConductorSize(f"{a:g} mm2", "metric", float(a)) for a in IEC_60228_SIZES_MM2]
    raise InputError("standard_sizes", "series", f"expected 'awg' or 'metric'; got {series!r}")


def next_sizes_up(size: str | ConductorSize, count: int = 1) -> list[ConductorSize]:
    """The next ``count`` standard sizes above ``size`` in its own series.

    Fewer (possibly none) are returned when the series runs out.
    """
    if isinstance(count, bool) or not isinstance(count, (int, np.integer)) or count < 1:
        raise InputError("next_sizes_up", "count", f"expected an integer >= 1; got {count!r}")
    s = parse_size(size, allow_nonstandard=True, where="next_sizes_up")
    # The tolerance keeps a size from counting as "above" its own float twin.
    return [c for c in standard_sizes(s.series) if c.area_mm2 > s.area_mm2 * (1 + 1e-9)][:count]


def _r_per_m(area_mm2, material, temp_c, stranded, conductor_class, where: str) -> np.ndarray:
    mat = material_properties(material, where)
    a = _check(area_mm2, "area_mm2", where)
    t = _check_temp(temp_c, mat, where)
    cls = (2 if stranded else 1) if conductor_class is None else conductor_class
    if cls not in STRANDING_FACTORS:
        raise InputError(where, "conductor_class", f"expected one of {sorted(STRANDING_FACTORS)}; got {cls!r}")
    return mat.rho20_ohm_mm2_per_m * (1.0 + mat.alpha20_per_k * (t - 20.0)) / a * STRANDING_FACTORS[cls]


def resistance_per_m_ohm(area_mm2, material, temp_c=DEFAULT_CONDUCTOR_TEMP_C,
                         stranded: bool = True, conductor_class: int | None = None):
    """DC resistance of one conductor per metre.

    R' = ρ20 [1 + α20 (T − 20)] / A · k, with ρ20 and α20 from IEC 60028
    or IEC 60889 and k the stranding factor of the conductor class
    (:data:`STRANDING_FACTORS`). Class 2's 1.02 is the ASTM B8 stranding
    increment and reproduces NEC Chapter 9 Table 8; class 5's 1.09 keeps
    fine-wire conductors under the IEC 60228 Table 3 maxima from 0.5 to
    500 mm² (630 mm² comes out 4 % above).

    Parameters
    ----------
    area_mm2 : array_like
        Nominal cross-section [mm²].
    material : str
        ``"copper"`` or ``"aluminium"`` (or an alias).
    temp_c : array_like
        Conductor temperature [°C]; default :data:`DEFAULT_CONDUCTOR_TEMP_C`.
    stranded : bool
        Class 2 if true, class 1 (solid) if false.
    conductor_class : {1, 2, 5}, optional
        IEC 60228 class; overrides ``stranded`` when given.

    Returns
    -------
    numpy.ndarray or float
        Resistance of one conductor [ohm/m].
    """
    return _out(_r_per_m(area_mm2, material, temp_c, stranded, conductor_class, "resistance_per_m_ohm"))


def tabulated_resistance(size: str | ConductorSize, material, conductor_class: int = 2):
    """The standard's tabulated resistance of a size, if its table has a row for it.

    Metric sizes: IEC 60228 Table 1, 2 or 3 (class 1, 2 or 5), maximum at
    20 °C. AWG and kcmil: NEC Chapter 9 Table 8 at 75 °C, the solid row for
    class 1 (18 to 8 AWG) and the stranded row for class 2. Table 8 has no
    fine-wire (class 5) rows, and IEC 60228 no aluminium below 10 mm², no
    class 5 aluminium and no class 1 copper above 400 mm².

    Returns
    -------
    tuple (ohm_per_m, t_ref_c, source) or None
        Resistance of one conductor [ohm/m] at ``t_ref_c`` [°C], and the table's name.
    """
    s = parse_size(size, allow_nonstandard=True, where="tabulated_resistance")
    mat = material_properties(material, "tabulated_resistance").name
    if s.series == "metric":
        r = IEC_60228_OHM_PER_KM.get((int(conductor_class), mat, s.area_mm2))
        table = {1: "Table 1", 2: "Table 2", 5: "Table 3"}.get(int(conductor_class))
        return None if r is None else (r / 1000.0, 20.0, f"IEC 60228 {table} (class {conductor_class}) maximum")
    construction = {1: "solid", 2: "stranded"}.get(int(conductor_class))
    r = NEC_TABLE8_OHM_PER_KFT.get((s.label, construction, mat))
    return None if r is None else (r / _M_PER_KFT, 75.0, f"NEC Chapter 9 Table 8 ({construction})")


def size_resistance(size: str | ConductorSize, material, temp_c=DEFAULT_CONDUCTOR_TEMP_C,
                    conductor_class: int = 2, basis: str = "table", where: str = "size_resistance"):
    """Resistance of one conductor of a size per metre, and where the value came from.

    With ``basis="table"`` the standard's tabulated value
    (:func:`tabulated_resistance`) is moved to ``temp_c``: IEC 60228 values by
    R(T) = R20 [1 + α20 (T − 20)] (IEC 60228 Annex B), NEC Table 8 values by
    R(T) = R75 [1 + α75 (T − 75)] (Table 8 note 2). A size its table lacks, and
    ``basis="computed"``, get :func:`resistance_per_m_ohm`.

    Parameters
    ----------
    size : str or ConductorSize
    material : str
    temp_c : array_like
        Conductor temperature [°C].
    conductor_class : {1, 2, 5}
        IEC 60228 class.
    basis : {"table", "computed"}

    Returns
    -------
    tuple (numpy.ndarray or float, str)
        Resistance [ohm/m], and its basis in words.
    """
    if basis not in RESISTANCE_BASES:
        raise InputError(where, "resistance_basis", f"expected one of {', '.join(RESISTANCE_BASES)}; got {basis!r}")
    s = parse_size(size, allow_nonstandard=True, where=where)
    row = tabulated_resistance(s, material, conductor_class) if basis == "table" else None
    if row is None:
        r = _r_per_m(s.area_mm2, material, temp_c, True, conductor_class, where)
        why = "" if basis == "computed" else f"; no table row for class {conductor_class} {s.label}"
        return _out(r), f"computed from resistivity and stranding factor{why}"
    r_ref, t_ref, source = row
    if t_ref == 75.0:
        return nec_temperature_correction(r_ref, temp_c, material), source
    return temperature_correction(r_ref, t_ref, temp_c, material), source


def sizes_resistance_per_m_ohm(sizes, material, temp_c=DEFAULT_CONDUCTOR_TEMP_C, conductor_class: int = 2,
                               basis: str = "table") -> np.ndarray:
    """:func:`size_resistance` of several sizes at one temperature [ohm/m], shape (len(sizes),)."""
    return np.array([float(size_resistance(s, material, temp_c, conductor_class, basis)[0]) for s in sizes])


def temperature_correction(r_ref_ohm, t_ref_c, t_c, material):
    """Move a resistance between temperatures by the linear law of IEC 60028.

    R(T) = R_ref [1 + α20 (T − 20)] / [1 + α20 (T_ref − 20)], i.e.
    R(T) = R20 [1 + α20 (T − 20)] when T_ref = 20 °C.

    Parameters
    ----------
    r_ref_ohm : array_like
        Resistance at ``t_ref_c`` [ohm] (ohm/km works too: the unit carries through).
    t_ref_c, t_c : array_like
        Reference and target conductor temperatures [°C].
    material : str

    Returns
    -------
    numpy.ndarray or float
        Resistance at ``t_c`` [unit of ``r_ref_ohm``].
    """
    where = "temperature_correction"
    mat = material_properties(material, where)
    r = _check(r_ref_ohm, "r_ref_ohm", where)
    t0, t1 = _check_temp(t_ref_c, mat, where, "t_ref_c"), _check_temp(t_c, mat, where, "t_c")
    a = mat.alpha20_per_k
    return _out(r * (1.0 + a * (t1 - 20.0)) / (1.0 + a * (t0 - 20.0)))


def nec_temperature_correction(r1_ohm, t2_c, material):
    """The NEC Chapter 9 Table 8 note: R2 = R1 [1 + α (T2 − 75)].

    R1 is the 75 °C value; α = 0.00323 /K (copper) or 0.00330 /K (aluminium).

    Parameters
    ----------
    r1_ohm, t2_c : array_like
        Resistance at 75 °C [ohm] (ohm/kft works too) and target temperature [°C].
    material : str

    Returns
    -------
    numpy.ndarray or float
        Resistance at ``t2_c`` [unit of ``r1_ohm``].
    """
    where = "nec_temperature_correction"
    mat = material_properties(material, where)
    r = _check(r1_ohm, "r1_ohm", where)
    t = _check_temp(t2_c, mat, where, "t2_c")
    return _out(r * (1.0 + mat.alpha75_nec_per_k * (t - 75.0)))


def loop_resistance_ohm(length_m, area_mm2, material, temp_c=DEFAULT_CONDUCTOR_TEMP_C,
                        conductors_in_parallel=1, ohm_per_km=None, *,
                        stranded: bool = True, conductor_class: int | None = None):
    """Resistance of a two-conductor DC loop: R = 2 L R' / n.

    The current goes out and back along the route; ``n`` conductors share each pole.

    Parameters
    ----------
    length_m : array_like
        One-way route length [m].
    area_mm2 : array_like or None
        Cross-section of one conductor [mm²]; None allowed with ``ohm_per_km``.
    material : str or None
        Metal; None allowed with ``ohm_per_km``.
    temp_c : array_like
        Conductor temperature [°C].
    conductors_in_parallel : array_like of int
        Conductors per pole [-].
    ohm_per_km : array_like, optional
        Resistance of one conductor at the operating temperature [ohm/km],
        e.g. from a datasheet; used as given instead of the computed value.
    stranded, conductor_class
        As in :func:`resistance_per_m_ohm`.

    Returns
    -------
    numpy.ndarray or float
        Loop resistance [ohm].
    """
    where = "loop_resistance_ohm"
    length = _check(length_m, "length_m", where)
    n = _check_parallel(conductors_in_parallel, where)
    if ohm_per_km is None:
        if area_mm2 is None or material is None:
            raise InputError(where, "area_mm2", "expected area_mm2 and material, or ohm_per_km")
        r_per_m = _r_per_m(area_mm2, material, temp_c, stranded, conductor_class, where)
    else:
        r_per_m = _check(ohm_per_km, "ohm_per_km", where) / 1000.0
        # Arguments the override makes unnecessary are still refused if wrong.
        if area_mm2 is not None:
            _check(area_mm2, "area_mm2", where)
        if material is not None:
            _check_temp(temp_c, material_properties(material, where), where)
    return _out(2.0 * length * r_per_m / n)


def conductor_mass_kg(length_m, area_mm2, material, conductors_in_parallel=1, stranded: bool = True):
    """Metal mass of a two-conductor loop, insulation excluded: m = 2 L n A ρ k.

    k = 1.02 for stranded conductors, because the lay lengthens each wire in
    the same ratio as it raises resistance (ASTM B8).

    Parameters
    ----------
    length_m, area_mm2 : array_like
        One-way route length [m]; cross-section of one conductor [mm²].
    material : str
    conductors_in_parallel : array_like of int
        Conductors per pole [-].
    stranded : bool

    Returns
    -------
    numpy.ndarray or float
        Mass [kg].
    """
    where = "conductor_mass_kg"
    mat = material_properties(material, where)
    length, a = _check(length_m, "length_m", where), _check(area_mm2, "area_mm2", where)
    n = _check_parallel(conductors_in_parallel, where)
    k = STRANDING_FACTORS[2] if stranded else 1.0
    return _out(2.0 * length * n * a * 1e-6 * mat.density_kg_per_m3 * k)


class VoltageDrop(NamedTuple):
    """Drop [V], drop over circuit voltage [-] and I²R loss [W] of a loop."""

    drop_v: np.ndarray
    drop_fraction: np.ndarray
    loss_w: np.ndarray


def voltage_drop(current_a, loop_resistance_ohm, circuit_v) -> VoltageDrop:
    """Voltage drop and loss of a loop.

    Parameters
    ----------
    current_a : array_like
        Loop current [A]; its sign carries into ``drop_v``.
    loop_resistance_ohm : array_like
        Loop resistance [ohm].
    circuit_v : array_like
        Circuit voltage the drop is compared with [V].

    Returns
    -------
    VoltageDrop
        ``drop_v`` = I R [V], ``drop_fraction`` = |I| R / V [-], ``loss_w`` = I² R [W].
    """
    where = "voltage_drop"
    i = _check(current_a, "current_a", where, signed=True)
    r = _check(loop_resistance_ohm, "loop_resistance_ohm", where, allow_zero=True)
    v = _check(circuit_v, "circuit_v", where)
    return VoltageDrop(_out(i * r), _out(np.abs(i) * r / v), _out(i * i * r))


def smallest_size_meeting(current_a: float, length_m: float, circuit_v: float,
                          budget_fraction: float, series: str = "awg", material: str = "copper",
                          temp_c: float = DEFAULT_CONDUCTOR_TEMP_C, conductors_in_parallel: int = 1,
                          *, conductor_class: int = 2, basis: str = "table") -> ConductorSize:
    """Smallest standard size whose loop voltage drop is within a budget.

    Parameters
    ----------
    current_a, length_m, circuit_v : float
        Design current [A] (> 0), one-way route length [m], circuit voltage [V].
    budget_fraction : float
        Allowed drop over circuit voltage [-], in (0, 1).
    series : {"awg", "metric"}
    material, temp_c, conductors_in_parallel
        As in :func:`loop_resistance_ohm`.
    conductor_class, basis
        As in :func:`size_resistance`.

    Raises
    ------
    InputError
        For bad arguments, or when no size in the series meets the budget.
    """
    where = "smallest_size_meeting"
    for name, val in (("current_a", current_a), ("length_m", length_m),
                      ("circuit_v", circuit_v), ("budget_fraction", budget_fraction)):
        if np.ndim(val) != 0:
            raise InputError(where, name, f"expected a single number; got {val!r}")
    _check(current_a, "current_a", where)
    if not 0.0 < float(_check(budget_fraction, "budget_fraction", where)) < 1.0:
        raise InputError(where, "budget_fraction", f"expected a fraction in (0, 1); got {budget_fraction!r}")
    sizes = standard_sizes(series)
    r_per_m = sizes_resistance_per_m_ohm(sizes, material, temp_c, conductor_class, basis)
    r = loop_resistance_ohm(length_m, None, None, conductors_in_parallel=conductors_in_parallel,
                            ohm_per_km=1000.0 * r_per_m)
    frac = voltage_drop(current_a, r, circuit_v).drop_fraction
    ok = np.flatnonzero(frac <= budget_fraction)
    if ok.size == 0:
        raise InputError(where, "budget_fraction",
                         f"no standard size in the {series} series meets {budget_fraction:.2%}: "
                         f"the largest, {sizes[-1].label}, drops {frac[-1]:.2%}; use conductors "
                         "in parallel, a shorter run or a higher voltage")
    return sizes[int(ok[0])]
