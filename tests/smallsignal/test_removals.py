"""Systems that differ from a circuit's only in removed elements, solved
together (chain.smallsignal.mna.solve_each_without, issue 16), against
numpy.linalg.solve of each system stamped on its own (``Mna.without``, the
reference library on the textbook definition): the same numbers to rounding,
and the per-stage AC loads of chain.analysis.ac_loads the same as one dense
solve per stage."""

import numpy as np
import pytest

from chain.analysis import ac_loads
from chain.build import build
from chain.circuit import GROUND, TRIODE_ELEMENT_ROLES
from chain.dc import solve
from chain.language import parse_text
from chain.smallsignal import linearize
from chain.smallsignal import mna as M

from tests.cascades import cascade


def linearised(stages: int):
    circuit = build(parse_text(cascade(stages), f"c{stages}.chain"))
    return linearize(circuit, solve(circuit))


def dense_reference(mna: M.Mna, s: complex, removed, b: np.ndarray) -> np.ndarray:
    m = mna.without(removed)
    return np.linalg.solve(m.g + s * m.c, b)


@pytest.mark.parametrize("stages", [1, 6])
def test_each_system_agrees_with_its_own_dense_solve(stages):
    # 1 stage: the band is not narrow and each system is solved on its own;
    # 6 stages: one banded factorisation for all of them
    mna = M.assemble(linearised(stages))
    rng = np.random.default_rng(stages)
    candidates = [st for st in mna.stamps if st.kind != "V"]
    removals = [[candidates[i] for i in rng.choice(len(candidates), size=4, replace=False)] for _ in range(7)]
    removals.append([])  # nothing removed: the circuit itself
    b = rng.normal(size=(len(removals), mna.size))
    s = 2j * np.pi * 2.5e3
    x = M.solve_each_without(mna, s, removals, b)
    for k, removed in enumerate(removals):
        ref = dense_reference(mna, s, removed, b[k])
        assert np.allclose(x[k], ref, rtol=1e-9, atol=1e-12 * np.abs(ref).max())
        # Oettli–Prager componentwise backward error of each system's own solution
        # (Higham, "Accuracy and Stability of Numerical Algorithms", thm 7.3)
        m = mna.without(removed)
        assert M.backward_error(m, np.array([s]), x[k][None], b[k]) < 8 * np.finfo(float).eps


def test_removal_changes_give_the_restamped_matrices():
    mna = M.assemble(linearised(3))
    s = 2j * np.pi * 400.0
    triode_parts = [st for st in mna.stamps if st.role in TRIODE_ELEMENT_ROLES]
    removals = [triode_parts[:5], triode_parts[5:7], []]
    ch = M.removal_changes(mna, removals)
    for k, removed in enumerate(removals):
        m = mna.without(removed)
        y = mna.g + s * mna.c
        mine = ch.system == k
        np.add.at(y, (ch.rows[mine], ch.cols[mine]), ch.dg[mine] + s * ch.dc[mine])
        ref = m.g + s * m.c
        assert np.allclose(y, ref, rtol=0.0, atol=1e-12 * np.abs(ref).max())


def test_the_signal_source_cannot_be_removed():
    mna = M.assemble(linearised(1))
    with pytest.raises(ValueError):
        M.removal_changes(mna, [[mna.source]])


def test_ac_loads_of_a_long_cascade_are_one_dense_solve_per_stage():
    ss = linearised(12)
    mna = M.assemble(ss)
    f_hz = 1e3
    got = ac_loads(ss, f_hz)
    circuit = ss.circuit
    for st in circuit.stages:
        triode = circuit.triode(st.triode)
        pins = {mna.index[ss.node_of.get(n, GROUND)] for n in (triode.plate, triode.grid, triode.cathode)}
        own = [e for e in mna.stamps if e.role in TRIODE_ELEMENT_ROLES and e.owner == triode.owner
               and {e.a, e.b} <= pins and (e.kind != "G" or {e.cp, e.cn} <= pins)]
        p, k = mna.index[ss.node_of[triode.plate]], mna.index[ss.node_of[triode.cathode]]
        b = np.zeros(mna.size)
        b[p] = -1.0
        if k >= 0:
            b[k] = 1.0
        x = dense_reference(mna, 2j * np.pi * f_hz, own, b)
        ref = (x[k] if k >= 0 else 0.0) - x[p]
        assert got[st.name] == pytest.approx(ref, rel=1e-10)


def test_port_impedances_at_a_few_frequencies_are_one_dense_solve_per_port():
    """Each stage's output impedance (the parts outside the stage, rails aside,
    taken off its output node, 1 A injected there) at the reference
    frequencies, all ports solved together, against numpy.linalg.solve of each
    port's own matrix."""
    from chain.circuit import Owner
    from chain.smallsignal import response

    ss = linearised(9)
    mna = M.assemble(ss)
    f = np.array([1e3, 7e3])
    got = response(ss, f)
    assert got.port_zout_ohm.keys() == {st.name for st in ss.circuit.stages}
    for st in ss.circuit.stages:
        me = Owner("stage", st.name)
        node = mna.index[ss.node_of[st.output]]
        removed = [e for e in mna.stamps
                   if e.kind != "V" and e.owner != me and e.owner.kind != "rail" and e.touches(node)]
        b = np.zeros(mna.size)
        b[node] = 1.0
        ref = [dense_reference(mna, 2j * np.pi * fk, removed, b)[node] for fk in f]
        assert np.allclose(got.stage_zout_ohm[st.name], ref, rtol=1e-10, atol=0.0)
