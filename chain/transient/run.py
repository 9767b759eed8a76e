"""Driving a compiled circuit with a signal: waveforms and the settled periodic response.

:func:`simulate` steps a :class:`~chain.transient.engine.TransientSystem`
from its DC operating point through a sampled input (V of source EMF at a
sample rate) and returns the waveforms at chosen nodes, sampled at the input
rate.  The solver takes ``oversample`` internal steps per input sample; the
input between samples is linear interpolation of the samples.

:func:`periodic_response` finds the settled (periodic) response to a sine by
shooting: Newton on the state at the start of a period, ``P(s) − s = 0``,
with the exact monodromy matrix ``∂P/∂s`` carried through every step's
linearisation (T. J. Aprille and T. N. Trick, "Steady-state analysis of
nonlinear circuits with periodic inputs", Proc. IEEE 60(1), 1972).  Slow
parts of a preamp (rail decoupling behind tens of kilohms, half a second and
more) would otherwise need many seconds of simulated time to settle.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Mapping, Sequence

import numpy as np

from chain.circuit import Circuit
from chain.errors import AnalysisError, error
import chain.transient.fast as fast
from chain.transient.engine import _A0, GAMMA, TransientOptions, TransientSystem, compile_transient

__all__ = ["Waveforms", "PeriodicResponse", "simulate", "periodic_response", "interpolator"]


@dataclass(frozen=True, slots=True, eq=False)
class Waveforms:
    """Node voltages against time from one time-domain run.

    Attributes
    ----------
    t_s : numpy.ndarray
        Sample times, s (0 is the start, from the DC operating point).
    input_v : numpy.ndarray
        The source EMF at those times, V.
    v : Mapping[str, numpy.ndarray]
        Node name → total voltage (DC plus signal), V.
    dc_v : Mapping[str, float]
        Node name → its DC operating-point voltage, V.
    fs_hz : float
        Sample rate of ``t_s``, Hz.
    h_s : float
        Internal step of the solver, s.
    """

    t_s: np.ndarray
    input_v: np.ndarray
    v: Mapping[str, np.ndarray]
    dc_v: Mapping[str, float]
    fs_hz: float
    h_s: float

    def signal(self, node: str) -> np.ndarray:
        """``v[node]`` minus its DC operating-point voltage, V."""
        return self.v[node] - self.dc_v[node]


@dataclass(frozen=True, slots=True, eq=False)
class PeriodicResponse:
    """One period of the settled response to ``amplitude_v · sin(2π·f_hz·t)``.

    ``t_s`` holds ``steps`` equally spaced instants of one period (the last
    one excluded, so the arrays are exactly periodic for a DFT); ``v`` holds
    every requested node's total voltage there.
    """

    f_hz: float
    amplitude_v: float
    t_s: np.ndarray
    input_v: np.ndarray
    v: Mapping[str, np.ndarray]
    dc_v: Mapping[str, float]
    #: Newton (shooting) iterations used
    iterations: int
    #: largest change of a node voltage over the last period, V
    residual_v: float

    def phasor(self, node: str, harmonic: int = 1) -> complex:
        """Complex amplitude (V peak) of ``harmonic`` at ``node``, phase relative to the sine's zero crossing.

        From the discrete Fourier transform of the period:
        ``X_k = (2/N)·Σ v_n·e^{−j2πkn/N}``; a node ``A·sin(2πft + φ)`` gives
        ``X_1 = A·e^{j(φ − π/2)}``, so the ratio of two phasors is the
        complex gain.
        """
        return _dft(self.v[node], harmonic)

    def gain(self, node: str) -> complex:
        """Fundamental at ``node`` per volt of source EMF (complex, V/V)."""
        return self.phasor(node, 1) / _dft(self.input_v, 1)


def _dft(x: np.ndarray, k: int) -> complex:
    n = len(x)
    return complex(2.0 / n * np.sum(x * np.exp(-2j * math.pi * k * np.arange(n) / n)))


def interpolator(samples: np.ndarray, fs_hz: float) -> Callable[[float], float]:
    """``u(t)`` by linear interpolation of ``samples`` taken at ``fs_hz`` (held after the last one)."""
    samples = np.asarray(samples, dtype=float)
    last = len(samples) - 1

    def u(t: float) -> float:
        pos = t * fs_hz
        i = int(pos)
        if i >= last:
            return float(samples[last])
        if i < 0:
            return float(samples[0])
        frac = pos - i
        return float(samples[i] + frac * (samples[i + 1] - samples[i]))

    return u


def _system(circuit_or_system, options, dc) -> TransientSystem:
    if isinstance(circuit_or_system, TransientSystem):
        return circuit_or_system
    if isinstance(circuit_or_system, Circuit):
        return compile_transient(circuit_or_system, options=options, dc=dc)
    raise TypeError("expected a Circuit or a TransientSystem")


def _node_indices(system: TransientSystem, nodes: Sequence[str] | None) -> dict[str, int]:
    circuit = system.circuit
    if nodes is None:
        wanted = [circuit.input_node]
        for st in circuit.stages:
            wanted += [st.input, *st.outputs.values()]
        wanted += [circuit.output_node, *circuit.rail_names()]
        nodes = list(dict.fromkeys(wanted))
    out = {}
    for name in nodes:
        i = system.index.get(name)
        if i is None:
            raise AnalysisError(error("E902", f"{name!r} is not a node of the circuit", subject=name,
                                      hint="nodes are named like V1.plate, V2.grid, B1, output"))
        out[name] = i
    return out


def simulate(circuit: Circuit | TransientSystem, input_v: np.ndarray | Callable[[float], float], fs_hz: float, *,
             duration_s: float | None = None, nodes: Sequence[str] | None = None, oversample: int = 4,
             options: TransientOptions = TransientOptions(), dc=None,
             progress: Callable[[int, int], None] | None = None, engine: str = "auto") -> Waveforms:
    """Drive the circuit from its DC operating point with a sampled source EMF.

    Parameters
    ----------
    circuit : Circuit or TransientSystem
    input_v : array_like or callable
        Source EMF samples, V (the first one should be 0: the circuit starts
        at DC); or the EMF as a function of time ``u(t_s)``, evaluated at
        every solver stage (then ``duration_s`` is required).
    fs_hz : float
        Sample rate of ``input_v`` and of the returned waveforms, Hz.
    duration_s : float, optional
        Length of the run when ``input_v`` is a function, s.
    nodes : sequence of str, optional
        Nodes to record (default: input, every stage's input and outputs,
        the output, every rail).
    oversample : int
        Internal solver steps per input sample (step ``h = 1/(fs·oversample)``).
    options : TransientOptions
    dc : DcSolution, optional
        A solved operating point to start from.
    progress : callable, optional
        Called as ``progress(done, total)`` with input samples done.
    engine : {"auto", "numpy", "compiled"}
        ``"compiled"``: the numba loop of :mod:`chain.transient.fast` (a
        step it cannot converge is handed to the numpy stepper, which halves
        it); ``"numpy"``: :meth:`TransientSystem.step` throughout (same
        equations, ~200× slower); ``"auto"``: compiled when numba is there.

    Returns
    -------
    Waveforms

    Raises
    ------
    AnalysisError
        E900 (a step that does not converge, with its time and stage), E902
        (an unknown node), E903 (an unusable signal or rate).
    """
    if not (math.isfinite(fs_hz) and fs_hz > 0.0):
        raise AnalysisError(error("E903", f"sample rate must be positive and finite, got {fs_hz!r} Hz"))
    func = input_v if callable(input_v) else None
    if func is not None:
        if duration_s is None or not (math.isfinite(duration_s) and duration_s >= 0.0):
            raise AnalysisError(error("E903", "a signal given as a function needs a duration_s >= 0"))
        u_samples = np.array([func(k / fs_hz) for k in range(int(round(duration_s * fs_hz)) + 1)], dtype=float)
    else:
        u_samples = np.asarray(input_v, dtype=float).reshape(-1)
    if u_samples.size == 0:
        raise AnalysisError(error("E903", "the input signal has no samples"))
    if not np.all(np.isfinite(u_samples)):
        raise AnalysisError(error("E903", "the input signal holds values that are not finite"))
    if int(oversample) != oversample or oversample < 1:
        raise AnalysisError(error("E903", f"oversample must be a positive whole number, got {oversample!r}"))
    if engine not in ("auto", "numpy", "compiled"):
        raise AnalysisError(error("E903", f"engine must be 'auto', 'numpy' or 'compiled', got {engine!r}"))
    system = _system(circuit, options, dc)
    idx = _node_indices(system, nodes)
    u = func if func is not None else interpolator(u_samples, fs_hz)
    h = 1.0 / (fs_hz * oversample)
    count = u_samples.size
    cols = np.array(list(idx.values()), dtype=np.intp)
    data = np.empty((count, cols.size))
    x = system.x_dc.copy()
    q = np.zeros(system.size)
    data[0] = x[cols]
    use_kernel = engine == "compiled" or (engine == "auto" and fast.AVAILABLE)
    if engine == "compiled" and not fast.AVAILABLE:
        raise AnalysisError(error("E903", "the compiled engine needs numba, which is not installed"))
    if use_kernel:
        _run_compiled(system, x, q, u_samples, func, fs_hz, oversample, cols, data, progress)
    else:
        every = max(1, count // 200)
        for k in range(1, count):
            t0 = (k - 1) / fs_hz
            for j in range(oversample):
                x, q, _ = system.step(x, q, t0 + j * h, h, u)
            data[k] = x[cols]
            if progress is not None and (k % every == 0 or k == count - 1):
                progress(k + 1, count)
    v = {name: data[:, i].copy() for i, name in enumerate(idx)}
    dc_v = {name: float(system.x_dc[i]) for name, i in idx.items()}
    t = np.arange(count) / fs_hz
    return Waveforms(t_s=t, input_v=u_samples.copy(), v=v, dc_v=dc_v, fs_hz=float(fs_hz), h_s=h)


def periodic_response(circuit: Circuit | TransientSystem, f_hz: float, amplitude_v: float, *,
                      nodes: Sequence[str] | None = None, steps: int = 256,
                      options: TransientOptions = TransientOptions(), dc=None, tol_v: float = 1e-9,
                      rtol: float = 1e-4, max_iter: int = 30) -> PeriodicResponse:
    """The settled response to the source EMF ``amplitude_v·sin(2π·f_hz·t)``.

    Shooting Newton on the state at the start of a period (see the module
    docstring), from the DC operating point, ``steps`` TR-BDF2 steps per
    period.  Converged when no node voltage changes over a period by more
    than ``tol_v`` plus ``rtol`` times the largest peak-to-peak swing of any
    node (the round-off of each step's Newton solve, amplified by the slow
    modes of the circuit, sets a floor near 1e-5 of the swing on a
    high-gain chain).

    Raises
    ------
    AnalysisError
        E900 (a step fails), E902 (unknown node), E903 (bad frequency or
        level), E904 (the shooting iteration does not settle).
    """
    if not (math.isfinite(f_hz) and f_hz > 0.0):
        raise AnalysisError(error("E903", f"frequency must be positive and finite, got {f_hz!r} Hz"))
    if not (math.isfinite(amplitude_v) and amplitude_v >= 0.0):
        raise AnalysisError(error("E903", f"level must be non-negative and finite, got {amplitude_v!r} V"))
    system = _system(circuit, options, dc)
    idx = _node_indices(system, nodes)
    size, n = system.size, system._n
    period = 1.0 / f_hz
    h = period / steps
    w = 2.0 * math.pi * f_hz

    def u(t):
        return amplitude_v * math.sin(w * t)

    x = system.x_dc.copy()
    q = np.zeros(size)
    eye = np.eye(2 * size)
    residual = math.inf
    rec = np.empty((steps, size))
    for it in range(1, max_iter + 1):
        dx = np.hstack((np.eye(size), np.zeros((size, size))))
        dq = np.hstack((np.zeros((size, size)), np.eye(size)))
        xs, qs = x.copy(), q.copy()
        for k in range(steps):
            rec[k] = xs
            xs, qs, jac = system.step(xs, qs, k * h, h, u, tangent=True)
            dx, dq = system.propagate_tangent(dx, dq, jac)
        f = np.concatenate((xs - x, qs - q))
        residual = float(np.abs(f[:n]).max(initial=0.0))
        swing = float((rec[:, :n].max(axis=0) - rec[:, :n].min(axis=0)).max(initial=0.0))
        if residual <= tol_v + rtol * swing:
            break
        phi = np.vstack((dx, dq))
        try:
            delta = np.linalg.solve(eye - phi, f)
        except np.linalg.LinAlgError:
            delta = np.linalg.lstsq(eye - phi, f, rcond=None)[0]
        x = x + delta[:size]
        q = q + delta[size:]
    else:
        raise AnalysisError(error(
            "E904", f"the response to {amplitude_v:g} V at {f_hz:g} Hz did not settle to a periodic state "
            f"after {max_iter} shooting iterations (largest change over a period {residual:.3g} V)",
            hint="the circuit may oscillate or respond at a sub-harmonic at this level"))
    t = np.arange(steps) * h
    v = {name: rec[:, i].copy() for name, i in idx.items()}
    dc_v = {name: float(system.x_dc[i]) for name, i in idx.items()}
    return PeriodicResponse(f_hz=float(f_hz), amplitude_v=float(amplitude_v), t_s=t,
                            input_v=amplitude_v * np.sin(w * t), v=v, dc_v=dc_v, iterations=it,
                            residual_v=residual)


def _stage_inputs(u_samples, func, fs_hz, oversample):
    """Source EMF at the two stage times (t + γh, t + h) of every internal step, V."""
    count = u_samples.size
    steps = (count - 1) * oversample
    n = np.arange(steps)
    k0 = n // oversample
    j = n % oversample
    frac_tr = (j + GAMMA) / oversample
    frac_bdf = (j + 1.0) / oversample
    if func is not None:
        t_tr = (k0 + frac_tr) / fs_hz
        t_bdf = (k0 + frac_bdf) / fs_hz
        return (np.array([func(t) for t in t_tr], dtype=float), np.array([func(t) for t in t_bdf], dtype=float))
    a = u_samples[k0]
    d = u_samples[np.minimum(k0 + 1, count - 1)] - a
    return a + d * frac_tr, a + d * frac_bdf


def _run_compiled(system, x, q, u_samples, func, fs_hz, oversample, cols, data, progress):
    """Drive the numba loop in chunks (for progress); failed intervals go to the numpy stepper."""
    count = u_samples.size
    if count < 2:
        return
    h = 1.0 / (fs_hz * oversample)
    st = system.stepper(h)
    u_tr, u_bdf = _stage_inputs(u_samples, func, fs_hz, oversample)
    size = system.size
    pins = [(system.index[t.plate], system.index[t.grid], system.index[t.cathode]) for t in system.triodes]
    pl, gr, ca = (np.array([p[i] if p[i] >= 0 else size for p in pins], dtype=np.intp).reshape(-1)
                  for i in range(3))
    prm = fast.triode_params([t.model for t in system.triodes])
    opts = system.options
    u = func if func is not None else interpolator(u_samples, fs_hz)
    sh = system.stepper(0.5 * h)
    chunk = max(1, min(count, 4800))
    k = 1
    while k < count:
        end = min(count, k + chunk)
        u_first = float(u_samples[k - 1]) if func is None else float(func((k - 1) / fs_hz))
        got = fast.run_kernel(x, q, u_tr, u_bdf, u_first, k, end, oversample, GAMMA, _A0,
                              system.g, system.b_dc, system._signal_row, st.tr.s, st.tr.z, st.tr.k,
                              st.bdf.s, st.bdf.z, st.bdf.k, st.ac, sh.tr.s, sh.tr.z, sh.tr.k,
                              sh.bdf.s, sh.bdf.z, sh.bdf.k, sh.ac, pl, gr, ca, prm,
                              opts.tol_v, opts.rtol, opts.max_iter, opts.max_step_v, cols, data)
        if got < end:
            # the numpy stepper halves what the kernel could not converge
            t0 = (got - 1) / fs_hz
            xs, qs = x.copy(), q.copy()
            for j in range(oversample):
                xs, qs, _ = system.step(xs, qs, t0 + j * h, h, u)
            x[:] = xs
            q[:] = qs
            data[got] = x[cols]
            got += 1
        k = got
        if progress is not None:
            progress(k, count)
