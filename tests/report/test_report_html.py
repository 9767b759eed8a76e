"""The HTML report (issue 15): one self-contained page that parses as HTML5
without errors (html5lib, strict), carries every section, figure and the
netlist, needs no network, and loads in a real headless Chromium without a
console error, with every figure laid out and a non-blank top of page."""

from __future__ import annotations

import io
import os
import re
from pathlib import Path

import numpy as np
import pytest

from chain.cli import main
from tests.report.browser import Browser, find_chromium
from tests.report.conftest import DEMOS, ROOT


@pytest.fixture(scope="module")
def pages(tmp_path_factory, demos_headroom) -> dict[str, Path]:
    """Demo name → its HTML report (the demos analysed once per session)."""
    from chain.page import page

    folder = tmp_path_factory.mktemp("html")
    out = {}
    for name in DEMOS:
        path = folder / f"{name}.html"
        path.write_text(page(demos_headroom[name]), encoding="utf-8")
        out[name] = path
    return out


@pytest.fixture(scope="module")
def parsed(pages):
    """Demo name → (the page's text, its strict html5lib parse), each page read and parsed once."""
    done: dict[str, tuple] = {}

    def get(name: str):
        if name not in done:
            text = pages[name].read_text(encoding="utf-8")
            done[name] = (text, _parse_strict(text))  # raises on any parse error
        return done[name]

    return get


SMALL = """title "Small <one> & only"
supply HT 300V
input into V1 resistance 10k
stage V1 common-cathode 12AX7
  plate 100k from HT
  cathode 1k5 bypass 22u
  grid leak 1M
couple V1 -> output cap 22n
output load 1M
"""


def test_report_command_writes_the_page(tmp_path, capsys):
    net = tmp_path / "small.chain"
    net.write_text(SMALL, encoding="utf-8")
    out = tmp_path / "small.html"
    assert main(["report", str(net), "--format", "html", "--output", str(out), "--no-headroom"]) == 0
    assert capsys.readouterr().out.strip() == f"wrote {out}"
    text = out.read_text(encoding="utf-8")
    doc = _parse_strict(text)
    assert doc.find("head/title").text.startswith("Small <one> & only")  # escaped, read back as written
    assert "Small &lt;one&gt; &amp; only" in text
    assert not any((h.text or "").startswith("Headroom") for h in doc.iter("h2"))


def _parse_strict(text: str):
    import html5lib

    return html5lib.HTMLParser(strict=True, namespaceHTMLElements=False).parse(text)


@pytest.mark.parametrize("name", DEMOS)
def test_page_is_valid_html5_and_complete(parsed, name):
    text, doc = parsed(name)  # the parse raises on any parse error
    design_text = (ROOT / f"netlists/{name}.chain").read_text(encoding="utf-8")
    title = re.search(r'^title "(.*)"', design_text, re.M).group(1)
    assert doc.find("head/title").text.startswith(title)
    headings = [h.text or "" for h in doc.iter("h2")]
    for wanted in ("Schematic", "Stages at", "Overall", "Headroom", "Diagnostics", "Supply and rails",
                   "The netlist"):
        assert any(h.startswith(wanted) for h in headings), f"no section {wanted!r} in {headings}"
    assert "lethal" in "".join(doc.find(".//p[@class='safety']").itertext())
    # the netlist itself, verbatim
    pre = doc.find(".//pre[@class='netlist']")
    assert "".join(pre.itertext()).strip() == design_text.strip()
    # every figure is an inline SVG with a caption
    figures = list(doc.iter("figure"))
    # schematic, Bode, impedance, transfer curves, harmonics, plate characteristics
    assert len(figures) == 6
    for fig in figures:
        assert any(el.tag.endswith("svg") for el in fig.iter()) and fig.find("figcaption") is not None


@pytest.mark.parametrize("name", DEMOS)
def test_page_needs_no_network_and_ids_are_unique(parsed, name):
    _, doc = parsed(name)
    for el in doc.iter():
        for attr in ("src", "href", "{http://www.w3.org/1999/xlink}href", "xlink:href"):
            value = el.get(attr)
            if value is not None:
                assert value.startswith("#"), f"<{el.tag} {attr}={value!r}> would load something"
    assert doc.find(".//link") is None and doc.find(".//script") is None
    ids = [el.get("id") for el in doc.iter() if el.get("id")]
    assert len(ids) == len(set(ids)), "duplicate element ids"


def test_print_style_is_there(pages):
    text = pages["lead_four_stage"].read_text(encoding="utf-8")
    assert "@media print" in text and "@page" in text


PROBE = """(() => {
  const figs = [...document.querySelectorAll('figure')].map(f => {
    const s = f.querySelector('svg');
    const r = s ? s.getBoundingClientRect() : {width: 0, height: 0};
    return {id: f.id, width: r.width, height: r.height,
            drawn: s ? s.querySelectorAll('path, use, text').length : 0};
  });
  return {figures: figs, title: document.title,
          safety: getComputedStyle(document.querySelector('.safety')).borderTopStyle};
})()"""


def _browser_or_skip() -> None:
    if find_chromium() is None:
        if os.environ.get("CI"):
            pytest.fail("Chromium is required in CI (.ci/run installs it): not found on PATH")
        pytest.skip("no Chromium on PATH (install it with 'apt-get install chromium'); .ci/run installs it")


@pytest.fixture(scope="module")
def browser():
    """One Chromium for every page of this module (each page in a tab of its own)."""
    _browser_or_skip()
    with Browser() as b:
        yield b


@pytest.mark.parametrize("name", DEMOS)
def test_page_loads_in_chromium_without_errors(pages, browser, name):
    from matplotlib.image import imread

    result = browser.load(pages[name], probe=PROBE)
    assert result.errors == []
    figures = result.probe["figures"]
    assert len(figures) >= 6
    for fig in figures:
        assert fig["width"] > 200 and fig["height"] > 100, f"figure {fig['id']} not laid out: {fig}"
        assert fig["drawn"] > 20, f"figure {fig['id']} is empty: {fig}"
    assert result.probe["safety"] == "solid"
    # the top of the page: white background, dark text, the orange-brown caution box
    image = imread(io.BytesIO(result.screenshot_png))[..., :3]
    assert image.shape[:2] == (900, 1280)
    dark = np.mean(image.max(axis=2) < 0.4)
    assert 0.005 < dark < 0.5, f"{dark:.4f} of the screenshot is dark"
    # distinct colours: each 8-bit RGB triple packed into one integer (the same count as
    # np.unique(..., axis=0) on the triples, without its slow row sort)
    rgb = (image * 255).astype(np.uint8).reshape(-1, 3).astype(np.uint32)
    assert len(np.unique((rgb[:, 0] << 16) | (rgb[:, 1] << 8) | rgb[:, 2])) > 50
