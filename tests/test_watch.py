"""Watch mode: one save, one re-run (issue 15)."""

import io
import os
import threading
import time

import pytest

from chain.cli import main
from chain.watch import watch

DEMO = """title "Watched"
supply HT 300V
input into V1 resistance 10k
stage V1 common-cathode 12AX7
  plate 100k from HT
  cathode 1k5 bypass 22u
  grid leak 1M
couple V1 -> output cap 22n
output load 1M
"""

#: generous bound for a change to be noticed on a busy machine, s
NOTICE_S = 10.0
#: quiet time after the re-run in which no further run may come, s (> debounce)
QUIET_S = 0.6


class Watcher:
    """``watch`` on a thread, with a counter of runs and a ready signal."""

    def __init__(self, files, action=None):
        self.runs = 0
        self.ready = threading.Event()
        self.stop = threading.Event()
        self.out = io.StringIO()
        self._action = action

        def act():
            if self._action is not None:
                self._action()
            self.runs += 1

        self.thread = threading.Thread(target=watch, args=(files, act), daemon=True,
                                       kwargs=dict(stop_event=self.stop, debounce_ms=100, out=self.out,
                                                   ready=self.ready.set))

    def __enter__(self):
        self.thread.start()
        assert self.ready.wait(NOTICE_S), "the watcher never started listening"
        return self

    def __exit__(self, *exc):
        self.stop.set()
        self.thread.join(NOTICE_S)
        assert not self.thread.is_alive()

    def wait_for(self, runs: int) -> None:
        deadline = time.monotonic() + NOTICE_S
        while self.runs < runs and time.monotonic() < deadline:
            time.sleep(0.02)
        assert self.runs >= runs, f"only {self.runs} run(s)"


def test_one_save_gives_exactly_one_rerun(tmp_path):
    net = tmp_path / "pre.chain"
    net.write_text(DEMO, encoding="utf-8")
    with Watcher([net]) as w:
        assert w.runs == 1  # the first run happens at once
        net.write_text(DEMO.replace("1k5", "1k8"), encoding="utf-8")
        w.wait_for(2)
        time.sleep(QUIET_S)
        assert w.runs == 2
    assert f"{net} changed: running again" in w.out.getvalue()


def test_save_by_rename_counts_once_and_other_files_not_at_all(tmp_path):
    """Editors that write a temporary file and rename it over the original."""
    net = tmp_path / "pre.chain"
    net.write_text(DEMO, encoding="utf-8")
    with Watcher([net]) as w:
        (tmp_path / "notes.txt").write_text("unrelated", encoding="utf-8")
        time.sleep(QUIET_S)
        assert w.runs == 1
        tmp = tmp_path / ".pre.chain.swp-new"
        tmp.write_text(DEMO.replace("100k", "220k"), encoding="utf-8")
        os.replace(tmp, net)
        w.wait_for(2)
        time.sleep(QUIET_S)
        assert w.runs == 2


def test_watch_reruns_a_chain_command_and_survives_a_broken_save(tmp_path, capsys):
    net = tmp_path / "pre.chain"
    net.write_text(DEMO, encoding="utf-8")
    codes = []
    with Watcher([net], action=lambda: codes.append(main(["check", str(net)]))) as w:
        net.write_text(DEMO.replace("plate 100k", "plate 100q"), encoding="utf-8")
        w.wait_for(2)
        net.write_text(DEMO, encoding="utf-8")
        w.wait_for(3)
    assert codes == [0, 2, 0]
    captured = capsys.readouterr()
    assert f"{net}:5:" in captured.err  # the broken line is named, and watching went on


def test_watch_command_line_errors(tmp_path, capsys):
    assert main(["watch"]) == 2
    assert "needs a command" in capsys.readouterr().err
    assert main(["watch", "report", str(tmp_path / "missing.chain")]) == 2
    assert "no such file" in capsys.readouterr().err
    assert main(["watch", "watch", "check", "x"]) == 2
    assert main(["watch", "report", "--no-such-option", "x"]) == 2
