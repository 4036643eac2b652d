"""The command line: output forms, exit codes, and one-line errors."""

import json
import re
import subprocess
import sys

import pytest

import pvsource
import pvsource.cli as cli
from pvsource.cli import parse_condition
from pvsource.errors import InputError

from conftest import DATA, ROOT, run_cli

EXAMPLE = str(DATA / "example-system.toml")
CABIN = str(DATA / "example-cabin-mppt.toml")
TWO_FACES = str(DATA / "example-two-faces.toml")


run = run_cli


def test_point_json_has_the_documented_keys_in_si_units(capsys):
    code, out, err = run(capsys, "point", EXAMPLE, "--irradiance-w-m2", "800", "--cell-temp-c", "45", "--json")
    assert code == 0 and err == ""
    rec = json.loads(out)
    assert set(rec["source"]) == {"v_oc", "i_sc", "v_mp", "i_mp", "p_mp"}
    assert set(rec["operating_point"]) == {"v", "i", "p"}
    assert set(rec["thevenin"]) == {"e_v", "r_ohm"} and set(rec["norton"]) == {"i_a", "r_ohm"}
    for key in ("matching_ratio", "delivered_w", "cable_loss_w", "efficiency", "mpp_shortfall_w"):
        assert isinstance(rec[key], float)
    # The same numbers as the library gives.
    system = pvsource.load_system(EXAMPLE)
    row = pvsource.operating_points(system, 800.0, 45.0).iloc[0]
    assert rec["operating_point"]["v"] == pytest.approx(row["v"], rel=1e-12)
    assert rec["thevenin"]["e_v"] == pytest.approx(row["thevenin_e_v"], rel=1e-12)
    assert rec["delivered_w"] + rec["cable_loss_w"] == pytest.approx(rec["generated_w"], rel=1e-9)


def test_point_table_shows_the_linearised_view_and_the_cautions(capsys):
    code, out, _ = run(capsys, "point", EXAMPLE)
    assert code == 0
    for words in ("Thevenin", "Norton", "matching ratio", "Superposition", "shortfall against the MPP",
                  "Cautions", "DC arcs", "licensed practitioners"):
        assert words in out


def test_point_takes_per_group_conditions(capsys):
    code, out, _ = run(capsys, "point", TWO_FACES, "--irradiance-w-m2", "west=900", "--irradiance-w-m2", "400",
                       "--cell-temp-c", "30", "--json")
    assert code == 0
    groups = {g["name"]: g for g in json.loads(out)["groups"]}
    assert groups["west"]["irradiance_w_m2"] == 900.0
    assert groups["east"]["irradiance_w_m2"] == 400.0


def test_fit_reports_parameters_and_errors(capsys):
    code, out, _ = run(capsys, "fit", str(DATA / "modules" / "ashgrove-ag300.toml"), "--json")
    rec = json.loads(out)
    assert code == 0 and rec["method"] == "six_parameter"
    assert set(rec["relative_error"]) == {"v_oc", "i_sc", "v_mp", "i_mp", "p_mp"}
    assert max(abs(e) for e in rec["relative_error"].values()) < 1e-6
    # Reference: the datasheet file's own coefficient (-0.37 %/degC), beside
    # which the model's finite-difference slope is shown.
    pmax = rec["temperature_coefficients"]["pmax"]
    assert pmax["datasheet_pct_per_c"] == -0.37
    assert pmax["model_pct_per_c"] == pytest.approx(-0.37, rel=0.01)
    assert pmax["model_w_per_c"] == pytest.approx(-0.0037 * 33.0 * 9.2, rel=0.01)
    assert rec["notes"] == []
    code, out, _ = run(capsys, "fit", str(DATA / "modules" / "ashgrove-ag300.toml"))
    assert "six-parameter" in out and "i_mp" in out and "pmax" in out


def test_without_the_power_coefficient_fit_point_and_check_say_hot_power_may_be_optimistic(capsys, tmp_path):
    text = (DATA / "modules" / "ashgrove-ag300.toml").read_text()
    sheet = tmp_path / "sheet.toml"
    sheet.write_text("\n".join(line for line in text.splitlines() if not line.startswith("pmax_temp_coeff_pct")))
    code, out, _ = run(capsys, "fit", str(sheet), "--json")
    rec = json.loads(out)
    assert code == 0 and rec["method"] == "desoto"
    assert rec["temperature_coefficients"]["pmax"]["datasheet_pct_per_c"] is None
    assert any("pmax_temp_coeff_pct" in n for n in rec["notes"])
    system = tmp_path / "system.toml"
    system.write_text(GOOD.replace("pmax_temp_coeff_pct", "# pmax_temp_coeff_pct"))
    for args in (("point", str(system)), ("check", str(system), "--min-temp", "-20", "--max-temp", "40")):
        code, out, _ = run(capsys, *args)
        # check exits 1 when one of its checks fails (tested apart); the note shows either way.
        assert code in ((0,) if args[0] == "point" else (0, 1))
        assert "hot-cell power may be optimistic" in out and "pmax_temp_coeff_pct" in out
    code, out, _ = run(capsys, "point", str(DATA / "example-system.toml"))
    assert code == 0 and "hot-cell power may be optimistic" not in out


def _bad_file(tmp_path, text):
    path = tmp_path / "system.toml"
    path.write_text(text)
    return str(path)


GOOD = (DATA / "example-system.toml").read_text().replace('file = "modules/ashgrove-ag300.toml"',
                                                         (DATA / "modules" / "ashgrove-ag300.toml").read_text()
                                                         .split("[module]")[1])


@pytest.mark.parametrize("edit, field", [
    (("strings = 3\n", ""), "[array].strings"),
    (("strings = 3", "strings = 3\ncolour = 2"), "[array].colour"),
    (("length_m = 12", "length_m = -1"), '[[cable]] "array to bank".length_m'),
    (("v_mp = 33.0", "v_mp = 45.0"), "[module].v_mp"),
    (("emf_v = 26.4", 'emf_v = "twenty"'), "[load].emf_v"),
    (("pmax_temp_coeff_pct = -0.37", "pmax_temp_coeff_pct = 0.37"), "[module].pmax_temp_coeff_pct"),
    (("pmax_temp_coeff_pct = -0.37", 'pmax_temp_coeff_pct = "-0.37 %"'), "[module].pmax_temp_coeff_pct"),
    (("noct_c = 45", "noct_c = 318"), "[module].noct_c"),
    (("noct_c = 45", "noct_c = 45\nr_s_ohm = 0.3"), "[module]"),
])
def test_bad_system_files_exit_2_with_one_line(capsys, tmp_path, edit, field):
    assert edit[0] in GOOD
    path = _bad_file(tmp_path, GOOD.replace(*edit))
    code, out, err = run(capsys, "point", path)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and "Traceback" not in err
    assert path in err and field in err


@pytest.mark.parametrize("args, words", [
    (["point", EXAMPLE, "--irradiance", "lots"], "--irradiance"),
    (["point", EXAMPLE, "--cell-temp", "east=hot"], "--cell-temp"),
    (["point", EXAMPLE, "--irradiance", "-20"], "--irradiance"),
    (["point", EXAMPLE, "--irradiance", "1e999"], "--irradiance"),
    (["point", EXAMPLE, "--cell-temp", "nan"], "--cell-temp"),
    (["point", EXAMPLE, "--irradiance", "north=500"], "no group named"),
    (["point", TWO_FACES, "--irradiance", "east=500", "--irradiance", "east=600"], "given twice"),
    (["point", EXAMPLE, "--frobnicate"], "No such option"),
    (["point"], "Missing argument"),
    (["point", "does-not-exist.toml"], "does-not-exist.toml"),
])
def test_bad_command_lines_exit_2_with_one_line(capsys, args, words):
    code, out, err = run(capsys, *args)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and words in err and "Traceback" not in err


def test_parse_condition_forms():
    assert parse_condition(None, "--x") is None
    assert parse_condition(["800"], "--x") == 800.0
    assert parse_condition(["a=1", "2"], "--x") == {"__default__": 2.0, "a": 1.0}
    with pytest.raises(InputError):
        parse_condition(["1", "2"], "--x")


def test_the_installed_entry_point_reports_errors_in_one_line(tmp_path):
    path = tmp_path / "empty.toml"
    path.write_text("")
    proc = subprocess.run([sys.executable, "-m", "pvsource", "point", str(path)], capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.strip() == f"pvsource: error: {path}: is empty (expected a TOML system description)"
    proc = subprocess.run([sys.executable, "-m", "pvsource", "--version"], capture_output=True, text=True)
    assert proc.returncode == 0 and pvsource.__version__ in proc.stdout


def test_readme_quick_start_has_exactly_two_commands():
    text = (ROOT / "README.md").read_text()
    section = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    commands = re.findall(r"```(?:sh|bash|console)?\n(.*?)```", section, re.S)
    lines = [ln for block in commands for ln in block.strip().splitlines() if ln.strip()]
    assert len(lines) == 2
    # CI reads and runs exactly these two commands, in this order.
    ci = subprocess.run(["bash", str(ROOT / ".ci" / "run"), "--commands"], capture_output=True, text=True,
                        timeout=60)
    assert ci.returncode == 0, ci.stderr
    assert ci.stdout.splitlines() == [ln.strip() for ln in lines]


def test_wire_on_a_system_file_reports_every_run(capsys):
    code, out, err = run(capsys, "wire", EXAMPLE, "--budget-pct", "3", "--json")
    assert code == 0 and err == ""
    rec = json.loads(out)
    assert [r["name"] for r in rec["runs"]] == ["array to bank", "bank link"]
    feeder = rec["runs"][0]
    for key in ("current_a", "resistance_ohm", "drop_v", "drop_pct", "loss_w", "loss_pct", "recommended_size",
                "options", "breaks_budget"):
        assert key in feeder
    assert feeder["breaks_budget"] is True and rec["over_budget"] == ["array to bank"]
    # By default the system's own load (a 24 V bank here) at STC: the current that really flows.
    assert rec["design_point"]["at_mpp"] is False and "STC" in rec["design_point"]["conditions"]
    code, out, _ = run(capsys, "wire", EXAMPLE, "--budget-pct", "3", "--at-mpp", "--json")
    at_mpp = json.loads(out)
    assert at_mpp["design_point"]["at_mpp"] is True
    assert at_mpp["runs"][0]["current_a"] < feeder["current_a"]  # a 24 V bank pulls the array toward Isc
    assert [o["size"] for o in feeder["options"]][:2] == ["6 mm2", "10 mm2"]
    assert rec["cautions"]


def test_wire_table_names_the_budget_and_the_cautions(capsys):
    code, out, _ = run(capsys, "wire", TWO_FACES, "--budget-pct", "2", "--irradiance-w-m2", "800", "--cell-temp-c", "40")
    assert code == 0
    assert "Total" in out and "worst path" in out and "licensed practitioners" in out
    # Cautions fit the command: a wiring result carries the conductor ones, not the arc one.
    assert "ampacity" in out and "DC arcs" not in out


def test_wire_one_run_json(capsys):
    code, out, _ = run(capsys, "wire", "--current", "20", "--length-m", "15", "--size", "10 AWG",
                       "--volts", "48", "--budget-pct", "2", "--json")
    rec = json.loads(out)
    assert code == 0
    assert {"resistance_ohm", "drop_v", "drop_pct", "loss_w", "recommended_size"} <= set(rec)
    # A 30 m loop of 10 AWG copper at 75 degC: 1.24 ohm/kft (NEC Ch. 9 Table 8, from memory).
    assert rec["resistance_ohm"] == pytest.approx(1.24 * 30 / 304.8, rel=0.02)
    assert rec["recommended_size"] == "4 AWG"


@pytest.mark.parametrize("args, words", [
    (["wire", "--current", "20", "--length-m", "15", "--size", "banana"], "accepted forms"),
    (["wire", "--current", "20", "--length-m", "15", "--size", "12 furlongs"], "--size"),
    (["wire", "--current", "20", "--length-m", "-15", "--size", "10 AWG"], "--length-m"),
    (["wire", "--current", "20", "--length-m", "15", "--size", "10 AWG", "--material", "gold"], "--material"),
    (["wire", "--current", "0", "--length-m", "15", "--size", "10 AWG", "--volts", "48", "--budget-pct", "2"],
     "--current"),
    (["wire", "--current", "20", "--length-m", "15"], "--size"),
    (["wire", EXAMPLE, "--current", "20"], "--current"),
    (["wire", EXAMPLE, "--budget-pct", "140"], "--budget-pct"),
    (["check", EXAMPLE, "--max-air-c", "40"], "--min-air-c"),
    (["check", EXAMPLE, "--min-air-c", "30", "--max-air-c", "20"], "--min-air-c"),
    # The earlier spellings still work, and messages give the current one.
    (["check", EXAMPLE, "--min-temp", "nan", "--max-temp", "20"], "--min-air-c"),
])
def test_bad_wiring_and_check_inputs_exit_2_with_one_line(capsys, args, words):
    code, out, err = run(capsys, *args)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and words in err and "Traceback" not in err


def test_check_json_lists_the_checks_with_their_basis(capsys):
    code, out, _ = run(capsys, "check", EXAMPLE, "--min-air-c", "-15", "--max-air-c", "38", "--json")
    rec = json.loads(out)
    assert code == 1  # a check fails below, so the command says so
    names = [c["name"] for c in rec["checks"]]
    assert names[0] == "max_string_voc"
    for c in rec["checks"]:
        assert {"name", "value", "limit", "unit", "passed", "basis"} <= set(c)
        assert c["basis"]
    assert rec["checks"][0]["passed"] is True
    assert any(c["name"].startswith("conductor_current") and c["passed"] is False for c in rec["checks"])
    assert rec["all_passed"] is False


def test_check_takes_the_cell_rise_from_noct_unless_given(capsys):
    # Reference, worked out by hand: the example module's NOCT is 45 degC
    # (its file), so the rise in full sun is (45 - 20) x 1000/800 = 31.25 degC
    # (NOCT conditions, IEC 61215-2: 800 W/m2, 20 degC air).
    _, out, _ = run(capsys, "check", EXAMPLE, "--min-temp", "-15", "--max-temp", "38", "--json")
    rec = json.loads(out)
    vmp = next(c for c in rec["checks"] if c["name"] == "min_string_vmp")
    assert rec["cell_rise_c"] == pytest.approx(31.25) and "NOCT 45" in rec["cell_rise_basis"]
    assert "38 + 31.25 = 69.25 degC" in vmp["detail"] and "NOCT 45" in vmp["basis"]
    _, out, _ = run(capsys, "check", EXAMPLE, "--min-temp", "-15", "--max-temp", "38", "--cell-rise", "35", "--json")
    rec = json.loads(out)
    assert rec["cell_rise_c"] == 35.0 and "as given" in rec["cell_rise_basis"]
    _, out, _ = run(capsys, "check", EXAMPLE, "--min-temp", "-15", "--max-temp", "38")
    assert "31.25 degC above the air in full sun, from the module's NOCT" in out


def test_check_cold_voc_of_a_cec_library_module(capsys, tmp_path):
    # Reference: the CEC module library that pvlib ships (an open dataset). A
    # string of two of its 60-cell modules at -15 degC.
    from pvlib import pvsystem
    cec = pvsystem.retrieve_sam("CECMod").T
    m = cec[(cec["Technology"] == "Mono-c-Si") & (cec["N_s"] == 60) & (cec["STC"] >= 300)].iloc[0]
    module = (f"[module]\nv_oc = {m['V_oc_ref']}\ni_sc = {m['I_sc_ref']}\nv_mp = {m['V_mp_ref']}\n"
              f"i_mp = {m['I_mp_ref']}\nisc_temp_coeff_pct = {100 * m['alpha_sc'] / m['I_sc_ref']!r}\n"
              f"voc_temp_coeff_pct = {100 * m['beta_oc'] / m['V_oc_ref']!r}\ncells_in_series = 60\n")
    text = GOOD.split("[module]")[0] + module + "\n[array]" + GOOD.split("[array]")[1]
    text = text.replace("modules_per_string = 1", "modules_per_string = 2").replace("max_input_v = 60",
                                                                                 "max_input_v = 100")
    code, out, _ = run(capsys, "check", _bad_file(tmp_path, text), "--min-temp", "-15", "--max-temp", "38", "--json")
    assert code in (0, 1)  # 1 only says that some other check fails
    voc = next(c for c in json.loads(out)["checks"] if c["name"] == "max_string_voc")
    # NEC 690.7(A)(1), worked from the library's own coefficient in V/K.
    assert voc["value"] == pytest.approx(2 * (m["V_oc_ref"] + m["beta_oc"] * (-15 - 25)), rel=1e-9)
    # pvlib's CEC model on the library's fitted parameters at -15 degC cells:
    # within 3 % (the library's fits reproduce beta_oc near STC, not exactly at -15 degC).
    cp = pvsystem.calcparams_cec(1000.0, -15.0, m["alpha_sc"], m["a_ref"], m["I_L_ref"], m["I_o_ref"],
                                 m["R_sh_ref"], m["R_s"], m["Adjust"])
    assert voc["value"] == pytest.approx(2 * float(pvsystem.singlediode(*cp)["v_oc"]), rel=0.03)
    assert voc["limit"] == 100.0 and voc["passed"] is True


def test_check_without_a_load_or_controller_still_runs(capsys, tmp_path):
    text = (DATA / "example-system.toml").read_text()
    text = text.split("[controller]")[0]
    path = tmp_path / "bare.toml"
    path.write_text(text.replace('file = "modules/ashgrove-ag300.toml"',
                                 f'file = "{(DATA / "modules" / "ashgrove-ag300.toml").as_posix()}"'))
    code, out, _ = run(capsys, "check", str(path), "--min-air-c", "-10", "--max-air-c", "35", "--json")
    rec = json.loads(out)
    assert code == (1 if rec["all_passed"] is False else 0)
    assert rec["checks"][0]["limit"] is None and rec["checks"][0]["passed"] is None


def test_a_group_without_conditions_names_the_file_and_the_option(capsys, tmp_path):
    text = GOOD.replace("irradiance_w_m2 = 800\n", "")
    path = _bad_file(tmp_path, text)
    code, _, err = run(capsys, "point", path)
    assert code == 2 and path in err and "--irradiance" in err


def test_module_files_that_refer_to_each_other_are_refused(capsys, tmp_path):
    (tmp_path / "a.toml").write_text('[module]\nfile = "b.toml"\n')
    (tmp_path / "b.toml").write_text('[module]\nfile = "a.toml"\n')
    code, out, err = run(capsys, "fit", str(tmp_path / "a.toml"))
    assert code == 2 and "loop" in err and err.count("\n") == 1


def test_nested_module_files_resolve_from_their_own_folder(capsys, tmp_path):
    (tmp_path / "lib").mkdir()
    (tmp_path / "lib" / "alias.toml").write_text('[module]\nfile = "real.toml"\n')
    (tmp_path / "lib" / "real.toml").write_text((DATA / "modules" / "ashgrove-ag300.toml").read_text())
    code, out, _ = run(capsys, "fit", str(tmp_path / "lib" / "alias.toml"), "--json")
    assert code == 0 and json.loads(out)["method"] == "six_parameter"


def test_an_unexpected_failure_is_still_one_line(capsys, monkeypatch):
    import pvsource.config

    def boom(*args, **kwargs):
        raise ZeroDivisionError("synthetic")

    monkeypatch.setattr(pvsource.config, "load_module", boom)
    code, _, err = run(capsys, "fit", "anything.toml")
    assert code == 1 and err.count("\n") == 1 and "internal error" in err and "Traceback" not in err


def test_wire_recommends_the_larger_of_ampacity_and_drop(capsys):
    code, out, _ = run(capsys, "wire", "--current", "100", "--length-m", "1", "--size", "2 AWG", "--volts", "48",
                       "--budget-pct", "3", "--json")
    rec = json.loads(out)
    # NEC 310.16 (from memory) with 110.14(C): 1.25 x 100 A = 125 A needs the 75 degC
    # column's 130 A of 1 AWG (2 AWG has 115 A); the drop alone would allow 12 AWG
    # (worked from NEC Ch. 9 Table 8: 1.98 ohm/kft x 2 m = 0.0130 ohm, 1.30 V = 2.7 %).
    assert rec["size_by_ampacity"] == "1 AWG" and rec["size_by_drop"] == "12 AWG"
    assert rec["recommended_size"] == "1 AWG" and rec["ampacity_a"] == 130.0
    # Aluminium metric sizes have IEC 60364-5-52 values now: 10 A needs a 16 A device (1.25 x 10 = 12.5 A,
    # IEC 60269-1 series), and 16 mm2, the smallest aluminium size held, carries 54 A in B1.
    code, out, _ = run(capsys, "wire", "--current", "10", "--length-m", "1", "--size", "50 mm2", "--volts", "48",
                       "--material", "aluminium", "--json")
    rec = json.loads(out)
    assert rec["size_by_ampacity"] == "16 mm2" and rec["ampacity_a"] == 118.0 and rec["protection_a"] == 16.0
    # More current than any size carries: never below the chosen size.
    code, out, _ = run(capsys, "wire", "--current", "3000", "--length-m", "1", "--size", "300 mm2", "--volts", "48",
                       "--json")
    rec = json.loads(out)
    assert rec["size_by_ampacity"] is None and rec["recommended_size"] == "300 mm2"
    assert "parallel" in rec["recommendation_note"]


@pytest.mark.parametrize("args", [
    ("--current", "10", "--size", "400 mm2"),                              # a size the tables do not hold
    ("--current", "10", "--size", "10 mm2", "--material", "aluminium"),   # aluminium below 16 mm2
    ("--current", "3000", "--size", "300 mm2"),                            # no size carries it
])
def test_quick_wire_messages_name_only_what_quick_mode_has(capsys, args):
    # Quick mode has no file, so no ampacity_a key to give: every hint must be an option of wire.
    options = _options("wire")
    code, out, _ = run(capsys, "wire", "--length-m", "5", "--volts", "48", *args)
    code_j, out_j, _ = run(capsys, "wire", "--length-m", "5", "--volts", "48", *args, "--json")
    rec = json.loads(out_j)
    assert code == code_j == 0
    text = out + " ".join(str(rec.get(k)) for k in ("recommendation_note", "ampacity_note"))
    assert "ampacity_a" not in text and ("--size" in text or "parallel" in text)
    named = set(re.findall(r"(?<![\w-])--[a-z][a-z0-9-]*", text))
    assert named <= options, named - options


@pytest.mark.parametrize("protection, size, device", [("gpv", "2.5 mm2", 25.0), ("breaker", "2.5 mm2", 25.0),
                                                   ("gg", "2.5 mm2", 25.0)])
def test_wire_sizes_a_metric_run_with_its_protection(capsys, protection, size, device):
    # IEC 60364-4-43 433.1: a 20 A circuit's device is the next preferred rating at or above 1.25 x 20 = 25 A,
    # 25 A in IEC 60269-1 and 60898-1 (from memory). 1.5 mm2 XLPE in B1 has I_z 23 A < 25 A; 2.5 mm2 has 31 A
    # (IEC 60364-5-52 B.52.4, from memory), and for a gG fuse 1.6 x 25 = 40 A <= 1.45 x 31 = 45 A.
    code, out, _ = run(capsys, "wire", "--current", "20", "--length-m", "1", "--size", "1.5 mm2", "--volts", "230",
                       "--protection", protection, "--json")
    rec = json.loads(out)
    assert code == 0 and rec["size_by_ampacity"] == size and rec["protection_a"] == device
    assert rec["ampacity_a"] == 23.0 and rec["ampacity_limit_a"] == 20.0 and rec["recommended_size"] == size
    assert rec["installation"]["protection"] == protection
    code, out, _ = run(capsys, "wire", "--current", "20", "--length-m", "1", "--size", "1.5 mm2", "--volts", "230")
    assert "433.1" in out and "25 A" in out
    code, _, err = run(capsys, "wire", "--current", "20", "--length-m", "1", "--size", "1.5 mm2", "--protection", "x")
    assert code == 2 and "--protection" in err


@pytest.mark.parametrize("args, words", [
    (["wire", EXAMPLE, "--material", "aluminium"], "--material"),
    (["wire", EXAMPLE, "--parallel", "3"], "--parallel"),
    (["wire", "--current", "20", "--length-m", "15", "--size", "10 AWG", "--at-mpp"], "--at-mpp"),
    (["wire", "--current", "1e300", "--length-m", "15", "--size", "10 AWG"], "--current"),
    (["wire", "--current", "-5", "--length-m", "15", "--size", "10 AWG"], "--current"),
    (["wire", "--current", "5", "--length-m", "1e9", "--size", "10 AWG"], "--length-m"),
])
def test_wire_refuses_options_of_the_other_mode_and_absurd_values(capsys, args, words):
    code, out, err = run(capsys, *args)
    assert code == 2 and out == "" and err.count("\n") == 1 and words in err


def test_wire_sizes_bank_runs_at_the_charge_current(capsys):
    code, out, _ = run(capsys, "wire", str(DATA / "example-cabin-mppt.toml"), "--budget-pct", "2", "--json")
    rec = json.loads(out)
    runs = {r["name"]: r for r in rec["runs"]}
    feeder, bank_run = runs["array to controller"], runs["controller to bank"]
    # Behind a tracker the bank cable carries the charge current at the bank's voltage.
    assert bank_run["current_a"] > 2 * feeder["current_a"]
    assert bank_run["circuit_v"] < 35.0 < feeder["circuit_v"]


def test_point_with_a_bank_reports_charging(capsys):
    code, out, _ = run(capsys, "point", str(DATA / "example-cabin-mppt.toml"), "--json")
    rec = json.loads(out)
    assert code == 0
    for key in ("charge_current_a", "stage", "stored_w", "curtailed_w", "losses_w"):
        assert key in rec
    assert set(rec["losses_w"]) >= {"array_cables", "controller", "bank_cables", "bank_internal"}
    parts = rec["losses_w"]
    assert rec["generated_w"] == pytest.approx(parts["array_cables"] + parts["controller"] + parts["bank_cables"]
                                               + parts["bank_internal"] + rec["stored_w"], rel=1e-9)
    code, out, _ = run(capsys, "point", str(DATA / "example-cabin-mppt.toml"))
    assert "Charging" in out and "stage" in out


@pytest.mark.parametrize("edit, field", [
    (("soc = 0.55", "soc = 1.5"), "[bank].soc"),
    (('chemistry = "lfp"', 'chemistry = "unobtainium"'), "[bank].chemistry"),
    (("max_input_v = 150", "max_input_v = 24"), "[controller].max_input_v"),
])
def test_bad_bank_or_controller_values_exit_2_with_one_line(capsys, tmp_path, edit, field):
    text = (DATA / "example-cabin-mppt.toml").read_text().replace(
        'file = "modules/ashgrove-ag300.toml"', f'file = "{(DATA / "modules" / "ashgrove-ag300.toml").as_posix()}"')
    assert edit[0] in text
    path = tmp_path / "bank.toml"
    path.write_text(text.replace(*edit))
    code, out, err = run(capsys, "point", str(path))
    assert code == 2 and out == "" and err.count("\n") == 1 and field in err and "Traceback" not in err


def _cabin(tmp_path, old="", new=""):
    text = (DATA / "example-cabin-mppt.toml").read_text().replace(old, new)
    path = tmp_path / "cabin.toml"
    path.write_text(text.replace('file = "modules/ashgrove-ag300.toml"',
                                 f'file = "{(DATA / "modules" / "ashgrove-ag300.toml").as_posix()}"'))
    return str(path)


def test_check_exit_codes(capsys, tmp_path):
    # Exit 0 when every check passes (the controller's output note is advisory),
    # 1 when one fails, 2 on bad input: the convention of verifying tools.
    code, out, _ = run(capsys, "check", _cabin(tmp_path), "--min-temp", "-20", "--max-temp", "38", "--json")
    rec = json.loads(out)
    assert code == 0 and rec["all_passed"] is True
    power = next(c for c in rec["checks"] if c["name"] == "controller_output_power")
    assert power["advisory"] is True and power["passed"] is False and power["verdict"] == "advisory"
    # By hand: 6 modules' STC power, above 40 A x 28.4 V = 1136 W, is clipped energy, not a failure.
    assert power["limit"] == pytest.approx(40 * 28.4) and power["value"] > power["limit"]
    # NEC 690.7(A)(1): 3 x 40.1 V x 1.1305 = 136.0 V at -20 degC, above a 130 V input.
    code, out, _ = run(capsys, "check", _cabin(tmp_path, "max_input_v = 150", "max_input_v = 130"),
                       "--min-temp", "-20", "--max-temp", "38", "--json")
    assert code == 1 and json.loads(out)["all_passed"] is False
    code, out, err = run(capsys, "check", _cabin(tmp_path), "--min-temp", "-20", "--max-temp", "38",
                         "--install", "buried")
    assert code == 2 and out == "" and "--install" in err and err.count("\n") == 1
    # A pass covers only the checks that had a limit: the text names those that had none.
    code, out, _ = run(capsys, "check", _cabin(tmp_path), "--min-temp", "-20", "--max-temp", "38")
    unchecked = [c["name"] for c in rec["checks"] if c["verdict"] == "none"]
    assert code == 0 and unchecked and "all checks pass" in out
    assert f"{len(unchecked)} not checked, no limit given in the file: {', '.join(unchecked)}" in out


def test_check_names_every_new_check(capsys, tmp_path):
    code, out, _ = run(capsys, "check", _cabin(tmp_path), "--min-temp", "-20", "--max-temp", "38", "--json")
    names = {c["name"] for c in json.loads(out)["checks"]}
    assert {"string_fuse", "controller_input_isc", "controller_output_power", "bank_short_circuit",
            "conductor_current[controller to bank]"} <= names
    for c in json.loads(out)["checks"]:
        assert {"name", "value", "limit", "unit", "passed", "basis", "margin"} <= set(c)


def test_wire_takes_feet(capsys):
    # 50 ft is 15.24 m exactly (the international foot).
    _, out_ft, _ = run(capsys, "wire", "--current", "20", "--length-ft", "50", "--size", "10 AWG", "--json")
    _, out_m, _ = run(capsys, "wire", "--current", "20", "--length-m", "15.24", "--size", "10 AWG", "--json")
    ft, m = json.loads(out_ft), json.loads(out_m)
    assert ft["resistance_ohm"] == pytest.approx(m["resistance_ohm"], rel=1e-12)
    assert ft["length_ft"] == pytest.approx(50.0)
    code, _, err = run(capsys, "wire", "--current", "20", "--length-ft", "50", "--length-m", "15", "--size", "10 AWG")
    assert code == 2 and "--length-ft" in err


def test_wire_system_mode_budgets_each_circuit_apart(capsys):
    code, out, _ = run(capsys, "wire", str(DATA / "example-cabin-mppt.toml"), "--json")
    rec = json.loads(out)
    assert code == 0 and rec["budget_pct"] == 3.0  # the documented default (common practice)
    assert {c["circuit"] for c in rec["circuits"]} == {"pv", "battery"}
    bank = next(r for r in rec["runs"] if r["role"] == "bank")
    # NEC 690.8(A)(1): behind a tracker the bank run carries its 40 A rated output, x 1.25.
    assert bank["max_circuit_current_a"] == 40.0 and bank["design_current_a"] == 50.0
    # Each circuit's drop is its own: the PV side against its own voltage, never added to the bank side.
    pv = next(c for c in rec["circuits"] if c["circuit"] == "pv")
    feeder = next(r for r in rec["runs"] if r["role"] == "feeder")
    assert pv["drop_pct"] == pytest.approx(feeder["drop_pct"])
    for r in rec["runs"]:
        assert r["recommended_size"] in (r["size_by_ampacity"], r["size_by_drop"])
    assert "DC arcs" not in "".join(rec["cautions"]) and "licensed practitioners" in rec["cautions"][-1]


WEATHER_OPTIONS = {"--column", "--tz", "--bad-rows", "--transposition", "--time-label", "--time-format"}


def _options(command: str) -> set:
    import typer.main

    from pvsource.cli import app
    click_command = typer.main.get_command(app).commands[command]
    return {opt for p in click_command.params for opt in getattr(p, "opts", [])}


def test_season_explore_and_fleet_take_the_same_weather_options():
    for command in ("season", "explore", "fleet"):
        assert WEATHER_OPTIONS <= _options(command), command


def test_every_hint_in_a_weather_message_names_an_option_that_exists():
    # A hint that names a missing option sends the user nowhere. Every "--name"
    # written in the weather modules must be an option of the commands that read weather.
    named = set()
    for module in ("weather.py", "sky.py", "season.py"):
        named |= set(re.findall(r"--[a-z][a-z-]+", (ROOT / "pvsource" / module).read_text()))
    assert named, "the scan found no hints at all"
    for command in ("season", "explore", "fleet"):
        assert named <= _options(command), (command, named - _options(command))


def test_demo_days_shortens_the_year(capsys, tmp_path):
    code, out, err = run(capsys, "demo", "--days", "2", "--out", str(tmp_path / "demo"), "--json")
    assert code == 0, err
    rec = json.loads(out)
    # Two days of hourly steps, from the first hour of the synthetic year.
    assert rec["steps"] == 48 and rec["step_h"] == 1.0
    assert rec["start"][:16].replace("T", " ") == "2025-01-01 00:00"
    # Issue 13 section 5: the study shows the cautions that fit it (the demo: a bank, two strings), not all
    # ten, in --json, in the report page and in the terminal; the deferral to local codes closes each.
    from pvsource import cautions
    from pvsource.demo import demo_system
    assert rec["cautions"] == cautions.for_command("season", demo_system())
    assert cautions.DC_ARC not in rec["cautions"] and cautions.STRING_FUSES not in rec["cautions"]
    assert rec["cautions"][-1] == cautions.CLOSING
    from pvsource.report_page import _esc
    page = (tmp_path / "demo" / "report.html").read_text()
    assert all(_esc(c) in page for c in rec["cautions"]) and _esc(cautions.DC_ARC) not in page
    code, out, err = run(capsys, "demo", "--days", "1", "--out", str(tmp_path / "text"))
    assert code == 0 and out.rstrip().endswith(cautions.CLOSING) and cautions.PV_LIVE not in out
    code, out, err = run(capsys, "demo", "--days", "0", "--out", str(tmp_path / "none"))
    assert code == 2 and out == "" and err.count("\n") == 1 and "--days" in err
    assert not (tmp_path / "none").exists()


@pytest.mark.parametrize("command", ["wire", "check"])
def test_help_keeps_the_units_in_brackets(capsys, command):
    # Units in brackets are the project's convention for every option (DEVELOPERS.md); rich markup read
    # "[degC]" and "[m]" as tags and printed "Design cell temperature ;".
    code, text, _ = run_cli(capsys, command, "--help")
    flat = " ".join(text.split())
    assert code == 0 and "Insulation temperature rating [degC]" in flat and "the runs [degC]" in flat
    if command == "wire":
        assert "conductor circuit [m]" in flat and "Design cell temperature [degC]" in flat


def _commands():
    """The click command behind every pvsource subcommand, by name."""
    import typer

    from pvsource.cli import app

    return typer.main.get_command(app).commands


def _flat(text: str) -> str:
    # Help wraps lines at spaces and after hyphens; neither loses a word.
    return re.sub(r"-\s+", "-", " ".join(text.split()))


@pytest.mark.parametrize("name", sorted(_commands()))
def test_every_help_keeps_its_words_lists_its_choices_and_shows_no_bool_value(capsys, name):
    # Help text is read as written: "[degC]" or "[site]" is a unit or a table name, not markup to drop.
    command = _commands()[name]
    code, out, _ = run(capsys, name, "--help")
    assert code == 0
    shown = _flat(out)
    assert _flat(command.help.split("\n\n")[0]) in shown
    for param in command.params:
        if param.help:
            assert _flat(param.help) in shown, (param.name, param.help)
        if getattr(param, "metavar", None):
            assert param.metavar in shown
        # Click keeps a choice on the parameter's type; Typer 0.26+ on its type descriptor.
        choices = (getattr(getattr(param, "type", None), "choices", None)
                   or getattr(getattr(param, "type_descriptor", None), "choices", None))
        if choices:  # a fixed set of values is listed as the set
            assert "|".join(str(getattr(c, "value", c)) for c in choices) in shown
    # On/off switches take no value.
    assert "<bool>" not in out and "BOOLEAN" not in out


def test_the_top_level_help_lists_every_command(capsys):
    code, out, _ = run(capsys, "--help")
    assert code == 0 and "[OPTIONS]" in out
    for name in _commands():
        assert name in out


def test_a_fixed_set_of_values_is_listed_and_enforced(capsys):
    code, out, _ = run(capsys, "season", "--help")
    assert "<fail|fill|skip>" in out and "<perez|haydavies|isotropic>" in out
    code, out, err = run(capsys, "wire", "--current", "20", "--length-m", "15", "--size", "10 AWG",
                         "--material", "aluminium", "--json")
    assert code == 0 and json.loads(out)["material"] == "aluminium"


def test_the_command_lines_fixed_sets_are_the_librarys():
    # The CLI lists these without importing the library; they must not drift apart.
    from pvsource import ampacity, conductors, sky, weather

    assert cli.TRANSPOSITIONS == sky.TRANSPOSITION_MODELS
    assert {m.value for m in cli.BadRows} == set(weather.POLICIES)
    assert {m.value for m in cli.ResistanceBasis} == set(conductors.RESISTANCE_BASES)
    assert tuple(m.value for m in cli.Install) == ampacity.INSTALLS
    assert set(cli.TIME_LABELS) == set(weather.TIME_LABELS)
    assert {conductors.material_properties(m.value).name for m in cli.Material} == {"copper", "aluminium"}


def test_temperature_options_are_named_in_degc():
    # One rule for every command: an option that takes a temperature ends in -c.
    for name, command in _commands().items():
        for param in command.params:
            if param.help and "[degC]" in param.help:
                assert all(opt.endswith("-c") for opt in param.opts), (name, param.opts)


def test_every_option_named_in_a_message_exists():
    # A hint such as "use --bad-rows fill" must name an option the tool has.
    known = set(cli.OPTION_ALIASES) | {"--help", "--version"}
    for command in _commands().values():
        for param in command.params:
            known.update(opt for opt in param.opts if opt.startswith("--"))
    for path in sorted((ROOT / "pvsource").glob("*.py")):
        if path.name == "report_page.py":  # HTML and CSS (custom properties are --name too), no messages
            continue
        for option in re.findall(r"(?<![\w-])--[a-z][a-z0-9-]*", path.read_text()):
            assert option in known, (path.name, option)


def test_importing_the_command_line_loads_no_numerical_library():
    # --version and --help answer at once because these load only inside the commands
    # (bench/bench_startup.py measures the times).
    code = ("import sys\nfrom pvsource.cli import main\n"
            "for args in (['--version'], ['--help'], ['season', '--help'], ['wire', '--help']):\n"
            "    try:\n        main(args)\n    except SystemExit:\n        pass\n"
            "heavy = ('pandas', 'pvlib', 'scipy', 'matplotlib', 'numba', 'pyarrow', 'numpy', 'rich')\n"
            "sys.stderr.write(repr(sorted(m for m in heavy if m in sys.modules)))\n")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert proc.returncode == 0 and proc.stderr == "[]", proc.stderr
    # The library's names still load on first use.
    proc = subprocess.run([sys.executable, "-c", "import pvsource; print(pvsource.load_system.__module__)"],
                          capture_output=True, text=True, cwd=ROOT)
    assert proc.stdout.strip() == "pvsource.config"


@pytest.mark.parametrize("typed, name", [
    ("bank-voltage", "bank_emf_v"), ("bank_emf_v", "bank-emf-v"), ("cell-temp", "cell_temp_c"),
    ("irradiance", "irradiance_w_m2"), ("modules", "modules_per_string"), ("load-resistance", "load_resistance_ohm"),
    ("bank-class", "bank_class_v"), ("size:array to bank", "size:array to bank"),
])
def test_sweep_variables_take_one_spelling_and_the_earlier_names(typed, name):
    from pvsource.sweep import variable_name

    assert variable_name(typed) == variable_name(name)
    assert variable_name(name) in ("size:array to bank", *__import__("pvsource.sweep").sweep.VARIABLES)


def test_sweep_and_explore_spell_their_shared_variables_alike():
    from pvsource.explore import VARY_KEYS
    from pvsource.sweep import VARIABLES

    assert {"modules_per_string", "bank_class_v", "size:RUN"} <= set(VARY_KEYS) & set(VARIABLES)
    for names in (VARY_KEYS, VARIABLES):
        assert all(n == n.lower() and "-" not in n for n in names if n != "size:RUN")


@pytest.mark.parametrize("typed", ["bank_class_v", "bank-class-v", "bank-class", "bank_class"])
def test_sweep_over_and_explore_vary_read_one_spelling_alike_and_say_the_canonical_one(capsys, typed):
    # Issue 12 §7: a variable is spelt the same in both commands, and both show the canonical name.
    from pvsource.config import load_system
    from pvsource.explore import parse_vary

    code, out, err = run(capsys, "sweep", CABIN, "--over", typed, "--from", "12", "--to", "48", "--json")
    assert code == 0, err
    assert json.loads(out)["variable"] == "bank_class_v"
    code, out, err = run(capsys, "sweep", CABIN, "--over", typed, "--from", "12", "--to", "48")
    assert code == 0 and out.startswith("pvsource sweep over bank_class_v:"), err
    assert list(parse_vary([f"{typed}=12,48"], load_system(CABIN))) == ["bank_class_v"]


def test_a_name_means_one_thing_in_both_commands(capsys):
    # "bank-voltage" was the resting voltage in sweep and the nominal class in explore. It is now the
    # resting voltage everywhere; explore, which cannot vary it, says how it read the name, in one line.
    from pvsource.names import VARIABLE_ALIASES
    from pvsource.sweep import variable_name

    assert variable_name("bank-voltage") == VARIABLE_ALIASES["bank_voltage"] == "bank_emf_v"
    code, _, err = run(capsys, "explore", CABIN, "w.csv", "--vary", "bank-voltage=12,24", "--out", "nowhere",
                       "--price-per-kg", "12", "--energy-value", "0.3")
    assert code == 2 and err.count("\n") == 1
    assert "--vary: unknown key 'bank-voltage' (read as 'bank_emf_v', which --vary does not take)" in err
    assert "bank_class_v" in err


def test_a_misspelt_variable_suggests_the_nearest(capsys):
    code, out, err = run(capsys, "sweep", EXAMPLE, "--over", "bank_emv_v", "--from", "20", "--to", "30")
    assert code == 2 and err.count("\n") == 1 and "--over" in err and "did you mean 'bank_emf_v'" in err


def test_an_unlikely_value_runs_with_a_one_line_note(capsys, tmp_path):
    # kW/m2 typed as W/m2: possible (dusk light), so the command runs, and says what was probably meant.
    code, out, err = run(capsys, "point", EXAMPLE, "--irradiance-w-m2", "1.0", "--json")
    assert code == 0 and json.loads(out)["groups"][0]["irradiance_w_m2"] == 1.0
    assert err.count("\n") == 1 and err.startswith("pvsource: note: --irradiance-w-m2: ") and "1000 W/m2" in err
    path = _bad_file(tmp_path, GOOD.replace("irradiance_w_m2 = 800", "irradiance_w_m2 = 0.7"))
    code, out, err = run(capsys, "point", path, "--json")
    assert code == 0 and err.startswith(f"pvsource: note: {path}: [array].irradiance_w_m2: ") and "700 W/m2" in err


def test_check_does_not_pass_runs_it_cannot_judge(capsys, tmp_path):
    # The two-faces example gives its runs by resistance_ohm_per_km only: no size, so no ampacity. Before,
    # check said "nothing to compare" and exited 0; now each run is an unverified finding and exit 1.
    code, out, _ = run(capsys, "check", TWO_FACES, "--min-air-c", "-20", "--max-air-c", "40", "--json")
    rec = json.loads(out)
    unverified = [c["name"] for c in rec["checks"] if c["verdict"] == "unverified"]
    assert code == 1 and rec["verdict"] == "unverified" and rec["all_passed"] is False
    assert unverified == ["conductor_current[east home run]", "conductor_current[west home run]",
                          "conductor_current[combiner to tracker]"]
    code, out, _ = run(capsys, "check", TWO_FACES, "--min-air-c", "-20", "--max-air-c", "40")
    assert code == 1 and "[UNVERIFIED] conductor_current[east home run]" in out and "NOT VERIFIED" in out
    # Each run's own rating makes it checkable: 2 strings x 9.8 A x 1.5625 = 30.6 A on the east home run
    # (NEC 690.8) against 35 A, and so on; nothing else has a limit, so the result is a pass.
    text = (DATA / "example-two-faces.toml").read_text().replace(
        'file = "modules/ashgrove-ag300.toml"', f'file = "{(DATA / "modules" / "ashgrove-ag300.toml").as_posix()}"')
    text = text.replace("resistance_ohm_per_km = 5.09\n", "resistance_ohm_per_km = 5.09\nampacity_a = 35\n")
    text = text.replace("resistance_ohm_per_km = 5.09    # about 4 mm2 copper\n",
                        "resistance_ohm_per_km = 5.09\nampacity_a = 35\n")
    text = text.replace("resistance_ohm_per_km = 1.95    # about 10 mm2 copper\n",
                        "resistance_ohm_per_km = 1.95\nampacity_a = 50\n")
    path = tmp_path / "rated.toml"
    path.write_text(text)
    code, out, _ = run(capsys, "check", str(path), "--min-air-c", "-20", "--max-air-c", "40", "--json")
    rec = json.loads(out)
    assert code == 0 and rec["verdict"] == "pass" and rec["all_passed"] is True


def test_check_names_each_controllers_checks(capsys):
    # The east/west example: each face on its own tracker. 3 modules x 40.1 V x
    # (1 + 0.0029 x 40) = 134.3 V at -15 degC (NEC 690.7(A)(1), by hand) on each.
    code, out, _ = run(capsys, "check", str(DATA / "example-east-west.toml"), "--min-air-c", "-15",
                       "--max-air-c", "38", "--json")
    rec = json.loads(out)
    by_name = {c["name"]: c for c in rec["checks"]}
    for tracker in ("east tracker", "west tracker"):
        voc = by_name[f"max_string_voc[{tracker}]"]
        assert voc["value"] == pytest.approx(3 * 40.1 * 1.116) and voc["controller"] == tracker
        assert by_name[f"controller_input_isc[{tracker}]"]["value"] == pytest.approx(1.25 * 1 * 9.8)
    assert code == 0 and rec["all_passed"] is True


@pytest.mark.parametrize("option, value", [
    ("--bank-price-per-kwh", "-5"), ("--bank-price-per-kwh", "nan"), ("--fuel-price-per-l", "inf"),
    ("--fuel-price", "-1"), ("--unmet-value-per-kwh", "1e9"), ("--unmet-value", "lots"), ("--years", "0"),
])
def test_explore_refuses_a_bad_price_in_one_line_before_writing(capsys, tmp_path, option, value):
    # The issue's shorter spellings (--fuel-price, --unmet-value) are read as the unit-named options,
    # and a message names the option as --help shows it.
    out = tmp_path / "out"
    code, _, err = run(capsys, "explore", CABIN, "w.csv", "--vary", "tilt_deg=20", "--out", str(out),
                       "--price-per-kg", "12", "--energy-value", "0.3", option, value)
    shown = {"--fuel-price": "--fuel-price-per-l", "--unmet-value": "--unmet-value-per-kwh"}.get(option, option)
    assert code == 2 and err.count("\n") == 1 and err.startswith("pvsource: error: ") and shown in err, err
    assert not out.exists()


def test_explore_help_names_every_cost_and_its_default(capsys):
    code, out, _ = run(capsys, "explore", "--help")
    text = " ".join(out.split())
    assert code == 0
    for words in ("--bank-price-per-kwh", "nominal energy (capacity x nominal voltage)", "--fuel-price-per-l",
                  "--unmet-value-per-kwh", "Default 10: a well-kept bank's service life"):
        assert words in text, words


def test_point_json_lists_each_controller_and_the_bank_current_is_their_sum(capsys):
    code, out, _ = run(capsys, "point", str(DATA / "example-east-west.toml"), "--json")
    rec = json.loads(out)
    assert code == 0
    names = [c["name"] for c in rec["controllers"]]
    assert names == ["east tracker", "west tracker"]
    for c in rec["controllers"]:
        assert {"name", "charge_current_a", "stage", "limit", "input_v", "curtailed_w", "loss_w"} <= set(c)
    # Kirchhoff's current law at the bank's terminals: the bank takes the controllers' sum.
    assert rec["charge_current_a"] == pytest.approx(sum(c["charge_current_a"] for c in rec["controllers"]),
                                                    rel=1e-12)
    assert abs(rec["residuals"]["energy_balance"]) < 1e-9
    code, out, _ = run(capsys, "point", str(DATA / "example-east-west.toml"))
    assert "east tracker (mppt)" in out and "the controllers' sum" in out


def test_battery_side_metric_runs_default_to_a_gg_fuse(capsys):
    # Common practice: a battery circuit's fuse is often a gG fuse (IEC 60269-1), and its conventional
    # operating current I_2 = 1.6 I_n (from 16 A; from memory) asks more of the conductor than a gPV fuse's or
    # a breaker's 1.45 I_n, so the battery side is sized for it unless told otherwise. IEC 60364-4-43 433.1
    # worked by hand for the hut's bank run, I_max 40 A (its controller's output): I_B = 50 A, I_n = 50 A;
    # gPV: I_z >= 50 A, so 6 mm2 (54 A); gG: 1.6 x 50 = 80 A <= 1.45 I_z, so I_z >= 55.2 A and 10 mm2
    # (75 A). I_z: IEC 60364-5-52 B.52.4, XLPE, method B1 (from memory, as in test_ampacity).
    from test_ampacity import IEC_60269_1_RATINGS, _433_by_hand

    iz = {"6 mm2": 54.0, "10 mm2": 75.0, "16 mm2": 100.0}
    gg = lambda r: 2.1 if r <= 4 else 1.9 if r < 16 else 1.6  # noqa: E731
    hut = str(DATA / "example-hut-generator.toml")
    code, out, _ = run(capsys, "wire", hut, "--json")
    assert code == 0
    rec = json.loads(out)
    runs = {r["name"]: r for r in rec["runs"]}
    bank, feeder = runs["controller to bank"], runs["array to controller"]
    assert bank["max_circuit_current_a"] == 40.0 and bank["protection"] == "gg" and bank["protection_a"] == 50.0
    assert bank["size_by_ampacity"] == _433_by_hand(40.0, iz, IEC_60269_1_RATINGS, gg) == "10 mm2"
    assert feeder["protection"] == "gpv"  # the PV side keeps the device made for it
    assert rec["installation_defaults"]["protection"] == {"pv": "gpv", "battery": "gg"}
    code, out, _ = run(capsys, "wire", hut)
    assert "needs a gG fuse (IEC 60269-1) of 50 A" in out and "gPV fuse (IEC 60269-6) of 32 A" in out
    # Told the device, the command uses it on both sides.
    code, out, _ = run(capsys, "wire", hut, "--protection", "gpv", "--json")
    bank = {r["name"]: r for r in json.loads(out)["runs"]}["controller to bank"]
    assert bank["protection"] == "gpv"
    assert bank["size_by_ampacity"] == _433_by_hand(40.0, iz, IEC_60269_1_RATINGS, lambda r: 1.45) == "6 mm2"


def test_wire_and_check_say_which_figure_binds(capsys):
    # 20 A over 10 m of 10 AWG at 48 V: 0.0814 ohm loop (NEC Chapter 9 Table 8 at 75 degC, as wire reports)
    # drops 3.4 % > 3 %, so the drop sets the size; over 1 m the drop is small and ampacity sets it. 10 AWG
    # copper's 75 degC column is 35 A (NEC 310.16, from memory), below 1.25 x 40 A: the terminations bind.
    code, out, _ = run(capsys, "wire", "--current", "20", "--length-m", "10", "--size", "10 AWG", "--volts", "48")
    assert code == 0 and "recommended 8 AWG (set by voltage drop)" in out
    assert "may be 35.0 A at most (its terminations' column, NEC 110.14(C))" in out
    code, out, _ = run(capsys, "wire", "--current", "20", "--length-m", "1", "--size", "10 AWG", "--volts", "48",
                       "--json")
    rec = json.loads(out)
    assert rec["recommended_size"] == rec["size_by_ampacity"] == "10 AWG" and rec["ampacity_limit_by"] == "terminations"
    # check's table of design currents gives the limit the check compares with, and what sets it.
    code, out, _ = run(capsys, "check", str(DATA / "example-cabin-mppt.toml"), "--min-air-c", "-20", "--max-air-c", "40",
                       "--json")
    currents = json.loads(out)["design_currents"]
    code, text, _ = run(capsys, "check", str(DATA / "example-cabin-mppt.toml"), "--min-air-c", "-20", "--max-air-c",
                        "40")
    for d in currents:
        assert d["ampacity_limit_by"] in ("device", "terminations", "ampacity", "rating")
        assert f"limit {d['ampacity_limit_a']:.1f} A" in text


def test_a_bank_too_cold_to_charge_is_named_and_no_drift_percentage_is_made_up(capsys, tmp_path):
    # Common practice: lithium is not charged below 0 degC, so at -5 degC the tracker holds the array at open
    # circuit. The limit names the cold, and the linear model's error, a share of the operating current, is
    # undefined where no current flows (the solver's 1e-13 A once gave 9e15 %).
    text = (DATA / "example-hut-generator.toml").read_text(encoding="utf-8")
    text = text.replace("temp_c = 15", "temp_c = -5").replace('file = "modules/', f'file = "{DATA.as_posix()}/modules/')
    cold = tmp_path / "cold.toml"
    cold.write_text(text, encoding="utf-8")
    code, out, _ = run(capsys, "point", str(cold), "--irradiance-w-m2", "800", "--cell-temp-c", "10", "--json")
    rec = json.loads(out)
    assert code == 0 and rec["charge_current_a"] == 0.0
    assert rec["limit"] == "bank below its minimum charging temperature: charging blocked"
    assert "charge_below_min_temp" in [a["name"] for a in rec["alerts"]]
    assert [rec["linear_drift"][k]["error_fraction_of_i"] for k in ("low", "high")] == [None, None]
    code, out, _ = run(capsys, "point", str(cold), "--irradiance-w-m2", "800", "--cell-temp-c", "10")
    assert "error n/a (no current at the operating point)" in out and "e+" not in out
