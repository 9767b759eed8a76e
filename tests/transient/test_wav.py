"""Rendering a WAV file through the preamp (chain.transient.wav and `chain drive --wav`).

A plucked-string-like tone (harmonics decaying exponentially, the higher ones
faster — common practice for a plucked string) is made here, rendered through
every demo, and read back with scipy.io.wavfile: it plays (a float WAV at the
input's rate, finite, not silent) and has the stated scaling.
"""

import math
from pathlib import Path

import numpy as np
import pytest
from scipy.io import wavfile

from chain.build import load
from chain.cli import main
from chain.errors import AnalysisError
from chain.transient import compile_transient
from chain.transient.wav import read_wav, render, wav_bytes

ROOT = Path(__file__).parents[2]
DEMOS = sorted((ROOT / "netlists").glob("*.chain"))


def plucked(fs=16000, seconds=0.15, f0=196.0):
    t = np.arange(int(fs * seconds)) / fs
    x = sum(np.exp(-t * (6.0 + 4.0 * k)) * np.sin(2 * math.pi * k * f0 * t) / k for k in range(1, 8))
    x[: int(0.002 * fs)] *= np.linspace(0.0, 1.0, int(0.002 * fs))  # the pluck's attack
    return t, x


@pytest.fixture(scope="module")
def pluck_file(tmp_path_factory):
    _, x = plucked()
    path = tmp_path_factory.mktemp("wav") / "pluck.wav"
    wavfile.write(path, 16000, (0.7 * x / np.abs(x).max() * 32767).astype(np.int16))
    return path


@pytest.mark.parametrize("demo", DEMOS, ids=[p.name for p in DEMOS])
def test_a_plucked_tone_renders_through_every_demo(demo, pluck_file, tmp_path):
    _, circuit, _ = load(demo)
    wav = read_wav(pluck_file)
    assert wav.fs_hz == 16000 and wav.channels == 1
    out = render(compile_transient(circuit), wav, peak_v=0.05, oversample=1)
    assert np.abs(out.input_v).max() == pytest.approx(0.05, rel=1e-12)  # the stated source peak
    target = tmp_path / "out.wav"
    target.write_bytes(wav_bytes(out))
    rate, data = wavfile.read(target)
    assert rate == 16000 and data.dtype == np.float32 and data.shape == wav.samples.shape
    assert np.all(np.isfinite(data)) and np.abs(data).max() > 0.1
    # peaks at -1 dBFS, and 1.0 stands for the stated full scale
    assert np.abs(data).max() == pytest.approx(0.891, abs=1e-6)
    assert np.abs(data).max() * out.full_scale_v == pytest.approx(out.output_peak_v, rel=1e-6)


def test_stereo_float_input_is_mixed_to_mono(tmp_path):
    _, x = plucked(fs=22050, seconds=0.05)
    path = tmp_path / "st.wav"
    wavfile.write(path, 22050, np.stack((x, 0.5 * x), axis=1).astype(np.float32))
    wav = read_wav(path)
    assert wav.channels == 2
    np.testing.assert_allclose(wav.samples, 0.75 * x, rtol=1e-6, atol=1e-7)


def test_cli_renders_and_states_the_scaling(pluck_file, tmp_path, capsys):
    out = tmp_path / "lead.wav"
    code = main(["drive", str(ROOT / "netlists" / "clean_two_stage.chain"), "--level", "10m",
                 "--wav", str(pluck_file), str(out), "--peak", "100m", "--oversample", "1"])
    text = capsys.readouterr().out
    assert code == 0
    assert "largest sample = 100 mV source EMF" in text and "1.0 = " in text and "dBFS" in text
    rate, data = wavfile.read(out)
    assert rate == 16000 and np.abs(data).max() == pytest.approx(0.891, abs=1e-6)


def _bad(tmp_path, name, payload):
    path = tmp_path / name
    if isinstance(payload, bytes):
        path.write_bytes(payload)
    else:
        wavfile.write(path, *payload)
    return path


@pytest.mark.parametrize("name, payload, code", [
    ("notes.wav", b"this is text, not audio\n", "E905"),
    ("empty.wav", (48000, np.zeros(0, dtype=np.int16)), "E906"),
    ("silent.wav", (48000, np.zeros(100, dtype=np.int16)), "E906"),
    ("odd.wav", (12345, np.ones(100, dtype=np.int16)), "E907"),
])
def test_bad_wav_files_are_located_errors(tmp_path, capsys, name, payload, code):
    path = _bad(tmp_path, name, payload)
    out = tmp_path / "out.wav"
    status = main(["drive", str(ROOT / "netlists" / "clean_two_stage.chain"), "--level", "10m",
                   "--wav", str(path), str(out), "--peak", "100m"])
    err = capsys.readouterr().err
    assert status == 2
    assert code in err and str(path) in err and "Traceback" not in err
    assert not out.exists()  # nothing written half-done


def test_a_full_scale_the_output_exceeds_is_refused(pluck_file):
    _, circuit, _ = load(ROOT / "netlists" / "clean_two_stage.chain")
    with pytest.raises(AnalysisError) as err:
        render(compile_transient(circuit), read_wav(pluck_file), peak_v=0.1, full_scale_v=0.01, oversample=1)
    assert err.value.diagnostics[0].code == "E908" and "clip" in err.value.diagnostics[0].message
