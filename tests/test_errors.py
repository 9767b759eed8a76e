"""Diagnostics and errors: rendering, the builtin each error also is, pickling."""

import pickle

import pytest

from chain.errors import (
    AnalysisError,
    DcConvergenceError,
    Diagnostic,
    FormulaError,
    LanguageError,
    Span,
    error,
    warning,
)

SPAN = Span("amp.chain", 3, 7, "stage V1 comon-cathode 12AX7")


def test_render_shows_place_line_caret_and_hint():
    d = error("E103", "unexpected 'comon-cathode'", SPAN, "did you mean 'common-cathode'?")
    assert d.render() == (
        "amp.chain:3:7: error E103: unexpected 'comon-cathode'\n"
        "    stage V1 comon-cathode 12AX7\n"
        "          ^\n"
        "    hint: did you mean 'common-cathode'?"
    )


def test_render_without_a_place():
    assert warning("W401", "V2 is cut off").render() == "warning W401: V2 is cut off"


def test_error_message_joins_all_diagnostics():
    err = LanguageError([error("E201", "first", SPAN), error("E202", "second")])
    assert str(err).splitlines()[0] == "amp.chain:3:7: error E201: first"
    assert str(err).splitlines()[-1] == "error E202: second"


@pytest.mark.parametrize("exc, builtin", [
    (LanguageError(error("E101", "x", SPAN)), ValueError),
    (AnalysisError(error("E501", "x")), RuntimeError),
    (DcConvergenceError(error("E401", "x"), iterations=7, residual_a=1e-3, last_guess={"V1.plate": 200.0}),
     RuntimeError),
    (FormulaError(error("E530", "x"), netlist="R1 1 0 1"), RuntimeError),
])
def test_errors_are_builtins_too_and_pickle(exc, builtin):
    assert isinstance(exc, builtin)
    back = pickle.loads(pickle.dumps(exc))
    assert type(back) is type(exc) and str(back) == str(exc) and back.diagnostics == exc.diagnostics
    for field in ("iterations", "residual_a", "last_guess", "netlist"):
        if hasattr(exc, field):
            assert getattr(back, field) == getattr(exc, field)


def test_a_single_diagnostic_is_accepted():
    d = Diagnostic("E100", "error", "cannot read netlist")
    assert LanguageError(d).diagnostics == (d,)
