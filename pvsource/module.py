"""One PV module as a single-diode source.

From datasheet values at STC this module fits the De Soto single-diode
parameters with :mod:`pvlib.ivtools.sdm` and, when the datasheet gives the
power temperature coefficient, the six-parameter (CEC) form of Dobos [5]_
with scipy. Every fit is verified against the datasheet. The parameters move
to any irradiance and cell temperature with
:func:`pvlib.pvsystem.calcparams_cec` (which is
:func:`pvlib.pvsystem.calcparams_desoto` when the adjustment is zero), and
the diode equation is evaluated with the derivatives the operating-point
solver needs.

The diode equation is written in the diode-voltage form of Bishop [3]_:
for a module diode voltage ``x`` (V), the terminal current and voltage are

    I(x) = I_L - I_0 (exp(x / a) - 1) - x / R_sh,     V(x) = x - I(x) R_s,

both explicit and monotone in ``x`` (I falls, V rises), which is what makes
Newton's method safe on it.

References
----------
.. [1] W. De Soto, S. A. Klein, W. A. Beckman, "Improvement and validation of
   a model for photovoltaic array performance", Solar Energy 80 (2006) 78-88,
   doi:10.1016/j.solener.2005.06.010
.. [2] E. I. Batzelis, S. A. Papathanassiou, "A method for the analytical
   extraction of the single-diode PV model parameters", IEEE Trans. Sustain.
   Energy 7 (2016) 504-512, doi:10.1109/TSTE.2015.2503435
.. [3] J. W. Bishop, "Computer simulation of the effects of electrical
   mismatches in photovoltaic cell interconnection circuits", Solar Cells 25
   (1988) 73-89, doi:10.1016/0379-6787(88)90059-2
.. [4] M. A. Green, "Accuracy of analytical expressions for solar cell fill
   factors", Solar Cells 7 (1982) 337-340, doi:10.1016/0379-6787(82)90057-6
.. [5] A. P. Dobos, "An improved coefficient calculator for the California
   Energy Commission 6 parameter photovoltaic module model", J. Sol. Energy
   Eng. 134 (2012) 021011, doi:10.1115/1.4005759
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field, replace

import numpy as np
from pvlib import ivtools, pvsystem, singlediode
from scipy import optimize

from pvsource.errors import InputError

STC_IRRADIANCE_W_M2 = 1000.0
STC_CELL_TEMP_C = 25.0
BOLTZMANN_OVER_Q_V_PER_K = 8.617333262e-5  # k/q, CODATA 2018
SILICON_BANDGAP_EV = 1.121  # De Soto et al. (2006), value for crystalline Si
SILICON_BANDGAP_SLOPE_PER_K = -0.0002677  # De Soto et al. (2006)


@dataclass(frozen=True)
class Datasheet:
    """Module datasheet values at STC (1000 W/m2, 25 degC cells, AM1.5).

    Attributes
    ----------
    v_oc, v_mp : float
        Open-circuit and maximum-power voltages [V].
    i_sc, i_mp : float
        Short-circuit and maximum-power currents [A].
    isc_temp_coeff_pct : float
        Temperature coefficient of Isc [%/degC].
    voc_temp_coeff_pct : float
        Temperature coefficient of Voc [%/degC]; negative.
    cells_in_series : int
        Cells in series in the module.
    name : str
        A label for reports.
    pmax_temp_coeff_pct : float or None
        Temperature coefficient of Pmp [%/degC]; negative. With it the fit
        has six parameters and reproduces how power falls with heat.
    noct_c : float or None
        Nominal operating cell temperature [degC], as the datasheet gives it;
        the hot-Vmp check takes its default cell rise from it (checks.cell_rise).
    max_series_fuse_a : float or None
        The maker's maximum series fuse rating [A] (NEC 690.9), if given.
    """

    v_oc: float
    i_sc: float
    v_mp: float
    i_mp: float
    isc_temp_coeff_pct: float
    voc_temp_coeff_pct: float
    cells_in_series: int
    name: str = ""
    pmax_temp_coeff_pct: float | None = None
    noct_c: float | None = None
    max_series_fuse_a: float | None = None

    @property
    def alpha_sc_a_per_c(self) -> float:
        """Temperature coefficient of Isc [A/degC]."""
        return self.isc_temp_coeff_pct / 100.0 * self.i_sc

    @property
    def beta_voc_v_per_c(self) -> float:
        """Temperature coefficient of Voc [V/degC]."""
        return self.voc_temp_coeff_pct / 100.0 * self.v_oc

    @property
    def gamma_pmp_w_per_c(self) -> float | None:
        """Temperature coefficient of Pmp [W/degC], or None when not given."""
        return None if self.pmax_temp_coeff_pct is None else self.pmax_temp_coeff_pct / 100.0 * self.p_mp_w

    @property
    def p_mp_w(self) -> float:
        return self.v_mp * self.i_mp

    @property
    def fill_factor(self) -> float:
        return self.p_mp_w / (self.v_oc * self.i_sc)


@dataclass(frozen=True)
class DiodeParameters:
    """Single-diode parameters at the reference condition (STC): De Soto, or CEC with an adjustment.

    Attributes
    ----------
    i_l_ref_a : float
        Light-generated current [A].
    i_o_ref_a : float
        Diode saturation current [A].
    r_s_ohm : float
        Series resistance [ohm].
    r_sh_ref_ohm : float
        Shunt resistance [ohm].
    a_ref_v : float
        Modified ideality factor n Ns k T / q [V].
    alpha_sc_a_per_c : float
        Temperature coefficient of the short-circuit current [A/degC].
    cells_in_series : int
        Cells in series; used for the Voc-per-cell plausibility check.
    eg_ref_ev : float
        Band gap at the reference temperature [eV].
    degdt_per_c : float
        Relative temperature dependence of the band gap [1/degC].
    adjust_pct : float
        The CEC model's adjustment of the Isc temperature coefficient [%]:
        the light current moves with ``alpha_sc (1 - adjust_pct / 100)``.
        Zero is the five-parameter De Soto model. Dobos [5]_ fits it so that
        the model reproduces both the Voc and the Pmp temperature coefficients.
    """

    i_l_ref_a: float
    i_o_ref_a: float
    r_s_ohm: float
    r_sh_ref_ohm: float
    a_ref_v: float
    alpha_sc_a_per_c: float
    cells_in_series: int
    eg_ref_ev: float = SILICON_BANDGAP_EV
    degdt_per_c: float = SILICON_BANDGAP_SLOPE_PER_K
    adjust_pct: float = 0.0


@dataclass(frozen=True)
class FitReport:
    """How a set of diode parameters was obtained and how well it reproduces STC.

    Attributes
    ----------
    method : str
        ``"six_parameter"`` (Dobos's six-parameter fit, used when the
        datasheet gives the Pmp temperature coefficient),
        ``"desoto"`` (five-parameter fit, Batzelis estimate as start),
        ``"batzelis"`` (explicit estimate kept because the full fit failed) or
        ``"given"`` (parameters entered directly).
    note : str
        Why the method was chosen, in one sentence.
    stc : dict
        ``v_oc``, ``i_sc``, ``v_mp``, ``i_mp``, ``p_mp`` recomputed from the
        parameters at STC [V, A, W].
    relative_error : dict
        (recomputed - datasheet) / datasheet for the same keys; empty when
        there is no datasheet.
    """

    method: str
    note: str
    stc: dict
    relative_error: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Module:
    """A module: its diode parameters, and the datasheet and fit they came from."""

    parameters: DiodeParameters
    fit: FitReport
    datasheet: Datasheet | None = None
    name: str = ""


@dataclass(frozen=True)
class DiodeState:
    """Single-diode parameters of one module at given conditions (arrays).

    All attributes broadcast together; this is what the solver works on.
    ``r_sh_ohm`` is infinite in the dark (De Soto scales it with 1/irradiance).
    """

    i_l_a: np.ndarray
    i_o_a: np.ndarray
    r_s_ohm: np.ndarray
    r_sh_ohm: np.ndarray
    a_v: np.ndarray


# ---------------------------------------------------------------- validation

# Bounds below are plausibility limits, not physics: each is common practice
# for crystalline and thin-film flat-plate modules, wide enough for any real
# datasheet and narrow enough to catch unit mistakes (A/degC for %/degC, a
# cell count for a module count).
VOC_PER_CELL_RANGE_V = (0.3, 1.5)
ISC_COEFF_RANGE_PCT = (-0.1, 0.2)
VOC_COEFF_RANGE_PCT = (-1.0, -0.05)
PMAX_COEFF_RANGE_PCT = (-1.0, -0.1)
NOCT_RANGE_C = (30.0, 70.0)
# The CEC library's crystalline modules lie within about -50 to +70 %; at
# +100 % the light current would stop following temperature altogether.
ADJUST_RANGE_PCT = (-100.0, 100.0)
FILL_FACTOR_MIN = 0.45


def ideal_fill_factor(v_oc_v, cells_in_series, temp_c=STC_CELL_TEMP_C, ideality=1.0):
    """Green's empirical fill factor of an ideal cell (no series or shunt loss).

    FF0 = (v - ln(v + 0.72)) / (v + 1), with v = Voc / (n Ns k T / q).
    No real module with ideality >= 1 exceeds it, so it bounds a datasheet.

    Parameters
    ----------
    v_oc_v : float or array
        Module open-circuit voltage [V].
    cells_in_series : int
        Cells in series.
    temp_c : float
        Cell temperature [degC].
    ideality : float
        Diode ideality factor [-].

    References
    ----------
    M. A. Green, Solar Cells 7 (1982) 337-340, doi:10.1016/0379-6787(82)90057-6
    """
    v = np.asarray(v_oc_v) / (ideality * cells_in_series * BOLTZMANN_OVER_Q_V_PER_K * (temp_c + 273.15))
    return (v - np.log(v + 0.72)) / (v + 1.0)


def _finite_positive(where, name, value, *, integer=False):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(where, name, f"expected a number, got {value!r}")
    if not math.isfinite(value):
        raise InputError(where, name, f"expected a finite number, got {value!r}")
    if value <= 0:
        raise InputError(where, name, f"must be greater than zero, got {value!r}")
    if integer and int(value) != value:
        raise InputError(where, name, f"must be a whole number, got {value!r}")


def validate_datasheet(ds: Datasheet, where: str = "datasheet", prefix: str = "") -> None:
    """Reject a physically inconsistent datasheet with a message naming the field.

    Raises
    ------
    InputError
        Naming ``prefix + field`` and what was expected.
    """
    f = lambda name: f"{prefix}{name}"  # noqa: E731
    for name in ("v_oc", "i_sc", "v_mp", "i_mp"):
        _finite_positive(where, f(name), getattr(ds, name))
    _finite_positive(where, f("cells_in_series"), ds.cells_in_series, integer=True)
    for name in ("isc_temp_coeff_pct", "voc_temp_coeff_pct"):
        value = getattr(ds, name)
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            raise InputError(where, f(name), f"expected a finite number in %/degC, got {value!r}")
    if ds.v_mp >= ds.v_oc:
        raise InputError(where, f("v_mp"), f"must be below v_oc ({ds.v_oc:g} V), got {ds.v_mp:g} V")
    if ds.i_mp >= ds.i_sc:
        raise InputError(where, f("i_mp"), f"must be below i_sc ({ds.i_sc:g} A), got {ds.i_mp:g} A")
    lo, hi = VOC_PER_CELL_RANGE_V
    per_cell = ds.v_oc / ds.cells_in_series
    if not lo <= per_cell <= hi:
        raise InputError(
            where, f("cells_in_series"),
            f"v_oc / cells_in_series = {per_cell:.3f} V per cell is outside {lo}-{hi} V; check the cell count",
        )
    lo, hi = VOC_COEFF_RANGE_PCT
    if not lo <= ds.voc_temp_coeff_pct <= hi:
        raise InputError(
            where, f("voc_temp_coeff_pct"),
            f"expected a negative coefficient between {lo} and {hi} %/degC, got {ds.voc_temp_coeff_pct:g}",
        )
    lo, hi = ISC_COEFF_RANGE_PCT
    if not lo <= ds.isc_temp_coeff_pct <= hi:
        raise InputError(
            where, f("isc_temp_coeff_pct"),
            f"expected a coefficient between {lo} and {hi} %/degC, got {ds.isc_temp_coeff_pct:g}",
        )
    for name, (lo, hi), expected in (
            ("pmax_temp_coeff_pct", PMAX_COEFF_RANGE_PCT, "a negative coefficient between {lo} and {hi} %/degC"),
            ("noct_c", NOCT_RANGE_C, "a nominal operating cell temperature between {lo} and {hi} degC")):
        value = getattr(ds, name)
        if value is None:
            continue
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            raise InputError(where, f(name), f"expected a finite number, got {value!r}")
        if not lo <= value <= hi:
            raise InputError(where, f(name), f"expected {expected.format(lo=lo, hi=hi)}, got {value:g}")
    if ds.pmax_temp_coeff_pct is not None:
        # Pmp = Voc Isc FF, and the fill factor of a silicon cell falls with
        # heat (Green's FF0 falls with Voc / (n k T / q)), so power falls
        # faster than Voc x Isc. The CEC library's crystalline records break
        # this in 33 of 20,946 cases, typing mistakes by the look of them.
        bound = ds.voc_temp_coeff_pct + ds.isc_temp_coeff_pct
        if ds.pmax_temp_coeff_pct >= bound:
            raise InputError(
                where, f("pmax_temp_coeff_pct"),
                f"expected below voc_temp_coeff_pct + isc_temp_coeff_pct = {bound:.3g} %/degC (power falls faster "
                f"with heat than Voc x Isc, since the fill factor falls too), got {ds.pmax_temp_coeff_pct:g}")
    ff = ds.fill_factor
    ff_max = float(ideal_fill_factor(ds.v_oc, ds.cells_in_series))
    if ff >= ff_max and ds.v_oc / ds.cells_in_series < 0.5:
        # Half-cut modules wire two halves in parallel: counting every half
        # cell doubles the cells in series and halves the voltage per cell.
        raise InputError(
            where, f("cells_in_series"),
            f"fill factor {ff:.3f} exceeds the ideal-cell limit {ff_max:.3f} for {ds.cells_in_series} cells in "
            f"series ({ds.v_oc / ds.cells_in_series:.3f} V per cell); for half-cut modules give the cells in "
            "series of one half (e.g. 72 for 144 half cells)",
        )
    if not FILL_FACTOR_MIN <= ff < ff_max:
        raise InputError(
            where, f("v_mp"),
            f"fill factor v_mp*i_mp/(v_oc*i_sc) = {ff:.3f} is outside the physical range "
            f"{FILL_FACTOR_MIN}-{ff_max:.3f} (ideal-cell limit for this Voc)",
        )


def validate_parameters(p: DiodeParameters, where: str = "module", prefix: str = "") -> None:
    """Reject single-diode parameters that cannot describe a PV module."""
    for name in ("i_l_ref_a", "i_o_ref_a", "r_sh_ref_ohm", "a_ref_v", "eg_ref_ev"):
        _finite_positive(where, f"{prefix}{name}", getattr(p, name))
    _finite_positive(where, f"{prefix}cells_in_series", p.cells_in_series, integer=True)
    for name in ("r_s_ohm", "alpha_sc_a_per_c", "degdt_per_c", "adjust_pct"):
        value = getattr(p, name)
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            raise InputError(where, f"{prefix}{name}", f"expected a finite number, got {value!r}")
    if p.r_s_ohm < 0:
        raise InputError(where, f"{prefix}r_s_ohm", f"must not be negative, got {p.r_s_ohm:g}")
    if not 0.5 <= p.eg_ref_ev <= 3.5:
        raise InputError(where, f"{prefix}eg_ref_ev", f"expected a band gap of 0.5-3.5 eV, got {p.eg_ref_ev:g}")
    if not -0.005 <= p.degdt_per_c <= 0.005:
        raise InputError(where, f"{prefix}degdt_per_c",
                         f"expected a relative band-gap slope within +/-0.005 /degC (silicon: -0.0002677), "
                         f"got {p.degdt_per_c:g}")
    lo, hi = ADJUST_RANGE_PCT
    if not lo < p.adjust_pct < hi:
        raise InputError(where, f"{prefix}adjust_pct",
                         f"expected an adjustment of the Isc temperature coefficient between {lo:g} and {hi:g} %, "
                         f"got {p.adjust_pct:g}")
    lo, hi = ISC_COEFF_RANGE_PCT
    alpha_pct = 100.0 * p.alpha_sc_a_per_c / p.i_l_ref_a
    if not lo <= alpha_pct <= hi:
        raise InputError(where, f"{prefix}alpha_sc_a_per_c",
                         f"is {alpha_pct:.3g} %/degC of i_l_ref_a; expected {lo} to {hi} %/degC")
    if p.i_o_ref_a >= p.i_l_ref_a:
        raise InputError(where, f"{prefix}i_o_ref_a", "must be far below i_l_ref_a (no open-circuit voltage otherwise)")
    per_cell = p.a_ref_v / p.cells_in_series / (BOLTZMANN_OVER_Q_V_PER_K * (STC_CELL_TEMP_C + 273.15))
    if not 0.5 <= per_cell <= 3.0:
        raise InputError(
            where, f"{prefix}a_ref_v",
            f"implies a diode ideality of {per_cell:.2f} per cell; expected 0.5-3 (check a_ref_v and cells_in_series)",
        )


# ---------------------------------------------------------------- fitting

def _stc_points(p: DiodeParameters) -> dict:
    state = parameters_at(p, STC_IRRADIANCE_W_M2, STC_CELL_TEMP_C)
    with warnings.catch_warnings():
        # scipy's bracketing start inside pvlib may divide 0/0 on its way to
        # the answer; the answer is checked against the datasheet anyway.
        warnings.simplefilter("ignore", RuntimeWarning)
        out = pvsystem.singlediode(state.i_l_a, state.i_o_a, state.r_s_ohm, state.r_sh_ohm, state.a_v,
                                   method="newton")
    return {k: float(np.asarray(out[k]).squeeze()) for k in ("v_oc", "i_sc", "v_mp", "i_mp", "p_mp")}


def _errors(stc: dict, ds: Datasheet) -> dict:
    ref = {"v_oc": ds.v_oc, "i_sc": ds.i_sc, "v_mp": ds.v_mp, "i_mp": ds.i_mp, "p_mp": ds.p_mp_w}
    return {k: (stc[k] - ref[k]) / ref[k] for k in ref}


# Said wherever a module's power at hot or cold cells is shown without the
# datasheet's power coefficient: measured against the CEC library (README,
# "The module model"), such fits overstate P_mp at 65 degC cells by about
# 2.5 % typically and up to about 5 %.
HOT_POWER_NOTE = ("hot-cell power may be optimistic by a few per cent without the datasheet's power "
                  "temperature coefficient: give pmax_temp_coeff_pct in [module]")


def model_notes(module: Module) -> list[str]:
    """Cautions about the module model for every output that shows power: empty when there are none."""
    if module.datasheet is None or module.fit.method == "six_parameter":
        return []
    if module.datasheet.pmax_temp_coeff_pct is not None:
        return ["module model: the six-parameter fit found no physical solution for the given pmax_temp_coeff_pct, "
                "so hot-cell power may be optimistic by a few per cent; check the coefficient against the datasheet"]
    return [f"module model: {HOT_POWER_NOTE}"]


# A full fit is kept only if it reproduces every datasheet point this well;
# the explicit estimate is usually within about 1 %, the full fit within 1e-6.
FULL_FIT_TOLERANCE = 1e-4


def fit_datasheet(ds: Datasheet, where: str = "datasheet") -> Module:
    """Fit single-diode parameters to a datasheet, and verify the fit.

    With ``pmax_temp_coeff_pct`` the six-parameter fit of Dobos [5]_
    (:func:`fit_six_parameter`), started from the five-parameter fit below;
    without it, or if it finds no physical solution, the five-parameter De
    Soto fit (:func:`fit_five_parameter`), and the report says why.

    Parameters
    ----------
    ds : Datasheet
        Validated or not; it is validated here.
    where : str
        The file name, for error messages.

    Returns
    -------
    Module
        With a :class:`FitReport` of the STC points recomputed from the
        parameters and their relative errors against the datasheet.
    """
    validate_datasheet(ds, where, prefix="[module].")
    five = fit_five_parameter(ds, where)
    if ds.pmax_temp_coeff_pct is None:
        return five
    try:
        return fit_six_parameter(ds, five.parameters, where)
    except _NoFit as exc:
        note = (f"{five.fit.note}; the six-parameter fit for pmax_temp_coeff_pct = {ds.pmax_temp_coeff_pct:g} %/degC "
                f"found no physical solution ({exc}), so the five-parameter fit is kept")
        return replace(five, fit=replace(five.fit, note=note))


def fit_five_parameter(ds: Datasheet, where: str = "datasheet") -> Module:
    """Fit De Soto single-diode parameters to a datasheet, and verify the fit.

    The explicit method of Batzelis and Papathanassiou [2]_
    (:func:`pvlib.ivtools.sdm.fit_desoto_batzelis`) never fails and starts the
    full De Soto fit (:func:`pvlib.ivtools.sdm.fit_desoto`). If the full fit
    fails, gives non-physical parameters, or misses any datasheet point by
    more than :data:`FULL_FIT_TOLERANCE`, the estimate is kept and the report
    says so. The model reproduces the Voc temperature coefficient but not the
    Pmp one (see :data:`HOT_POWER_NOTE`).
    """
    validate_datasheet(ds, where, prefix="[module].")
    alpha, beta = ds.alpha_sc_a_per_c, ds.beta_voc_v_per_c
    est = ivtools.sdm.fit_desoto_batzelis(ds.v_mp, ds.i_mp, ds.v_oc, ds.i_sc, alpha, beta)
    explicit = DiodeParameters(
        i_l_ref_a=float(est["I_L_ref"]), i_o_ref_a=float(est["I_o_ref"]), r_s_ohm=float(est["R_s"]),
        r_sh_ref_ohm=float(est["R_sh_ref"]), a_ref_v=float(est["a_ref"]), alpha_sc_a_per_c=float(alpha),
        cells_in_series=int(ds.cells_in_series),
    )
    explicit_stc = _stc_points(explicit)
    explicit_err = _errors(explicit_stc, ds)

    reason = ""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            full, result = ivtools.sdm.fit_desoto(
                ds.v_mp, ds.i_mp, ds.v_oc, ds.i_sc, alpha, beta, int(ds.cells_in_series),
                init_guess={"IL_0": explicit.i_l_ref_a, "Io_0": explicit.i_o_ref_a, "Rs_0": explicit.r_s_ohm,
                            "Rsh_0": explicit.r_sh_ref_ohm, "a_0": explicit.a_ref_v},
            )
        fitted = DiodeParameters(
            i_l_ref_a=float(full["I_L_ref"]), i_o_ref_a=float(full["I_o_ref"]), r_s_ohm=float(full["R_s"]),
            r_sh_ref_ohm=float(full["R_sh_ref"]), a_ref_v=float(full["a_ref"]), alpha_sc_a_per_c=float(alpha),
            cells_in_series=int(ds.cells_in_series),
        )
        validate_parameters(fitted, where)
        stc = _stc_points(fitted)
        err = _errors(stc, ds)
        worst = max(abs(e) for e in err.values())
        if not np.isfinite(worst) or worst > FULL_FIT_TOLERANCE:
            reason = f"the full De Soto fit reproduces the datasheet only to {worst:.2%}"
    except (RuntimeError, InputError, ValueError, FloatingPointError) as exc:
        reason = f"the full De Soto fit failed ({' '.join(str(exc).split())})"

    if reason:
        return Module(
            parameters=explicit,
            fit=FitReport("batzelis", f"{reason}; kept the explicit Batzelis estimate", explicit_stc, explicit_err),
            datasheet=ds, name=ds.name,
        )
    worst_explicit = max(abs(e) for e in explicit_err.values())
    return Module(
        parameters=fitted,
        fit=FitReport(
            "desoto",
            f"full De Soto fit started from the explicit Batzelis estimate (which alone was off by up to {worst_explicit:.2%})",
            stc, err,
        ),
        datasheet=ds, name=ds.name,
    )


# The temperature equations hold the model's Voc and Pmp at STC + this step
# to the datasheet's linear coefficients, as pvlib's fit_desoto does for Voc
# (its T2 = Tref + 2 K). Measured on the CEC library (bench/bench_fit_cec.py),
# this reproduces the library's own records about three times more closely
# than a 40 K secant.
SIX_PARAMETER_STEP_C = 2.0
# When the datasheet's maximum-power point needs a negative shunt, the shunt
# is held this many times Voc/Isc (it then carries 0.1 % of Isc at Voc)
# and Isc is left free; the CEC library's own records do the same.
HELD_SHUNT_VOC_OVER_ISC = 1000.0


class _NoFit(Exception):
    """The six-parameter equations have no acceptable solution from this start."""


def _six_parameter_solve(ds: Datasheet, start: DiodeParameters, hold_shunt: bool):
    """Solve Dobos's equations for (a, R_s, adjustment); the other unknowns follow in closed form.

    For given a and R_s, the short-circuit, open-circuit and maximum-power
    equations at STC are linear in (I_L, I_0, 1/R_sh). What remains is
    dP/dV = 0 at the datasheet's MPP and, at STC + step, the open-circuit
    equation and the model's Pmp against the datasheet's coefficients. As in
    Dobos [5]_, the adjustment scales both temperature coefficients: the
    light current moves with alpha_sc (1 - adj) and the open-circuit voltage
    is held to beta_voc (1 + adj). With the adjustment on alpha_sc alone the
    Voc equation hardly depends on it (the light current barely moves Voc)
    and the adjustments come out several times larger.
    """
    isc, voc, vmp, imp = ds.i_sc, ds.v_oc, ds.v_mp, ds.i_mp
    alpha, beta = ds.alpha_sc_a_per_c, ds.beta_voc_v_per_c
    step = SIX_PARAMETER_STEP_C
    pmp2 = ds.p_mp_w + ds.gamma_pmp_w_per_c * step
    a0, r0 = start.a_ref_v, voc / isc
    held_g = isc / (HELD_SHUNT_VOC_OVER_ISC * voc)

    def unknowns(z):
        a, rs, adj = z[0] * a0, z[1] * r0, z[2]
        xs, xm = isc * rs, vmp + imp * rs
        if hold_shunt:
            m = np.array([[1.0, -np.expm1(voc / a)], [1.0, -np.expm1(xm / a)]])
            il, io = np.linalg.solve(m, [voc * held_g, imp + xm * held_g])
            g = held_g
        else:
            m = np.array([[1.0, -np.expm1(xs / a), -xs], [1.0, -np.expm1(voc / a), -voc],
                          [1.0, -np.expm1(xm / a), -xm]])
            il, io, g = np.linalg.solve(m, [isc, 0.0, imp])
        il2, io2, _, _, a2 = pvsystem.calcparams_cec(STC_IRRADIANCE_W_M2, STC_CELL_TEMP_C + step, alpha, a, il, io,
                                                     1.0, rs, 100.0 * adj, EgRef=start.eg_ref_ev,
                                                     dEgdT=start.degdt_per_c)
        return a, rs, adj, il, io, g, float(il2), float(io2), float(a2)

    def residuals(z):
        a, rs, adj, il, io, g, il2, io2, a2 = unknowns(z)
        gd = io / a * np.exp((vmp + imp * rs) / a) + g
        voc2 = voc + beta * (1.0 + adj) * step
        with np.errstate(divide="ignore"):
            hot = DiodeState(np.asarray(il2), np.asarray(io2), np.asarray(rs), np.asarray(1.0 / g), np.asarray(a2))
        return np.array([(imp - vmp * gd / (1.0 + rs * gd)) / imp,
                         (il2 - io2 * np.expm1(voc2 / a2) - voc2 * g) / isc,
                         float(key_points(hot)["p_mp"]) / pmp2 - 1.0])

    z0 = np.array([1.0, max(start.r_s_ohm, 1e-3 * r0) / r0, 0.0])
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sol = optimize.root(residuals, z0, method="hybr", options={"xtol": 1e-12})
        a, rs, adj, il, io, g, _, _, _ = unknowns(sol.x)
        worst = float(np.max(np.abs(residuals(sol.x))))
    if not (np.isfinite(worst) and worst < 1e-9 and a > 0 and rs >= 0 and io > 0 and g > 0 and il > 0):
        raise _NoFit(f"no solution with positive resistances (residual {worst:.1e})")
    return DiodeParameters(i_l_ref_a=float(il), i_o_ref_a=float(io), r_s_ohm=float(rs), r_sh_ref_ohm=float(1.0 / g),
                           a_ref_v=float(a), alpha_sc_a_per_c=float(alpha), cells_in_series=int(ds.cells_in_series),
                           eg_ref_ev=start.eg_ref_ev, degdt_per_c=start.degdt_per_c, adjust_pct=float(100.0 * adj))


def fit_six_parameter(ds: Datasheet, start: DiodeParameters, where: str = "datasheet") -> Module:
    """Fit the six-parameter (CEC) single-diode model of Dobos [5]_ to a datasheet.

    The six unknowns are the five De Soto parameters and the adjustment of
    the Isc temperature coefficient (``adjust_pct``). The model reproduces
    Isc, Voc, Vmp and Imp at STC, dP/dV = 0 at the MPP, and the datasheet's
    Voc and Pmp temperature coefficients (as Voc and Pmp at STC +
    :data:`SIX_PARAMETER_STEP_C`, evaluated with
    :func:`pvlib.pvsystem.calcparams_cec`). Written with scipy: two unknowns
    are solved by :func:`scipy.optimize.root`, the other four follow in
    closed form.

    Some datasheets (about one in five of the CEC library's crystalline
    records) put the MPP where only a negative shunt resistance could hold
    it. Then the shunt is held large (:data:`HELD_SHUNT_VOC_OVER_ISC`), Isc is
    left free, and the note says how far Isc moved.

    Parameters
    ----------
    ds : Datasheet
        With ``pmax_temp_coeff_pct``; validated by the caller.
    start : DiodeParameters
        A five-parameter fit of the same datasheet: the starting point.
    where : str
        The file name, for error messages.

    Returns
    -------
    Module

    Raises
    ------
    _NoFit
        When no acceptable solution is found; the caller keeps the
        five-parameter fit and says so.
    """
    note = "six-parameter fit (Dobos 2012): reproduces the STC points and the Pmp temperature coefficient"
    try:
        p = _six_parameter_solve(ds, start, hold_shunt=False)
        tolerance_keys = ("v_oc", "i_sc", "v_mp", "i_mp", "p_mp")
    except _NoFit:
        p = _six_parameter_solve(ds, start, hold_shunt=True)
        tolerance_keys = ("v_oc", "v_mp", "i_mp", "p_mp")
    try:
        validate_parameters(p, where)
    except InputError as exc:
        raise _NoFit(f"{exc.field}: {exc.expected}") from None
    stc = _stc_points(p)
    err = _errors(stc, ds)
    worst = max(abs(err[k]) for k in tolerance_keys)
    if not np.isfinite(worst) or worst > FULL_FIT_TOLERANCE:
        raise _NoFit(f"the solution reproduces the datasheet only to {worst:.2%}")
    note += (f"; as that method prescribes, the Voc coefficient is held to the datasheet's times (1 + adjustment) "
             f"= x {1.0 + p.adjust_pct / 100.0:.3f}")
    if "i_sc" not in tolerance_keys:
        note += (f"; the datasheet's maximum-power point needs a negative shunt resistance, so the shunt is held at "
                 f"{p.r_sh_ref_ohm:.0f} ohm and Isc comes out {err['i_sc']:+.2%} from the datasheet")
    return Module(parameters=p, fit=FitReport("six_parameter", note, stc, err), datasheet=ds, name=ds.name)


def module_from_parameters(p: DiodeParameters, where: str = "module", name: str = "") -> Module:
    """A module from explicit single-diode parameters, with its STC points.

    The parameters must describe a plausible module at STC: the same
    per-cell Voc and fill-factor limits as a datasheet.
    """
    validate_parameters(p, where, prefix="[module].")
    stc = _stc_points(p)
    per_cell = stc["v_oc"] / p.cells_in_series
    lo, hi = VOC_PER_CELL_RANGE_V
    if not lo <= per_cell <= hi and p.i_l_ref_a * p.r_sh_ref_ohm < lo * p.cells_in_series:
        raise InputError(where, "[module].r_sh_ref_ohm",
                         f"a shunt of {p.r_sh_ref_ohm:g} ohm holds Voc at {stc['v_oc']:.3g} V; "
                         f"expected {lo}-{hi} V per cell")
    if not lo <= per_cell <= hi:
        raise InputError(where, "[module].i_o_ref_a",
                         f"the parameters give Voc {stc['v_oc']:.3g} V at STC, {per_cell:.3f} V per cell; "
                         f"expected {lo}-{hi} V per cell (check i_o_ref_a, a_ref_v and cells_in_series)")
    ff = stc["p_mp"] / (stc["v_oc"] * stc["i_sc"])
    if ff < FILL_FACTOR_MIN or stc["i_sc"] < 0.5 * p.i_l_ref_a:
        raise InputError(where, "[module].r_sh_ref_ohm",
                         f"the parameters give a fill factor of {ff:.2f} and Isc {stc['i_sc']:.3g} A at STC; "
                         f"no working module is that poor (check r_s_ohm and r_sh_ref_ohm)")
    return Module(parameters=p, fit=FitReport("given", "single-diode parameters entered directly", stc), name=name)


# ---------------------------------------------------------------- conditions

def parameters_at(p: DiodeParameters, irradiance_w_m2, cell_temp_c) -> DiodeState:
    """Single-diode parameters at the given effective irradiance and cell temperature.

    Thin wrapper over :func:`pvlib.pvsystem.calcparams_cec` [5]_: De Soto's
    translation [1]_ with the light current's temperature coefficient
    scaled by ``1 - adjust_pct / 100``. Every evaluation of the model at
    conditions goes through here, so the adjustment is never left out.

    Parameters
    ----------
    p : DiodeParameters
    irradiance_w_m2 : float or array
        Effective irradiance on the cells [W/m2]; zero is the dark.
    cell_temp_c : float or array
        Cell temperature [degC].
    """
    g = np.asarray(irradiance_w_m2, dtype=float)
    t = np.asarray(cell_temp_c, dtype=float)
    with np.errstate(divide="ignore"):
        il, io, rs, rsh, a = pvsystem.calcparams_cec(
            g, t, p.alpha_sc_a_per_c, p.a_ref_v, p.i_l_ref_a, p.i_o_ref_a, p.r_sh_ref_ohm, p.r_s_ohm,
            p.adjust_pct, EgRef=p.eg_ref_ev, dEgdT=p.degdt_per_c,
        )
    shape = np.broadcast_shapes(g.shape, t.shape)
    # In the dark pvlib returns I_L = 0 and R_sh = inf; a tiny negative I_L
    # from the temperature term would only add noise.
    il = np.maximum(np.broadcast_to(il, shape), 0.0)
    return DiodeState(
        i_l_a=il, i_o_a=np.broadcast_to(io, shape), r_s_ohm=np.broadcast_to(np.asarray(rs, float), shape),
        r_sh_ohm=np.broadcast_to(rsh, shape), a_v=np.broadcast_to(a, shape),
    )


def diode_current(x_v, state: DiodeState):
    """Module current and its first two derivatives at diode voltage ``x_v``.

    I = I_L - I_0 (exp(x/a) - 1) - x / R_sh, the same equation as
    :func:`pvlib.singlediode.bishop88` without its thin-film and breakdown
    terms. Written out here because the solver needs d2I/dx2 and calls this
    tens of times per condition; pvlib's gradient path costs about thirty
    times more per call on a million points.

    Parameters
    ----------
    x_v : array
        Module diode voltage V + I R_s [V].
    state : DiodeState

    Returns
    -------
    i_a, di_dx, d2i_dx2 : arrays
        Current [A], dI/dx [A/V], d2I/dx2 [A/V2].
    """
    e = state.i_o_a / state.a_v * np.exp(x_v / state.a_v)
    di_dx = -e - 1.0 / state.r_sh_ohm
    i = state.i_l_a - state.a_v * e + state.i_o_a - x_v / state.r_sh_ohm
    return i, di_dx, -e / state.a_v


def diode_voltage_upper_bound(state: DiodeState):
    """A diode voltage above which the module current is never positive [V].

    a ln(1 + I_L / I_0): pvlib's :func:`pvlib.singlediode.estimate_voc`,
    which ignores the shunt and so bounds the true Voc from above.
    """
    return singlediode.estimate_voc(state.i_l_a, state.i_o_a, state.a_v)


KEY_POINT_ITERATIONS = 60
# A Newton step below this (relative) means the one just taken left an error
# of about its square: 1e-14.
KEY_POINT_TOLERANCE_V = 1e-7


def key_points(state: DiodeState):
    """Voc, Isc, Vmp and Imp of one module at each condition.

    The same numbers as :func:`pvlib.pvsystem.singlediode` (and checked
    against it in the tests), computed in the diode-voltage form with a few
    Newton steps each, several times faster on large arrays: the season study
    and the operating-point pipeline need them for every condition.

    - Voc: I(x) = 0, Newton from the upper bound a ln(1 + I_L/I_0); I is
      concave and falling, so the iterates fall monotonically to the root.
    - Isc: x = I(x) R_s, Newton from x = I_L R_s, which lies right of the
      root of this convex, rising function.
    - MPP: dP/dx = 0 with P = (x - I R_s) I, Newton safeguarded by
      bisection in [0, x_oc], started at the ideal-diode estimate
      x_oc - a ln(1 + x_oc / a).

    Parameters
    ----------
    state : DiodeState

    Returns
    -------
    dict of arrays
        ``v_oc``, ``i_sc``, ``v_mp``, ``i_mp``, ``p_mp`` [V, A, W], and
        ``converged`` (bool).
    """
    shape = np.broadcast_shapes(*(np.shape(getattr(state, k)) for k in state.__dataclass_fields__))
    il, io, rs, rsh, a = (np.broadcast_to(getattr(state, k), shape).astype(float)
                          for k in state.__dataclass_fields__)
    with np.errstate(divide="ignore"):
        g = 1.0 / rsh
    inv_a = 1.0 / a
    io_a = io * inv_a
    lit = il > 0.0

    def current(x):
        e = io_a * np.exp(x * inv_a)
        return il + io - a * e - x * g, -(e + g), -e * inv_a

    converged = np.ones(shape, bool)
    # Voc
    x = np.where(lit, diode_voltage_upper_bound(state), 0.0)
    for _ in range(KEY_POINT_ITERATIONS):
        i, di, _ = current(x)
        step = i / di
        x = x - step
        if np.all(np.abs(step) <= KEY_POINT_TOLERANCE_V * (1.0 + np.abs(x))):
            break
    else:
        converged &= np.abs(step) <= 1e-9 * (1.0 + np.abs(x))
    x_oc = np.where(lit, x, 0.0)
    # Isc
    x = il * rs
    for _ in range(KEY_POINT_ITERATIONS):
        i, di, _ = current(x)
        step = (x - i * rs) / (1.0 - di * rs)
        x = x - step
        if np.all(np.abs(step) <= KEY_POINT_TOLERANCE_V * (1.0 + np.abs(x))):
            break
    else:
        converged &= np.abs(step) <= 1e-9 * (1.0 + np.abs(x))
    i_sc = np.where(lit, current(x)[0], 0.0)
    # MPP
    lo, hi = np.zeros(shape), x_oc.copy()
    x = np.where(lit, x_oc - a * np.log1p(np.maximum(x_oc, 0.0) * inv_a), 0.0)
    for _ in range(KEY_POINT_ITERATIONS):
        i, di, d2i = current(x)
        v = x - i * rs
        dv = 1.0 - di * rs
        slope = dv * i + v * di
        curvature = -d2i * rs * i + 2.0 * dv * di + v * d2i
        lo = np.where(slope > 0, x, lo)
        hi = np.where(slope > 0, hi, x)
        with np.errstate(divide="ignore", invalid="ignore"):
            newton = x - slope / curvature
        ok = (curvature < 0) & (newton >= lo) & (newton <= hi)
        x_new = np.where(lit, np.where(ok, newton, 0.5 * (lo + hi)), 0.0)
        done = np.abs(x_new - x) <= KEY_POINT_TOLERANCE_V * (1.0 + np.abs(x))
        x = x_new
        if np.all(done):
            break
    else:
        converged &= done
    i_mp, _, _ = current(x)
    v_mp = np.where(lit, x - i_mp * rs, 0.0)
    i_mp = np.where(lit, i_mp, 0.0)
    return {"v_oc": x_oc, "i_sc": i_sc, "v_mp": v_mp, "i_mp": i_mp, "p_mp": v_mp * i_mp, "converged": converged}


# Central differences over +/-1 K: Voc and Pmp are smooth in temperature, so
# the truncation error (about the curvature times 1 K^2 / 6) is far below
# the datasheet's rounding.
TEMP_COEFF_STEP_C = 1.0


def temperature_coefficients(p: DiodeParameters) -> dict:
    """The temperature coefficients the model itself reproduces at STC.

    Central finite differences of Voc, Isc and Pmp at 1000 W/m2 over
    25 +/- :data:`TEMP_COEFF_STEP_C` degC, for comparison with the datasheet.

    Returns
    -------
    dict
        ``dvoc_dt_v_per_c`` [V/degC], ``disc_dt_a_per_c`` [A/degC],
        ``dpmp_dt_w_per_c`` [W/degC], and the same relative to the STC value
        as ``voc_temp_coeff_pct``, ``isc_temp_coeff_pct``,
        ``pmax_temp_coeff_pct`` [%/degC].
    """
    h = TEMP_COEFF_STEP_C
    kp = key_points(parameters_at(p, STC_IRRADIANCE_W_M2, np.array([STC_CELL_TEMP_C - h, STC_CELL_TEMP_C,
                                                                     STC_CELL_TEMP_C + h])))
    out = {}
    for key, unit, label in (("v_oc", "v", "voc"), ("i_sc", "a", "isc"), ("p_mp", "w", "pmp")):
        lo, mid, hi = (float(v) for v in kp[key])
        slope = (hi - lo) / (2.0 * h)
        out[f"d{label}_dt_{unit}_per_c"] = slope
        out[f"{'pmax' if label == 'pmp' else label}_temp_coeff_pct"] = 100.0 * slope / mid
    return out
