"""Safety cautions the tool prints with its results.

pvsource computes; it does not certify. These lines travel with every result
a person might build from, and defer to local codes and licensed practice.
"""

GENERAL = (
    "PV strings are live whenever light falls on them; covering or disconnecting does not make the array "
    "side safe.",
    "DC arcs do not self-extinguish: open DC circuits under load only with devices rated for DC at the "
    "string's maximum voltage.",
    "Battery banks can deliver very large short-circuit currents; protect every battery conductor with a "
    "fuse or breaker rated for DC and for the bank's fault current, close to the bank.",
    "Conductors carrying more than their rating overheat; size for current and temperature, not voltage "
    "drop alone.",
    "These results are estimates from a model; the design must follow local electrical codes and be "
    "reviewed and installed by licensed practitioners.",
)

WIRING = (
    "Voc rises as cells cool: check the string against the site's record low, not a design day.",
    "A voltage-drop budget is about efficiency. Conductor ampacity, insulation rated for DC, sunlight and wet "
    "locations, and overcurrent protection are separate requirements.",
    "Size battery cables and their fuses for the bank's fault current, not for the PV current.",
    "With three or more strings in parallel, a faulted string takes the other strings' current backwards: "
    "string fuses or a rating for that backfeed are needed (NEC 690.9, or the local equivalent).",
    "Terminations carry the same current as the cable: torque them as the maker specifies and use lugs rated "
    "for the conductor's metal.",
)
