"""Operating-point warnings: cutoff, grid current and the tube's ratings.

Codes (all with ``subject`` = the stage name, or the capacitor/rail name):

====  =====================================================================
W401  stage cut off: Ip below ``SolveOptions.cutoff_a``
W402  grid conducting at DC: Vgk > 0 V or Ig above ``grid_current_a``
W403  plate dissipation Vpk·Ip over the rated maximum
W404  plate dissipation over the derated limit ``derating``·Pd(max)
      (only when still within the rating; W403 covers the worse case)
W405  plate voltage over the rated maximum — warning for the hot
      plate–cathode voltage; a note when only the cold-start plate voltage
      (tubes not yet conducting, so no drop in any load: the plate sits at
      its no-load rail voltage) is over it and the tube's cold rating is
      not known
W411  cold-start plate voltage over the tube's cold (zero-current) rating
W406  heater–cathode voltage |Vk − heater_v| over the rating (a
      direct-coupled cathode follower with its cathode near 200 V and the
      heaters at 0 V is the classic case)
W407  cathode current Ip + Ig over the rating
W408  grid leak ``<stage>.Rg`` larger than the rated maximum grid resistance
W409  capacitor DC voltage over its stated voltage rating
W410  a triode pin (grid, cathode or plate) with no DC path to ground
====  =====================================================================

Ratings of ``None`` are not checked.  Messages give the numbers with units;
the report layer formats further.
"""

from __future__ import annotations

from chain.circuit import Circuit, Owner, Resistor, Role, Triode
from chain.dc.engine import NetworkSystem, compile_network
from chain.dc.result import DcSolution, OperatingPoint, SolveOptions
from chain.errors import Diagnostic, warning
from chain.units import format_si

__all__ = ["diagnose"]


def _v(value: float) -> str:
    return format_si(value, "V", 4)


def _a(value: float) -> str:
    return format_si(value, "A", 3)


def _w(value: float) -> str:
    return format_si(value, "W", 3)


def _ohm(value: float) -> str:
    return format_si(value, "Ω", 3)


def _rating(ratings, name: str) -> float | None:
    value = getattr(ratings, name, None)
    return None if value is None else float(value)


def diagnose(circuit: Circuit, solution: DcSolution, options: SolveOptions | None = None, *,
             system: NetworkSystem | None = None) -> tuple[Diagnostic, ...]:
    """Warnings about a solved DC operating point.

    Parameters
    ----------
    circuit : Circuit
        The circuit that was solved.
    solution : DcSolution
        Its DC solution (``solution.diagnostics`` is ignored).
    options : SolveOptions, optional
        Thresholds and derating; defaults to ``solution.options``.
    system : NetworkSystem, optional
        The circuit's compiled network, when the caller has it (with the same
        gmin): the cold plate voltages are then solved on it, not on a new one.

    Returns
    -------
    tuple[Diagnostic, ...]
        In stage order, then capacitors, then floating pins.
    """
    options = solution.options if options is None else options
    triodes = {t.name: t for t in circuit.triodes}
    ordered = [name for s in circuit.stages for name in s.triodes if name in triodes]
    ordered += [name for name in triodes if name not in ordered]
    cold = _cold_plate_voltages(circuit, options, system)
    leaks = _grid_leaks(circuit)
    out: list[Diagnostic] = []
    for name in ordered:
        point = solution.points.get(name)
        if point is None:
            continue
        leak = leaks.get(Owner("stage", circuit.stage_of_triode(name)))
        out.extend(_triode_checks(circuit, triodes[name], point, cold.get(name), options, leak))
    out.extend(_capacitor_checks(circuit, solution))
    out.extend(_floating_checks(circuit))
    return tuple(out)


def _cold_plate_voltages(circuit: Circuit, options: SolveOptions,
                         system: NetworkSystem | None = None) -> dict[str, float]:
    """Plate–cathode voltage of each triode with every tube cold (no current), V
    (on ``system`` when it is this circuit's network with the same gmin)."""
    if not circuit.triodes:
        return {}
    if system is None or system.circuit is not circuit or system.gmin_s != options.gmin_s:
        system = compile_network(circuit, gmin_s=options.gmin_s)
    x = system.cold_solution(0.0)
    return {t.name: system.voltage(x, t.plate) - system.voltage(x, t.cathode) for t in circuit.triodes}


def _triode_checks(circuit: Circuit, tri: Triode, p: OperatingPoint, cold_vpk: float | None,
                   options: SolveOptions, leak: Resistor | None) -> list[Diagnostic]:
    """The warnings about one triode's operating point; ``leak``: its stage's
    grid leak (:func:`_grid_leaks`), or None."""
    subject = circuit.stage_of_triode(tri.name)
    who = circuit.stage_label(subject)
    r = tri.model.ratings
    out: list[Diagnostic] = []
    if p.ip_a < options.cutoff_a:
        out.append(warning(
            "W401", f"{who} is cut off: Ip = {_a(p.ip_a)} (below {_a(options.cutoff_a)}) "
            f"at Vgk = {_v(p.vgk_v)}, Vpk = {_v(p.vpk_v)}",
            hint="the grid is biased beyond cutoff; check the cathode resistor and the grid's DC voltage",
            subject=subject))
    if p.vgk_v > 0.0 or p.ig_a > options.grid_current_a:
        out.append(warning(
            "W402", f"{who} draws grid current at DC: Vgk = {_v(p.vgk_v)}, Ig = {_a(p.ig_a)}",
            hint="the grid is biased positive of its cathode; raise the cathode voltage or lower the grid's",
            subject=subject))
    pd_max = _rating(r, "pd_max_w")
    if pd_max is not None:
        if p.pd_w > pd_max:
            out.append(warning(
                "W403", f"{who} plate dissipation {_w(p.pd_w)} is over the rating of {_w(pd_max)} "
                f"(Vpk = {_v(p.vpk_v)}, Ip = {_a(p.ip_a)})",
                hint="raise the plate load or the cathode resistor", subject=subject))
        elif p.pd_w > options.derating * pd_max:
            out.append(warning(
                "W404", f"{who} plate dissipation {_w(p.pd_w)} is over {options.derating:.0%} of the "
                f"rating ({_w(options.derating * pd_max)} of {_w(pd_max)})",
                hint="common practice keeps small-signal triodes below the derated limit for tube life",
                subject=subject))
    vp_max = _rating(r, "vp_max_v")
    if vp_max is not None:
        if p.vpk_v > vp_max:
            out.append(warning(
                "W405", f"{who} plate–cathode voltage {_v(p.vpk_v)} is over the rating of {_v(vp_max)}",
                hint="lower the rail or raise the plate load", subject=subject))
        elif cold_vpk is not None and cold_vpk > vp_max and (cold_max := _rating(r, "vp_cold_max_v")) is not None:
            if cold_vpk > cold_max:
                out.append(warning(
                    "W411", f"{who} plate voltage at cold start (no plate current yet) is {_v(cold_vpk)}, over "
                    f"the cold (zero-current) rating of {_v(cold_max)}",
                    hint="lower the supply, or delay the high voltage until the heaters are warm",
                    subject=subject))
        elif cold_vpk is not None and cold_vpk > vp_max:
            out.append(Diagnostic(
                "W405", "note",
                f"{who} plate voltage at cold start (no plate current yet) is {_v(cold_vpk)}, over the "
                f"running rating of {_v(vp_max)}; hot it is {_v(p.vpk_v)}",
                hint="tube data often allow a higher cold (zero-current) plate voltage; check the data sheet",
                subject=subject))
    vhk_max = _rating(r, "vhk_max_v")
    if vhk_max is not None:
        vhk = p.vk_v - tri.heater_v
        if abs(vhk) > vhk_max:
            out.append(warning(
                "W406", f"{who} heater–cathode voltage {_v(vhk)} (cathode {_v(p.vk_v)}, heater "
                f"{_v(tri.heater_v)}) is over the rating of ±{_v(vhk_max)}",
                hint="elevate the heater supply (a divider from the B+ rail) towards the cathode voltage",
                subject=subject))
    ik_max = _rating(r, "ik_max_a")
    if ik_max is not None and p.ik_a > ik_max:
        out.append(warning(
            "W407", f"{who} cathode current {_a(p.ik_a)} is over the rating of {_a(ik_max)}",
            hint="raise the cathode resistor or the plate load", subject=subject))
    rg_max = _rating(r, "rg_max_ohm")
    if rg_max is not None:
        if leak is not None and leak.ohms > rg_max:
            out.append(warning(
                "W408", f"{who} grid leak {leak.name} = {_ohm(leak.ohms)} is over the rated maximum "
                f"grid resistance of {_ohm(rg_max)}",
                hint="grid current and gas current through a large grid leak shift the bias; use a smaller one",
                subject=subject))
    return out


def _grid_leaks(circuit: Circuit) -> dict[Owner, Resistor]:
    """Each owner's grid leak (the largest, the first of equals, if several),
    in one pass over the resistors."""
    out: dict[Owner, Resistor] = {}
    for r in circuit.resistors:
        if r.role == Role.GRID_LEAK:
            best = out.get(r.owner)
            if best is None or r.ohms > best.ohms:
                out[r.owner] = r
    return out


def _capacitor_checks(circuit: Circuit, solution: DcSolution) -> list[Diagnostic]:
    out: list[Diagnostic] = []
    for cap in circuit.capacitors:
        point = solution.capacitors.get(cap.name)
        if point is None or point.rated_v is None:
            continue
        if abs(point.v) > point.rated_v:
            out.append(warning(
                "W409", f"capacitor {cap.name} has {_v(point.v)} across it, over its rating of "
                f"{_v(point.rated_v)}",
                hint="use a capacitor rated above the highest voltage it can see (the cold-start rail)",
                subject=cap.name))
    return out


def _floating_checks(circuit: Circuit) -> list[Diagnostic]:
    floating = set(circuit.dc_floating_nodes())
    out: list[Diagnostic] = []
    for tri in circuit.triodes:
        for pin, node in (("grid", tri.grid), ("cathode", tri.cathode), ("plate", tri.plate)):
            if node in floating:
                subject = circuit.stage_of_triode(tri.name)
                out.append(warning(
                    "W410", f"{circuit.stage_label(subject)} {pin} (node '{node}') has no DC path to ground; "
                    f"only capacitors reach it, so the solved voltage rests on the solver's gmin alone",
                    hint="add a grid leak (grid), a cathode resistor (cathode) or a plate load (plate)",
                    subject=subject))
    return out
