"""The noise part of a report: :class:`chain.smallsignal.noise.NoiseResult` as
data, and its lines.

Totals are V rms over the band; densities are V/√Hz; dBV is ``20·log10(V rms
/ 1 V)``.  Contributors are named by what they belong to and their role
(``"V1 grid stopper"``) and carry the part name beside it.
"""

from __future__ import annotations

import math
from typing import Any, Callable

import numpy as np

import chain.report.fmt as fmt
from chain.report.values import num

__all__ = ["noise_data", "text_lines", "markdown_lines", "spot_density", "SHOWN"]

#: contributors listed by name in the text and Markdown reports (the rest are summed)
SHOWN = 8


def noise_data(result) -> dict[str, Any] | None:
    """The ``noise`` entry of a report document (None when not analysed).

    Parameters
    ----------
    result : chain.smallsignal.noise.NoiseResult or None
    """
    if result is None:
        return None
    n = result
    density = np.sqrt(np.asarray(n.output_psd_v2_hz, dtype=float))
    return {
        "temperature_k": num(n.temperature_k),
        "grid_noise_factor": num(n.grid_noise_factor),
        "flicker_corner_hz": num(n.flicker_corner_hz),
        "band_low_hz": num(n.band_hz[0]), "band_high_hz": num(n.band_hz[1]),
        "reference_hz": num(n.reference_hz),
        "output_rms_v": num(n.output_rms_v), "output_rms_a_v": num(n.output_rms_a_v),
        "output_density_ref_v": num(n.output_density_ref_v),
        "gain_ref": num(n.gain_ref),
        "input_rms_v": num(n.input_rms_v), "input_rms_a_v": num(n.input_rms_a_v),
        "input_density_ref_v": num(n.input_density_ref_v),
        "level_v": num(n.level_v), "signal_rms_v": num(n.signal_rms_v),
        "snr_db": num(n.snr_db), "snr_a_db": num(n.snr_a_db),
        "contributors": [
            {"name": c.name, "owner": {"kind": c.owner.kind, "name": c.owner.name}, "role": c.role.value,
             "label": c.label, "output_rms_v": num(math.sqrt(c.power_v2)),
             "fraction": num(c.fraction), "fraction_a": num(c.fraction_a)}
            for c in n.contributors
        ],
        "density": {"f_hz": [num(x) for x in n.f_hz], "output_v": [num(x) for x in density]},
    }


def spot_density(noise: dict[str, Any]) -> list[tuple[float, float | None]]:
    """``(f_hz, output density V/√Hz)`` at the 1-2-5 frequencies of the band,
    read from the grid by linear interpolation of log density against log frequency."""
    from chain.report.base import spot_frequencies

    f = np.asarray(noise["density"]["f_hz"], dtype=float)
    d = np.asarray([np.nan if v is None or v <= 0 else v for v in noise["density"]["output_v"]], dtype=float)
    out = []
    for fs in spot_frequencies(noise["band_low_hz"], noise["band_high_hz"]):
        with np.errstate(divide="ignore", invalid="ignore"):
            v = float(np.exp(np.interp(np.log(fs), np.log(f), np.log(d))))
        out.append((fs, v if math.isfinite(v) else None))
    return out


def _dbv(v: float | None) -> str:
    if v is None or v <= 0:
        return fmt.NONE
    return f"{20 * math.log10(v):.1f} dBV"


def _level(v: float | None) -> str:
    return f"{fmt.si(v, 'V')} rms ({_dbv(v)})"


def _density(v: float | None) -> str:
    return fmt.si(v, "V/√Hz")


def _db1(v: float | None) -> str:
    return fmt.NONE if v is None else f"{v:.1f} dB"


def _facts(n: dict[str, Any]) -> list[tuple[str, str]]:
    band = f"{fmt.si(n['band_low_hz'], 'Hz')} to {fmt.si(n['band_high_hz'], 'Hz')}"
    ref = fmt.si(n["reference_hz"], "Hz")
    return [
        ("output noise, unweighted", f"{_level(n['output_rms_v'])} over {band}"),
        ("output noise, A-weighted", _level(n["output_rms_a_v"])),
        (f"output density at {ref}", _density(n["output_density_ref_v"])),
        ("input-referred noise", f"{_level(n['input_rms_v'])}, A-weighted {_level(n['input_rms_a_v'])}"),
        (f"input-referred density at {ref}", _density(n["input_density_ref_v"])),
        (f"signal-to-noise at {fmt.si(n['level_v'], 'V')} peak",
         f"{_db1(n['snr_db'])}, A-weighted {_db1(n['snr_a_db'])} (small-signal gain, clipping not modelled)"),
        ("assumptions", f"T = {fmt.plain(n['temperature_k'])} K; triode noise resistance "
                        f"{fmt.plain(n['grid_noise_factor'])}/gm at the grid, flicker corner "
                        f"{fmt.si(n['flicker_corner_hz'], 'Hz')}"),
    ]


def _ranked(n: dict[str, Any]) -> tuple[list[dict[str, Any]], float, float]:
    """The :data:`SHOWN` largest contributors and the summed shares of the rest."""
    shown = n["contributors"][:SHOWN]
    rest = n["contributors"][len(shown):]
    return shown, sum(c["fraction"] or 0 for c in rest), sum(c["fraction_a"] or 0 for c in rest)


def text_lines(n: dict[str, Any], kv: Callable[[str, str], str]) -> list[str]:
    """Lines of the text report's noise section (``kv`` formats a label and value).

    One fact a line; contributors are labelled by rank (``noise rank 1``), so
    a changed share changes its own line."""
    lines = [kv(k, v) for k, v in _facts(n)]
    shown, rest, rest_a = _ranked(n)
    for i, c in enumerate(shown, 1):
        lines.append(kv(f"noise rank {i}", f"{c['label']} ({c['name']}): {fmt.pct(c['fraction'])} of the "
                                           f"output noise power, A-weighted {fmt.pct(c['fraction_a'])}"))
    if len(n["contributors"]) > len(shown):
        lines.append(kv("noise, all others", f"{fmt.pct(rest)}, A-weighted {fmt.pct(rest_a)}"))
    for f, v in spot_density(n):
        lines.append(kv(f"output noise density at {fmt.si(f, 'Hz')}", _density(v)))
    return lines


def markdown_lines(n: dict[str, Any]) -> list[str]:
    """Lines of the Markdown report's noise section (after its heading)."""
    lines = [f"- {k}: {v}" for k, v in _facts(n)]
    shown, rest, rest_a = _ranked(n)
    lines += ["", "| contributor | part | share | A-weighted share |", "| --- | --- | ---: | ---: |"]
    for c in shown:
        lines.append(f"| {c['label']} | `{c['name']}` | {fmt.pct(c['fraction'])} | {fmt.pct(c['fraction_a'])} |")
    if rest > 0 or rest_a > 0:
        lines.append(f"| all others | | {fmt.pct(rest)} | {fmt.pct(rest_a)} |")
    spots = spot_density(n)
    if spots:
        lines += ["", "| frequency | output density |", "| ---: | ---: |"]
        lines += [f"| {fmt.si(f, 'Hz')} | {_density(v)} |" for f, v in spots]
    return lines
