"""Module model: datasheet validation, fitting, conditions, diode evaluation."""

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from pvlib import pvsystem, singlediode
from scipy.optimize import minimize_scalar

from pvsource import module as mod
from pvsource.errors import InputError
from pvsource.module import Datasheet, DiodeParameters, fit_datasheet, module_from_parameters, parameters_at

from conftest import DEMO_DATASHEET


def test_full_fit_reproduces_the_datasheet_points(demo_module):
    # Law: a five-parameter fit to five conditions must return them (the
    # datasheet is the reference; invented demo numbers).
    assert demo_module.fit.method == "desoto"
    for key, err in demo_module.fit.relative_error.items():
        assert abs(err) < 1e-6, key
    ds = DEMO_DATASHEET
    stc = demo_module.fit.stc
    assert stc["v_mp"] * stc["i_mp"] == pytest.approx(ds.v_mp * ds.i_mp, rel=1e-6)


def test_fit_stc_points_agree_with_pvlib_singlediode(demo_module):
    # Reference: pvlib.pvsystem.singlediode (lambertw) on the fitted parameters.
    st = parameters_at(demo_module.parameters, 1000.0, 25.0)
    ref = pvsystem.singlediode(st.i_l_a, st.i_o_a, st.r_s_ohm, st.r_sh_ohm, st.a_v, method="lambertw")
    for key in ("v_oc", "i_sc", "v_mp", "i_mp", "p_mp"):
        assert demo_module.fit.stc[key] == pytest.approx(float(np.squeeze(ref[key])), rel=1e-8)


def _datasheet_from_cec(r):
    return Datasheet(float(r.V_oc_ref), float(r.I_sc_ref), float(r.V_mp_ref), float(r.I_mp_ref),
                     100 * float(r.alpha_sc) / float(r.I_sc_ref), 100 * float(r.beta_oc) / float(r.V_oc_ref),
                     int(r.N_s))


def test_fits_of_published_module_records_reproduce_their_datasheets(cec_fits):
    # Reference: datasheet values in the CEC module library (California Energy
    # Commission, as shipped in pvlib's SAM library file). Every
    # five-parameter fit, full or explicit fallback, must reproduce them; the
    # explicit Batzelis method is expected within about 1 % (Batzelis &
    # Papathanassiou 2016, Table III); 2 % is allowed here because the random
    # sample also holds 36- to 96-cell records (the worst measured: 1.55 %).
    methods = []
    for m in cec_fits[2]:
        methods.append(m.fit.method)
        worst = max(abs(e) for e in m.fit.relative_error.values())
        assert worst < (1e-4 if m.fit.method == "desoto" else 0.02)
        if m.fit.method == "batzelis":
            assert "kept the explicit Batzelis estimate" in m.fit.note
    assert methods.count("desoto") >= 0.7 * len(methods)


# The CEC module library shipped with pvlib (California Energy Commission,
# fitted by the six-parameter method of Dobos, J. Sol. Energy Eng. 134 (2012),
# doi:10.1115/1.4005759) gives, per record, the datasheet values and the
# record's own six parameters. A seeded random sample of its crystalline
# records is fitted here from the datasheet values alone; the reference is
# pvlib calcparams_cec + singlediode on the record's own parameters.
CEC_SAMPLE_SIZE = 80
CEC_SAMPLE_SEED = 20261202
CEC_CONDITIONS = ((1000.0, 65.0), (1000.0, -10.0), (600.0, 45.0), (200.0, 25.0))


@pytest.fixture(scope="module")
def cec_fits():
    cec = pvsystem.retrieve_sam("CECMod").T
    crystalline = cec[cec.Technology.isin(["Mono-c-Si", "Multi-c-Si"])]
    records, six, five = [], [], []
    for _, r in crystalline.sample(CEC_SAMPLE_SIZE + 10, random_state=CEC_SAMPLE_SEED).iterrows():
        ds = replace(_datasheet_from_cec(r), pmax_temp_coeff_pct=float(r.gamma_r))
        try:
            mod.validate_datasheet(ds)
        except InputError:
            continue                      # half-cut records that count every half cell in series
        records.append(r)
        # fit_datasheet's own path, with the five-parameter start kept for comparison.
        five.append(fit_datasheet(replace(ds, pmax_temp_coeff_pct=None)))
        six.append(mod.fit_six_parameter(ds, five[-1].parameters))
        if len(records) == CEC_SAMPLE_SIZE:
            break
    return pd.DataFrame(records), six, five


def _library_p_mp(records, g, t):
    # Reference: pvlib calcparams_cec + singlediode on the library's own parameters.
    c = {k: records[k].astype(float).to_numpy() for k in
         ("alpha_sc", "a_ref", "I_L_ref", "I_o_ref", "R_sh_ref", "R_s", "Adjust")}
    params = pvsystem.calcparams_cec(g, t, c["alpha_sc"], c["a_ref"], c["I_L_ref"], c["I_o_ref"], c["R_sh_ref"],
                                     c["R_s"], c["Adjust"])
    return np.asarray(pvsystem.singlediode(*params)["p_mp"], float)


def _relative_p_mp_errors(modules, records, g, t):
    ours = np.array([float(mod.key_points(parameters_at(m.parameters, g, t))["p_mp"]) for m in modules])
    return ours / _library_p_mp(records, g, t) - 1.0


@pytest.mark.parametrize("g, t", CEC_CONDITIONS)
def test_six_parameter_fit_matches_the_cec_library_at_hot_cold_and_low_light(cec_fits, g, t):
    records, six, _ = cec_fits
    assert len(records) == CEC_SAMPLE_SIZE
    assert all(m.fit.method == "six_parameter" for m in six)
    err = np.abs(_relative_p_mp_errors(six, records, g, t))
    # Reference: CEC module library records through pvlib (see above). Limits
    # of issue 10: median <= 0.5 % and 95th percentile <= 1.5 %, and at
    # 200 W/m2 <= 1 % and <= 2.5 %.
    median_limit, p95_limit = (0.01, 0.025) if g <= 200 else (0.005, 0.015)
    assert np.median(err) <= median_limit
    assert np.percentile(err, 95) <= p95_limit


def test_without_the_power_coefficient_hot_cell_power_is_optimistic_by_a_few_per_cent(cec_fits):
    # Reference: CEC module library records through pvlib. This is the bias
    # the note in fit/point/check/season warns about ("a few per cent"): the
    # five-parameter fit overstates P_mp at 65 degC cells.
    records, _, five = cec_fits
    err = _relative_p_mp_errors(five, records, 1000.0, 65.0)
    assert 0.01 <= np.median(err) <= 0.04
    assert np.mean(err > 0) >= 0.9
    assert all(mod.model_notes(m) for m in five)


def test_six_parameter_fit_recovers_the_cec_librarys_own_adjustment(cec_fits):
    # Reference: the 'Adjust' column of the CEC module library, fitted from the
    # same datasheet values by the published method (Dobos 2012).
    records, six, _ = cec_fits
    diff = np.abs(np.array([m.parameters.adjust_pct for m in six]) - records["Adjust"].astype(float).to_numpy())
    assert np.median(diff) <= 1.0
    assert diff.max() <= 3.0


def test_six_parameter_fit_reproduces_the_datasheet_and_its_temperature_coefficients(cec_fits):
    records, six, _ = cec_fits
    for (_, r), m in zip(records.iterrows(), six):
        tc = mod.temperature_coefficients(m.parameters)
        # Reference: the record's datasheet values (CEC library). Dobos (2012)
        # holds Pmp to gamma_r and Voc to beta_oc (1 + Adjust/100), the
        # relation the library's own records obey; the model's slopes are
        # central differences, the fit's a 2 K secant, so 1 % apart at most.
        assert tc["pmax_temp_coeff_pct"] == pytest.approx(float(r.gamma_r), rel=0.01)
        beta_pct = 100 * float(r.beta_oc) / float(r.V_oc_ref)
        assert tc["voc_temp_coeff_pct"] == pytest.approx(beta_pct * (1 + m.parameters.adjust_pct / 100), rel=0.01)
        keys = ("v_oc", "v_mp", "i_mp", "p_mp") if "negative shunt" in m.fit.note else m.fit.relative_error
        assert max(abs(m.fit.relative_error[k]) for k in keys) < 1e-4


def test_a_datasheet_that_needs_a_negative_shunt_keeps_the_mpp_and_says_how_far_isc_moved():
    # Reference: this CEC library record's own parameters (pvlib
    # calcparams_cec) also give up Isc, by +1.0 %, to keep the MPP: no
    # positive shunt can hold its datasheet MPP.
    r = pvsystem.retrieve_sam("CECMod")["LG_Electronics_Inc__LG230R1W_G2"]
    m = fit_datasheet(replace(_datasheet_from_cec(r), pmax_temp_coeff_pct=float(r.gamma_r)))
    assert m.fit.method == "six_parameter"
    assert "negative shunt" in m.fit.note and "Isc comes out" in m.fit.note
    assert 0.0 < m.fit.relative_error["i_sc"] < 0.03
    assert m.parameters.r_sh_ref_ohm > 0
    for g, t in CEC_CONDITIONS:
        ours = float(mod.key_points(parameters_at(m.parameters, g, t))["p_mp"])
        ref = _library_p_mp(pd.DataFrame([r]), g, t)[0]
        assert ours == pytest.approx(ref, rel=0.01)


def test_six_parameter_failure_keeps_the_five_parameter_fit_and_says_so(monkeypatch):
    def no_solution(*args, **kwargs):
        raise mod._NoFit("forced for the test")

    monkeypatch.setattr(mod, "_six_parameter_solve", no_solution)
    m = fit_datasheet(replace(DEMO_DATASHEET, pmax_temp_coeff_pct=-0.37))
    assert m.fit.method == "desoto"
    assert "forced for the test" in m.fit.note and "pmax_temp_coeff_pct = -0.37" in m.fit.note
    assert "check the coefficient" in mod.model_notes(m)[0]


def test_explicit_estimate_is_kept_and_said_when_the_full_fit_fails(monkeypatch):
    def broken(*args, **kwargs):
        raise RuntimeError("Parameter estimation failed: forced for the test")

    monkeypatch.setattr(mod.ivtools.sdm, "fit_desoto", broken)
    m = fit_datasheet(DEMO_DATASHEET)
    assert m.fit.method == "batzelis"
    assert "failed" in m.fit.note and "Batzelis" in m.fit.note
    # Batzelis & Papathanassiou (2016) report errors around 1 % at most.
    assert max(abs(e) for e in m.fit.relative_error.values()) < 0.01


@pytest.mark.parametrize("change, field", [
    (dict(v_mp=40.1), "v_mp"),
    (dict(v_mp=41.0), "v_mp"),
    (dict(i_mp=9.8), "i_mp"),
    (dict(voc_temp_coeff_pct=0.29), "voc_temp_coeff_pct"),
    (dict(isc_temp_coeff_pct=4.9), "isc_temp_coeff_pct"),
    (dict(cells_in_series=6), "cells_in_series"),
    (dict(cells_in_series=60.5), "cells_in_series"),
    (dict(v_oc=-40.1), "v_oc"),
    (dict(i_sc=float("nan")), "i_sc"),
    (dict(v_mp=20.0, i_mp=5.0), "v_mp"),          # fill factor 0.25: no module is that poor
    (dict(v_mp=39.0, i_mp=9.7), "v_mp"),          # fill factor 0.96: above the ideal-cell limit
    (dict(cells_in_series=120), "cells_in_series"),  # half cells counted twice
    (dict(pmax_temp_coeff_pct=0.4), "pmax_temp_coeff_pct"),     # the sign: power falls with heat
    (dict(pmax_temp_coeff_pct=-4.0), "pmax_temp_coeff_pct"),    # a fraction typed as per cent
    (dict(pmax_temp_coeff_pct=float("inf")), "pmax_temp_coeff_pct"),
    # Law: Pmp = Voc Isc FF and the fill factor falls with heat (Green 1982),
    # so the Pmp coefficient lies below -0.29 + 0.05 = -0.24 %/degC.
    (dict(pmax_temp_coeff_pct=-0.2), "pmax_temp_coeff_pct"),
    (dict(noct_c=318.0), "noct_c"),                             # kelvin, not degC
    (dict(noct_c=-45.0), "noct_c"),
])
def test_inconsistent_datasheets_are_rejected_naming_the_field(change, field):
    with pytest.raises(InputError) as exc:
        fit_datasheet(replace(DEMO_DATASHEET, **change), where="sheet.toml")
    assert exc.value.where == "sheet.toml"
    assert exc.value.field == f"[module].{field}"


def test_green_fill_factor_matches_the_exact_ideal_diode_fill_factor():
    # Reference: M. A. Green, Solar Cells 7 (1982) 337 states the expression is
    # accurate to about 1e-4 for normalised Voc above 10 (from memory); the
    # exact ideal-diode fill factor is computed here by direct maximisation.
    vt = mod.BOLTZMANN_OVER_Q_V_PER_K * 298.15
    for voc_n in (12.0, 20.0, 28.0):
        v_oc = voc_n * vt * 60
        res = minimize_scalar(lambda v: -v * (1 - np.expm1(v / (60 * vt)) / np.expm1(voc_n)),
                              bounds=(0, v_oc), method="bounded", options={"xatol": 1e-12})
        exact = -res.fun / v_oc
        assert mod.ideal_fill_factor(v_oc, 60) == pytest.approx(exact, abs=2e-4)


def test_diode_current_matches_pvlib_bishop88(demo_module, rng):
    # Reference: pvlib.singlediode.bishop88 (with gradients) on the same points.
    g = rng.uniform(1, 1200, 500)
    t = rng.uniform(-30, 80, 500)
    st = parameters_at(demo_module.parameters, g, t)
    x = rng.uniform(-5, 45, 500)
    i, di, d2i = mod.diode_current(x, st)
    ref = singlediode.bishop88(x, st.i_l_a, st.i_o_a, st.r_s_ohm, st.r_sh_ohm, st.a_v, gradients=True)
    np.testing.assert_allclose(i, ref[0], rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(di, ref[3], rtol=1e-10)
    # d2I/dx2 by central differences of pvlib's dI/dx.
    h = 1e-4
    up = singlediode.bishop88(x + h, st.i_l_a, st.i_o_a, st.r_s_ohm, st.r_sh_ohm, st.a_v, gradients=True)[3]
    dn = singlediode.bishop88(x - h, st.i_l_a, st.i_o_a, st.r_s_ohm, st.r_sh_ohm, st.a_v, gradients=True)[3]
    np.testing.assert_allclose(d2i, (up - dn) / (2 * h), rtol=1e-5, atol=1e-12)


def test_parameters_in_the_dark(demo_module):
    st = parameters_at(demo_module.parameters, 0.0, 20.0)
    assert float(st.i_l_a) == 0.0
    assert np.isinf(st.r_sh_ohm)


def test_explicit_parameters_are_accepted_and_checked(demo_module):
    p = demo_module.parameters
    m = module_from_parameters(p, name="given")
    assert m.fit.method == "given"
    assert m.fit.stc["v_oc"] == pytest.approx(DEMO_DATASHEET.v_oc, rel=1e-6)
    with pytest.raises(InputError, match="r_s_ohm"):
        module_from_parameters(replace(p, r_s_ohm=-0.1))
    with pytest.raises(InputError, match="a_ref_v"):
        module_from_parameters(replace(p, a_ref_v=15.0))
    with pytest.raises(InputError, match="i_o_ref_a"):
        module_from_parameters(replace(p, i_o_ref_a=20.0))
    with pytest.raises(InputError, match="i_o_ref_a"):
        module_from_parameters(replace(p, i_o_ref_a=9.7))          # Voc of a few millivolts
    with pytest.raises(InputError, match="eg_ref_ev"):
        module_from_parameters(replace(p, eg_ref_ev=100.0))
    with pytest.raises(InputError, match="degdt_per_c"):
        module_from_parameters(replace(p, degdt_per_c=1e3))
    with pytest.raises(InputError, match="alpha_sc_a_per_c"):
        module_from_parameters(replace(p, alpha_sc_a_per_c=-1000.0))
    with pytest.raises(InputError, match="r_sh_ref_ohm"):
        module_from_parameters(replace(p, r_sh_ref_ohm=1e-3))
    with pytest.raises(InputError, match="adjust_pct"):
        module_from_parameters(replace(p, adjust_pct=150.0))


def test_cec_library_parameters_entered_directly_reproduce_the_records_datasheet():
    # Reference: a CEC library record (pvlib's copy): its six parameters,
    # entered as they are, must give back its own datasheet values at STC,
    # and at 65 degC the same P_mp as pvlib calcparams_cec + singlediode.
    r = pvsystem.retrieve_sam("CECMod")["Canadian_Solar_Inc__CS6K_275M"]
    p = DiodeParameters(float(r.I_L_ref), float(r.I_o_ref), float(r.R_s), float(r.R_sh_ref), float(r.a_ref),
                        float(r.alpha_sc), int(r.N_s), adjust_pct=float(r.Adjust))
    m = module_from_parameters(p)
    for key, col in (("v_oc", "V_oc_ref"), ("i_sc", "I_sc_ref"), ("v_mp", "V_mp_ref"), ("i_mp", "I_mp_ref")):
        assert m.fit.stc[key] == pytest.approx(float(r[col]), rel=2e-3)
    ref = pvsystem.singlediode(*pvsystem.calcparams_cec(1000.0, 65.0, r.alpha_sc, r.a_ref, r.I_L_ref, r.I_o_ref,
                                                        r.R_sh_ref, r.R_s, r.Adjust))["p_mp"]
    ours = mod.key_points(parameters_at(p, 1000.0, 65.0))["p_mp"]
    assert float(ours) == pytest.approx(float(ref), rel=1e-9)


def test_every_path_that_evaluates_the_model_carries_the_adjustment():
    # Reference: pvlib calcparams_cec + singlediode on a CEC library record's
    # own six parameters (Adjust included); the operating-point pipeline and
    # the hot-Vmp check must give the same module power and Vmp at 65 degC.
    from pvsource.checks import min_string_vmp
    from pvsource.operating import operating_points

    from conftest import make_system

    r = pvsystem.retrieve_sam("CECMod")["A10Green_Technology_A10J_S72_175"]
    p = DiodeParameters(float(r.I_L_ref), float(r.I_o_ref), float(r.R_s), float(r.R_sh_ref), float(r.a_ref),
                        float(r.alpha_sc), int(r.N_s), adjust_pct=float(r.Adjust))
    system = make_system(module_from_parameters(p), groups=((2, 1),))
    ref = pvsystem.singlediode(*pvsystem.calcparams_cec(1000.0, 65.0, r.alpha_sc, r.a_ref, r.I_L_ref, r.I_o_ref,
                                                        r.R_sh_ref, r.R_s, r.Adjust))
    without = pvsystem.singlediode(*pvsystem.calcparams_cec(1000.0, 65.0, r.alpha_sc, r.a_ref, r.I_L_ref,
                                                            r.I_o_ref, r.R_sh_ref, r.R_s, 0.0))
    assert abs(float(without["p_mp"]) / float(ref["p_mp"]) - 1) > 1e-3   # leaving Adjust out would show
    df = operating_points(system, 1000.0, 65.0)
    assert float(df["groups_p_mp_w"].iloc[0]) == pytest.approx(2 * float(ref["p_mp"]), rel=1e-6)
    check = min_string_vmp(system, 65.0, 0.0)
    assert check.value == pytest.approx(2 * float(ref["v_mp"]), rel=1e-6)
