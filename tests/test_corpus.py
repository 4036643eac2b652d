"""A corpus of malformed inputs: every one ends in one line naming the place, exit code 2, nothing written.

The files live in tests/corpus/. Each case names the file (or option) and a
fragment of the field, row or reason the message must carry.
"""

from pathlib import Path

import pytest

from conftest import run_cli

CORPUS = Path(__file__).parent / "corpus"

# (command template, fragments the one-line message must contain)
CASES = {
    # system files
    "empty system": ("point {c}/empty.toml", ["empty.toml", "is empty"]),
    "binary system": ("point {c}/binary.toml", ["binary.toml", "UTF-8"]),
    "nan irradiance": ("point {c}/nan-irradiance.toml", ["irradiance_w_m2", "finite"]),
    "inf length": ("point {c}/inf-length.toml", ["length_m", "finite"]),
    "absurd strings": ("point {c}/absurd-strings.toml", ["[array].strings", "at most"]),
    "absurd modules": ("point {c}/absurd-modules.toml", ["modules_per_string", "at most"]),
    "negative length": ("point {c}/negative-length.toml", ["length_m", "greater than zero"]),
    "negative capacity": ("point {c}/negative-capacity.toml", ["[bank].capacity_ah"]),
    "zero strings": ("point {c}/zero-strings.toml", ["[array].strings", "greater than zero"]),
    "vmp above voc": ("point {c}/vmp-above-voc.toml", ["[module].v_mp", "below v_oc"]),
    "unknown chemistry": ("point {c}/unknown-chemistry.toml", ["[bank].chemistry", "lfp"]),
    "duplicate table": ("point {c}/duplicate-table.toml", ["duplicate-table.toml", "TOML"]),
    "unknown key": ("point {c}/unknown-key.toml", ["stirngs", "unknown key"]),
    "text for a number": ("point {c}/text-for-number.toml", ["[bank].soc", "number"]),
    "state of charge above one": ("point {c}/soc-above-one.toml", ["[bank].soc", "at most 1"]),
    "controller below the bank": ("point {c}/max-input-below-bank.toml", ["max_input_v", "absorption"]),
    "bank without a controller kind": ("point {c}/bank-without-controller-kind.toml", ["[controller].kind"]),
    "no module": ("point {c}/no-module.toml", ["[module]", "missing"]),
    "cable for an unknown group": ("point {c}/cable-unknown-group.toml", ["group", "north"]),
    "group on two controllers": ("check {c}/controller-group-twice.toml --min-air-c -10 --max-air-c 40",
                                 ['[[controller]] "west tracker".groups', "'east'", "exactly one controller"]),
    "controller in both forms": ("check {c}/controller-both-forms.toml --min-air-c -10 --max-air-c 40",
                                 ["controller-both-forms.toml", "[controller]", "not both"]),
    "nonsense size": ("point {c}/nonsense-size.toml", ["size", "garden hose"]),
    "positive Voc coefficient": ("point {c}/negative-temp-coefficient-sign.toml", ["voc_temp_coeff_pct"]),
    "missing file": ("point {c}/no-such-file.toml", ["no-such-file.toml", "cannot be read"]),
    # enumerated keys are checked when the file loads; typos get the nearest name
    "unknown mounting": ("check {c}/unknown-mounting.toml --min-air-c -10 --max-air-c 40",
                         ["unknown-mounting.toml", "[array].mounting", "open_rack", "'roof'"]),
    "misspelt cable key": ("point {c}/misspelt-cable-key.toml",
                           ['[[cable]] "array to controller".lenght_m', "unknown key", "did you mean 'length_m'"]),
    "misspelt section": ("point {c}/misspelt-section.toml", ["[controler]", "did you mean 'controller'"]),
    "misspelt role": ("point {c}/misspelt-role.toml", ['"controller to bank".role', "did you mean 'bank'"]),
    # a value impossible in its unit names the unit it was probably typed in
    "cell temperature in degF": ("point {c}/cell-temp-in-fahrenheit.toml", ["[array].cell_temp_c", "degF", "65.6"]),
    "cell temperature in kelvin": ("point {c}/cell-temp-in-kelvin.toml", ["[array].cell_temp_c", "kelvin", "44.9"]),
    "irradiance in lux": ("point {c}/irradiance-in-lux.toml", ["[array].irradiance_w_m2", "lux"]),
    "bank temperature in degF": ("point {c}/bank-temp-in-fahrenheit.toml", ["[bank].temp_c", "degF", "35.0"]),
    # a backup generator
    "generator stops below its start": ("season {c}/generator-stop-below-start.toml {c}/w-good.csv --out {out}",
                                        ["[generator].stop_soc", "above start_soc"]),
    "generator fuel curve without a rating": ("point {c}/generator-curve-without-rating.toml",
                                              ["[generator].rated_power_w", "rated power"]),
    # datasheets
    "empty datasheet": ("fit {c}/ds-empty.toml", ["ds-empty.toml", "empty"]),
    "datasheet vmp above voc": ("fit {c}/ds-vmp-above-voc.toml", ["[module].v_mp"]),
    "datasheet imp above isc": ("fit {c}/ds-imp-above-isc.toml", ["[module].i_mp", "below i_sc"]),
    "datasheet positive Voc coefficient": ("fit {c}/ds-positive-voc-coeff.toml", ["voc_temp_coeff_pct"]),
    "datasheet fill factor too high": ("fit {c}/ds-fill-factor-too-high.toml", ["fill factor"]),
    "datasheet unknown key": ("fit {c}/ds-unknown-key.toml", ["colour", "unknown key"]),
    # weather files
    "empty weather": ("season {c}/good-system.toml {c}/w-empty.csv --out {out}", ["w-empty.csv", "empty"]),
    "binary weather": ("season {c}/good-system.toml {c}/w-binary.csv --out {out}", ["w-binary.csv"]),
    "missing temperature": ("season {c}/good-system.toml {c}/w-missing-temp.csv --out {out}", ["temp_air"]),
    "unsorted timestamps": ("season {c}/good-system.toml {c}/w-unsorted.csv --out {out}", ["w-unsorted.csv", "row"]),
    "duplicate timestamps": ("season {c}/good-system.toml {c}/w-duplicate.csv --out {out}", ["w-duplicate.csv", "row"]),
    "text in a number column": ("season {c}/good-system.toml {c}/w-text-in-number.csv --out {out}", ["row 5"]),
    "naive timestamps": ("season {c}/good-system.toml {c}/w-naive-times.csv --out {out}", ["--tz"]),
    "mixed time zones": ("season {c}/good-system.toml {c}/w-mixed-zones.csv --out {out}", ["w-mixed-zones.csv", "row"]),
    "unknown unit in a header": ("season {c}/good-system.toml {c}/w-unknown-unit.csv --out {out}", ["lux"]),
    "absurd irradiance": ("season {c}/good-system.toml {c}/w-absurd-irradiance.csv --out {out}", ["ghi"]),
    "NaN in a column": ("season {c}/good-system.toml {c}/w-nan.csv --out {out}", ["w-nan.csv", "row 10"]),
    "spreadsheet export missing a column": (
        "season {c}/good-system.toml {c}/w-spreadsheet-missing-column.csv --out {out}", ["temp_air"]),
    "irradiance in kW/m2": ("season {c}/good-system.toml {c}/w-kilowatts.csv --out {out}",
                            ["w-kilowatts.csv", "column 'ghi'", "kW/m2", "--column"]),
    "temperature in degF": ("season {c}/good-system.toml {c}/w-fahrenheit.csv --out {out}",
                            ["w-fahrenheit.csv", "column 'temp_air'", "degF", "temp_air [degF]"]),
    "day-first dates without --time-format": ("season {c}/good-system.toml {c}/w-day-first.csv --out {out}",
                                              ["w-day-first.csv", "'01.06.2025 00:00'", "--time-format"]),
    "day-first dates with the wrong --time-format": (
        "season {c}/good-system.toml {c}/w-day-first.csv --out {out} --tz UTC --time-format %m/%d/%Y",
        ["w-day-first.csv", "row 2", "does not match --time-format"]),
    "strings that never reach the bank": (
        "season {c}/never-reaches-bank.toml {c}/w-good.csv --out {out}", ["never charged the bank"]),
    # command-line values
    "irradiance not a number": ("point {c}/good-system.toml --irradiance abc", ["--irradiance"]),
    "cell temperature out of range": ("point {c}/good-system.toml --cell-temp 500", ["--cell-temp"]),
    "budget above 100 %": ("wire {c}/good-system.toml --budget-pct 140", ["--budget-pct"]),
    "nonsense size option": ("wire --current 20 --length-m 10 --size banana", ["--size"]),
    "one sweep step": ("sweep {c}/good-system.toml --over irradiance --from 0 --to 1 --steps 1", ["--steps"]),
    "unknown time zone": ("season {c}/good-system.toml {c}/w-good.csv --out {out} --tz Mars/Olympus", ["--tz"]),
    "unknown bad-row policy": ("season {c}/good-system.toml {c}/w-good.csv --out {out} --bad-rows maybe",
                               ["--bad-rows"]),
    "unknown time label": ("season {c}/good-system.toml {c}/w-good.csv --out {out} --time-label noon",
                           ["--time-label", "instant"]),
    "time format without a directive": (
        "season {c}/good-system.toml {c}/w-good.csv --out {out} --time-format daymonthyear", ["--time-format"]),
    "explore with an unknown bad-row policy": (
        "explore {c}/good-system.toml {c}/w-good.csv --vary tilt_deg=20,30 --out {out} --price-per-kg 1 "
        "--energy-value 1 --bad-rows maybe", ["--bad-rows"]),
    "fleet with an unknown transposition": ("fleet {c} --out {out} --transposition klucher", ["--transposition"]),
    "check without temperatures": ("check {c}/good-system.toml", ["--min-air-c"]),
    "cell temperature option in kelvin": ("point {c}/good-system.toml --cell-temp-c 300", ["--cell-temp-c", "kelvin"]),
    "air temperature option in degF": ("check {c}/good-system.toml --min-air-c -10 --max-air-c 100",
                                       ["--max-air-c", "degF", "37.8"]),
}


def test_the_corpus_is_large_enough():
    assert len(CASES) >= 40


@pytest.mark.parametrize("name", sorted(CASES))
def test_malformed_input_ends_in_one_line_and_exit_2(capsys, tmp_path, name):
    template, fragments = CASES[name]
    out = tmp_path / "out"
    args = template.format(c=CORPUS, out=out).split()
    code, stdout, stderr = run_cli(capsys, *args)
    assert code == 2, stderr
    assert stdout == ""
    assert stderr.count("\n") == 1 and stderr.startswith("pvsource: error: ") and "Traceback" not in stderr
    for fragment in fragments:
        assert fragment in stderr, (fragment, stderr)
    # Nothing half-written: the output folder is absent or empty.
    assert not out.exists() or not any(out.iterdir())
