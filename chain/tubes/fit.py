"""Fitting triode models to plate-curve points, reproducibly.

The built-in library is regenerated from the data files in
``chain/tubes/data/`` by one command::

    python -m chain.tubes.fit            # rewrites chain/tubes/fitted.py
    python -m chain.tubes.fit --check    # exit 1 if fitted.py is out of date

and ``chain fit`` runs the same code on a user's measured points.

A data file is CSV with a header row; ``#`` starts a comment line.  Columns
(the unit is part of the name; ``_ma``/``_ua`` and ``_kohm`` are accepted
for the user's convenience):

``vpk_v, vgk_v, ip_a`` (required)
    plate–cathode voltage, grid–cathode voltage, plate current;
``ig_a`` (optional)
    grid current;
``kind`` (optional, ``curve`` or ``typical``), ``gm_s``, ``rp_ohm``, ``split``
(``fit`` or ``hold``), ``source``
    used by the library data: typical points carry the handbook gm and rp,
    and only ``fit`` rows enter the fit.

Equations and the residual are in the docstring of :func:`fit_points`.
Heavy imports (scipy.optimize) happen inside the functions.
"""

from __future__ import annotations

import csv
import math
from collections.abc import Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np

from chain.errors import ChainError, Diagnostic, Span, error, warning
from chain.tubes.model import FORMS, TriodeModel, grid_current, plate_current

__all__ = [
    "DATA_DIR",
    "FIT_PARAMS",
    "FitDataError",
    "DataPoint",
    "TubeData",
    "PointResidual",
    "FitResult",
    "read_points",
    "library_data",
    "fit_points",
    "fit_library",
    "render_fitted_module",
    "tube_line",
]

DATA_DIR = Path(__file__).with_name("data")
FITTED_MODULE = Path(__file__).with_name("fitted.py")

#: Parameters a fit adjusts, per form; the rest keep their values.
FIT_PARAMS = {
    "koren": ("mu", "ex", "kg1", "kp", "vct"),
    "dempwolf": ("dz_mu", "dz_g", "dz_gamma", "dz_c", "dz_vct"),
}
#: Koren's kvb (V²) is held, not fitted: with the contact potential the data
#: need no plate-voltage dependence of the grid's effect, and a fitted kvb
#: (≈ 60–170 V² on the library data) bends the curves at low plate voltage
#: so that the 2nd harmonic of a low-voltage stage cancels (docs/models.md).
#: 1 V² keeps sqrt(kvb + Vpk²) smooth at Vpk = 0.
KOREN_KVB = 1.0
#: Grid-current parameters fitted when the data has grid current.
GRID_PARAMS = {
    "koren": ("grid_perveance_a_v15", "grid_onset_v"),
    "dempwolf": ("dz_gg", "dz_xi", "dz_cg"),
}
# (low, high, log-scaled) bounds of each parameter
_BOUNDS = {
    "mu": (1.0, 300.0, True), "ex": (1.05, 2.5, False), "kg1": (10.0, 1e5, True), "kp": (1.0, 3000.0, True),
    "kvb": (1.0, 3e4, True), "vct": (-1.0, 2.0, False), "dz_vct": (-1.0, 2.0, False),
    "dz_mu": (1.0, 300.0, True), "dz_g": (1e-6, 1.0, True), "dz_gamma": (1.05, 2.5, False), "dz_c": (0.3, 30.0, True),
    "grid_perveance_a_v15": (1e-6, 1e-1, True), "grid_onset_v": (-2.0, 1.0, False),
    "dz_gg": (1e-6, 1e-1, True), "dz_xi": (1.05, 2.5, False), "dz_cg": (0.5, 50.0, True),
}
#: Tube-line key of each parameter (the netlist language's names).
LINE_KEYS = {
    "koren": {"mu": "mu", "ex": "ex", "kg1": "kg1", "kp": "kp", "kvb": "kvb", "vct": "vct",
              "grid_perveance_a_v15": "ig-k", "grid_onset_v": "ig-onset"},
    "dempwolf": {"dz_mu": "mu", "dz_g": "g", "dz_gamma": "gamma", "dz_c": "c", "dz_vct": "vct", "dz_gg": "gg", "dz_xi": "xi",
                 "dz_cg": "cg"},
}

_UNITS = {"v": 1.0, "a": 1.0, "ma": 1e-3, "ua": 1e-6, "s": 1.0, "ms": 1e-3, "ohm": 1.0, "kohm": 1e3}
_COLUMNS = ("vpk", "vgk", "ip", "ig", "gm", "rp")
_MIN_POINTS = 6


class FitDataError(ChainError, ValueError):
    """A data file that cannot be fitted: every problem found, located."""


@dataclass(frozen=True, slots=True)
class DataPoint:
    """One measured or handbook point, SI units; ``line`` is its line in the file."""

    vpk_v: float
    vgk_v: float
    ip_a: float
    ig_a: float | None = None
    gm_s: float | None = None
    rp_ohm: float | None = None
    kind: str = "curve"
    split: str = "fit"
    source: str = ""
    line: int = 0


@dataclass(frozen=True, slots=True)
class TubeData:
    """The points of one file and the non-fatal problems found in it."""

    path: str
    points: tuple[DataPoint, ...]
    warnings: tuple[Diagnostic, ...] = ()

    def subset(self, *, kind: str | None = None, split: str | None = None) -> tuple[DataPoint, ...]:
        return tuple(p for p in self.points if (kind is None or p.kind == kind) and (split is None or p.split == split))


@dataclass(frozen=True, slots=True)
class PointResidual:
    """Model against one point: currents in A, ``error`` = model/data − 1."""

    point: DataPoint
    model_ip_a: float
    error: float


@dataclass(frozen=True, slots=True)
class FitResult:
    """Outcome of :func:`fit_points`.

    Attributes
    ----------
    form : str
        Model form fitted.
    params : Mapping[str, float]
        Fitted parameter values by :class:`TriodeModel` field name, rounded
        to 4 significant figures (what ships and what the tube line says).
    model : TriodeModel
        ``base`` with the fitted parameters and ``form``.
    residuals : tuple of PointResidual
        Every point of the data, fitted and held out.
    rms_fit : float
        RMS of the fit residual (log ratio) over the fitted points.
    cost : float
        Final least-squares cost (½·Σ r²).
    grid_fitted : bool
        Whether grid-current parameters were fitted too.
    """

    form: str
    params: Mapping[str, float]
    model: TriodeModel
    residuals: tuple[PointResidual, ...]
    rms_fit: float
    cost: float
    grid_fitted: bool = False


# ----------------------------------------------------------------------------- reading


def _column(name: str) -> tuple[str, float] | None:
    """(quantity, scale to SI) for a header such as ``ip_ma``, else None."""
    base, _, unit = name.strip().lower().partition("_")
    if base in _COLUMNS and unit in _UNITS:
        return base, _UNITS[unit]
    return None


def read_points(path: str | Path, *, text: str | None = None) -> TubeData:
    """Read a CSV of plate-curve points (see the module docstring).

    Raises
    ------
    FitDataError
        With every problem located at file, line and column: a missing
        column, a value that is not a number, a negative current, a plate
        voltage <= 0, fewer than 6 points, a single grid voltage, or
        currents that look like a unit slip by 1000.
    """
    path = str(path)
    if text is None:
        try:
            text = Path(path).read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as exc:
            raise FitDataError([error("E701", f"cannot read the data file: {exc}", Span(path, 1, 1))]) from None
    lines = text.splitlines()
    problems: list[Diagnostic] = []
    header_at = next((i for i, ln in enumerate(lines) if ln.strip() and ln.lstrip()[:1] != "#"), None)
    if header_at is None:
        raise FitDataError([error("E701", "the data file has no header row and no points", Span(path, 1, 1),
                                  "first line: vpk_v,vgk_v,ip_a  (optional ig_a; ip_ma for milliamperes)")])
    header_line = lines[header_at]
    header = next(csv.reader([header_line]))
    cols: dict[str, tuple[int, float]] = {}
    extra: dict[str, int] = {}
    for j, h in enumerate(header):
        c = _column(h)
        if c is not None:
            cols[c[0]] = (j, c[1])
        elif h.strip().lower() in ("kind", "split", "source"):
            extra[h.strip().lower()] = j
        else:
            problems.append(error("E701", f"unknown column {h.strip()!r}",
                                  Span(path, header_at + 1, header_line.find(h) + 1, header_line),
                                  "columns: vpk_v, vgk_v, ip_a (or ip_ma, ip_ua), optional ig_a, gm_s, rp_ohm, "
                                  "kind, split, source"))
    for need in ("vpk", "vgk", "ip"):
        if need not in cols:
            problems.append(error("E701", f"the header has no {need} column", Span(path, header_at + 1, 1, header_line),
                                  f"name it {need}_v" if need != "ip" else "name it ip_a, ip_ma or ip_ua"))
    if problems:
        raise FitDataError(problems)
    points: list[DataPoint] = []
    for i in range(header_at + 1, len(lines)):
        raw = lines[i]
        if not raw.strip() or raw.lstrip()[:1] == "#":
            continue
        cells = next(csv.reader([raw]))
        offsets, pos = [], 0
        for cell in cells:  # column of each cell, for the caret
            k = raw.find(cell, pos)
            offsets.append(k + 1 if k >= 0 else 1)
            pos = max(k, pos) + len(cell)
        values: dict[str, float] = {}  # an empty optional cell stays absent (read with .get)
        bad = False
        for q, (j, scale) in cols.items():
            cell = cells[j].strip() if j < len(cells) else ""
            col = offsets[j] if j < len(offsets) else len(raw) + 1
            if not cell:
                if q in ("vpk", "vgk", "ip"):
                    problems.append(error("E702", f"missing {q} value", Span(path, i + 1, col, raw)))
                    bad = True
                continue
            try:
                v = float(cell)
            except ValueError:
                problems.append(error("E702", f"{cell!r} is not a number", Span(path, i + 1, col, raw),
                                      "plain numbers only; the unit is in the column name"))
                bad = True
                continue
            if not math.isfinite(v):
                problems.append(error("E702", f"{cell!r} is not a finite number", Span(path, i + 1, col, raw)))
                bad = True
                continue
            if q in ("ip", "ig") and v < 0:
                problems.append(error("E703", f"negative {q} current {cell}", Span(path, i + 1, col, raw),
                                      "currents are magnitudes flowing into the electrode; check the sign "
                                      "convention of the instrument"))
                bad = True
            if q == "vpk" and v <= 0:
                problems.append(error("E703", f"plate voltage {cell} V is not positive", Span(path, i + 1, col, raw)))
                bad = True
            values[q] = v * scale
        if bad:
            continue
        kind = cells[extra["kind"]].strip() if "kind" in extra and extra["kind"] < len(cells) else "curve"
        split = cells[extra["split"]].strip() if "split" in extra and extra["split"] < len(cells) else "fit"
        source = cells[extra["source"]].strip() if "source" in extra and extra["source"] < len(cells) else ""
        if kind not in ("curve", "typical") or split not in ("fit", "hold"):
            problems.append(error("E702", f"kind must be curve or typical and split fit or hold, not {kind!r}/{split!r}",
                                  Span(path, i + 1, 1, raw)))
            continue
        points.append(DataPoint(vpk_v=values["vpk"], vgk_v=values["vgk"], ip_a=values["ip"],
                                ig_a=values.get("ig"), gm_s=values.get("gm"), rp_ohm=values.get("rp"),
                                kind=kind, split=split, source=source, line=i + 1))
    if problems:
        raise FitDataError(problems)
    _check_set(path, header_at, header_line, points, cols)
    return TubeData(path=path, points=tuple(points))


def _check_set(path: str, header_at: int, header_line: str, points: list[DataPoint], cols) -> None:
    """Problems of the point set as a whole (count, spread, units)."""
    where = Span(path, header_at + 1, 1, header_line)
    fitted = [p for p in points if p.split == "fit"]
    problems = []
    if len(fitted) < _MIN_POINTS:
        problems.append(error("E704", f"{len(fitted)} point(s) to fit; a fit needs at least {_MIN_POINTS}",
                              where, "measure at least two grid voltages at three or more plate voltages each"))
    elif len({round(p.vgk_v, 6) for p in fitted}) < 2:
        problems.append(error("E705", f"every point has the same grid voltage ({fitted[0].vgk_v:g} V): the grid's "
                              "effect (mu) cannot be fitted", where, "add curves at two or more grid voltages"))
    elif len({round(p.vpk_v, 6) for p in fitted}) < 2:
        problems.append(error("E705", "every point has the same plate voltage: the plate's effect cannot be fitted",
                              where, "add points at two or more plate voltages"))
    if points:
        ip = np.array([p.ip_a for p in points])
        unit = cols["ip"][1]
        name = {1.0: "A", 1e-3: "mA", 1e-6: "µA"}[unit]
        big = max(points, key=lambda p: p.ip_a)
        if ip.max() > 0.5:
            problems.append(error("E706", f"largest plate current {big.ip_a / unit:g} {name} = {big.ip_a:g} A; "
                                  "no small-signal triode passes that: is the column in mA, not A?",
                                  Span(path, big.line, 1), "rename the column ip_ma (or ip_ua) to match the numbers"))
        elif 0.0 < ip.max() < 2e-6:
            problems.append(error("E706", f"largest plate current {big.ip_a / unit:g} {name} = {big.ip_a:g} A; "
                                  "too small for plate curves: is the column in A, not mA (or mA, not µA)?",
                                  Span(path, big.line, 1), "rename the column ip_a (or ip_ma) to match the numbers"))
        vmax = max(p.vpk_v for p in points)
        if vmax > 2000.0:
            problems.append(error("E706", f"plate voltage {vmax:g} V is beyond any receiving tube: millivolts?",
                                  Span(path, max(points, key=lambda p: p.vpk_v).line, 1)))
    if problems:
        raise FitDataError(problems)


def library_data(name: str) -> TubeData:
    """The shipped data file of a built-in type (``chain/tubes/data/NAME.csv``)."""
    return read_points(DATA_DIR / f"{name}.csv")


# ----------------------------------------------------------------------------- fitting


def _pack(names, model: TriodeModel) -> np.ndarray:
    return np.array([math.log(getattr(model, n)) if _BOUNDS[n][2] else getattr(model, n) for n in names])


def _unpack(names, x) -> dict:
    return {n: (math.exp(v) if _BOUNDS[n][2] else float(v)) for n, v in zip(names, x)}


def _bounds(names):
    lo = [math.log(_BOUNDS[n][0]) if _BOUNDS[n][2] else _BOUNDS[n][0] for n in names]
    hi = [math.log(_BOUNDS[n][1]) if _BOUNDS[n][2] else _BOUNDS[n][1] for n in names]
    return np.array(lo), np.array(hi)


def _round4(x: float) -> float:
    return float(f"{x:.4g}")


def _starts(form: str, base: TriodeModel, pts) -> list[TriodeModel]:
    """Starting models: several amplification factors, current scale matched to the data."""
    vpk = np.array([p.vpk_v for p in pts])
    vgk = np.array([p.vgk_v for p in pts])
    ip = np.array([p.ip_a for p in pts])
    out = []
    for mu, vct in ((mu, vct) for mu in (6.0, 15.0, 35.0, 80.0) for vct in (0.0, 0.6)):
        if form == "dempwolf":
            m = replace(base, form=form, dz_mu=mu, dz_gamma=1.4, dz_c=5.0, dz_g=1e-3, dz_vct=vct)
            scale_name = "dz_g"
        else:
            m = replace(base, form=form, mu=mu, ex=1.4, kg1=1000.0, kp=300.0, kvb=KOREN_KVB, vct=vct)
            scale_name = "kg1"
        got = np.asarray(plate_current(m, vpk, vgk))
        ok = (got > 0) & (ip > 0)
        if not ok.any():
            continue
        ratio = float(np.exp(np.median(np.log(got[ok] / ip[ok]))))
        cur = getattr(m, scale_name)
        new = cur / ratio if scale_name == "dz_g" else cur * ratio
        lo, hi, _ = _BOUNDS[scale_name]
        out.append(replace(m, **{scale_name: min(max(new, lo * 1.01), hi / 1.01)}))
    return out


def fit_points(data: TubeData | tuple[DataPoint, ...], form: str, *, base: TriodeModel) -> FitResult:
    """Fit one model form to the ``fit`` points of ``data``.

    Least squares over the fitted points (scipy.optimize.least_squares,
    trust-region reflective, bounded; positive scale parameters optimised as
    logarithms) of the residual per point

        r = ln((Ip_model + ε) / (Ip_data + ε)),   ε = 2 % of the largest Ip in the data

    i.e. the relative error, softened near zero current so that a point read
    off the foot of a curve does not dominate.  Started from eight points
    (amplification factor 6, 15, 35, 80 × contact potential 0, 0.6 V) with
    the current scale matched to the data; the lowest final cost wins.  Fitted parameters: ``FIT_PARAMS[form]``;
    when at least three points carry grid current with Vgk > −0.5 V, the
    grid-current parameters ``GRID_PARAMS[form]`` are then fitted to those
    (same residual, on Ig).  Parameters are rounded to 4 significant figures
    and the residuals reported for the rounded model.
    """
    from scipy.optimize import least_squares

    if form not in FORMS:
        raise ValueError(f"form must be one of {FORMS}, got {form!r}")
    points = data.points if isinstance(data, TubeData) else tuple(data)
    pts = [p for p in points if p.split == "fit" and p.kind == "curve"] or [p for p in points if p.split == "fit"]
    vpk = np.array([p.vpk_v for p in pts])
    vgk = np.array([p.vgk_v for p in pts])
    ip = np.array([p.ip_a for p in pts])
    eps = 0.02 * float(ip.max())
    names = FIT_PARAMS[form]

    def residual(x, model):
        m = replace(model, **_unpack(names, x))
        return np.log((np.asarray(plate_current(m, vpk, vgk)) + eps) / (ip + eps))

    best = None
    lo, hi = _bounds(names)
    for start in _starts(form, replace(base, form=form), pts):
        x0 = np.clip(_pack(names, start), lo + 1e-9, hi - 1e-9)
        res = least_squares(residual, x0, bounds=(lo, hi), args=(start,), method="trf", x_scale=1.0,
                            xtol=1e-12, ftol=1e-12, gtol=1e-12, max_nfev=4000)
        if best is None or res.cost < best[0].cost - 1e-15:
            best = (res, start)
    assert best is not None  # _starts gives several starting models
    res, start = best
    # float fields of TriodeModel by name, the keyword arguments of replace() below
    params: dict[str, Any] = {n: _round4(v) for n, v in _unpack(names, res.x).items()}
    if form == "koren":  # the held parameter belongs to the set (and to the tube line)
        params = {"mu": params["mu"], "ex": params["ex"], "kg1": params["kg1"], "kp": params["kp"],
                  "kvb": KOREN_KVB, "vct": params["vct"]}
    model = replace(start, **params)
    grid_fitted = False
    gpts = [p for p in pts if p.ig_a is not None and p.vgk_v > -0.5]
    if len(gpts) >= 3:
        gnames = GRID_PARAMS[form]
        gv = np.array([p.vgk_v for p in gpts])
        gi = np.array([p.ig_a for p in gpts])
        geps = 0.02 * float(gi.max()) + 1e-9
        glo, ghi = _bounds(gnames)

        def gres(x):
            m = replace(model, **_unpack(gnames, x))
            return np.log((np.asarray(grid_current(m, gv)) + geps) / (gi + geps))

        g = least_squares(gres, np.clip(_pack(gnames, model), glo + 1e-9, ghi - 1e-9), bounds=(glo, ghi),
                          method="trf", xtol=1e-12, ftol=1e-12, gtol=1e-12, max_nfev=2000)
        gparams: dict[str, Any] = {n: _round4(v) for n, v in _unpack(gnames, g.x).items()}
        params.update(gparams)
        model = replace(model, **gparams)
        grid_fitted = True
    all_ip = np.asarray(plate_current(model, np.array([p.vpk_v for p in points]), np.array([p.vgk_v for p in points])))
    residuals = tuple(PointResidual(point=p, model_ip_a=float(m), error=float(m / p.ip_a - 1.0) if p.ip_a > 0 else math.inf)
                      for p, m in zip(points, all_ip))
    r = residual(_pack(names, model), model)
    return FitResult(form=form, params=params, model=model, residuals=residuals,
                     rms_fit=float(np.sqrt(np.mean(r * r))), cost=float(res.cost), grid_fitted=grid_fitted)


def fit_warnings(result: FitResult, path: str) -> tuple[Diagnostic, ...]:
    """W430 when the fit misses its own points by more than 15 % RMS."""
    if result.rms_fit > 0.15:
        return (warning("W430", f"the {result.form} form misses the fitted points by {result.rms_fit:.0%} RMS; "
                        "the data may hold a unit slip, a mislabelled curve or a tube the form cannot describe",
                        Span(path, 1, 1), "look at the plot of data against model"),)
    return ()


def fit_library(names: tuple[str, ...] | None = None) -> dict[str, dict[str, dict[str, float]]]:
    """Fit every form to every built-in type's data file.

    Returns ``{type: {form: {parameter: value}}}``, values rounded to 4
    significant figures — exactly what :func:`render_fitted_module` writes
    into ``chain/tubes/fitted.py``.
    """
    from chain.tubes.library import LIBRARY

    out: dict[str, dict[str, dict[str, float]]] = {}
    for name in names or tuple(LIBRARY):
        data = library_data(name)
        out[name] = {form: dict(fit_points(data, form, base=LIBRARY[name]).params) for form in FORMS}
    return out


def render_fitted_module(params: dict[str, dict[str, dict[str, float]]]) -> str:
    """Python source of ``chain/tubes/fitted.py`` for ``params``."""
    lines = ['"""Fitted model parameters of the built-in tubes.',
             "",
             "GENERATED by ``python -m chain.tubes.fit`` from chain/tubes/data/*.csv; do not edit by hand.",
             "tests/tubes/test_fit.py checks that this file is what that command produces.",
             '"""',
             "",
             "PARAMS = {"]
    for name, forms in params.items():
        lines.append(f"    {name!r}: {{")
        for form, values in forms.items():
            body = ", ".join(f"{k!r}: {v!r}" for k, v in values.items())
            lines.append(f"        {form!r}: {{{body}}},")
        lines.append("    },")
    lines.append("}")
    return "\n".join(lines) + "\n"


def tube_line(name: str, result: FitResult, *, like: str | None = None) -> str:
    """A ``tube`` line for a netlist that reproduces the fitted model."""
    keys = LINE_KEYS[result.form]
    parts = [f"tube {name}"]
    if like:
        parts.append(f"like {like}")
    parts.append(f"model {result.form}")
    parts += [f"{keys[k]} {v:.4g}" for k, v in result.params.items()]
    return " ".join(parts)


def main(argv=None) -> int:
    """``python -m chain.tubes.fit [--check]``: regenerate chain/tubes/fitted.py."""
    import argparse

    ap = argparse.ArgumentParser(prog="python -m chain.tubes.fit",
                                 description="Refit the built-in tube library from chain/tubes/data/*.csv.")
    ap.add_argument("--check", action="store_true", help="only check that fitted.py is up to date (exit 1 if not)")
    args = ap.parse_args(argv)
    text = render_fitted_module(fit_library())
    if args.check:
        same = FITTED_MODULE.exists() and FITTED_MODULE.read_text(encoding="utf-8") == text
        print("fitted.py is up to date" if same else "fitted.py differs from a fresh fit")
        return 0 if same else 1
    from chain.fileio import write_atomically

    write_atomically(FITTED_MODULE, text)
    print(f"wrote {FITTED_MODULE}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())


def residual_table(result: FitResult) -> str:
    """Residuals per curve (grid voltage) and per point, as fixed-width text."""
    rows = ["curve (Vgk)   points   RMS error   worst     fitted/held out",
            "-" * 60]
    by_grid: dict[float, list[PointResidual]] = {}
    for r in result.residuals:
        by_grid.setdefault(r.point.vgk_v, []).append(r)
    for vg in sorted(by_grid, reverse=True):
        rs = by_grid[vg]
        e = np.array([r.error for r in rs])
        worst = rs[int(np.argmax(np.abs(e)))].error
        n_fit = sum(1 for r in rs if r.point.split == "fit")
        rows.append(f"{vg:>+9.3g} V  {len(rs):>6}   {float(np.sqrt(np.mean(e * e))):>8.1%}   {worst:>+7.1%}   "
                    f"{n_fit}/{len(rs) - n_fit}")
    rows += ["", "  line     Vpk       Vgk        Ip data     Ip model    error   split"]
    for r in result.residuals:
        p = r.point
        rows.append(f"  {p.line:>4} {p.vpk_v:>7.4g} V {p.vgk_v:>+7.3g} V {p.ip_a * 1e3:>9.4g} mA "
                    f"{r.model_ip_a * 1e3:>9.4g} mA {r.error:>+7.1%}   {p.split}")
    rows.append(f"\nRMS of the fit residual over the fitted points: {result.rms_fit:.1%}")
    return "\n".join(rows)
