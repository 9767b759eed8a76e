"""Watch mode: run an action now and again each time a watched file is saved.

Editors save in different ways: some write the file in place, some write a
new file and rename it over the old one (which replaces the inode a plain
file watch would follow).  So the *folders* holding the files are watched,
and a change counts when its path is one of the watched files.  Changes that
arrive together (an editor's write, chmod and rename of one save) are
debounced into one re-run.

``watchfiles`` is imported inside :func:`watch`, so importing this module is
cheap.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path
from typing import Callable, Sequence

__all__ = ["watch", "CLEAR"]

#: ANSI: cursor home, clear the screen (written only when output is a terminal)
CLEAR = "\033[H\033[2J"


def watch(files: Sequence[str | os.PathLike], action: Callable[[], object], *, stop_event=None,
          debounce_ms: int = 300, clear: bool | None = None, out=None,
          max_runs: int | None = None, ready: Callable[[], object] | None = None) -> int:
    """Run ``action()`` once, then again after every save of one of ``files``.

    Parameters
    ----------
    files
        The files to watch (each must exist; their folders are watched).
    action
        Called with no arguments; its return value is ignored, and an
        exception it raises ends the watch (the caller keeps its own
        errors inside ``action``).
    stop_event
        A ``threading.Event``; setting it ends the watch (for tests and
        embedding).  Ctrl-C also ends it.
    debounce_ms
        Changes closer together than this, milliseconds, make one re-run.
    clear
        Clear the terminal before each run; default: when ``out`` is a
        terminal.  Otherwise a one-line separator names the changed file.
    out
        Where the separator and status lines go (default ``sys.stdout``).
    max_runs
        Stop after this many runs of ``action`` (None: until stopped).
    ready
        Called once, when the watcher is listening (after the first run).

    Returns
    -------
    int
        How many times ``action`` ran.
    """
    from watchfiles import watch as watch_changes

    out = out if out is not None else sys.stdout
    if clear is None:
        clear = bool(getattr(out, "isatty", lambda: False)())
    targets = {Path(f).resolve(): str(f) for f in files}
    folders = sorted({str(t.parent) for t in targets})

    def interesting(_change, path: str) -> bool:
        return Path(path).resolve() in targets

    names = ", ".join(str(f) for f in files)
    runs = 0

    def once(changed: str | None) -> None:
        nonlocal runs
        if clear:
            out.write(CLEAR)
        elif changed is not None:
            out.write(f"\n──── {changed} changed: running again ────\n")
        out.flush()
        action()
        runs += 1
        out.write(f"\nwatching {names} (Ctrl-C to stop)\n")
        out.flush()

    once(None)
    if max_runs is not None and runs >= max_runs:
        return runs
    try:
        # an idle tick every 200 ms (an empty set) tells that the watcher is listening
        for changes in watch_changes(*folders, watch_filter=interesting, debounce=debounce_ms, step=20,
                                     stop_event=stop_event, recursive=False, raise_interrupt=False,
                                     rust_timeout=200, yield_on_timeout=True):
            if not changes:
                if ready is not None:
                    ready()
                    ready = None
                continue
            changed = sorted({targets.get(Path(p).resolve(), p) for _, p in changes})
            once(", ".join(changed))
            if max_runs is not None and runs >= max_runs:
                break
    except KeyboardInterrupt:  # pragma: no cover - interactive only
        pass
    return runs
