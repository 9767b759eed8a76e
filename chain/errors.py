"""Located diagnostics and the one exception hierarchy of `chain`.

Every message a user can see is a :class:`Diagnostic` value: a code, a
severity, a message, an optional location (:class:`Span`) and an optional
hint.  Errors carry a tuple of diagnostics so that all problems of a file are
reported at once, not only the last one found.

Codes (every one is listed in ``docs/diagnostics.md``)
-------------------------------------------------------
``E1xx``  syntax (language/parser)
``E2xx``  names and references (language/validate); ``W2xx`` their warnings
``E3xx``  values (language/validate) and topology (build)
``E4xx``  DC solve; ``W4xx`` operating-point warnings (ratings, cutoff, grid current)
``E5xx``  small-signal (E50x) and formulas (E52x, E53x)
``E6xx``  reports read back
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "Span",
    "Diagnostic",
    "ChainError",
    "LanguageError",
    "DcConvergenceError",
    "AnalysisError",
    "FormulaError",
]


@dataclass(frozen=True, slots=True)
class Span:
    """A place in a source file: 1-based line and column."""

    path: str
    line: int
    column: int = 1
    #: the full text of the line, for the caret display
    text: str = ""

    def __str__(self) -> str:
        return f"{self.path}:{self.line}:{self.column}"


@dataclass(frozen=True, slots=True)
class Diagnostic:
    """One message for the user."""

    code: str
    severity: str  # "error" | "warning" | "note"
    message: str
    span: Span | None = None
    hint: str = ""
    #: the stage, rail or part the message is about ("" if none)
    subject: str = ""

    def render(self) -> str:
        """Human-readable form: ``file:line:col: error E102: message``,
        then the source line with a caret and the hint."""
        where = f"{self.span}: " if self.span is not None else ""
        out = [f"{where}{self.severity} {self.code}: {self.message}"]
        if self.span is not None and self.span.text:
            out.append("    " + self.span.text.rstrip("\n"))
            out.append("    " + " " * max(self.span.column - 1, 0) + "^")
        if self.hint:
            out.append(f"    hint: {self.hint}")
        return "\n".join(out)

    def __str__(self) -> str:
        return self.render()


class ChainError(Exception):
    """Base of every error `chain` raises on purpose.

    ``diagnostics`` holds one or more :class:`Diagnostic`; ``str(err)`` is
    their rendering, one after the other.
    """

    def __init__(self, diagnostics):
        if isinstance(diagnostics, Diagnostic):
            diagnostics = (diagnostics,)
        self.diagnostics = tuple(diagnostics)
        super().__init__(self.diagnostics)

    def __str__(self) -> str:
        return "\n".join(d.render() for d in self.diagnostics)

    def __reduce__(self):
        return (type(self), (self.diagnostics,))


class LanguageError(ChainError, ValueError):
    """The netlist text is malformed or inconsistent."""


class AnalysisError(ChainError, RuntimeError):
    """An analysis step could not produce a result."""


class DcConvergenceError(AnalysisError):
    """The DC operating-point solve did not converge.

    Extra fields: ``iterations``, ``residual_a`` (largest node-current
    residual, A) and ``last_guess`` (node voltages, V, by node name).
    """

    def __init__(self, diagnostics, iterations: int = 0, residual_a: float = float("nan"),
                 last_guess=None):
        super().__init__(diagnostics)
        self.iterations = iterations
        self.residual_a = residual_a
        self.last_guess = dict(last_guess or {})

    def __reduce__(self):
        return (type(self), (self.diagnostics, self.iterations, self.residual_a, self.last_guess))


class FormulaError(AnalysisError):
    """The symbolic layer (lcapy/sympy) failed; carries the generated netlist."""

    def __init__(self, diagnostics, netlist: str = ""):
        super().__init__(diagnostics)
        self.netlist = netlist

    def __reduce__(self):
        return (type(self), (self.diagnostics, self.netlist))


def error(code: str, message: str, span: Span | None = None, hint: str = "", subject: str = "") -> Diagnostic:
    """Shorthand for an error diagnostic."""
    return Diagnostic(code, "error", message, span, hint, subject)


def warning(code: str, message: str, span: Span | None = None, hint: str = "", subject: str = "") -> Diagnostic:
    """Shorthand for a warning diagnostic."""
    return Diagnostic(code, "warning", message, span, hint, subject)
