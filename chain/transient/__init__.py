"""Time domain: what the chain does to a real signal.

:func:`compile_transient` stamps a :class:`~chain.circuit.Circuit` for the
nonlinear time-domain solve (TR-BDF2, triodes by the nodal DK reduction; see
:mod:`chain.transient.engine`) and polishes its DC operating point;
:func:`simulate` drives it with a sampled signal and returns
:class:`Waveforms`; :func:`periodic_response` gives the settled response to
a sine (shooting).  Times in s, frequencies in Hz, voltages in V.
"""

from chain.transient.engine import GAMMA, TransientOptions, TransientSystem, compile_transient
from chain.transient.run import PeriodicResponse, Waveforms, interpolator, periodic_response, simulate

__all__ = [
    "GAMMA",
    "TransientOptions",
    "TransientSystem",
    "compile_transient",
    "Waveforms",
    "PeriodicResponse",
    "simulate",
    "periodic_response",
    "interpolator",
]
