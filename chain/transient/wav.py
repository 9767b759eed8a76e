"""Rendering a WAV file through the preamp.

:func:`read_wav` reads a WAV file (scipy.io.wavfile: PCM 8/16/24/32-bit or
float, mono or stereo, 8–192 kHz) into full-scale samples;
:func:`render` scales it to a stated peak source EMF, drives the circuit
with it and returns the output's signal (DC removed) with the scaling that
turns it back into samples; :func:`wav_bytes` encodes the result.

Scaling is always stated: the input file's largest sample becomes
``peak_v`` volts of source EMF; the output is written as 32-bit float with
``1.0 = full_scale_v`` volts at the output node.  Stereo input is mixed to
mono (the mean of the channels): a preamp has one input.
"""

from __future__ import annotations

import io
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from chain.errors import AnalysisError, error

__all__ = ["WavInput", "Rendered", "read_wav", "render", "wav_bytes", "RATES_HZ"]

#: accepted sample rates, Hz (the common ones)
RATES_HZ = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000, 176400, 192000)


@dataclass(frozen=True, slots=True, eq=False)
class WavInput:
    path: str
    fs_hz: int
    #: mono samples, full scale = 1.0
    samples: np.ndarray
    channels: int
    #: numpy dtype name of the file's samples
    dtype: str


@dataclass(frozen=True, slots=True, eq=False)
class Rendered:
    fs_hz: int
    #: source EMF, V
    input_v: np.ndarray
    #: output node minus its DC voltage, V
    output_v: np.ndarray
    #: the input file's largest sample became this source peak, V
    peak_v: float
    #: output volts that 1.0 in the written file stands for
    full_scale_v: float

    @property
    def output_peak_v(self) -> float:
        return float(np.abs(self.output_v).max(initial=0.0))


def _fail(path, message, code="E905", hint=""):
    return AnalysisError(error(code, f"{path}: {message}", hint=hint))


def read_wav(path: str | Path) -> WavInput:
    """Read a WAV file as mono full-scale samples; located errors (E905–E907) for anything else."""
    from scipy.io import wavfile

    path = str(path)
    try:
        with open(path, "rb") as fh:
            head = fh.read(12)
    except OSError as exc:
        raise _fail(path, f"cannot be read ({exc.strerror or exc})") from None
    if len(head) < 12 or head[:4] not in (b"RIFF", b"RIFX", b"RF64") or head[8:12] != b"WAVE":
        raise _fail(path, "is not a WAV file (no RIFF/WAVE header)")
    try:
        import warnings

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # unknown chunks (metadata) are skipped
            rate, data = wavfile.read(path)
    except (ValueError, EOFError, OSError) as exc:
        raise _fail(path, f"is not a WAV file scipy can read ({exc})") from None
    if rate not in RATES_HZ:
        raise _fail(path, f"has a sample rate of {rate} Hz; accepted: {', '.join(map(str, RATES_HZ))} Hz",
                    code="E907")
    if data.ndim == 2:
        channels = data.shape[1]
        if channels > 2:
            raise _fail(path, f"has {channels} channels; mono and stereo are accepted", code="E907")
    else:
        channels = 1
    if data.size == 0 or data.shape[0] < 2:
        raise _fail(path, "holds no audio (fewer than two samples)", code="E906")
    kind = data.dtype
    x = data.astype(float)
    if kind == np.uint8:
        x = (x - 128.0) / 128.0
    elif kind == np.int16:
        x = x / 32768.0
    elif kind == np.int32:
        x = x / 2147483648.0
    elif kind.kind != "f":
        raise _fail(path, f"has samples of type {kind}, not PCM or float", code="E907")
    if x.ndim == 2:
        x = x.mean(axis=1)
    if not np.all(np.isfinite(x)):
        raise _fail(path, "holds samples that are not finite numbers", code="E907")
    if not np.any(x):
        raise _fail(path, "is silent (every sample is 0): it cannot be scaled to a peak", code="E906")
    return WavInput(path=path, fs_hz=int(rate), samples=x, channels=int(channels), dtype=str(kind))


def render(system, wav: WavInput, *, peak_v: float, full_scale_v: float | None = None, oversample: int = 2,
           progress=None) -> Rendered:
    """Drive ``system`` with ``wav`` scaled so that its largest sample is ``peak_v`` volts of source EMF.

    The output is the output node minus its DC voltage.  ``full_scale_v``:
    the output volts that 1.0 in the written file stands for; by default
    the output's peak divided by 0.891 (peaks at −1 dBFS).  A full scale
    below the output's peak would clip the converter: error E908.
    """
    from chain.transient.run import simulate

    if not (math.isfinite(peak_v) and peak_v > 0.0):
        raise AnalysisError(error("E903", f"the source peak must be positive and finite, got {peak_v!r} V"))
    biggest = float(np.abs(wav.samples).max(initial=0.0))
    if biggest == 0.0:
        raise _fail(wav.path, "is silent (every sample is 0): it cannot be scaled to a peak", code="E906")
    u = wav.samples * (peak_v / biggest)
    u = np.concatenate(([0.0], u))  # start from rest: the circuit is at its DC point at t = 0
    node = system.circuit.output_node
    w = simulate(system, u, float(wav.fs_hz), nodes=[node], oversample=oversample, progress=progress)
    out = w.signal(node)[1:]
    peak_out = float(np.abs(out).max(initial=0.0))
    if full_scale_v is None:
        full_scale_v = peak_out / 0.891 if peak_out > 0.0 else 1.0
    elif not (math.isfinite(full_scale_v) and full_scale_v > 0.0):
        raise AnalysisError(error("E903", f"the output full scale must be positive and finite, got {full_scale_v!r} V"))
    elif peak_out > full_scale_v:
        raise AnalysisError(error(
            "E908", f"the output peaks at {peak_out:.4g} V, above the full scale of {full_scale_v:.4g} V: the "
            f"written file would clip the converter",
            hint=f"give a full scale of at least {peak_out:.4g} V, or leave it out to scale to -1 dBFS"))
    return Rendered(fs_hz=wav.fs_hz, input_v=u[1:], output_v=out, peak_v=float(peak_v),
                    full_scale_v=float(full_scale_v))


def wav_bytes(rendered: Rendered) -> bytes:
    """The output as a mono 32-bit float WAV, ``1.0 = full_scale_v`` volts."""
    from scipy.io import wavfile

    buf = io.BytesIO()
    wavfile.write(buf, rendered.fs_hz, (rendered.output_v / rendered.full_scale_v).astype(np.float32))
    return buf.getvalue()
