"""Cautions fit the command; the closing deferral ends every list."""

from pvsource import cautions
from pvsource.demo import demo_system


def test_quick_wire_gets_conductor_and_termination_cautions_only():
    items = cautions.for_command("quick-wire")
    assert items == [cautions.CONDUCTOR, cautions.DROP_IS_EFFICIENCY, cautions.TERMINATION, cautions.CLOSING]


def test_every_command_ends_with_the_deferral_to_local_codes():
    system = demo_system()
    for command in ("quick-wire", "wire", "check", "point"):
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
