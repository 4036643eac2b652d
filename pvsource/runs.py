"""Each cable run at an operating point: current, drop, loss, and the sizes that meet a budget.

The currents and voltages come from a solved operating point
(:func:`pvsource.operating.operating_points`); this module only walks the
circuit from the strings to the load and accounts for each run in turn.
Runs of one role in one group are in series, in the order of the file.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, replace

import numpy as np

from pvsource import conductors
from pvsource.errors import InputError
from pvsource.system import System
from pvsource.units import FOOT_M
from pvsource.ampacity import (
    CONTINUOUS_FACTOR, DEFAULT_BATTERY_PROTECTION, DEFAULT_PROTECTION, Installation, check_installation, check_series,
    needed_protection_a, smallest_size_for_current,
)
from pvsource.checks import design_currents
from pvsource.wiring import BATTERY_SIDE_ROLES, CableRun, run_ampacity, run_installation, sized_ohm_per_km

OPTIONS_SHOWN = 3
#: Drop budget per circuit when none is given [-]. Common practice: 3 % for
#: each circuit, after the NEC's informational notes (210.19(A) Note 4,
#: 215.2(A)(1) Note 2: 3 % for a branch circuit or feeder, 5 % in all). It is
#: not a requirement; on a low-voltage battery side each per cent of drop is
#: a larger current's loss, so many designers aim lower there.
DEFAULT_DROP_BUDGET = 0.03


@dataclass(frozen=True)
class RunFlow:
    """One run at one operating point.

    Attributes
    ----------
    run : CableRun
    current_a : float
        Current in each conductor loop of the run (one string's, for a string lead) [A].
    circuit_v : float
        Voltage at the run's source end, the one its drop is compared with [V].
    resistance_ohm : float
        Loop resistance of the run (one string's lead, for string leads) [ohm].
    drop_v : float
        Voltage drop along the run [V].
    loss_w : float
        Power lost in the run (all strings' leads together, for string leads) [W].
    power_w : float
        Power entering the run (all strings together, for string leads) [W].
    copies : int
        Identical loops the run stands for (the strings of the group, for string leads).
    """

    run: CableRun
    current_a: float
    circuit_v: float
    resistance_ohm: float
    drop_v: float
    loss_w: float
    power_w: float
    copies: int = 1

    @property
    def drop_fraction(self) -> float:
        return abs(self.drop_v) / self.circuit_v if self.circuit_v > 0 else float("nan")

    @property
    def loss_fraction(self) -> float:
        return self.loss_w / self.power_w if self.power_w > 0 else float("nan")


def run_flows(system: System, row) -> list[RunFlow]:
    """Walk the circuit at one solved operating point (a row of ``operating_points``).

    Returns the runs in file order.
    """
    if system.several_controllers:
        return _shared_flows(system, row)
    flows: dict[int, RunFlow] = {}
    runs = list(enumerate(system.cables))
    for g in system.groups:
        v = float(row[f"group_{g.name}_v"])
        j = float(row[f"group_{g.name}_i_a"])
        for role, current, copies in (("string", j / g.strings, g.strings), ("home-run", j, 1)):
            for k, run in runs:
                if run.role == role and run.group == g.name:
                    r = run.loop_resistance_ohm
                    drop = current * r
                    flows[k] = RunFlow(run, current, v, r, drop, copies * current * drop, copies * v * current,
                                       copies)
                    v -= drop
    duty = float(row["duty"]) if "duty" in row else 1.0
    i = float(row["i"])
    v = float(row["v"])
    for role in ("feeder", *BATTERY_SIDE_ROLES):
        if role == "bank" and system.bank is not None:
            # Behind a controller the bank runs carry the charge current at
            # the bank's voltage: from the controller output to the bank.
            i = float(row["charge_current_a"]) / duty if duty > 0 else 0.0
            r_bank_side = sum(run.loop_resistance_ohm for _, run in runs if run.role in BATTERY_SIDE_ROLES)
            v = float(row["load_v"]) + i * r_bank_side
        for k, run in runs:
            if run.role == role:
                r = run.loop_resistance_ohm
                drop = i * r
                # A switching controller passes current for a share of the time:
                # the drop is the on-state one, the loss the average.
                flows[k] = RunFlow(run, i, v, r, drop, duty * i * drop, duty * v * i)
                v -= drop
    return [flows[k] for k, _ in runs]


def _shared_flows(system: System, row) -> list[RunFlow]:
    """:func:`run_flows` with several controllers: each controller's part at its own columns, then the
    interconnects, which carry every controller's charge current from the bank's terminals."""
    from pvsource.operating import controller_column

    inter = [r for r in system.cables if r.role == "interconnect"]
    total = float(row["charge_current_a"])
    node_v = float(row["load_v"]) + total * sum(r.loop_resistance_ohm for r in inter)
    by_run = {}
    for assigned, part in zip(system.controllers, system.parts()):
        own = {key: float(row[controller_column(assigned.name, key)]) for key in ("v", "i_a", "duty", "charge_current_a")}
        part_row = {**{k: row[k] for k in row.index if k.startswith("group_")}, "v": own["v"], "i": own["i_a"],
                    "duty": own["duty"], "charge_current_a": own["charge_current_a"], "load_v": node_v}
        mine = replace(part, cables=tuple(r for r in part.cables if r.role != "interconnect"))
        by_run.update({f.run.name: f for f in run_flows(mine, part_row)})
    v = node_v
    for run in inter:
        r = run.loop_resistance_ohm
        by_run[run.name] = RunFlow(run, total, v, r, total * r, total * total * r, v * total)
        v -= total * r
    return [by_run[r.name] for r in system.cables]


def _on_path(system: System, run: CableRun, group: str) -> bool:
    """Whether a run lies on the path from a group's strings to the bank (through its own controller)."""
    if run.group is not None:
        return run.group == group
    if not system.several_controllers or run.role == "interconnect":
        return True
    return run.controller == system.controller_of(group).name


def _battery_paths(system: System) -> list[list[CableRun]]:
    """The bank-side runs from each controller's output to the bank (with one controller, all of them)."""
    battery = [r for r in system.cables if circuit_of(system, r) == "battery"]
    if not system.several_controllers:
        return [battery]
    return [[r for r in battery if r.role == "interconnect" or r.controller == c.name] for c in system.controllers]


def path_drops(system: System, flows: list[RunFlow]) -> dict[str, float]:
    """Total drop from each group's string terminals to the load [V]."""
    return {g.name: sum(f.drop_v for f in flows if _on_path(system, f.run, g.name)) for g in system.groups}


@dataclass(frozen=True)
class SizeOption:
    """The same run in another conductor size."""

    size: conductors.ConductorSize
    resistance_ohm: float
    drop_v: float
    drop_fraction: float
    loss_w: float
    loss_fraction: float
    mass_kg: float


def size_options(flow: RunFlow, count: int = OPTIONS_SHOWN) -> list[SizeOption]:
    """The run in its own size and the next ``count`` standard sizes up, at the same current."""
    run = flow.run
    if run.size is None:
        return []
    sizes = [run.size] + conductors.next_sizes_up(run.size, count)
    areas = [s.area_mm2 for s in sizes]
    r = np.array([replace(run, resistance_ohm_per_km=sized_ohm_per_km(run, s)[0]).loop_resistance_ohm for s in sizes])
    # A user-given resistance describes this cable; other sizes of the same
    # make are taken to differ from the tables by the same factor.
    r = r * (run.loop_resistance_ohm / r[0])
    mass = np.atleast_1d(conductors.conductor_mass_kg(run.length_m, areas, run.material, run.conductors_in_parallel,
                                                      stranded=run.conductor_class != 1)) * flow.copies
    out = []
    for s, rk, mk in zip(sizes, r, mass):
        drop = flow.current_a * rk
        loss = flow.copies * flow.current_a * drop
        out.append(SizeOption(s, float(rk), float(drop), abs(drop) / flow.circuit_v if flow.circuit_v > 0 else np.nan,
                              float(loss), loss / flow.power_w if flow.power_w > 0 else np.nan, float(mk)))
    return out


def recommend_size(flow: RunFlow, budget_fraction: float):
    """Smallest standard size in the run's own series whose drop is within the budget.

    Returns
    -------
    ConductorSize or None
        None when the run has no size (given as resistance per km) or carries
        no current.

    Raises
    ------
    InputError
        When no size in the series meets the budget.
    """
    run = flow.run
    if run.size is None or flow.current_a <= 0 or flow.circuit_v <= 0:
        return None
    try:
        return conductors.smallest_size_meeting(
            abs(flow.current_a), run.length_m, flow.circuit_v, budget_fraction, series=run.size.series,
            material=run.material, temp_c=run.temp_c, conductors_in_parallel=run.conductors_in_parallel,
            conductor_class=run.conductor_class, basis=run.resistance_basis)
    except InputError as exc:
        raise InputError(run.name, None, exc.expected) from None


def _option_record(opt: SizeOption) -> dict:
    return {"size": opt.size.label, "resistance_ohm": opt.resistance_ohm, "drop_v": opt.drop_v,
            "drop_pct": 100.0 * opt.drop_fraction, "loss_w": opt.loss_w, "loss_pct": 100.0 * opt.loss_fraction,
            "mass_kg": opt.mass_kg}


def _size_by_drop(flow: RunFlow, budget_fraction):
    """(smallest size within the budget or None, note) for a run."""
    if budget_fraction is None:
        return None, "no budget: give --volts for one run"
    if flow.run.size is None:
        return None, "no size given (resistance per km only), so no size series to choose from"
    factor = flow.run.resistance_ohm_per_km / sized_ohm_per_km(flow.run, flow.run.size)[0]
    if abs(factor - 1.0) > 1e-9:
        # Search the series with the budget tightened by the cable's own factor.
        budget_fraction = budget_fraction / factor
    try:
        size = recommend_size(flow, budget_fraction)
    except InputError as exc:
        return None, exc.expected
    return size, "" if size is not None else "no current flows at the design point"


#: What a user can do when the tables hold no value for a run, by where the run was described.
REMEDY_FILE = "give the run's ampacity_a from the cable's own rating"
REMEDY_QUICK = ("choose a --size and --material the tables hold (IEC 60364-5-52: copper 1.5 to 300 mm2, aluminium "
                "16 to 300 mm2; NEC 310.16: copper 14 AWG and up, aluminium 12 AWG and up)")


def _sizing(flow: RunFlow, budget_fraction, max_circuit_current_a: float, defaults: Installation,
            remedy: str = REMEDY_FILE) -> dict:
    """Ampacity of the run's size, and the sizes by ampacity, by drop, and the larger of the two (JSON-ready).

    ``max_circuit_current_a`` is I_max; the conductor must carry 1.25 x it
    (:mod:`pvsource.ampacity`). Without a table value for the run's metal or
    installation the recommendation never goes below the chosen size, since
    voltage drop alone cannot show that a smaller conductor is safe.
    ``remedy`` says what the user can do then, in the terms of the command
    used (a file key, or an option).
    """
    run = flow.run
    by_drop, drop_note = _size_by_drop(flow, budget_fraction)
    a = run_ampacity(run, defaults)
    by_amp, amp_note = None, ""
    if run.size is not None:
        try:
            by_amp, _ = smallest_size_for_current(max_circuit_current_a, run.size.series, run.material,
                                                  run_installation(run, defaults), run.conductors_in_parallel,
                                                  where=run.name)
        except InputError as exc:
            # A gap in the tables has a remedy in the command's own terms; too much current names its own.
            amp_note = exc.expected if exc.field == "ampacity" else f"{exc.expected}; {remedy}"
    candidates = [x for x in (by_drop, by_amp) if x is not None]
    note = "; ".join(n for n in (drop_note, amp_note) if n)
    if by_amp is None and run.size is not None:
        candidates.append(run.size)
        if by_drop is not None and by_drop.area_mm2 < run.size.area_mm2:
            note = "; ".join(n for n in (note, f"voltage drop alone would allow {by_drop.label}, but without an "
                                               "ampacity for this run only the chosen size is known to be safe") if n)
    recommended = max(candidates, key=lambda x: x.area_mm2) if candidates else None
    n = run.conductors_in_parallel
    return {"max_circuit_current_a": max_circuit_current_a,
            "design_current_a": CONTINUOUS_FACTOR * max_circuit_current_a,
            "ampacity_a": None if a is None else n * a.corrected_a,
            "ampacity_limit_a": None if a is None else a.limit_for(n),
            "ampacity_limit_by": None if a is None else a.limit_by(n),
            "ampacity_basis": None if a is None else a.basis,
            "ampacity_note": None if a is not None else
            f"no table value for {run.size.label if run.size else 'a run without a size'} {run.material} "
            f"in this installation; {remedy}",
            "protection": None if a is None else a.protection,
            "protection_a": None if a is None or a.protection is None else
            needed_protection_a(CONTINUOUS_FACTOR * max_circuit_current_a, a.protection),
            "size_by_ampacity": by_amp.label if by_amp else None,
            "size_by_drop": by_drop.label if by_drop else None,
            "recommended_size": recommended.label if recommended else None,
            "recommendation_note": note}


def circuit_of(system: System, run: CableRun) -> str:
    """``"pv"`` or ``"battery"``: a controller separates the two circuits, each with its own drop budget."""
    if run.role in BATTERY_SIDE_ROLES and system.bank is not None and system.controllers:
        return "battery"
    return "pv"


def budget_shares(system: System) -> dict[str, float]:
    """Each run's share of its circuit's drop budget [-], by run name.

    Along each path of a circuit (a string lead, its home run and the feeder;
    or the bank-side runs) the budget is shared in proportion to length, so
    the runs of any path together stay within the circuit's budget.
    """
    circuit = {r.name: circuit_of(system, r) for r in system.cables}

    def path_m(group):
        return sum(r.length_m for r in system.cables if circuit[r.name] == "pv" and _on_path(system, r, group))

    def longest_pv(run):  # a feeder: the longest path through it
        return max([path_m(g.name) for g in system.groups if _on_path(system, run, g.name)] + [1e-12])

    def battery_m(run):  # the longest bank-side path through it
        return max([sum(r.length_m for r in path) for path in _battery_paths(system) if run in path] + [1e-12])

    shares = {}
    for r in system.cables:
        whole = battery_m(r) if circuit[r.name] == "battery" else path_m(r.group) if r.group else longest_pv(r)
        shares[r.name] = r.length_m / whole
    return shares


def circuit_drops(system: System, flows: list[RunFlow]) -> list[dict]:
    """Drop of each circuit's worst path, as V and as a share of its voltage (never added across a controller)."""
    out = []
    pv = [f for f in flows if circuit_of(system, f.run) == "pv"]
    worst = None
    for g in system.groups:
        path = [f for f in pv if _on_path(system, f.run, g.name)]
        start = next((f.circuit_v for f in path if f.run.group == g.name), None) or \
            next((f.circuit_v for f in path), None)
        if not path or not start:
            continue
        drop = sum(f.drop_v for f in path)
        if worst is None or drop / start > worst[1] / worst[2]:
            worst = (g.name, drop, start)
    if worst is not None:
        out.append({"circuit": "pv", "worst_group": worst[0], "drop_v": worst[1], "drop_pct": 100.0 * worst[1] / worst[2]})
    by_run = {f.run.name: f for f in flows}
    worst = None
    for path in _battery_paths(system):
        battery = [by_run[r.name] for r in path]
        if battery and battery[0].circuit_v > 0:
            drop = sum(f.drop_v for f in battery)
            if worst is None or drop / battery[0].circuit_v > worst[0] / worst[1]:
                worst = (drop, battery[0].circuit_v)
    if worst is not None:
        out.append({"circuit": "battery", "worst_group": None, "drop_v": worst[0],
                    "drop_pct": 100.0 * worst[0] / worst[1]})
    return out


def wire_record(system: System, row, budget_fraction: float = DEFAULT_DROP_BUDGET,
                defaults: Installation = Installation()) -> dict:
    """Every run at one operating point: drop, loss, ampacity, and sizes by ampacity and by drop (JSON-ready).

    ``budget_fraction`` is each circuit's drop budget; see :func:`budget_shares`.
    """
    flows = run_flows(system, row)
    shares = budget_shares(system)
    currents = {d["run"]: d["circuit_current_a"] for d in design_currents(system, defaults)}
    runs = []
    for f in flows:
        share = budget_fraction * shares[f.run.name]
        runs.append({
            "name": f.run.name, "role": f.run.role, "group": f.run.group, "circuit": circuit_of(system, f.run),
            "size": f.run.size.label if f.run.size else None, "material": f.run.material,
            "length_m": f.run.length_m, "length_ft": f.run.length_m / FOOT_M,
            "conductors_in_parallel": f.run.conductors_in_parallel,
            "temp_c": f.run.temp_c, "copies": f.copies, "resistance_source": f.run.resistance_source,
            "current_a": f.current_a, "resistance_ohm": f.resistance_ohm, "circuit_v": f.circuit_v,
            "drop_v": f.drop_v, "drop_pct": 100.0 * f.drop_fraction,
            "loss_w": f.loss_w, "loss_pct": 100.0 * f.loss_fraction, "power_w": f.power_w,
            "budget_pct": 100.0 * share, "breaks_budget": bool(f.drop_fraction > share),
            **_sizing(f, share, currents[f.run.name], defaults),
            "options": [_option_record(o) for o in size_options(f)],
        })
    generated = float(row["generated_w"])
    circuits = circuit_drops(system, flows)
    for c in circuits:
        c["budget_pct"] = 100.0 * budget_fraction
        c["over_budget"] = bool(c["drop_pct"] > 100.0 * budget_fraction * (1 + 1e-9))
    return {
        "runs": runs,
        "circuits": circuits,
        "total": {"loss_w": float(row["cable_loss_w"]),
                  "loss_pct": 100.0 * float(row["cable_loss_w"]) / generated if generated > 0 else None},
        "budget_pct": 100.0 * budget_fraction,
        "over_budget": [r["name"] for r in runs if r["breaks_budget"]],
        "installation_defaults": _defaults_record(defaults),
    }


def _defaults_record(defaults: Installation) -> dict:
    """The command's installation defaults as JSON; a device left to the circuit's side is given per side."""
    out = asdict(defaults)
    if out["protection"] is None:
        out["protection"] = {"pv": DEFAULT_PROTECTION, "battery": DEFAULT_BATTERY_PROTECTION}
    return out


def drop_budget_reasons(system: System, budget_fraction: float) -> list[str]:
    """Why a system breaks a per-circuit drop budget at its STC design point, in words (empty when it does not).

    The design point is ``wire``'s: STC, the system's own load or bank.
    """
    from pvsource.operating import operating_points  # the solver is needed only here

    if not system.cables:
        return []
    row = operating_points(system, 1000.0, 25.0).iloc[0]
    return [f"drop budget: the {c['circuit']} circuit drops {c['drop_pct']:.2f} % at STC against "
            f"{100 * budget_fraction:g} %" for c in circuit_drops(system, run_flows(system, row))
            if c["drop_pct"] > 100.0 * budget_fraction * (1 + 1e-9)]


def quick_record(current_a: float, length_m: float, size_text: str, material: str = "copper",
                 temp_c: float = conductors.DEFAULT_CONDUCTOR_TEMP_C, volts: float | None = None,
                 budget_fraction: float | None = None, conductors_in_parallel: int = 1,
                 conductor_class: int = 2, resistance_basis: str = "table",
                 installation: Installation = Installation()) -> dict:
    """One two-conductor DC run from its current, one-way length and size (JSON-ready).

    ``current_a`` is the circuit's maximum current I_max: the drop is
    computed at it, and the conductor must carry 1.25 x it
    (:mod:`pvsource.ampacity`). With ``volts`` and no budget, the default
    budget :data:`DEFAULT_DROP_BUDGET` applies.

    Raises
    ------
    InputError
        Naming the option at fault.
    """
    size = conductors.parse_size(size_text, where="--size")
    try:
        mat = conductors.material_properties(str(material).lower(), where="--material").name
    except InputError as exc:
        raise InputError("--material", None, exc.expected) from None
    if not np.isfinite(current_a) or not 0 < current_a <= 1.0e5:
        raise InputError("--current", None, f"expected a current above 0 and at most 100000 A, got {current_a!r}")
    if not np.isfinite(length_m) or not 0 < length_m <= 1.0e4:
        raise InputError("--length-m", None, f"expected a one-way length above 0 and at most 10000 m, "
                                             f"got {length_m!r}")
    if volts is not None and (not np.isfinite(volts) or not 0.1 <= volts <= 1.0e5):
        raise InputError("--volts", None, f"expected a circuit voltage from 0.1 to 100000 V, got {volts!r}")
    if not 1 <= conductors_in_parallel <= 100:
        raise InputError("--parallel", None, f"expected 1 to 100 conductors, got {conductors_in_parallel!r}")
    names = {"insulation_c": "--insulation-c", "ambient_c": "--ambient-c",
             "conductors_together": "--conductors-together", "install": "--install"}
    check_installation(installation, "wire", names)
    if installation.protection is None:
        installation = replace(installation, protection=DEFAULT_PROTECTION)
    # One run of one known size: an installation its standard has no table for is
    # a typing slip, refused here rather than left without an ampacity.
    check_series(size.series, {"install": installation.install, "insulation_c": installation.insulation_c},
                 "wire", names)
    if budget_fraction is not None:
        if not (np.isfinite(budget_fraction) and 1e-4 <= budget_fraction < 1):
            raise InputError("--budget-pct", None, f"expected a percentage between 0 and 100, "
                                                   f"got {100 * budget_fraction!r}")
        if volts is None:
            raise InputError("--budget-pct", None, "needs --volts: a drop budget is a share of the circuit voltage")
        if current_a <= 0:
            raise InputError("--current", None, f"a budget needs a current above 0 A, got {current_a!r}")
    if not np.isfinite(temp_c) or not -60.0 <= temp_c <= 250.0:
        raise InputError("--temp-c", None, f"expected a conductor temperature from -60 to 250 degC, got {temp_c!r}")
    if int(conductors_in_parallel) != conductors_in_parallel or conductors_in_parallel < 1:
        raise InputError("--parallel", None, f"expected a whole number of conductors, 1 or more, "
                                             f"got {conductors_in_parallel!r}")
    if resistance_basis not in conductors.RESISTANCE_BASES:
        raise InputError("--resistance-basis", None, f"expected one of {', '.join(conductors.RESISTANCE_BASES)}, "
                                                     f"got {resistance_basis!r}")
    run = CableRun("run", "feeder", length_m, 1.0, conductors_in_parallel=int(conductors_in_parallel), size=size,
                   material=mat, temp_c=temp_c, conductor_class=conductor_class, resistance_basis=resistance_basis)
    r_km, source = sized_ohm_per_km(run, size)
    run = replace(run, resistance_ohm_per_km=r_km, resistance_source=source)
    r = run.loop_resistance_ohm
    drop = current_a * r
    flow = RunFlow(run, current_a, volts if volts else float("nan"), r, drop, current_a * drop,
                   current_a * volts if volts else float("nan"))
    if budget_fraction is None and volts:
        budget_fraction = DEFAULT_DROP_BUDGET
    rec = {
        "current_a": current_a, "length_m": length_m, "length_ft": length_m / FOOT_M, "size": size.label,
        "material": mat, "temp_c": temp_c,
        "conductors_in_parallel": conductors_in_parallel, "resistance_ohm": r,
        "resistance_basis": resistance_basis, "resistance_source": source, "drop_v": drop,
        "drop_pct": 100.0 * abs(drop) / volts if volts else None, "loss_w": current_a * drop,
        "loss_pct": 100.0 * abs(drop) / volts if volts else None,
        "mass_kg": float(conductors.conductor_mass_kg(length_m, size.area_mm2, mat, conductors_in_parallel,
                                                      stranded=conductor_class != 1)),
        "installation": asdict(installation),
        **_sizing(flow, budget_fraction, current_a, installation, REMEDY_QUICK),
        "options": [_option_record(o) for o in size_options(flow)],
    }
    rec["budget_pct"] = None if budget_fraction is None else 100.0 * budget_fraction
    rec["breaks_budget"] = None if budget_fraction is None else bool(abs(drop) / volts > budget_fraction)
    return rec


def resize_run(system: System, name: str, size: conductors.ConductorSize) -> System:
    """The system with run ``name`` in another conductor size (resistance recomputed for it)."""
    runs = []
    for run in system.cables:
        if run.name == name:
            r_km, source = sized_ohm_per_km(run, size)
            # A typed ampacity_a belongs to the size it was written with.
            rating = run.ampacity_a if size == run.size else None
            run = replace(run, size=size, resistance_ohm_per_km=r_km, resistance_source=source, ampacity_a=rating)
        runs.append(run)
    return replace(system, cables=tuple(runs))
