"""Every malformed netlist gets one clear, located error and exit status 2."""

import re
from pathlib import Path

import pytest

from chain.cli import main

CORPUS = sorted((Path(__file__).parent / "malformed").glob("*.chain"))


def expectation(path: Path) -> tuple[str, int, int]:
    m = re.match(r"# expect: (\w+) (\d+):(\d+)", path.read_text(encoding="utf-8"))
    assert m, f"{path.name} lacks its '# expect:' line"
    return m.group(1), int(m.group(2)), int(m.group(3))


def test_corpus_is_large_enough():
    assert len(CORPUS) >= 30


@pytest.mark.parametrize("path", CORPUS, ids=[p.stem for p in CORPUS])
def test_malformed_netlist_is_located(path, capsys):
    code, line, col = expectation(path)
    status = main(["check", str(path)])
    out, err = capsys.readouterr()
    assert status == 2
    assert "Traceback" not in err + out
    assert f"{path}:{line}:{col}: error {code}:" in err, err
