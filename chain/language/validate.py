"""Semantic checks of a Design: names, references and values.

Topology (DC paths, dangling nodes, loops of direct couplings) is checked on
the expanded circuit by :mod:`chain.build`, where the parts actually exist.

:func:`check` collects every problem and raises one
:class:`~chain.errors.LanguageError`; it returns the warnings.
"""

from __future__ import annotations

import difflib
import math

from chain.errors import Diagnostic, LanguageError, Span, error, warning
from chain.language.design import KIND_PORTS, KIND_TERMINALS, TERMINALS, TWO_TRIODE_KINDS, Design, Pot, Stage
from chain.tubes import LIBRARY, lookup

#: tube-line keys of each model form (capacitances and ratings belong to every form)
FORM_KEYS = {
    "koren": ("mu", "ex", "kg1", "kp", "kvb", "vct", "ig-k", "ig-onset", "ig-knee"),
    "dempwolf": ("mu", "g", "gamma", "c", "vct", "gg", "xi", "cg", "ig0"),
}
#: keys a tube without 'like' must give, per form
REQUIRED_KEYS = {"koren": ("mu", "ex", "kg1", "kp", "kvb"), "dempwolf": ("mu", "g", "gamma", "c")}

__all__ = ["check", "RANGES", "network_node_name"]

#: sensible limits per role, SI units: (low, high, what)
RANGES = {
    "supply": (1.0, 1000.0, "supply voltage"),
    #: magnitude of a negative (fixed grid-bias) supply
    "bias_supply": (0.1, 300.0, "bias supply voltage (magnitude)"),
    "supply_impedance": (0.0, 100e3, "supply impedance"),
    "drop": (1.0, 1e6, "dropping resistor"),
    "decouple": (10e-9, 10e-3, "decoupling capacitor"),
    "plate_load": (1e3, 10e6, "plate load"),
    "cathode": (1.0, 1e6, "cathode resistor"),
    "bypass": (1e-9, 10e-3, "cathode bypass capacitor"),
    "bypass_series": (1.0, 1e6, "bypass series resistor"),
    "grid_leak": (1e3, 100e6, "grid leak"),
    "grid_stopper": (1.0, 10e6, "grid stopper"),
    "coupling": (1e-12, 100e-6, "coupling capacitor"),
    "resistor": (0.01, 1e9, "resistor"),
    "capacitor": (0.1e-12, 10e-3, "capacitor"),
    "inductor": (1e-9, 1e3, "inductor"),
    "pot": (100.0, 100e6, "pot"),
    "source_r": (0.0, 10e6, "source resistance"),
    "pickup_r": (1.0, 100e3, "pickup winding resistance"),
    "pickup_l": (1e-3, 100.0, "pickup inductance"),
    "pickup_c": (0.0, 10e-9, "pickup capacitance"),
    "cable": (0.0, 100e-9, "cable capacitance"),
    "pickup_loss": (1e3, 100e6, "pickup loss resistance"),
    "load": (100.0, 1e9, "output load"),
    "stray": (0.0, 10e-9, "stray capacitance"),
    "reference": (1.0, 1e6, "reference frequency"),
    "level": (1e-6, 100.0, "input level"),
    "rated": (1.0, 10e3, "voltage rating"),
    "heater": (-500.0, 500.0, "heater potential"),
    "band": (0.1, 10e6, "band edge"),
    "tail": (1.0, 1e6, "tail resistor"),
    "grid_bypass": (1e-12, 100e-6, "grid bypass capacitor"),
}

#: sensible limits of each ``tube`` line key, SI units: (low, high, unit, what, zero allowed).
#: Wide enough for every small-signal and power triode in common use (common
#: practice: mu from about 2 for a 6AS7 to about 100 for a 12AX7; interelectrode
#: capacitances of a few pF; plate ratings up to a few kV); a value outside
#: is a typing slip (a missing prefix, a stray exponent), not a tube.
TUBE_RANGES = {
    "mu": (1.0, 1000.0, "", "amplification factor mu", False),
    "ex": (1.01, 3.0, "", "exponent ex", False),
    "ig-k": (0.0, 1.0, "", "grid perveance ig-k (A/V^1.5)", True),
    "ig-knee": (1e-3, 1.0, "V", "grid-current knee ig-knee", False),
    "g": (1e-7, 1.0, "", "Dempwolf perveance g", False),
    "gamma": (1.01, 3.0, "", "Dempwolf exponent gamma", False),
    "c": (0.01, 100.0, "", "Dempwolf smoothing c (1/V)", False),
    "gg": (1e-9, 1.0, "", "Dempwolf grid perveance gg", False),
    "xi": (1.01, 3.0, "", "Dempwolf grid exponent xi", False),
    "cg": (0.01, 100.0, "", "Dempwolf grid smoothing cg (1/V)", False),
    "ig0": (0.0, 1e-3, "A", "Dempwolf grid offset current ig0", True),
    "kg1": (1.0, 1e6, "", "kg1", False),
    "kp": (0.1, 1e5, "", "kp", False),
    "kvb": (1.0, 1e7, "", "kvb", False),
    "cgk": (0.0, 1e-9, "F", "grid-cathode capacitance cgk", True),
    "cgp": (0.0, 1e-9, "F", "grid-plate capacitance cgp", True),
    "cpk": (0.0, 1e-9, "F", "plate-cathode capacitance cpk", True),
    "vp-max": (1.0, 10e3, "V", "plate voltage rating vp-max", False),
    "pd-max": (1e-3, 1e3, "W", "plate dissipation rating pd-max", False),
    "ik-max": (1e-5, 10.0, "A", "cathode current rating ik-max", False),
    "vhk-max": (1.0, 10e3, "V", "heater-cathode voltage rating vhk-max", False),
    "rg-max": (1e3, 1e9, "Ω", "grid-circuit resistance rating rg-max", False),
    "vp0-max": (1.0, 10e3, "V", "cold plate voltage rating vp0-max", False),
}

_SI_UNITS = {"supply": "V", "bias_supply": "V", "supply_impedance": "Ω", "drop": "Ω", "decouple": "F", "plate_load": "Ω",
             "cathode": "Ω", "bypass": "F", "bypass_series": "Ω", "grid_leak": "Ω", "grid_stopper": "Ω",
             "coupling": "F", "resistor": "Ω", "capacitor": "F", "inductor": "H", "pot": "Ω",
             "source_r": "Ω", "pickup_r": "Ω", "pickup_l": "H", "pickup_c": "F", "cable": "F", "pickup_loss": "Ω", "load": "Ω",
             "stray": "F", "reference": "Hz", "level": "V", "rated": "V", "heater": "V", "band": "Hz",
             "tail": "Ω", "grid_bypass": "F"}


def _fmt(value: float, unit: str) -> str:
    from chain.units import format_si

    return format_si(value, unit)


class _Checker:
    def __init__(self, design: Design):
        self.d = design
        self.problems: list[Diagnostic] = []
        self.warnings: list[Diagnostic] = []

    def err(self, code, message, span, hint="", subject=""):
        self.problems.append(error(code, message, self._lined(span), hint, subject))

    def warn(self, code, message, span, hint="", subject=""):
        self.warnings.append(warning(code, message, self._lined(span), hint, subject))

    def _lined(self, span: Span | None) -> Span | None:
        if span is None or span.line <= 0:
            return None
        if not span.text and span.line <= len(self.d.lines):
            from dataclasses import replace

            return replace(span, text=self.d.lines[span.line - 1])
        return span

    # -- values ---------------------------------------------------------------
    def in_range(self, role: str, value: float | None, span: Span, subject: str = "", *, zero_ok=False):
        if value is None:
            return
        lo, hi, what = RANGES[role]
        unit = _SI_UNITS[role]
        if not math.isfinite(value):
            self.err("E301", f"{what} must be a finite number", span, subject=subject)
        elif (value < 0 and lo >= 0) or (value == 0 and not zero_ok and lo > 0):
            self.err("E301", f"{what} must be positive, not {_fmt(value, unit)}", span, subject=subject)
        elif value < lo or value > hi:
            self.err("E302", f"{what} of {_fmt(value, unit)} is outside the sensible range "
                     f"{_fmt(lo, unit)} to {_fmt(hi, unit)}", span,
                     "check the prefix: m is milli, M is mega", subject)

    # -- names ----------------------------------------------------------------
    def unique(self, items, what):
        seen: dict[str, Span] = {}
        for name, span in items:
            if name in seen:
                self.err("E201", f"duplicate {what} name '{name}' (first defined on line {seen[name].line})", span)
            else:
                seen[name] = span

    def unknown(self, code, what, name, span, known, hint_extra=""):
        close = difflib.get_close_matches(name, list(known), n=1, cutoff=0.5)
        hint = f"did you mean '{close[0]}'?" if close else hint_extra
        self.err(code, f"unknown {what} '{name}'", span, hint)

    def unknown_tube(self, name: str, span: Span, defined: set[str]) -> None:
        """E206 for a tube type that is neither built in nor defined in the netlist.

        A near match is offered only when it is plausibly the same tube
        (:func:`same_type`); a similar designation is usually a different
        tube (6SL7 is not a 6SN7, 12AT7 not a 12AX7).
        """
        same = sorted(k for k in set(LIBRARY) | defined if same_type(name, k))
        if same:
            hint = f"did you mean '{same[0]}'?"
        else:
            hint = (f"'{name}' is not in the built-in library ({', '.join(sorted(LIBRARY))}); define it with "
                    f"'tube {name} mu … ex … kg1 … kp … kvb …', or start from a built-in type: "
                    f"'tube {name} like 12AX7 mu …' (see docs/models.md)")
        self.err("E206", f"unknown tube type '{name}'", span, hint)

    def run(self) -> tuple[Diagnostic, ...]:
        d = self.d
        stage_names = {s.name for s in d.stages}
        net_names = {n.name for n in d.networks}
        rail_names = [s.name for s in d.supplies] + [r.name for r in d.rails]
        self.unique([(s.name, s.span) for s in d.supplies] + [(r.name, r.span) for r in d.rails]
                    + [(s.name, s.span) for s in d.stages] + [(n.name, n.span) for n in d.networks], "stage, network or rail")
        self.unique([(t.name, t.span) for t in d.tubes], "tube")
        reserved = {"gnd", "output", "input"}
        for name, span in [(s.name, s.span) for s in d.stages] + [(n.name, n.span) for n in d.networks] + \
                          [(r, None) for r in rail_names]:
            if name in reserved:
                self.err("E202", f"'{name}' is a reserved word and cannot name a stage, network or rail",
                         span or d.supplies[0].span)

        all_names = {s.name for s in d.stages} | set(net_names) | set(rail_names)
        for s in d.stages:
            if s.kind == "long-tailed-pair":
                for t in (f"{s.name}a", f"{s.name}b"):
                    if t in all_names:
                        self.err("E275", f"stage '{s.name}' names its triodes {s.name}a and {s.name}b, but "
                                 f"'{t}' is taken", s.span, "rename one of them")
        self.check_settings()
        self.check_supplies(rail_names)
        tube_names = self.check_tubes()
        for s in d.stages:
            self.check_stage(s, rail_names, tube_names)
        self.check_networks(stage_names, net_names, rail_names)
        self.check_couplings(stage_names, net_names)
        self.check_source_output(stage_names, net_names)
        for st in d.strays:
            self.in_range("stray", st.farads, st.span, zero_ok=True)
            # a stage name is its main output node; 'output' is the chain's output node
            if st.node not in stage_names and st.node != "output":
                self.check_node_ref(st.node, st.span, stage_names, net_names, rail_names, local=None)
        if self.problems:
            raise LanguageError(tuple(self.problems) + tuple(self.warnings))
        return tuple(self.warnings)

    def check_settings(self):
        s = self.d.settings
        self.in_range("reference", s.reference_hz, self._setting_span("reference"))
        self.in_range("level", s.level_v, self._setting_span("level"))
        self.in_range("heater", s.heater_v, self._setting_span("heater"), zero_ok=True)
        band_span = self._setting_span("band")
        bad_band = len(self.problems)
        self.in_range("band", s.band_low_hz, band_span)
        self.in_range("band", s.band_high_hz, band_span)
        if len(self.problems) > bad_band:
            pass
        elif not 0 < s.band_low_hz < s.band_high_hz:
            self.err("E303", f"the band must run from a lower to a higher frequency, not "
                     f"{_fmt(s.band_low_hz, 'Hz')} to {_fmt(s.band_high_hz, 'Hz')}", self._setting_span("band"))
        elif not s.band_low_hz <= s.reference_hz <= s.band_high_hz:
            self.err("E303", f"reference frequency {_fmt(s.reference_hz, 'Hz')} lies outside the band "
                     f"{_fmt(s.band_low_hz, 'Hz')} to {_fmt(s.band_high_hz, 'Hz')}", self._setting_span("reference"))

    def _setting_span(self, key: str) -> Span:
        """The line of the ``set KEY`` in effect (the last one), or no place."""
        found = Span(self.d.path, 0, 0)
        for i, line in enumerate(self.d.lines, start=1):
            words = line.split()
            if len(words) >= 2 and words[0] == "set" and words[1] == key:
                found = Span(self.d.path, i, 1, line)
        return found

    def check_supplies(self, rail_names):
        d = self.d
        if not d.supplies:
            self.err("E203", "no supply: add a line such as 'supply B+ 300V'", Span(d.path, 1, 1))
        for s in d.supplies:
            # a negative supply is a fixed grid-bias supply (a few volts to ~150 V below ground)
            if s.volts < 0 and math.isfinite(s.volts):
                self.in_range("bias_supply", -s.volts, s.span)
            else:
                self.in_range("supply", s.volts, s.span)
            self.in_range("supply_impedance", s.impedance_ohm, s.span, zero_ok=True)
        feeds = {r.name: r.feed for r in d.rails}
        for r in d.rails:
            self.in_range("drop", r.drop_ohm, r.span)
            self.in_range("decouple", r.decouple_f, r.span)
            self.in_range("rated", r.decouple_rated_v, r.span)
            if r.feed not in rail_names:
                self.unknown("E204", "supply or rail", r.feed, r.span, rail_names)
        # a loop of rails feeding each other never reaches a supply
        for r in d.rails:
            seen, cur = set(), r.name
            while cur in feeds and cur not in seen:
                seen.add(cur)
                cur = feeds[cur]
            if cur in seen:
                self.err("E205", f"rail '{r.name}' is fed in a loop and never reaches a supply", r.span)

    def tube_form(self, name: str, depth: int = 0) -> str:
        """The model form a tube definition ends up with (its own, its base's, or "koren")."""
        defs = {t.name: t for t in self.d.tubes}
        t = defs.get(name)
        if t is None or depth > len(defs):
            try:
                return lookup(name).form
            except KeyError:
                return "koren"
        if t.form is not None:
            return t.form
        if t.base is None:
            return "koren"
        if t.base == t.name:
            try:
                return lookup(t.base).form
            except KeyError:
                return "koren"
        return self.tube_form(t.base, depth + 1)

    def check_tubes(self) -> set[str]:
        known = set(LIBRARY) | {t.name for t in self.d.tubes}
        bases = {t.name: t.base for t in self.d.tubes}
        for t in self.d.tubes:
            # follow the 'like' chain; "tube X like X" changes the built-in X and ends it
            seen, cur = {t.name}, t.base
            while cur in bases and cur not in seen:
                seen.add(cur)
                cur = None if bases[cur] == cur else bases[cur]
            if t.base != t.name and cur in seen:
                self.err("E223", f"tube '{t.name}' is defined 'like' itself through a loop of definitions", t.span)
            if t.base is not None:
                try:
                    lookup(t.base)
                except KeyError:
                    if t.base not in {u.name for u in self.d.tubes}:
                        self.unknown_tube(t.base, t.span, {u.name for u in self.d.tubes})
            form = self.tube_form(t.name)
            if t.base is None:
                required = REQUIRED_KEYS[form]
                missing = [k for k in required if k not in dict(t.params)]
                if missing:
                    self.err("E207", f"tube '{t.name}' needs the {form} model parameters {', '.join(missing)} "
                             "(or 'like TYPE' to start from a built-in type)", t.span)
            for key, value in t.params:
                other = next((f for f, keys in FORM_KEYS.items() if f != form and key in keys), None)
                if key not in FORM_KEYS[form] and other is not None:
                    self.err("E261", f"tube '{t.name}': '{key}' is a parameter of the {other} form, "
                             f"but this tube uses the {form} form", self._key_span(t.span, key),
                             f"write 'model {other}' or use the {form} keys: {', '.join(FORM_KEYS[form])}")
                self.tube_value(t.name, key, value, self._key_span(t.span, key))
                if key in ("vct", "ig-onset") and not abs(value) <= 5.0:
                    self.err("E302", f"tube '{t.name}': {key} of {value:g} V is outside the sensible range "
                             "-5 V to 5 V", self._key_span(t.span, key), subject=t.name)
        return known

    def tube_value(self, tube: str, key: str, value: float, span: Span) -> None:
        """One ``tube`` line key against :data:`TUBE_RANGES` (E301 sign, E302 range)."""
        if key not in TUBE_RANGES:
            return
        lo, hi, unit, what, zero_ok = TUBE_RANGES[key]
        shown = _fmt(value, unit) if unit and math.isfinite(value) else f"{value:g}"
        if not math.isfinite(value):
            self.err("E301", f"tube '{tube}': {what} must be a finite number", span, subject=tube)
        elif value < 0 or (value == 0 and not zero_ok):
            self.err("E301", f"tube '{tube}': {what} must be positive, not {shown}", span, subject=tube)
        elif not lo <= value <= hi:
            lo_s, hi_s = (_fmt(lo, unit), _fmt(hi, unit)) if unit else (f"{lo:g}", f"{hi:g}")
            self.err("E302", f"tube '{tube}': {what} of {shown} is outside the sensible range {lo_s} to {hi_s}",
                     span, "check the prefix and the exponent (p is pico, 1e3 is a thousand)", tube)

    def _key_span(self, span: Span, key: str) -> Span:
        """The place of ``key`` on the tube line of ``span`` (the line itself if not found)."""
        import re

        if 0 < span.line <= len(self.d.lines):
            found = re.search(rf"(?<![\w-]){re.escape(key)}(?![\w-])", self.d.lines[span.line - 1])
            if found:
                from dataclasses import replace

                return replace(span, column=found.start() + 1)
        return span

    def check_stage(self, s: Stage, rail_names, tube_names):
        sp = s.spans
        try:
            lookup(s.tube)
        except KeyError:
            if s.tube not in tube_names:
                self.unknown_tube(s.tube, s.span, {t.name for t in self.d.tubes})
        if not s.rail:
            self.err("E304", f"stage '{s.name}' has no plate line, so its plate has no path to a rail", s.span,
                     "add 'plate 100k from B+' (or 'plate on B+' for a follower)")
        elif s.rail not in rail_names:
            self.unknown("E204", "supply or rail", s.rail, sp.get("plate", s.span), rail_names)
        if s.plate_load_ohm is None and s.rail and s.kind != "cathode-follower":
            self.err("E305", f"stage '{s.name}': a {s.kind} stage needs a plate load", sp.get("plate", s.span),
                     "only a cathode follower may have its plate straight on a rail")
        self.in_range("plate_load", s.plate_load_ohm, sp.get("plate", s.span), s.name)
        if s.cathode is not None:
            cs = sp.get("cathode", s.span)
            self.in_range("cathode", s.cathode.r_ohm, cs, s.name)
            self.in_range("bypass", s.cathode.bypass_f, cs, s.name)
            self.in_range("bypass_series", s.cathode.bypass_series_ohm, cs, s.name)
            self.in_range("rated", s.cathode.bypass_rated_v, cs, s.name)
        elif s.kind in ("cathode-follower", "common-grid", *TWO_TRIODE_KINDS):
            self.err("E306", f"stage '{s.name}': a {s.kind} stage needs a cathode resistor", s.span)
        elif s.kind == "common-cathode" and s.grid_leak_ohm is not None:
            # common practice: with the cathode grounded the grid sits at 0 V and biases
            # itself by the grid current it draws through the grid leak (grid-leak bias)
            self.warn("W210", f"stage '{s.name}' has no cathode resistor: its cathode is at 0 V and it biases "
                      "by the grid current it draws through its grid leak (grid-leak bias); the operating "
                      "point then rests on the tube model's grid-current law", s.span,
                      "add 'cathode 1k5 bypass 22u' for cathode bias, or keep it and use a grid leak of "
                      "several megohms as grid-leak bias needs", s.name)
        self.check_two_triode(s, rail_names)
        self.in_range("grid_leak", s.grid_leak_ohm, sp.get("grid_leak", s.span), s.name)
        self.in_range("grid_stopper", s.grid_stopper_ohm, sp.get("grid_stopper", s.span), s.name)
        if s.heater_v is not None:
            self.in_range("heater", s.heater_v, sp.get("heater", s.span), s.name, zero_ok=True)
        if s.grid_ground and s.grid_leak_ohm is not None:
            self.err("E307", f"stage '{s.name}': a grid tied to ground needs no grid leak", sp.get("grid_ground", s.span))
        if s.grid_ground and s.kind != "common-grid":
            self.err("E307", f"stage '{s.name}': only a common-grid stage has its grid tied to ground",
                     sp.get("grid_ground", s.span), "drive the grid through a grid leak instead")
        if s.kind == "common-grid" and not s.grid_ground and s.grid_leak_ohm is None:
            self.err("E308", f"stage '{s.name}': the common-grid stage's grid needs 'grid ground' or a grid leak",
                     s.span)

    def check_two_triode(self, s: Stage, rail_names):
        """The members only a cathodyne or a long-tailed pair may have, and what those need."""
        sp = s.spans
        cs = sp.get("cathode", s.span)
        k = s.cathode
        if s.kind not in TWO_TRIODE_KINDS:
            if k is not None and k.tail_ohm is not None:
                self.err("E271", f"stage '{s.name}': a tail resistor belongs to a cathodyne or a long-tailed "
                         f"pair, not to a {s.kind} stage", cs,
                         "write 'cathode R' or 'cathode R bypass C'")
            return
        if k is not None:
            self.in_range("tail", k.tail_ohm, cs, s.name)
            if k.bypass_f is not None:
                self.err("E271", f"stage '{s.name}': the cathode of a {s.kind} is not bypassed here", cs,
                         "write 'cathode R' or 'cathode R tail R2' (the grid leaks return to the tap "
                         "between them)")
        if s.kind == "cathodyne":
            return
        sec = s.second
        if sec is None or not sec.rail:
            self.err("E272", f"stage '{s.name}': a long-tailed pair needs the second triode's plate line",
                     s.span, "add 'second plate 100k from B+'")
            return
        if sec.rail not in rail_names:
            self.unknown("E204", "supply or rail", sec.rail, sp.get("second_plate", s.span), rail_names)
        if sec.plate_load_ohm is None:
            self.err("E272", f"stage '{s.name}': the second triode of a long-tailed pair needs a plate load",
                     sp.get("second_plate", s.span))
        self.in_range("plate_load", sec.plate_load_ohm, sp.get("second_plate", s.span), s.name)
        self.in_range("grid_leak", sec.grid_leak_ohm, sp.get("second_grid_leak", s.span), s.name)
        self.in_range("grid_stopper", sec.grid_stopper_ohm, sp.get("second_grid_stopper", s.span), s.name)
        self.in_range("grid_bypass", sec.grid_bypass_f, sp.get("second_grid_bypass", s.span), s.name)
        self.in_range("rated", sec.grid_bypass_rated_v, sp.get("second_grid_bypass", s.span), s.name)

    def check_node_ref(self, name, span, stage_names, net_names, rail_names, local):
        """A node written in a network (``local`` = that network's name) or a stray line."""
        if name == "gnd" or name in rail_names:
            return
        if "." in name:
            head, tail = name.split(".", 1)
            if head in stage_names:
                terminals = KIND_TERMINALS.get(self.d.stage(head).kind, TERMINALS)
                if tail not in terminals:
                    self.unknown("E209", f"terminal of stage {head}", tail, span, terminals)
                return
            if head in net_names or head in self._instances():
                return
            self.unknown("E210", "stage or network", head, span, list(stage_names) + list(net_names))
            return
        if local is None:
            self.unknown("E211", "node", name, span, list(rail_names) + ["gnd"],
                         "name a stage terminal such as V1.plate, a rail, or a network node as net.node")

    def check_port(self, stage: str, port: str | None, side: int, span: Span):
        """``side`` 1: an output port of ``stage``; 0: an input port."""
        if port is None:
            return
        kind = self.d.stage(stage).kind
        ports = KIND_PORTS[kind][side]
        if port not in ports:
            what = "output" if side else "input"
            self.err("E273", f"stage '{stage}' ({kind}) has no {what} port '{port}'", span,
                     f"its {what} ports: " + ", ".join(ports))

    def _instances(self):
        return {c.instance for c in self.d.couplings if c.instance}

    def check_networks(self, stage_names, net_names, rail_names):
        for n in self.d.networks:
            if n.ports and len(n.ports) != 2:
                self.err("E212", f"network '{n.name}' must have an input and an output port", n.span)
            elif n.ports and n.ports[0] == n.ports[1]:
                self.err("E250", f"network '{n.name}': its input and output ports must differ, not both "
                         f"'{n.ports[0]}'", n.span, f"write 'network {n.name}: in -> out'", n.name)
            self.unique([(p.name, p.span) for p in n.parts], f"part in network {n.name}")
            if not n.parts:
                self.err("E213", f"network '{n.name}' has no parts", n.span)
            for p in n.parts:
                nodes = (p.a, p.wiper, p.b) if isinstance(p, Pot) else (p.a, p.b)
                for node in nodes:
                    self.check_node_ref(node, p.span, stage_names, net_names, rail_names, local=n.name)
                if isinstance(p, Pot):
                    self.in_range("pot", p.value, p.span)
                    if not 0.0 <= p.position <= 1.0:
                        self.err("E309", f"pot '{p.name}' position out of range: knob settings run 0 to 10, "
                                 "travel 0 to 1", p.span)
                    if p.taper == "audio" and not 0.005 <= p.taper_mid <= 0.495:
                        self.err("E310", f"pot '{p.name}': an audio taper's mid-rotation fraction must lie "
                                 f"between 0.5% and 49.5%, not {p.taper_mid * 100:g}%", p.span)
                else:
                    self.in_range(p.kind, p.value, p.span)
                    self.in_range("rated", p.rated_v, p.span)
                    if len(set(nodes)) == 1:
                        self.err("E311", f"part '{p.name}' has both ends on node '{p.a}'", p.span)
            used = [c for c in self.d.couplings if c.kind == "network" and c.network == n.name]
            if n.ports and not used:
                self.warn("W201", f"network '{n.name}' has ports but is never attached with 'couple … via {n.name}'",
                          n.span, subject=n.name)
            if not n.ports and used:
                self.err("E214", f"network '{n.name}' is attached with 'via' but has no ports", used[0].span,
                         f"write its header as 'network {n.name}: in -> out'")

    def check_couplings(self, stage_names, net_names):
        instances: dict[str, Span] = {}
        for c in self.d.couplings:
            if c.src_stage not in stage_names:
                self.unknown("E215", "stage", c.src, c.span, stage_names)
            else:
                self.check_port(c.src_stage, c.src_port, 1, c.span)
            if c.dst != "output" and c.dst_stage not in stage_names:
                self.unknown("E215", "stage", c.dst, c.span, list(stage_names) + ["output"])
            elif c.dst != "output":
                self.check_port(c.dst_stage, c.dst_port, 0, c.span)
            if c.src_stage == c.dst_stage:
                self.err("E216", f"stage '{c.src_stage}' is coupled to itself", c.span)
            if c.kind == "cap":
                self.in_range("coupling", c.cap_f, c.span)
                self.in_range("rated", c.rated_v, c.span)
            if c.kind == "network":
                if c.network not in net_names:
                    self.unknown("E217", "network", c.network, c.span, net_names)
                inst = c.label
                if inst in instances:
                    self.err("E218", f"network instance '{inst}' is attached twice (line {instances[inst].line})",
                             c.span, f"name the second one: 'via {c.network} as {c.network}2'")
                instances[inst] = c.span
            if c.kind == "direct" and c.dst == "output":
                continue
        # each stage is fed by at most one coupling
        fed: dict[str, Span] = {}
        for c in self.d.couplings:
            dst = c.dst
            if c.dst_stage in stage_names and c.dst_port is not None \
                    and c.dst_port == KIND_PORTS[self.d.stage(c.dst_stage).kind][0][0]:
                dst = c.dst_stage  # "PI.in" is the stage's main input, "PI"
            if dst in fed:
                self.err("E219", f"'{c.dst}' is fed by two couplings (line {fed[dst].line} and here)", c.span)
            fed[dst] = c.span
        if self.d.source is not None and self.d.source.into in fed:
            self.err("E219", f"stage '{self.d.source.into}' is fed by the input and by a coupling", fed[self.d.source.into])

    def check_common_grid_drive(self, src, stage_names):
        """E325: a common-grid stage takes the signal at its cathode; a source
        with no resistance of its own, DC-coupled, holds that cathode at 0 V
        (no bias, several mA): refuse it and say what to add."""
        if src.into not in stage_names or src.cap_f is not None:
            return
        if self.d.stage(src.into).kind != "common-grid":
            return
        if src.kind == "ideal" or (src.kind == "resistance" and src.r_ohm == 0.0):
            self.err("E325", f"the input drives the cathode of common-grid stage '{src.into}' with no resistance "
                     "and no capacitor: the source would hold the cathode at 0 V at DC, leaving the stage "
                     "without bias", src.span,
                     "couple the input through a capacitor so the cathode resistor sets the bias: "
                     f"'input into {src.into} {src.kind}{' 0' if src.kind == 'resistance' else ''} cap 10u'")

    def check_source_output(self, stage_names, net_names):
        d = self.d
        src = d.source
        if src is None:
            self.err("E220", "no input: add a line such as 'input into V1 resistance 10k'", Span(d.path, 1, 1))
        else:
            if src.into not in stage_names:
                self.unknown("E215", "stage", src.into, src.span, stage_names)
            if src.kind == "resistance":
                self.in_range("source_r", src.r_ohm, src.span, zero_ok=True)
            elif src.kind == "pickup":
                self.in_range("pickup_r", src.r_ohm, src.span)
                self.in_range("pickup_l", src.l_h, src.span)
                self.in_range("pickup_c", src.c_f, src.span, zero_ok=True)
                self.in_range("cable", src.cable_f, src.span, zero_ok=True)
                self.in_range("pickup_loss", src.loss_ohm, src.span)
            if src.cap_f is not None:
                self.in_range("coupling", src.cap_f, src.span)
                self.in_range("rated", src.cap_rated_v, src.span)
            self.check_common_grid_drive(src, stage_names)
        out = d.output
        to_output = [c for c in d.couplings if c.dst == "output"]
        if out is None:
            self.err("E221", "no output: add a line such as 'output V2 load 1M'", Span(d.path, 1, 1))
            return
        self.in_range("load", out.load_ohm, out.span)
        if out.node is None and not to_output:
            self.err("E222", "say where the output is taken: 'output V2 load 1M', or couple a stage to 'output'", out.span)
        if out.node is not None and to_output:
            self.err("E222", "the output is fed by a coupling already; write 'output load …' without a node", out.span)
        rails = [s.name for s in d.supplies] + [r.name for r in d.rails]
        seen: dict[str, Span] = {}
        for o in (out, *out.more):
            if o is not out:
                self.in_range("load", o.load_ohm, o.span)
            if o.node is None:
                continue
            if o.node in seen:
                self.err("E274", f"output '{o.node}' is named twice on the output line", o.span)
            seen[o.node] = o.span
            if o.node not in stage_names:
                self.check_node_ref(o.node, o.span, stage_names, net_names, rails, local=None)


def _designation(name: str) -> str:
    return "".join(ch for ch in name.upper() if ch.isalnum())


def same_type(written: str, known: str) -> bool:
    """Whether ``written`` is plausibly the tube type ``known`` (or one of its aliases).

    Yes when the two are equal ignoring case and punctuation, or when one is
    the other followed by letters only: the suffix of a later or ruggedised
    version of one type (``12AX7A``, ``12AT7WC``, ``6SN7GTB``; common
    practice of the type designation systems).  Any other difference, even
    one letter or digit, names a different tube.
    """
    w = _designation(written)
    try:
        model = lookup(known)
        names = {model.name, *model.aliases, known}
    except KeyError:
        names = {known}
    for n in map(_designation, names):
        if w == n:
            return True
        long_, short = (w, n) if len(w) > len(n) else (n, w)
        if short and long_.startswith(short) and long_[len(short):].isalpha() and short[-1].isdigit():
            return True
    return False


def check(design: Design) -> tuple[Diagnostic, ...]:
    """Check names, references and values; raise LanguageError on any error.

    Returns
    -------
    tuple of Diagnostic
        the warnings (codes W2xx).
    """
    return _Checker(design).run()


def network_node_name(design: Design, instance: str, local: str, ports: dict[str, str]) -> str:
    """The circuit node a network's node name refers to.

    ``instance`` is the network instance's name, ``ports`` maps its port
    names to the circuit nodes they attach to.  Rails and ``gnd`` keep their
    names; ``STAGE.terminal`` and ``net.node`` are returned as written (the
    builder resolves terminals); a plain local name becomes ``instance.local``.
    """
    if local in ports:
        return ports[local]
    if local == "gnd" or "." in local:
        return local
    if local in {s.name for s in design.supplies} | {r.name for r in design.rails}:
        return local
    return f"{instance}.{local}"
