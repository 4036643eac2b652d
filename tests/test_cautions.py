"""Cautions fit the command; the closing deferral ends every list."""

from pvsource import cautions
from pvsource.demo import demo_system


def test_quick_wire_gets_conductor_and_termination_cautions_only():
    items = cautions.for_command("quick-wire")
    assert items == [cautions.CONDUCTOR, cautions.DROP_IS_EFFICIENCY, cautions.TERMINATION, cautions.CLOSING]


def test_every_command_ends_with_the_deferral_to_local_codes():
    system = demo_system()
    for command in cautions.COMMANDS:
        items = cautions.for_command(command, system)
        assert items[-1] == cautions.CLOSING and "licensed practitioners" in items[-1]
        assert len(items) == len(set(items))


def test_system_cautions_follow_what_the_system_holds():
    system = demo_system()  # a bank behind a tracker, two strings
    wire = cautions.for_command("wire", system)
    assert cautions.BATTERY_CABLES in wire and cautions.DC_ARC not in wire
    # NEC 690.9 matters from three strings in parallel (common practice).
    assert cautions.STRING_FUSES not in wire
    from dataclasses import replace
    three = replace(system, groups=tuple(replace(g, strings=3) for g in system.groups))
    assert cautions.STRING_FUSES in cautions.for_command("check", three)


def test_a_season_study_shows_only_what_applies():
    # The demo: a bank behind a tracker, two strings. A season reports cable losses and the design checks, so
    # it gets the conductor, drop-budget, termination, cold-Voc and battery cautions; not the live-array and
    # arc cautions of a measurement, nor string fuses for two strings; never the whole list.
    system = demo_system()
    items = cautions.for_command("season", system)
    assert set(items) == {cautions.CONDUCTOR, cautions.DROP_IS_EFFICIENCY, cautions.TERMINATION, cautions.COLD_VOC,
                          cautions.BATTERY_FAULT, cautions.BATTERY_CABLES, cautions.CLOSING}
    every = set(cautions.GENERAL) | set(cautions.WIRING)
    assert set(items) < every
    from dataclasses import replace
    no_bank = replace(system, bank=None, controller=None)
    assert cautions.BATTERY_FAULT not in cautions.for_command("season", no_bank)
    assert cautions.for_command("sweep", no_bank) == [cautions.CONDUCTOR, cautions.DROP_IS_EFFICIENCY, cautions.CLOSING]
