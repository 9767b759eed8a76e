"""Writing figures: the one place that turns a matplotlib Figure into a file."""

from __future__ import annotations

import io
from pathlib import Path

from chain.fileio import write_atomically

__all__ = ["FORMATS", "save_figure", "figure_svg"]

#: file suffixes a figure can be written as
FORMATS = ("png", "svg")


def save_figure(plot, path: str | Path, *, dpi: int = 200) -> Path:
    """Write a figure as PNG or SVG, chosen by the suffix of ``path``.

    The image is rendered completely in memory first, then written with
    :func:`chain.fileio.write_atomically`, so a failure never leaves a
    half-written file.  Metadata that would change from run to run
    (dates, software versions) is left out.

    Parameters
    ----------
    plot
        A matplotlib ``Figure``, or any plot object of this package with a
        ``figure`` attribute (BodePlot, CharacteristicsPlot, …).
    path : str or Path
        Target file ending in ``.png`` or ``.svg``.
    dpi : int
        Resolution of a PNG, dots per inch.

    Returns
    -------
    Path
        The written file.

    Raises
    ------
    ValueError
        for any other suffix.
    """
    figure = getattr(plot, "figure", plot)
    path = Path(path)
    fmt = path.suffix.lower().lstrip(".")
    if fmt not in FORMATS:
        raise ValueError(f"cannot save a plot as {path.suffix or 'no suffix'!r}: use .png or .svg")
    buf = io.BytesIO()
    metadata = {"Date": None} if fmt == "svg" else {"Software": None}
    figure.savefig(buf, format=fmt, dpi=dpi if fmt == "png" else None, metadata=metadata)
    write_atomically(path, buf.getvalue())
    return path


def figure_svg(plot) -> str:
    """A figure as the text of an SVG document, for inline use (the HTML report).

    Text is drawn as paths, so the picture needs no fonts where it is
    shown; the element ids are salted with a fixed string, so the same
    figure gives the same text on every run.
    """
    import matplotlib

    figure = getattr(plot, "figure", plot)
    buf = io.StringIO()
    with matplotlib.rc_context({"svg.hashsalt": "chain", "svg.fonttype": "path"}):
        figure.savefig(buf, format="svg", metadata={"Date": None})
    return buf.getvalue()
