"""Text → :class:`~chain.language.design.Design`.

The netlist is line-oriented.  Each line (with its ``#`` comment removed) is
parsed on its own by the lark grammar in ``grammar.lark``; indented lines are
members of the last ``stage`` or ``network`` header above them.  Parsing line
by line lets one pass collect *every* syntax error of a file, each located by
file, line and column, before anything is raised.

Entry points: :func:`parse_text` and :func:`parse_file` (nothing is sniffed:
text is text, a path is a path).  Both validate the result
(:mod:`chain.language.validate`) and raise :class:`~chain.errors.LanguageError`
carrying all diagnostics found.
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass, replace
from functools import lru_cache
from importlib import resources
from pathlib import Path

from chain.errors import Diagnostic, LanguageError, Span, error
from chain.language.design import (
    ToleranceDef,
    parse_tolerance,
    DEFAULT_PICKUP_LOSS_OHM,
    Cathode,
    Coupling,
    Design,
    Network,
    Output,
    Part,
    Pot,
    Rail,
    Section,
    Settings,
    Source,
    Stage,
    Stray,
    Supply,
    TubeDef,
)
from chain.tubes.model import FORMS
from chain.units import QuantityError, parse_level, parse_quantity

__all__ = ["parse_text", "parse_file", "parse_syntax"]

#: statements allowed at the top level, and inside each kind of block
TOP_LEVEL = {"title", "set_reference", "set_band", "set_level", "set_points", "set_heater", "supply",
             "rail", "tube", "stage", "network", "couple", "input", "output", "stray", "tolerance",
             "tolerance_tube"}
STAGE_MEMBERS = {"plate_load", "plate_on", "cathode", "grid", "heater", "second"}
NETWORK_MEMBERS = {"part", "pot", "rheostat", "pot_unlabelled"}

#: other words of the trade for a stage terminal
TERMINAL_SYNONYMS = {"anode": "plate"}

#: units expected for each tube parameter key (None: a plain number)
TUBE_KEYS = {
    "mu": None, "ex": None, "kg1": None, "kp": None, "kvb": None, "vct": "V",
    "ig-k": None, "ig-onset": "V", "ig-knee": "V",
    "g": None, "gamma": None, "c": None, "gg": None, "xi": None, "cg": None, "ig0": "A",
    "cgk": "F", "cgp": "F", "cpk": "F",
    "vp-max": "V", "pd-max": "W", "ik-max": "A", "vhk-max": "V", "rg-max": "ohm", "vp0-max": "V",
}


@lru_cache(maxsize=1)
def _lark():
    from lark import Lark

    text = resources.files("chain.language").joinpath("grammar.lark").read_text(encoding="utf-8")
    # cache=True keeps the built parser tables in the temporary folder, keyed by the
    # grammar's hash and lark's version: building them costs more than all of
    # `chain check` on a demo (issue 16, start-up)
    return Lark(text, parser="lalr", lexer="contextual", propagate_positions=True, cache=True)


@lru_cache(maxsize=1)
def _terminal_words() -> dict[str, str]:
    """Terminal name → what the user would type, for error messages."""
    words = {}
    for t in _lark().terminals:
        if t.pattern.type == "str":
            words[t.name] = t.pattern.value
    words.update({"VALUE": "a value", "NAME": "a name", "TYPE": "a tube type", "KEY": "a parameter name",
                  "REST": "text", "$END": "end of line"})
    return words


def strip_comment(line: str) -> str:
    """The line without its ``#`` comment (a ``#`` inside double quotes stays)."""
    quoted = False
    for i, ch in enumerate(line):
        if ch == '"':
            quoted = not quoted
        elif ch == "#" and not quoted:
            return line[:i]
    return line


@dataclass(frozen=True, slots=True)
class Statement:
    """One parsed line: ``kind`` (the grammar rule), its ``tree``, its place."""

    kind: str
    tree: object
    span: Span
    indented: bool


class _LineErrors(Exception):
    def __init__(self, diagnostics):
        self.diagnostics = diagnostics


def _expected_names(exc) -> set[str]:
    from lark.exceptions import UnexpectedCharacters

    if isinstance(exc, UnexpectedCharacters):
        return set(exc.allowed or ())
    return set(exc.expected or ())


#: the words that may start a line inside each kind of block
BLOCK_WORDS = {"stage": ("plate", "cathode", "grid", "heater", "second"),
               "network": ("resistor", "capacitor", "inductor", "pot", "rheostat")}


def _syntax_error(exc, body: str, span: Span, members: tuple[str, ...] | None = None) -> Diagnostic:
    """A located E10x diagnostic for lark's exception on the stripped line ``body``.

    The offending *word* (up to white space) is reported, and what was
    expected is asked of the parser at the start of that word, so that a
    keyword glued to more letters ("capacitor" where "cap" is allowed) is
    reported as one wrong word.
    """
    from lark.exceptions import UnexpectedEOF, UnexpectedInput

    words = _terminal_words()
    at_end = isinstance(exc, UnexpectedEOF) or getattr(getattr(exc, "token", None), "type", "") == "$END"
    indent = span.column - 1
    if at_end:
        found, pos = "", len(body)
        expected_names = _expected_names(exc)
    else:
        pos = (getattr(exc, "column", 1) or 1) - 1
        start = pos
        while start > 0 and not body[start - 1].isspace():
            start -= 1
        stop = pos
        while stop < len(body) and not body[stop].isspace():
            stop += 1
        found, pos = body[start:stop], start
        try:
            state = _lark().parse_interactive(body[:start].rstrip())
            state.exhaust_lexer()
            expected_names = set(state.accepts())
        except UnexpectedInput:
            expected_names = _expected_names(exc)
    expected = sorted({words.get(name, name.lower()) for name in expected_names})
    if members is not None and pos == 0:
        # the first word of a line inside a block: only that block's members fit
        expected = sorted(members)
    span = replace(span, column=indent + pos + 1)
    literal = [w for w in expected if not w.startswith(("a ", "an ", "end ", "text"))]
    hint = ""
    if found:
        close = difflib.get_close_matches(found, literal, n=1, cutoff=0.6)
        if close:
            hint = f"did you mean '{close[0]}'?"
    listing = ", ".join(f"'{w}'" if w in literal else w for w in expected) or "nothing more"
    if not found:
        return error("E101", f"line ends too early: expected {listing}", span, hint)
    if expected == ["end of line"]:
        return error("E102", f"unexpected '{found}' after a complete statement", span, hint)
    return error("E103", f"unexpected '{found}': expected {listing}", span, hint)


#: names of control characters that Unicode leaves unnamed
_CONTROL_NAMES = {0: "NUL", 0x0B: "LINE TABULATION", 0x0C: "FORM FEED", 0x0D: "CARRIAGE RETURN",
                  0x1B: "ESCAPE", 0x7F: "DELETE"}


def _invisible(body: str, span: Span) -> list[Diagnostic]:
    """E132 for each character of ``body`` (outside double quotes) that shows as
    nothing or as a plain space but is not one: a no-break space, a
    zero-width space, NUL and other control characters, a byte-order mark in
    the middle of the text.  They come from copying out of web pages and word
    processors, and would otherwise give a puzzling syntax error."""
    import unicodedata

    found = []
    quoted = False
    for i, ch in enumerate(body):
        if ch == '"':
            quoted = not quoted
        if quoted or ch in " \t" or (ch.isprintable() and not ch.isspace()):
            continue
        category = unicodedata.category(ch)
        if category not in ("Cc", "Cf", "Zs", "Zl", "Zp", "Co", "Cn") and not ch.isspace():
            continue
        if ch == "\r" and i == len(body) - 1:
            continue  # a Windows line end that splitlines left behind
        code = ord(ch)
        name = unicodedata.name(ch, "") or _CONTROL_NAMES.get(code, "a control character")
        spaceish = category == "Zs" or ch.isspace()
        found.append(error("E132", f"invisible character U+{code:04X} ({name}) in the line",
                           replace(span, column=i + 1),
                           "replace it with a plain space" if spaceish else
                           "delete it (such characters come from copying text out of web pages or documents)"))
    return found


def parse_syntax(text: str, source: str = "<string>") -> Design:
    """Parse ``text`` into a Design, checking syntax only.

    Raises
    ------
    LanguageError
        with every syntax error of the text (codes E1xx).
    """
    from lark.exceptions import UnexpectedInput

    lines = text.splitlines()
    statements: list[Statement] = []
    diagnostics: list[Diagnostic] = []
    block = None  # "stage" or "network" while inside such a block
    for number, raw in enumerate(lines, start=1):
        body = strip_comment(raw)
        if not body.strip():
            continue
        if "\t" in body[: len(body) - len(body.lstrip())]:
            col = body.index("\t") + 1
            diagnostics.append(error("E104", "indent with spaces, not tabs", Span(source, number, col, raw)))
            continue
        hidden = _invisible(body, Span(source, number, 1, raw))
        if hidden:
            diagnostics.extend(hidden)
            head = body.split()[0] if body.split() else ""
            if body[:1] not in (" ", "\t") and head in ("stage", "network"):
                block = head
                statements.append(Statement("broken_" + head, None, Span(source, number, 1, raw), False))
            continue
        indent = len(body) - len(body.lstrip())
        span = Span(source, number, indent + 1, raw)
        if indent == 0:
            head = body.split()[0]
            block = head if head in ("stage", "network") else None
        try:
            tree = _lark().parse(body.strip())
        except UnexpectedInput as exc:
            members = BLOCK_WORDS.get(block) if indent > 0 and block is not None else None
            diagnostics.append(_syntax_error(exc, body.strip(), span, members))
            head = body.split()[0]
            if indent == 0 and head in ("stage", "network"):
                # keep the block open so its member lines are still checked
                # without a cascade of "outside a block" errors
                statements.append(Statement("broken_" + head, None, span, False))
            continue
        rule = tree.children[0]
        statements.append(Statement(rule.data, rule, span, indent > 0))
    builder = _Builder(source, tuple(lines))
    for st in statements:
        try:
            builder.add(st)
        except _LineErrors as exc:
            diagnostics.extend(exc.diagnostics)
    if diagnostics:
        raise LanguageError(diagnostics)
    return builder.design()


def parse_text(text: str, source: str = "<string>") -> Design:
    """Parse and validate netlist ``text``; ``source`` names it in messages."""
    from chain.language.validate import check

    design = parse_syntax(text, source)
    return replace(design, warnings=check(design))


#: the largest netlist read, bytes (a real preamp is a few kB)
MAX_NETLIST_BYTES = 10_000_000

#: leading bytes of files that are often passed by mistake → what they are
_MAGIC = ((b"\x89PNG\r\n\x1a\n", "a PNG image"), (b"%PDF-", "a PDF document"), (b"\xff\xd8\xff", "a JPEG image"),
          (b"GIF8", "a GIF image"), (b"PK\x03\x04", "a ZIP archive"), (b"\x7fELF", "a program"))


def read_netlist(path) -> str:
    """The text of the netlist file at ``path``, checked before parsing.

    Raises
    ------
    LanguageError
        E100 the file cannot be read; E130 it is larger than
        :data:`MAX_NETLIST_BYTES` (read no further, so ``/dev/zero`` stops at
        once); E133 it is plainly another kind of file (an image, a JSON or
        Markdown report); E131 it is not UTF-8 text, located at the first
        bad byte's line and column.
    """
    name = str(path)
    try:
        with open(path, "rb") as fh:
            raw = fh.read(MAX_NETLIST_BYTES + 1)
    except OSError as exc:
        reason = exc.strerror or str(exc)
        raise LanguageError(error("E100", f"cannot read netlist: {reason}", Span(name, 1, 1))) from None
    if len(raw) > MAX_NETLIST_BYTES:
        raise LanguageError(error(
            "E130", f"the file is larger than {MAX_NETLIST_BYTES // 1_000_000} MB: too big to be a netlist",
            Span(name, 1, 1), "a preamp netlist is a few kB; is this the right file?"))
    kind = _other_kind(raw, name)
    if kind:
        raise LanguageError(error("E133", f"this is {kind}, not a netlist", Span(name, 1, 1),
                                  "give a netlist written in the chain language (.chain)"
                                  + ("; chain diff and chain compare read JSON reports whose names end in .json"
                                     if "JSON" in kind else "")))
    if raw.startswith(b"\xef\xbb\xbf"):  # a byte-order mark (some editors write one) is not text
        raw = raw[3:]
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise LanguageError(_not_utf8(raw, exc.start, name)) from None


def _other_kind(raw: bytes, name: str) -> str:
    """What a file plainly is when it is not a netlist ("" if it may be one)."""
    for magic, kind in _MAGIC:
        if raw.startswith(magic):
            return kind
    head = raw[:4096].lstrip(b"\xef\xbb\xbf \t\r\n")
    if head.startswith((b"{", b"[")):
        return "a chain JSON report" if b'"chain-report/' in head else "a JSON file"
    if head.startswith((b"<?xml", b"<svg", b"<!DOCTYPE", b"<html")):
        return "an SVG image or other XML/HTML file"
    first = head.split(b"\n", 1)[0].strip()
    if first.startswith(b"# chain report"):
        return "a chain report in Markdown"
    if first.startswith(b"chain report"):
        return "a chain text report"
    if first.startswith((b"chain diff", b"chain compare")):
        return "the output of " + first.split()[0].decode() + " " + first.split()[1].decode()
    return ""


def _not_utf8(raw: bytes, start: int, name: str) -> Diagnostic:
    """E131 at the line and column (in characters) of the first byte that is not UTF-8."""
    line_start = raw.rfind(b"\n", 0, start) + 1
    line = raw.count(b"\n", 0, start) + 1
    column = len(raw[line_start:start].decode("utf-8", errors="replace")) + 1
    line_end = raw.find(b"\n", start)
    shown = raw[line_start: line_end if line_end >= 0 else len(raw)].decode("utf-8", errors="replace")
    byte = raw[start]
    guess = raw[start:start + 1].decode("latin-1")
    return error("E131", f"the file is not UTF-8 text: byte 0x{byte:02X} cannot be read"
                 + (f" (in Latin-1 it would be '{guess}')" if guess.isprintable() and byte >= 0xA0 else ""),
                 Span(name, line, column, shown),
                 "save the file as UTF-8 (most editors offer the encoding under 'Save as')")


def _looks_like_markdown(path: str, diagnostics) -> bool:
    return Path(path).suffix.lower() in (".md", ".markdown") and all(d.code.startswith("E1") for d in diagnostics)


def parse_file(path) -> Design:
    """Parse and validate the netlist file at ``path``.

    Raises
    ------
    LanguageError
        as :func:`read_netlist`, else as :func:`parse_text`; a Markdown file
        that fails to parse is said to be one (E133) once, not line by line.
    """
    text = read_netlist(path)
    try:
        return parse_text(text, str(path))
    except LanguageError as exc:
        syntax = [d for d in exc.diagnostics if d.severity == "error"]
        if len(syntax) > 1 and _looks_like_markdown(str(path), syntax):
            raise LanguageError(error("E133", f"this is a Markdown file, not a netlist ({len(syntax)} lines "
                                      "are not netlist statements)", syntax[0].span,
                                      "give a netlist written in the chain language (.chain)")) from None
        raise


# --------------------------------------------------------------------------
# statements → design objects


def _tok(node) -> str:
    return str(node)


def _col(token, span: Span) -> int:
    return span.column + (getattr(token, "column", 1) or 1) - 1


class _Builder:
    """Collects statements into blocks and design objects."""

    def __init__(self, source: str, lines: tuple[str, ...]):
        self.source = source
        self.lines = lines
        self.title = ""
        self.settings: dict[str, tuple[float, Span]] = {}
        self.supplies: list[Supply] = []
        self.rails: list[Rail] = []
        self.tubes: list[TubeDef] = []
        self.stages: list[dict] = []
        self.networks: list[dict] = []
        self.couplings: list[Coupling] = []
        self.sources: list[Source] = []
        self.outputs: list[Output] = []
        self.strays: list[Stray] = []
        self.tolerances: list[ToleranceDef] = []
        #: the open block: ("stage", dict) or ("network", dict) or None
        self.block: tuple[str, dict] | None = None

    # -- values ---------------------------------------------------------------
    def value(self, tree, span: Span, unit: str | None, what: str) -> float:
        token = tree.children[0]
        text = str(token)
        col = _col(token, span)
        try:
            return parse_quantity(text, unit)
        except QuantityError as exc:
            raise _LineErrors([error("E110", f"bad {what} '{text}': {exc.message}",
                                     replace(span, column=col + exc.column), exc.hint)]) from None

    def percent(self, tree, span: Span, what: str) -> float:
        token = tree.children[0]
        text = str(token)
        col = _col(token, span)
        body = text[:-1] if text.endswith("%") else text
        try:
            number = float(body)
        except ValueError:
            raise _LineErrors([error("E110", f"bad {what} '{text}': write a percentage such as 10%",
                                     replace(span, column=col))]) from None
        return number / 100.0 if text.endswith("%") else number

    def at(self, token, span: Span) -> Span:
        return replace(span, column=_col(token, span))

    # -- dispatch -------------------------------------------------------------
    def add(self, st: Statement) -> None:
        kind = st.kind
        if st.indented:
            if self.block is None:
                raise _LineErrors([error("E105", f"indented '{_first_word(st)}' line outside a stage or network block", st.span,
                                         "remove the indentation, or put it under a 'stage' or 'network' header")])
            block_kind, _ = self.block
            allowed = STAGE_MEMBERS if block_kind == "stage" else NETWORK_MEMBERS
            if kind not in allowed:
                where = "a stage" if block_kind == "stage" else "a network"
                raise _LineErrors([error("E106", f"'{_first_word(st)}' does not belong inside {where}", st.span,
                                         _member_hint(block_kind))])
            getattr(self, "_" + kind)(st.tree, st.span)
            return
        if kind.startswith("broken_"):
            block = kind[len("broken_"):]
            self.block = (block, {"name": "?", "parts": []})
            return
        if kind not in TOP_LEVEL:
            raise _LineErrors([error("E107", f"'{_first_word(st)}' must be indented under a "
                                     f"{'stage' if kind in STAGE_MEMBERS else 'network'} header", st.span)])
        self.block = None
        getattr(self, "_" + kind)(st.tree, st.span)

    # -- top level ------------------------------------------------------------
    def _title(self, tree, span):
        text = str(tree.children[0]).strip()
        if len(text) >= 2 and text[0] == text[-1] == '"':
            text = text[1:-1]
        self.title = text

    def _set_reference(self, tree, span):
        self.settings["reference_hz"] = (self.value(tree.children[0], span, "Hz", "reference frequency"), span)

    def _set_band(self, tree, span):
        lo = self.value(tree.children[0], span, "Hz", "band start")
        hi = self.value(tree.children[1], span, "Hz", "band end")
        self.settings["band_low_hz"], self.settings["band_high_hz"] = (lo, span), (hi, span)

    def _set_level(self, tree, span):
        token = tree.children[0].children[0]
        form = str(tree.children[1].data) if len(tree.children) > 1 else None
        try:
            peak_v = parse_level(str(token), form)
        except QuantityError as exc:
            raise _LineErrors([error("E110", f"bad input level '{token}': {exc.message}",
                                     replace(span, column=_col(token, span) + exc.column), exc.hint)]) from None
        self.settings["level_v"] = (peak_v, span)

    def _set_points(self, tree, span):
        self.settings["points"] = (self.value(tree.children[0], span, None, "number of points"), span)

    def _set_heater(self, tree, span):
        self.settings["heater_v"] = (self.value(tree.children[0], span, "V", "heater potential"), span)

    def _supply(self, tree, span):
        name, volts, *rest = tree.children
        imp = self.value(rest[0], span, "ohm", "supply impedance") if rest else 0.0
        self.supplies.append(Supply(str(name), self.value(volts, span, "V", "supply voltage"), imp,
                                    self.at(name, span)))

    def _rail(self, tree, span):
        name, feed, drop, *rest = tree.children
        dec_f = dec_v = None
        if rest:
            dec = rest[0]
            dec_f = self.value(dec.children[0], span, "F", "decoupling capacitor")
            if len(dec.children) > 1:
                dec_v = self.value(dec.children[1].children[0], span, "V", "voltage rating")
        self.rails.append(Rail(str(name), str(feed), self.value(drop, span, "ohm", "dropping resistor"),
                               dec_f, dec_v, self.at(name, span)))

    def _tube(self, tree, span):
        children = list(tree.children)
        name = children.pop(0)
        base = form = None
        if children and getattr(children[0], "data", None) == "tube_like":
            base = str(children.pop(0).children[0])
        if children and getattr(children[0], "data", None) == "tube_form":
            form = children.pop(0).children[0]
        params = []
        problems = []
        for p in children:
            key_tok, val = p.children
            key = str(key_tok)
            if key not in TUBE_KEYS:
                close = difflib.get_close_matches(key, list(TUBE_KEYS), n=1)
                problems.append(error("E111", f"unknown tube parameter '{key}'", self.at(key_tok, span),
                                      f"did you mean '{close[0]}'?" if close else
                                      "known: " + ", ".join(TUBE_KEYS)))
                continue
            try:
                params.append((key, self.value(val, span, TUBE_KEYS[key], f"tube parameter {key}")))
            except _LineErrors as exc:
                problems.extend(exc.diagnostics)
        if form is not None and str(form) not in FORMS:
            close = difflib.get_close_matches(str(form), list(FORMS), n=1)
            problems.append(error("E260", f"unknown tube model form '{form}'", self.at(form, span),
                                  f"did you mean '{close[0]}'?" if close else "known: " + ", ".join(FORMS)))
        if problems:
            raise _LineErrors(problems)
        self.tubes.append(TubeDef(str(name), base, tuple(params), self.at(name, span),
                                  None if form is None else str(form)))

    def _stage(self, tree, span):
        name, kind, tube = tree.children
        stage = {"name": str(name), "kind": kind.data.replace("_", "-"), "tube": str(tube),
                 "span": self.at(name, span)}
        self.stages.append(stage)
        self.block = ("stage", stage)

    def _network(self, tree, span):
        name, *ports = tree.children
        net = {"name": str(name), "ports": tuple(str(p) for p in ports), "parts": [], "span": self.at(name, span)}
        self.networks.append(net)
        self.block = ("network", net)

    def _couple(self, tree, span):
        src, dst, how = tree.children
        common = dict(src=str(src), dst=str(dst), span=self.at(src, span))
        if how.data == "via_cap":
            rated = self.value(how.children[1].children[0], span, "V", "voltage rating") if len(how.children) > 1 else None
            self.couplings.append(Coupling(kind="cap", cap_f=self.value(how.children[0], span, "F", "coupling capacitor"),
                                           rated_v=rated, **common))
        elif how.data == "via_direct":
            self.couplings.append(Coupling(kind="direct", **common))
        else:
            net = str(how.children[0])
            inst = str(how.children[1]) if len(how.children) > 1 else None
            self.couplings.append(Coupling(kind="network", network=net, instance=inst, **common))

    def _input(self, tree, span):
        into, src, *link = tree.children
        cap = {}
        if link:
            value, *rated = link[0].children
            cap = {"cap_f": self.value(value, span, "F", "input coupling capacitor"),
                   "cap_rated_v": self.value(rated[0].children[0], span, "V", "voltage rating") if rated else None}
        kind = src.data
        if kind == "ideal":
            self.sources.append(Source("ideal", str(into), span=self.at(into, span), **cap))
        elif kind == "resistance":
            self.sources.append(Source("resistance", str(into), self.value(src.children[0], span, "ohm", "source resistance"),
                                       span=self.at(into, span), **cap))
        else:
            r, l, c, *rest = src.children
            loss = [t for t in rest if getattr(t, "data", None) in ("loss_value", "loss_off")]
            cable = [t for t in rest if t not in loss]
            loss_ohm: float | None = DEFAULT_PICKUP_LOSS_OHM
            if loss and loss[0].data == "loss_off":
                loss_ohm = None
            elif loss:
                loss_ohm = self.value(loss[0].children[0], span, "ohm", "pickup loss resistance")
            self.sources.append(Source(
                "pickup", str(into),
                r_ohm=self.value(r, span, "ohm", "winding resistance"),
                l_h=self.value(l, span, "H", "pickup inductance"),
                c_f=self.value(c, span, "F", "pickup capacitance"),
                cable_f=self.value(cable[0], span, "F", "cable capacitance") if cable else 0.0,
                loss_ohm=loss_ohm,
                span=self.at(into, span), **cap))

    def _output(self, tree, span):
        children = list(tree.children)
        more = [c for c in children if getattr(c, "data", None) == "output_more"]
        children = [c for c in children if getattr(c, "data", None) != "output_more"]
        node = str(children.pop(0)) if len(children) == 2 else None
        extra = []
        for m in more:
            name, val = m.children
            extra.append(Output(str(name), self.value(val, span, "ohm", "output load"), self.at(name, span)))
        if extra and node is None:
            raise _LineErrors([error("E274", "an output line with several ports names each of them",
                                     self.at(more[0].children[0], span),
                                     "write 'output PI.plate load 220k and PI.cathode load 220k'")])
        self.outputs.append(Output(node, self.value(children[0], span, "ohm", "output load"), span,
                                   tuple(extra)))

    def _stray(self, tree, span):
        node, val = tree.children
        self.strays.append(Stray(str(node), self.value(val, span, "F", "stray capacitance"), self.at(node, span)))

    def _tolerance(self, tree, span, tube_type: bool = False):
        target, val = tree.children
        try:
            low, high = parse_tolerance(str(val.children[0]), self.at(val.children[0], span))
        except LanguageError as exc:
            raise _LineErrors(list(exc.diagnostics)) from None
        self.tolerances.append(ToleranceDef(str(target), low, high, tube_type, self.at(target, span)))

    def _tolerance_tube(self, tree, span):
        self._tolerance(tree, span, tube_type=True)

    # -- stage members --------------------------------------------------------
    #: while a ``second …`` line is read: the prefix of its member keys
    _prefix = ""

    def _member(self, key: str, value, span: Span) -> None:
        assert self.block is not None  # members are dispatched only inside an open block
        _, stage = self.block
        key = self._prefix + key
        if key in stage:
            raise _LineErrors([error("E108", f"stage {stage['name']} already has its {key.replace('_', ' ')}", span,
                                     "give each part once per stage")])
        stage[key] = value
        stage.setdefault("spans", {})[key] = span

    def _second(self, tree, span):
        _, stage = self.block
        if stage.get("kind") != "long-tailed-pair":
            raise _LineErrors([error("E270", f"'second' lines belong to a long-tailed pair, not to a "
                                     f"{stage.get('kind', 'broken')} stage", span,
                                     "only a long-tailed pair has a second triode with its own plate and grid")])
        member = tree.children[0]
        self._prefix = "second_"
        try:
            getattr(self, "_" + member.data)(member, span)
        finally:
            self._prefix = ""

    def _plate_load(self, tree, span):
        val, rail = tree.children
        self._member("plate", (self.value(val, span, "ohm", "plate load"), str(rail)), span)

    def _plate_on(self, tree, span):
        self._member("plate", (None, str(tree.children[0])), span)

    def _cathode(self, tree, span):
        r, *rest = tree.children
        rk = self.value(r, span, "ohm", "cathode resistor")
        ck = rkc = rated = None
        if rest and rest[0].data == "tail":
            tail = self.value(rest[0].children[0], span, "ohm", "tail resistor")
            self._member("cathode", Cathode(rk, tail_ohm=tail), span)
            return
        if rest:
            by = rest[0].children
            ck = self.value(by[0], span, "F", "bypass capacitor")
            for item in by[1:]:
                if hasattr(item, "data") and item.data == "rated":
                    rated = self.value(item.children[0], span, "V", "voltage rating")
                else:
                    rkc = self.value(item, span, "ohm", "bypass series resistor")
        self._member("cathode", Cathode(rk, ck, rkc, rated), span)

    def _grid(self, tree, span):
        for item in tree.children:
            if item.data == "grid_leak":
                self._member("grid_leak", self.value(item.children[0], span, "ohm", "grid leak"), span)
            elif item.data == "grid_stopper":
                self._member("grid_stopper", self.value(item.children[0], span, "ohm", "grid stopper"), span)
            elif item.data == "grid_bypass":
                if not self._prefix:
                    raise _LineErrors([error("E270", "only the second grid of a long-tailed pair takes a bypass "
                                             "capacitor", span,
                                             "write 'second grid leak 1M bypass 100n' under a long-tailed pair")])
                c = self.value(item.children[0], span, "F", "grid bypass capacitor")
                rated = (self.value(item.children[1].children[0], span, "V", "voltage rating")
                         if len(item.children) > 1 else None)
                self._member("grid_bypass", (c, rated), span)
            else:
                self._member("grid_ground", True, span)

    def _heater(self, tree, span):
        self._member("heater", self.value(tree.children[0], span, "V", "heater potential"), span)

    # -- network members ------------------------------------------------------
    def _part(self, tree, span):
        kind_tree, name, a, b, val, *rest = tree.children
        kind = kind_tree.data
        unit = {"resistor": "ohm", "capacitor": "F", "inductor": "H"}[kind]
        rated = None
        if rest:
            if kind != "capacitor":
                raise _LineErrors([error("E109", f"only capacitors take a voltage rating, not a {kind}", span)])
            rated = self.value(rest[0].children[0], span, "V", "voltage rating")
        _, net = self.block
        net["parts"].append(Part(kind, str(name), str(a), str(b), self.value(val, span, unit, kind), rated,
                                 self.at(name, span)))

    def _taper_position(self, taper, position, span) -> tuple[str, float, float]:
        """``(taper, mid-rotation fraction, travel 0..1)``; ``log`` is the audio taper."""
        kind = "linear" if taper.data == "linear" else "audio"
        mid = 0.5
        if kind == "audio":
            mid = self.percent(taper.children[0], span, "taper") if taper.children else 0.1
        if position.data == "knob":
            pos = self.value(position.children[0], span, None, "knob setting") / 10.0
        else:
            pos = self.value(position.children[0], span, None, "travel")
        return kind, mid, pos

    def _pot(self, tree, span):
        name, *ends, val, taper, position = tree.children
        nodes: dict[str, str] = {}
        problems = []
        for end in ends:
            if end.data in nodes:
                problems.append(error("E120", f"pot '{name}' names its {end.data} terminal twice",
                                      self.at(end.children[0], span),
                                      "name each terminal once: cw (the end at knob 10), wiper, ccw (the end at knob 0)"))
            nodes[end.data] = str(end.children[0])
        missing = [t for t in ("cw", "wiper", "ccw") if t not in nodes]
        if missing:
            problems.append(error("E120", f"pot '{name}' does not name its {' and '.join(missing)} terminal",
                                  self.at(name, span),
                                  "name each terminal once: cw (the end at knob 10), wiper, ccw (the end at knob 0)"))
        if problems:
            raise _LineErrors(problems)
        kind, mid, pos = self._taper_position(taper, position, span)
        _, net = self.block
        net["parts"].append(Pot(str(name), nodes["cw"], nodes["wiper"], nodes["ccw"],
                                self.value(val, span, "ohm", "pot value"), kind, mid, pos, self.at(name, span)))

    def _rheostat(self, tree, span):
        name, a, b, val, taper, position = tree.children
        kind, mid, pos = self._taper_position(taper, position, span)
        _, net = self.block
        # the wiper tied to the knob-10 end: the resistance a–b is the wiper–ccw section
        net["parts"].append(Pot(str(name), str(a), str(a), str(b), self.value(val, span, "ohm", "rheostat value"),
                                kind, mid, pos, self.at(name, span)))

    def _pot_unlabelled(self, tree, span):
        name, a, w, b, val, *_ = tree.children
        a, w, b, name = str(a), str(w), str(b), str(name)
        rest = " ".join(strip_comment(span.text).split()[7:])
        if w == a or w == b:
            other = b if w == a else a
            hint = (f"a pot with its wiper tied to one end is a variable resistor: write "
                    f"'rheostat {name} {w} -- {other} {rest}' (its resistance rises from 0 at knob 0 "
                    f"to the full value at knob 10), or name the ends: 'pot {name} cw … wiper … ccw …'")
        else:
            hint = (f"write 'pot {name} cw {a} wiper {w} ccw {b} {rest}' if {a} is the end the wiper "
                    f"reaches at knob 10 (cw: turned fully clockwise)")
        raise _LineErrors([error("E121", f"pot '{name}': say which end is which", self.at(tree.children[0], span),
                                 hint)])

    # -- result -----------------------------------------------------------------
    def design(self) -> Design:
        problems: list[Diagnostic] = []
        settings = Settings()
        s = self.settings

        def given(key: str, default: float) -> float:
            return s[key][0] if key in s else default

        if "points" in s:
            pts, sp = s["points"]
            if pts != int(pts) or not 10 <= pts <= 100000:
                problems.append(error("E112", f"number of points must be a whole number from 10 to 100000, not {pts:g}", sp))
            else:
                settings = replace(settings, points=int(pts))
        settings = replace(settings, reference_hz=given("reference_hz", settings.reference_hz),
                           level_v=given("level_v", settings.level_v), heater_v=given("heater_v", settings.heater_v),
                           band_low_hz=given("band_low_hz", settings.band_low_hz),
                           band_high_hz=given("band_high_hz", settings.band_high_hz))
        stages = []
        for st in self.stages:
            load, rail = st.get("plate", (None, ""))
            second = None
            if any(k.startswith("second_") for k in st):
                if "second_grid_ground" in st:
                    problems.append(error("E270", f"stage {st['name']}: the second grid of a long-tailed pair is "
                                          "not tied to ground; AC-ground it with 'second grid leak 1M bypass 100n'",
                                          st["spans"]["second_grid_ground"]))
                load2, rail2 = st.get("second_plate", (None, ""))
                bypass_f, bypass_v = st.get("second_grid_bypass", (None, None))
                second = Section(load2, rail2, st.get("second_grid_leak"), st.get("second_grid_stopper"),
                                 bypass_f, bypass_v)
            stages.append(Stage(st["name"], st["kind"], st["tube"], load, rail, st.get("cathode"),
                                st.get("grid_leak"), st.get("grid_stopper"), st.get("grid_ground", False),
                                st.get("heater"), st["span"], dict(st.get("spans", {})), second))
        stage_names = {st["name"] for st in self.stages}

        def node(name: str) -> str:
            """``V1.anode`` is ``V1.plate`` (anode: the trade's other word for the plate)."""
            if "." in name:
                head, tail = name.split(".", 1)
                if head in stage_names and tail in TERMINAL_SYNONYMS:
                    return f"{head}.{TERMINAL_SYNONYMS[tail]}"
            return name

        def renamed(p: Part | Pot) -> Part | Pot:
            if isinstance(p, Pot):
                return replace(p, a=node(p.a), wiper=node(p.wiper), b=node(p.b))
            return replace(p, a=node(p.a), b=node(p.b))

        networks = tuple(Network(n["name"], n["ports"], tuple(renamed(p) for p in n["parts"]), n["span"])
                         for n in self.networks)
        strays = tuple(replace(st, node=node(st.node)) for st in self.strays)
        outputs = [replace(o, node=None if o.node is None else node(o.node)) for o in self.outputs]
        for extra in self.sources[1:]:
            problems.append(error("E113", "a design has one input; this is a second 'input' line", extra.span))
        for extra_output in self.outputs[1:]:
            problems.append(error("E113", "a design has one output; this is a second 'output' line",
                                  extra_output.span))
        if problems:
            raise LanguageError(problems)
        return Design(
            title=self.title,
            settings=settings,
            supplies=tuple(self.supplies),
            rails=tuple(self.rails),
            tubes=tuple(self.tubes),
            stages=tuple(stages),
            networks=networks,
            couplings=tuple(self.couplings),
            source=self.sources[0] if self.sources else None,
            output=outputs[0] if outputs else None,
            strays=strays,
            tolerances=tuple(self.tolerances),
            path=self.source,
            lines=self.lines,
        )


def _first_word(st: Statement) -> str:
    return st.span.text.split()[0] if st.span.text.split() else st.kind


def _member_hint(block_kind: str) -> str:
    if block_kind == "stage":
        return "a stage holds 'plate', 'cathode', 'grid' and 'heater' lines"
    return "a network holds 'resistor', 'capacitor', 'inductor' and 'pot' lines"
