"""Small-signal (AC) analysis of a chain at its DC operating point.

``linearize(circuit, dc)`` → :class:`SmallSignalCircuit` (supplies shorted,
triodes as ``mu·vgk`` in series with ``rp`` plus interelectrode
capacitances); ``response(ss, f_hz)`` → :class:`Response` (every node's
transfer per volt of source EMF and the input, output and per-stage
impedances, vectorised over frequency by modified nodal analysis);
``corners``, ``gain_at``, ``stage_table`` and ``overall`` read it.
Frequencies are in Hz everywhere; impedances in ohm (complex).
"""

from chain.smallsignal.corners import corners, response_corners
from chain.smallsignal.shape import Extremum, ResponseShape, response_shape
from chain.smallsignal.model import (
    SmallSignalCircuit,
    TriodeSmallSignal,
    linearize,
)
from chain.smallsignal.response import Response, gain_at, response, transfer_function
from chain.smallsignal.table import (
    ChainOutput,
    CouplingRow,
    OverallResult,
    PortRow,
    StageRow,
    coupling_table,
    db,
    output_balance,
    overall,
    reference_response,
    stage_table,
)

__all__ = [
    "SmallSignalCircuit",
    "TriodeSmallSignal",
    "linearize",
    "Response",
    "response",
    "transfer_function",
    "gain_at",
    "corners",
    "response_corners",
    "Extremum",
    "ResponseShape",
    "response_shape",
    "StageRow",
    "PortRow",
    "ChainOutput",
    "output_balance",
    "CouplingRow",
    "coupling_table",
    "OverallResult",
    "stage_table",
    "overall",
    "reference_response",
    "db",
]
