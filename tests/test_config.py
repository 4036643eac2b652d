"""System and datasheet files: what is accepted, and how bad files are refused."""

import pytest

from pvsource.config import load_module, load_system
from pvsource.errors import InputError

from conftest import DATA

GOOD = """
name = "test"
[module]
v_oc = 40.1
i_sc = 9.8
v_mp = 33.0
i_mp = 9.2
isc_temp_coeff_pct = 0.05
voc_temp_coeff_pct = -0.29
cells_in_series = 60

[array]
modules_per_string = 3
strings = 2

[[cable]]
length_m = 12
resistance_ohm_per_km = 3.4

[load]
kind = "battery"
emf_v = 25.6
resistance_ohm = 0.03
"""


def write(tmp_path, text, name="system.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_the_issue_form_is_accepted(tmp_path):
    system = load_system(write(tmp_path, GOOD))
    assert system.groups[0].modules_per_string == 3 and system.groups[0].strings == 2
    assert system.cables[0].role == "feeder"
    assert system.wiring.r_feeder_ohm == pytest.approx(2 * 12 * 3.4 / 1000)
    assert system.load.kind == "battery" and system.load.emf_v == 25.6


def test_shipped_examples_load():
    one = load_system(DATA / "example-system.toml")
    two = load_system(DATA / "example-two-faces.toml")
    assert one.module.fit.method == "six_parameter"
    assert two.group_names == ("east", "west")
    assert two.wiring.r_home_ohm[1] == pytest.approx(2 * 15 * 5.09 / 1000)


def test_a_system_without_a_load_works_at_the_mpp(tmp_path):
    text = GOOD.split("[load]")[0]
    assert load_system(write(tmp_path, text)).load.kind == "mpp"


def test_explicit_single_diode_parameters_are_accepted(tmp_path):
    text = """
[module]
i_l_ref_a = 9.81
i_o_ref_a = 2.2e-11
r_s_ohm = 0.27
r_sh_ref_ohm = 211.0
a_ref_v = 1.497
alpha_sc_a_per_c = 0.0049
cells_in_series = 60
[array]
modules_per_string = 2
strings = 1
"""
    system = load_system(write(tmp_path, text))
    assert system.module.fit.method == "given"
    assert system.module.fit.stc["v_oc"] == pytest.approx(40.1, rel=0.01)


def test_datasheet_file_for_fit():
    m = load_module(DATA / "modules" / "ashgrove-ag300.toml")
    assert m.name.startswith("Ashgrove")


BAD_CASES = {
    "missing key": (GOOD.replace("strings = 2\n", ""), "[array].strings", "missing"),
    "unknown key": (GOOD.replace("strings = 2", "strings = 2\nstirngs = 3"), "[array].stirngs", "unknown key"),
    "negative length": (GOOD.replace("length_m = 12", "length_m = -12"), "[[cable]] #1.length_m", "greater than zero"),
    "v_mp above v_oc": (GOOD.replace("v_mp = 33.0", "v_mp = 41.0"), "[module].v_mp", "below v_oc"),
    "text for a number": (GOOD.replace("emf_v = 25.6", 'emf_v = "abc"'), "[load].emf_v", "expected a number"),
    "unknown load kind": (GOOD.replace('kind = "battery"', 'kind = "supercap"'), "[load].kind", "expected one of"),
    "zero strings": (GOOD.replace("strings = 2", "strings = 0"), "[array].strings", "greater than zero"),
    "fractional modules": (GOOD.replace("modules_per_string = 3", "modules_per_string = 2.5"),
                           "[array].modules_per_string", "whole number"),
    "infinite irradiance": (GOOD.replace("strings = 2", "strings = 2\nirradiance_w_m2 = inf"),
                            "[array].irradiance_w_m2", "finite"),
    "unknown section": (GOOD + "\n[inverter]\nsize = 3\n", "[inverter]", "unknown section"),
    "no module": (GOOD.split("[array]")[0].split("[module]")[0] + "[array]" + GOOD.split("[array]")[1],
                  "[module]", "missing"),
    "both forms of module": (GOOD.replace("cells_in_series = 60", "cells_in_series = 60\nr_s_ohm = 0.2"),
                             "[module]", "not both"),
    "cable for a missing group": (GOOD.replace("length_m = 12", 'group = "north"\nlength_m = 12'),
                                  "[[cable]] #1.group", "no group named"),
    "array and groups": (GOOD + '\n[[group]]\nname = "x"\nmodules_per_string = 1\nstrings = 1\n', "[array]",
                         "not both"),
}


@pytest.mark.parametrize("case", sorted(BAD_CASES))
def test_bad_system_files_name_the_file_and_the_field(tmp_path, case):
    text, field, words = BAD_CASES[case]
    path = write(tmp_path, text)
    with pytest.raises(InputError) as exc:
        load_system(path)
    assert exc.value.where == str(path)
    assert exc.value.field == field
    assert words in exc.value.expected
    assert "\n" not in str(exc.value)


@pytest.mark.parametrize("content, words", [
    (b"", "is empty"),
    (b"\x00\x01\xff\xfe binary", "not UTF-8"),
    (b"[module]\n[module]\nv_oc = 1\n", "not valid TOML"),
    (b"name = \n", "not valid TOML"),
])
def test_unreadable_files_are_refused_in_one_line(tmp_path, content, words):
    path = tmp_path / "bad.toml"
    path.write_bytes(content)
    with pytest.raises(InputError) as exc:
        load_system(path)
    assert words in str(exc.value) and str(path) in str(exc.value)
    assert "\n" not in str(exc.value)


def test_a_missing_file_is_named(tmp_path):
    with pytest.raises(InputError, match="cannot be read"):
        load_system(tmp_path / "nowhere.toml")


def test_cables_by_size_and_material(tmp_path):
    text = GOOD.replace("resistance_ohm_per_km = 3.4", 'size = "4 AWG"\nmaterial = "aluminium"\ntemp_c = 50')
    run = load_system(write(tmp_path, text)).cables[0]
    # NEC Chapter 9 Table 8: 4 AWG aluminium 0.508 ohm/kft at 75 degC (from memory),
    # corrected to 50 degC with the Table 8 note formula (alpha 0.00330).
    expected_per_km = 0.508 / 0.3048 * (1 + 0.00330 * (50 - 75))
    assert run.resistance_ohm_per_km == pytest.approx(expected_per_km, rel=1e-9)
    assert run.size.label == "4 AWG" and run.material == "aluminium"


def test_metric_run_uses_iec_60228_unless_asked_to_compute(tmp_path):
    text = GOOD.replace("resistance_ohm_per_km = 3.4", 'size = "50 mm2"\ntemp_c = 20')
    run = load_system(write(tmp_path, text)).cables[0]
    # IEC 60228 Table 2: 50 mm2 class 2 plain copper, 0.387 ohm/km at 20 degC (from memory).
    assert run.resistance_ohm_per_km == pytest.approx(0.387, rel=1e-9)
    assert "IEC 60228" in run.resistance_source
    computed_text = text.replace('size = "50 mm2"', 'size = "50 mm2"\nresistance_basis = "computed"')
    computed = load_system(write(tmp_path, computed_text)).cables[0]
    # First principles: 1/58 ohm mm2/m (IEC 60028) / 50 mm2 x 1.02 stranding = 0.3517 ohm/km.
    assert computed.resistance_ohm_per_km == pytest.approx(0.017241 / 50 * 1.02 * 1000, rel=1e-4)


def test_a_given_resistance_wins_over_the_size(tmp_path):
    text = GOOD.replace("resistance_ohm_per_km = 3.4", 'resistance_ohm_per_km = 3.4\nsize = "6 mm2"')
    run = load_system(write(tmp_path, text)).cables[0]
    assert run.resistance_ohm_per_km == 3.4 and run.size.label == "6 mm2"


@pytest.mark.parametrize("edit, field, words", [
    (("resistance_ohm_per_km = 3.4", 'size = "banana"'), "[[cable]] #1.size", "accepted forms"),
    (("resistance_ohm_per_km = 3.4", 'size = "6 mm2"\nmaterial = "gold"'), "[[cable]] #1.material", "one of"),
    (("resistance_ohm_per_km = 3.4", ""), "[[cable]] #1.size", "is missing"),
    (("resistance_ohm_per_km = 3.4", 'size = "6 mm2"\nrole = "sideways"'), "[[cable]] #1.role", "one of"),
    (("resistance_ohm_per_km = 3.4", 'size = "6 mm2"\nconductor_class = 3'), "[[cable]] #1.conductor_class",
     "IEC 60228"),
    (("resistance_ohm_per_km = 3.4", 'size = "6 mm2"\nampacity_a = -5'), "[[cable]] #1.ampacity_a", "greater"),
    (("resistance_ohm_per_km = 3.4", 'size = "6 mm2"\nresistance_basis = "guess"'), "[[cable]] #1.resistance_basis",
     "table"),
    (("resistance_ohm_per_km = 3.4", 'size = "6 mm2"\ninsulation_c = 75'), "[[cable]] #1.insulation_c", "IEC 60364-5-52"),
    (("resistance_ohm_per_km = 3.4", 'size = "10 AWG"\ninstall = "C"'), "[[cable]] #1.install", "IEC method"),
    (("resistance_ohm_per_km = 3.4", 'size = "10 AWG"\ninstall = "buried"'), "[[cable]] #1.install", "one of"),
    (("resistance_ohm_per_km = 3.4", 'size = "10 AWG"\nconductors_together = 0'), "[[cable]] #1.conductors_together",
     "greater"),
    (("resistance_ohm_per_km = 3.4", 'size = "10 AWG"\nambient_c = 95'), "[[cable]] #1.ambient_c", "-50 to 85"),
    (("resistance_ohm_per_km = 3.4", 'size = "6 mm2"\nprotection = "gL"'), "[[cable]] #1.protection", "one of"),
    (("resistance_ohm_per_km = 3.4", 'size = "10 AWG"\nprotection = "gg"'), "[[cable]] #1.protection", "NEC 240"),
])
def test_bad_cable_tables(tmp_path, edit, field, words):
    with pytest.raises(InputError) as exc:
        load_system(write(tmp_path, GOOD.replace(*edit)))
    assert exc.value.field == field and words in exc.value.expected


def test_a_run_may_give_its_length_in_feet(tmp_path):
    # The international foot is 0.3048 m exactly (1959 international yard and pound agreement): 100 ft = 30.48 m.
    import re
    text = re.sub(r"length_m = [0-9.]+", "length_ft = 100", GOOD, count=1)
    assert text != GOOD
    run = load_system(write(tmp_path, text)).cables[0]
    assert run.length_m == pytest.approx(30.48, rel=1e-12)
    with pytest.raises(InputError) as exc:
        load_system(write(tmp_path, text.replace("length_ft = 100", "length_ft = 100\nlength_m = 30")))
    assert exc.value.field.endswith("length_ft") and "not both" in exc.value.expected


def test_a_run_names_its_protective_device(tmp_path):
    run = load_system(write(tmp_path, GOOD.replace("resistance_ohm_per_km = 3.4",
                                                   'size = "6 mm2"\nprotection = "breaker"'))).cables[0]
    assert dict(run.installed)["protection"] == "breaker"


def test_controller_limits(tmp_path):
    system = load_system(write(tmp_path, GOOD + "\n[controller]\nmax_input_v = 150\nmin_input_v = 30\n"))
    assert system.controller.max_input_v == 150 and system.controller.min_input_v == 30
    with pytest.raises(InputError, match="below max_input_v"):
        load_system(write(tmp_path, GOOD + "\n[controller]\nmax_input_v = 30\nmin_input_v = 150\n"))
    with pytest.raises(InputError, match="unknown key"):
        load_system(write(tmp_path, GOOD + "\n[controller]\nmax_input_volts = 30\n"))


BANK = GOOD.split("[load]")[0] + """
[controller]
kind = "mppt"
max_input_v = 150
max_output_a = 40

[bank]
chemistry = "lfp"
cells_in_series = 8
strings = 1
capacity_ah = 280
soc = 0.5
temp_c = 20
"""


def test_bank_and_controller_sections(tmp_path):
    system = load_system(write(tmp_path, BANK))
    assert system.bank.chemistry.key == "lfp" and system.bank.cells_in_series == 8
    assert system.controller.kind == "mppt" and system.controller.max_output_a == 40
    with_overrides = BANK + "\n[bank.overrides]\nabsorption_v_per_cell = 3.5\n"
    assert load_system(write(tmp_path, with_overrides)).bank is not None
    # Without air_offset_c the bank stays at temp_c through a season; with it, it follows the air.
    assert system.bank.air_offset_c is None
    shed = load_system(write(tmp_path, BANK.replace("temp_c = 20", "temp_c = 20\nair_offset_c = 3")))
    assert shed.bank.air_offset_c == 3.0 and shed.bank.temp_c == 20.0
    with pytest.raises(InputError, match="did you mean 'air_offset_c'"):
        load_system(write(tmp_path, BANK.replace("temp_c = 20", "temp_c = 20\nair_ofset_c = 3")))


@pytest.mark.parametrize("edit, field, words", [
    (("soc = 0.5", "soc = 1.5"), "[bank].soc", "at most 1"),
    (('chemistry = "lfp"', 'chemistry = "sodium"'), "[bank].chemistry", "expected one of"),
    (("max_input_v = 150", "max_input_v = 20"), "[controller].max_input_v", "absorption"),
    (('kind = "mppt"', 'kind = "magic"'), "[controller].kind", "expected one of"),
    (("capacity_ah = 280", "capacity_ah = -280"), "[bank].capacity_ah", "greater than zero"),
    (("strings = 1\ncapacity", "strings = 0\ncapacity"), "[bank].strings", "greater than zero"),
    (("temp_c = 20", "temp_c = 20\nair_offset_c = 55"), "[bank].air_offset_c", "at most 40"),
    (("temp_c = 20", "temp_c = 20\nair_offset_c = \"warm\""), "[bank].air_offset_c", "expected a number"),
])
def test_bad_bank_and_controller_values(tmp_path, edit, field, words):
    assert edit[0] in BANK
    with pytest.raises(InputError) as exc:
        load_system(write(tmp_path, BANK.replace(*edit)))
    assert exc.value.field == field and words in exc.value.expected


def test_bank_needs_a_controller_kind_and_excludes_a_load(tmp_path):
    with pytest.raises(InputError, match="needs a controller"):
        load_system(write(tmp_path, BANK.replace('kind = "mppt"\n', "").replace("max_output_a = 40\n", "")))
    with pytest.raises(InputError, match="give one or the other"):
        load_system(write(tmp_path, BANK + '\n[load]\nkind = "mpp"\n'))
    with pytest.raises(InputError, match="unknown override|overrides"):
        load_system(write(tmp_path, BANK + "\n[bank.overrides]\nvoltage_boost = 3\n"))


def test_a_run_carries_its_installation_and_protection(tmp_path):
    from pvsource.wiring import run_ampacity
    text = GOOD.replace("resistance_ohm_per_km = 3.4", 'size = "10 AWG"\nambient_c = 45\nconductors_together = 6\n'
                                                       'fuse_a = 30\nfuse_interrupting_a = 10000')
    run = load_system(write(tmp_path, text)).cables[0]
    assert (run.fuse_a, run.fuse_interrupting_a) == (30.0, 10000.0)
    # NEC 310.16 90 degC 40 A x 310.15(B)(1) 0.87 (41-45 degC) x 310.15(C)(1) 0.80 = 27.84 A.
    assert run_ampacity(run).corrected_a == pytest.approx(27.84)


# --- Units, typos and names in messages -------------------------------------------------------------


def _edited(tmp_path, old, new, text=GOOD):
    assert old in text
    return write(tmp_path, text.replace(old, new, 1))


def test_kw_per_m2_typed_as_w_per_m2_is_loaded_with_a_note(tmp_path, caplog):
    path = _edited(tmp_path, "strings = 2\n", "strings = 2\nirradiance_w_m2 = 0.7\n")
    with caplog.at_level("WARNING", logger="pvsource"):
        system = load_system(path)
    assert system.groups[0].irradiance_w_m2 == 0.7  # possible (dusk), so loaded as written
    (message,) = [r.getMessage() for r in caplog.records]
    assert str(path) in message and "[array].irradiance_w_m2" in message
    assert "kW/m2" in message and "700 W/m2" in message  # 0.7 kW/m2 = 700 W/m2
    caplog.clear()
    with caplog.at_level("WARNING", logger="pvsource"):
        load_system(_edited(tmp_path, "strings = 2\n", "strings = 2\nirradiance_w_m2 = 800\n"))
    assert not caplog.records  # a sunny design point needs no remark


@pytest.mark.parametrize("value, words", [
    (150, ["degF", "65.6 degC"]),   # (150 - 32) x 5/9 = 65.6 (the Fahrenheit scale's definition)
    (318, ["kelvin", "44.9 degC"]),  # 318 - 273.15 = 44.85 (the kelvin's definition)
    (-100, []),                      # neither: no guess offered
])
def test_a_temperature_impossible_in_degc_names_the_likely_unit(tmp_path, value, words):
    path = _edited(tmp_path, "strings = 2\n", f"strings = 2\ncell_temp_c = {value}\n")
    with pytest.raises(InputError, match=r"\[array\]\.cell_temp_c") as exc:
        load_system(path)
    for word in words:
        assert word in str(exc.value)
    if not words:
        assert "degF" not in str(exc.value) and "kelvin" not in str(exc.value)


def test_an_illuminance_in_lux_is_refused_as_such(tmp_path):
    with pytest.raises(InputError, match="lux"):
        load_system(_edited(tmp_path, "strings = 2\n", "strings = 2\nirradiance_w_m2 = 95000\n"))


def test_every_mounting_preset_loads_and_others_are_refused_when_the_file_loads(tmp_path):
    from pvsource.sky import MOUNTING_PRESETS

    for mounting in MOUNTING_PRESETS:
        system = load_system(_edited(tmp_path, "strings = 2\n", f'strings = 2\nmounting = "{mounting}"\n'))
        assert system.groups[0].mounting == mounting
    path = _edited(tmp_path, "strings = 2\n", 'strings = 2\nmounting = "roof"\n')
    with pytest.raises(InputError) as exc:
        load_system(path)
    assert str(path) in str(exc.value) and "[array].mounting" in str(exc.value) and "close_roof" in str(exc.value)


@pytest.mark.parametrize("old, new, words", [
    ("length_m = 12", "lenght_m = 12", ["[[cable]] #1.lenght_m", "unknown key", "did you mean 'length_m'"]),
    ("strings = 2\n", "strings = 2\ntilt_dge = 30\n", ["[array].tilt_dge", "did you mean 'tilt_deg'"]),
    ("[load]", "[laod]", ["[laod]", "did you mean 'load'"]),
    ('kind = "battery"', 'kind = "batery"', ["[load].kind", "did you mean 'battery'"]),
    ("strings = 2\n", "strings = 2\ncolour = 2\n", ["[array].colour", "unknown key"]),
])
def test_a_misspelt_key_or_value_suggests_the_nearest(tmp_path, old, new, words):
    with pytest.raises(InputError) as exc:
        load_system(_edited(tmp_path, old, new))
    for word in words:
        assert word in str(exc.value)
    if "colour" in new:
        assert "did you mean" not in str(exc.value)  # nothing near: no guess


def test_runs_and_groups_are_named_by_their_name(tmp_path):
    named = GOOD.replace("[[cable]]\n", '[[cable]]\nname = "array to bank"\n')
    with pytest.raises(InputError, match=r'\[\[cable\]\] "array to bank"\.length_m: must be greater than zero'):
        load_system(_edited(tmp_path, "length_m = 12", "length_m = -1", named))
    groups = GOOD.replace("[array]\n", '[[group]]\nname = "east"\n')
    with pytest.raises(InputError, match=r'\[\[group\]\] "east"\.strings'):
        load_system(_edited(tmp_path, "strings = 2", "strings = 0", groups))


# Two faces, each on its own tracker, charging one bank.
TWO = GOOD.split("[array]")[0] + """
[[group]]
name = "east"
modules_per_string = 3
strings = 2

[[group]]
name = "west"
modules_per_string = 3
strings = 1

[[controller]]
name = "e"
groups = ["east"]
kind = "mppt"
max_input_v = 150
max_output_a = 40

[[controller]]
name = "w"
groups = ["west"]
kind = "mppt"
max_input_v = 150
max_output_a = 30

[[cable]]
name = "e feeder"
controller = "e"
length_m = 10
resistance_ohm_per_km = 3.4

[[cable]]
name = "w bank run"
role = "bank"
controller = "w"
length_m = 2
resistance_ohm_per_km = 1.0

[[cable]]
name = "links"
role = "interconnect"
length_m = 0.5
resistance_ohm_per_km = 0.5

[bank]
chemistry = "lfp"
cells_in_series = 8
strings = 1
capacity_ah = 280
soc = 0.5
"""


def test_controllers_each_track_their_own_groups(tmp_path):
    system = load_system(write(tmp_path, TWO))
    assert system.controller is None and system.several_controllers
    assert [(c.name, c.groups, c.controller.max_output_a) for c in system.controllers] == \
        [("e", ("east",), 40.0), ("w", ("west",), 30.0)]
    assert system.controller_of("west").name == "w"
    east, west = system.parts()
    # Each part holds its groups, its own feeder or bank run, and the shared interconnect.
    assert east.group_names == ("east",) and [r.name for r in east.cables] == ["e feeder", "links"]
    assert west.group_names == ("west",) and [r.name for r in west.cables] == ["w bank run", "links"]
    assert east.controller.name == "e" and east.controllers[0].groups == ("east",)


def test_one_controller_still_tracks_every_group(tmp_path):
    two = load_system(write(tmp_path, TWO))
    one = load_system(write(tmp_path, BANK))
    assert not one.several_controllers and one.parts() == (one,)
    assert one.controllers[0].controller is one.controller and one.controllers[0].groups == one.group_names
    # The assignment follows a replaced controller: it is never stale.
    from dataclasses import replace

    swapped = replace(one, controller=replace(one.controller, max_output_a=10.0))
    assert swapped.controllers[0].controller.max_output_a == 10.0
    # One [[controller]] table listing every group is the same as a [controller].
    single = TWO.replace(W_TABLE, "").replace('["east"]', '["east", "west"]').replace('controller = "w"\n',
                                                                                   'controller = "e"\n')
    system = load_system(write(tmp_path, single))
    assert not system.several_controllers and system.controller.name == "e"
    assert system.controllers[0].groups == ("east", "west") and system.group_names == two.group_names


W_TABLE = '[[controller]]\nname = "w"\ngroups = ["west"]\nkind = "mppt"\nmax_input_v = 150\nmax_output_a = 30\n'
TWO_BAD = {
    "unknown group": (('groups = ["west"]', 'groups = ["north"]'), '[[controller]] "w".groups', "no group named"),
    "group in two controllers": (('groups = ["west"]', 'groups = ["east", "west"]'), '[[controller]] "w".groups',
                                 "already tracked by [[controller]] 'e'"),
    "group listed twice": (('groups = ["west"]', 'groups = ["west", "west"]'), '[[controller]] "w".groups',
                           "listed twice"),
    "group left out": (('name = "w"\ngroups = ["west"]', 'name = "w"\ngroups = []'), '[[controller]] "w".groups',
                       "expected a list of group names"),
    "group in no controller": ((W_TABLE, ''), "[[controller]].groups", "'west' belongs to no controller"),
    "no groups key": (('name = "w"\ngroups = ["west"]', 'name = "w"'), '[[controller]] "w".groups', "is missing"),
    "no name": (('name = "w"\n', ''), "[[controller]] #2.name", "needs a name"),
    "same name twice": (('name = "w"\n', 'name = "e"\n'), '[[controller]] "e".name', "'e' repeats"),
    "mixed forms": (('[[controller]]\nname = "w"', '[controller]\nname = "w"'), "[controller]",
                    "not both"),
    "feeder without a controller": (('controller = "e"\nlength_m = 10', 'length_m = 10'),
                                    '[[cable]] "e feeder".controller', "must name its controller: one of e, w"),
    "run for an unknown controller": (('controller = "w"\nlength_m = 2', 'controller = "x"\nlength_m = 2'),
                                      '[[cable]] "w bank run".controller', "no controller named 'x'"),
    "interconnect naming a controller": (('role = "interconnect"', 'role = "interconnect"\ncontroller = "w"'),
                                         '[[cable]] "links".controller', "carries every controller's current"),
    "kindless controller with a bank": (('kind = "mppt"\nmax_input_v = 150\nmax_output_a = 30', 'max_input_v = 150'),
                                        '[[controller]] "w".kind', "needs a controller"),
    "a direct connection among several": (('kind = "mppt"\nmax_input_v = 150\nmax_output_a = 30',
                                           'kind = "direct"\nmax_input_v = 150'), '[[controller]] "w".kind',
                                          "cannot share the bank"),
    "one controller below the bank": (('max_input_v = 150\nmax_output_a = 30', 'max_input_v = 25\nmax_output_a = 30'),
                                      '[[controller]] "w".max_input_v', "absorption"),
    "misspelt groups": (('name = "w"\ngroups =', 'name = "w"\ngruops ='), '[[controller]] "w".gruops',
                        "did you mean 'groups'"),
}


@pytest.mark.parametrize("case", sorted(TWO_BAD))
def test_bad_controller_tables_name_the_table_and_field(tmp_path, case):
    (old, new), field, words = TWO_BAD[case]
    assert old in TWO
    path = write(tmp_path, TWO.replace(old, new, 1) if case != "mixed forms" else TWO.replace(old, new))
    with pytest.raises(InputError) as exc:
        load_system(path)
    assert exc.value.where == str(path)
    assert exc.value.field == field, exc.value
    assert words in exc.value.expected, exc.value
    assert "\n" not in str(exc.value)


def test_a_single_controller_table_takes_no_group_list(tmp_path):
    with pytest.raises(InputError) as exc:
        load_system(write(tmp_path, BANK.replace('kind = "mppt"', 'kind = "mppt"\ngroups = ["array"]')))
    assert exc.value.field == "[controller].groups" and "[[controller]] tables" in exc.value.expected
