"""Safety cautions the tool prints with its results, chosen to fit what was computed.

pvsource computes; it does not certify. Each command shows the cautions that
apply to its result (:func:`for_command`); the closing deferral to local
codes and licensed practitioners ends every list.
"""

PV_LIVE = ("PV strings are live whenever light falls on them; covering or disconnecting does not make the array "
           "side safe.")
DC_ARC = ("DC arcs do not self-extinguish: open DC circuits under load only with devices rated for DC at the "
          "string's maximum voltage.")
BATTERY_FAULT = ("Battery banks can deliver very large short-circuit currents; protect every battery conductor with a "
                 "fuse or breaker rated for DC and for the bank's fault current, close to the bank.")
CONDUCTOR = ("Conductors carrying more than their rating overheat; size for current and temperature, not voltage "
             "drop alone.")
DROP_IS_EFFICIENCY = ("A voltage-drop budget is about efficiency. Conductor ampacity, insulation rated for DC, sunlight "
                      "and wet locations, and overcurrent protection are separate requirements.")
TERMINATION = ("Terminations carry the same current as the cable: use lugs and terminals rated for the conductor's "
               "metal and temperature (NEC 110.14(C), usually 75 degC) and torque them as the maker specifies.")
COLD_VOC = "Voc rises as cells cool: check the string against the site's record low, not a design day."
BATTERY_CABLES = "Size battery cables and their fuses for the bank's fault current, not for the PV current."
STRING_FUSES = ("With three or more strings in parallel, a faulted string takes the other strings' current backwards: "
                "string fuses or a rating for that backfeed are needed (NEC 690.9, or the local equivalent).")
GENERATOR = ("A generator's exhaust carries carbon monoxide: run it outdoors, away from doors, windows and vents; "
             "store its fuel as local rules require; connect it only through a transfer switch or interlock so it "
             "can never feed back into other supplies, and earth and bond it as the local code requires.")
CLOSING = ("These results are estimates from a model; the design must follow local electrical codes and be "
           "reviewed and installed by licensed practitioners.")

# The full sets (every caution the tool has), for reference; a result shows only its own (for_command).
GENERAL = (PV_LIVE, DC_ARC, BATTERY_FAULT, CONDUCTOR, CLOSING)
WIRING = (COLD_VOC, DROP_IS_EFFICIENCY, BATTERY_CABLES, STRING_FUSES, TERMINATION)

#: What each command computes decides its cautions: conductor sizes and losses, design checks against the
#: site's extremes, the live array a measurement or check is made on, and the system's bank and strings.
COMMANDS = ("quick-wire", "wire", "check", "point", "sweep", "season", "explore", "fleet")
_CONDUCTORS = ("quick-wire", "wire", "check", "season", "explore")   # ampacity or losses of sized runs
_ON_THE_ARRAY = ("point", "check")                                  # an operating point, a check on the array
_COLD = ("check", "season", "explore")                              # the string Voc against the site's cold
_BATTERY_CABLES = ("wire", "check", "season", "explore")            # bank cables sized or checked


def for_command(command: str, system=None) -> list[str]:
    """The cautions for one command's result, ending with :data:`CLOSING`.

    Parameters
    ----------
    command : one of :data:`COMMANDS`
        ``season`` and ``explore`` report cable losses and the design checks
        (as ``check`` does, against the weather's extremes); ``sweep``
        reports power and efficiency against one variable; ``fleet`` each
        system's energy and cable losses (see :func:`for_systems`).
    system : System, optional
        Adds the battery cautions when it has a bank, and the string-fuse
        caution from three strings in parallel on one controller, and for
        ``check``, ``season`` and ``explore`` the generator's when it has one.
    """
    if command not in COMMANDS:
        raise ValueError(f"no cautions for {command!r}")
    items = []
    if command in _CONDUCTORS:
        items += [CONDUCTOR, DROP_IS_EFFICIENCY, TERMINATION]
    if command == "sweep":
        items += [CONDUCTOR, DROP_IS_EFFICIENCY]
    if command == "fleet":              # energy and cable losses per system, no checks
        items.append(DROP_IS_EFFICIENCY)
    if command in _ON_THE_ARRAY:
        items += [PV_LIVE, DC_ARC]
    if command in _COLD:
        items.append(COLD_VOC)
    if system is not None and command != "quick-wire":
        if system.bank is not None or system.load.kind == "battery":
            items += [BATTERY_FAULT] + ([BATTERY_CABLES] if command in _BATTERY_CABLES else [])
        parts = system.parts() if hasattr(system, "parts") else (system,)
        if command in _BATTERY_CABLES and max(sum(g.strings for g in p.groups) for p in parts) >= 3:
            items.append(STRING_FUSES)
        if command in ("check", "season", "explore") and getattr(system, "generator", None) is not None:
            items.append(GENERATOR)
    return [*items, CLOSING]


def for_systems(command: str, systems) -> list[str]:
    """The cautions of one result over several systems: each system's, once each, in order, :data:`CLOSING` last."""
    items = [c for system in systems for c in for_command(command, system)]
    return [*dict.fromkeys(c for c in items if c != CLOSING), CLOSING]
