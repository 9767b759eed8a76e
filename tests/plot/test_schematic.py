"""Schematic drawn from the netlist (issue 15): every part as written is drawn
with its value, the parts meet where the netlist says, and the files are
real images."""

from __future__ import annotations

import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from chain.cli import main
from chain.language import parse_file
from chain.language.design import Pot
from chain.units import format_rkm

ROOT = Path(__file__).parents[2]
DEMOS = sorted((ROOT / "netlists").glob("**/*.chain"))


def _expected_texts(design) -> list[str]:
    """What a reader must find on the drawing: names, tubes, rails, every value."""
    r = lambda v: format_rkm(v, "R")  # noqa: E731
    c = lambda v: format_rkm(v, "C")  # noqa: E731
    texts = []
    for st in design.stages:
        texts += [st.name, st.tube, st.rail]
        for v in (st.plate_load_ohm, st.grid_leak_ohm, st.grid_stopper_ohm):
            if v:
                texts.append(r(v))
        if st.cathode:
            texts.append(r(st.cathode.r_ohm))
            if st.cathode.bypass_f:
                texts.append(c(st.cathode.bypass_f))
            if st.cathode.bypass_series_ohm:
                texts.append(r(st.cathode.bypass_series_ohm))
    for rail in design.rails:
        texts += [rail.name, r(rail.drop_ohm)]
        if rail.decouple_f:
            texts.append(c(rail.decouple_f))
    for cp in design.couplings:
        if cp.kind == "cap":
            texts.append(c(cp.cap_f))
        elif cp.kind == "network":
            texts.append(cp.label)
    for net in design.networks:
        for p in net.parts:
            if isinstance(p, Pot):
                taper = "audio" if p.taper == "audio" else "linear"
                texts.append(f"{p.name} {r(p.value)} {taper}, at {10 * p.position:.3g}")
            else:
                value = {"resistor": r, "capacitor": c}.get(p.kind, lambda v: f"{v:g}")(p.value)
                texts.append(f"{p.name} {value}")
    if design.output and design.output.load_ohm and any(c.dst == "output" for c in design.couplings):
        texts.append(r(design.output.load_ohm))  # drawn as a part; an output taken at a node is said in words
    return texts


def _first_section(design) -> set[str]:
    """Values that belong to a second section or a tail only (listed in words, not as part labels)."""
    out = set()
    for st in design.stages:
        if st.cathode and st.cathode.tail_ohm:
            out.add(format_rkm(st.cathode.tail_ohm, "R"))
        if st.second is not None:
            out |= {format_rkm(v, "R") for v in (st.second.plate_load_ohm, st.second.grid_leak_ohm,
                                                   st.second.grid_stopper_ohm) if v}
    return out


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_every_part_of_every_demo_is_drawn_with_its_value(path):
    from chain.plot.schematic import schematic

    design = parse_file(path)
    drawn = schematic(design)
    missing = [t for t in _expected_texts(design) if t not in drawn.labels]
    # a two-triode stage: its tail and second section are listed in words beside the first section
    notes = "\n".join(drawn.labels)
    for st in design.stages:
        sec = st.second
        extra = ([format_rkm(st.cathode.tail_ohm, "R")] if st.cathode and st.cathode.tail_ohm else []) + (
            [format_rkm(v, "R") for v in (sec.plate_load_ohm, sec.grid_leak_ohm, sec.grid_stopper_ohm) if v]
            if sec is not None else [])
        assert all(f" {t}" in notes for t in extra), (st.name, extra)
    missing = [t for t in missing if f" {t}" not in notes or t not in _first_section(design)]
    if design.output and not any(c.dst == "output" for c in design.couplings):
        for o in (design.output, *design.output.more):
            assert f"output taken at {o.node}" in notes
            if o.load_ohm:
                assert f"{o.node}, load {format_rkm(o.load_ohm, 'R')}" in notes
    assert not missing, f"not on the drawing: {missing}"
    assert design.title in drawn.labels


def test_parts_meet_at_the_nodes_the_netlist_names():
    """The plate load ends on the triode's plate lead, the cathode resistor
    hangs from the cathode lead, and the two caps of a split bypass are in
    series (the lead demo's V2: 'bypass 2u2 series 1k')."""
    from chain.plot.schematic import schematic

    drawn = schematic(parse_file(ROOT / "netlists/lead_four_stage.chain"))
    p = drawn.parts
    for name in ("V1", "V2", "V3"):
        anode = p[f"{name}.tube"].absanchors["anode"]
        rp = p[f"{name}.Rp"]
        assert rp.absanchors["start"][0] == pytest.approx(anode[0])
        assert rp.absanchors["start"][1] > anode[1]  # above the tube
        k = p[f"{name}.tube"].absanchors["cathode"]
        assert p[f"{name}.Rk"].absanchors["start"][0] == pytest.approx(k[0])
    rkc, ck = p["V2.Rkc"], p["V2.Ck"]
    assert np.allclose(rkc.absanchors["end"], ck.absanchors["start"])
    assert "V4.Rp" not in p  # 'plate on B1': no plate load drawn
    # every pot of the tone network is drawn as a pot
    assert {"tone.treble", "tone.bass", "tone.mid", "drive.gain"} <= set(p)


@pytest.mark.parametrize("suffix", ["png", "svg"])
def test_schematic_command_writes_the_named_file(tmp_path, capsys, suffix):
    out = tmp_path / f"drawing.{suffix}"
    assert main(["schematic", str(ROOT / "netlists/lead_four_stage.chain"), "-o", str(out)]) == 0
    assert capsys.readouterr().out.strip().endswith(f"wrote {out}")
    assert sorted(x.name for x in tmp_path.iterdir()) == [out.name]
    if suffix == "svg":
        root = ET.parse(out).getroot()
        assert root.tag.endswith("svg")
    else:
        from matplotlib.image import imread

        image = imread(out)
        ink = np.mean(image[..., :3] < 0.5)
        assert 0.005 < ink < 0.2, f"{ink:.4f} of the pixels are dark"


def test_schematic_command_rejects_a_bad_netlist(tmp_path, capsys):
    bad = tmp_path / "bad.chain"
    bad.write_text("stage V1 common-cathode 12AX7\n  plate 100q from HT\n", encoding="utf-8")
    out = tmp_path / "x.png"
    assert main(["schematic", str(bad), "-o", str(out)]) == 2
    assert f"{bad}:2:" in capsys.readouterr().err
    assert not out.exists()
