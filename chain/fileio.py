"""Output files: checked before any work, written whole or not at all.

Rules (the same for every command that writes a file):

* A path that does not exist yet, or names a regular file, is written
  through a temporary file in the same folder and renamed over the target
  at the end, so a failure never leaves a half-written file.  A new file is
  created with the mode any program would give it (0666 less the umask); an
  overwritten file keeps its mode.
* A symbolic link is followed: the file it points to is written, the link
  stays a link.
* Anything else that can be written but is not a regular file — a FIFO, a
  character device such as ``/dev/null`` or a terminal, ``/dev/stdout``,
  ``/dev/fd/N``, a process substitution ``>(…)`` — is opened and written
  in place, as ``cat > PATH`` would.
* A folder, a path whose folder does not exist or cannot be written, and
  the input file itself are refused with :class:`OutputPathError` by
  :func:`check_output`, which the command line calls before the analysis.
"""

from __future__ import annotations

import os
import stat
import tempfile
from pathlib import Path
from typing import Iterable

__all__ = ["write_atomically", "check_output", "OutputPathError"]


class OutputPathError(ValueError):
    """An output path that cannot be written; the message says why in plain words."""


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _stat(path: Path) -> os.stat_result | None:
    try:
        return os.stat(path)  # follows symbolic links
    except (FileNotFoundError, NotADirectoryError):
        return None


def _special(path: Path) -> bool:
    """A name under /dev or /proc (``/dev/stdout``, ``/dev/fd/3``, ``/proc/self/fd/3``)."""
    return Path(os.path.abspath(path)).parts[:2] in (("/", "proc"), ("/", "dev"))


def _in_place(st: os.stat_result | None, path: Path) -> bool:
    """Write by opening the path itself rather than by atomic replacement?"""
    if st is None:
        return False
    # not a regular file, or a descriptor's name (``3>out.txt`` then ``/dev/fd/3``)
    return not stat.S_ISREG(st.st_mode) or _special(path)


def check_output(path: str | os.PathLike, *, inputs: Iterable[str | os.PathLike] = ()) -> None:
    """Refuse an output ``path`` that cannot be written, before any work is done.

    Raises
    ------
    OutputPathError
        the path is a folder, its folder is missing or not writable, it is
        one of ``inputs`` (never overwrite the netlist being read), or it
        names something that exists but cannot be opened for writing.
    """
    target = Path(path)
    if str(path) == "" or str(path).endswith(os.sep):
        raise OutputPathError(f"cannot write '{path}': give a file name, not a folder")
    st = _stat(target)
    if st is not None and stat.S_ISDIR(st.st_mode):
        raise OutputPathError(f"cannot write '{path}': it is a folder; give a file name inside it")
    for source in inputs:
        try:
            same = st is not None and os.path.samefile(target, source)
        except OSError:
            same = False
        if same:
            raise OutputPathError(f"cannot write '{path}': it is the input file; choose another name")
    real = Path(os.path.realpath(target))
    if _in_place(st, target):
        if not os.access(target, os.W_OK):
            raise OutputPathError(f"cannot write '{path}': permission denied")
        return
    folder = real.parent
    if not folder.is_dir():
        raise OutputPathError(f"cannot write '{path}': folder '{Path(path).parent}' does not exist")
    if st is None and (_special(target) or _special(real)):
        # /dev/fd/N for a descriptor that is not open, or a name under /proc
        raise OutputPathError(f"cannot write '{path}': no such file or open descriptor")
    try:  # the only honest test that a file can be created there
        fd, tmp = tempfile.mkstemp(prefix=f".{real.name}.", dir=folder)
    except OSError as exc:
        reason = "permission denied" if isinstance(exc, PermissionError) else (exc.strerror or str(exc))
        raise OutputPathError(f"cannot write '{path}': folder '{Path(path).parent}': {reason}") from None
    os.close(fd)
    os.unlink(tmp)


def write_atomically(path: str | os.PathLike, data: bytes | str) -> Path:
    """Write ``data`` (text as UTF-8) to ``path`` by the rules of this module.

    Returns the path written (as given).
    """
    target = Path(path)
    raw = data.encode("utf-8") if isinstance(data, str) else data
    st = _stat(target)
    real = Path(os.path.realpath(target))
    if _in_place(st, target):
        with open(target, "wb") as fh:
            fh.write(raw)
        return target
    mode = stat.S_IMODE(st.st_mode) if st is not None else 0o666 & ~_umask()
    fd, tmp = tempfile.mkstemp(prefix=f".{real.name}.", dir=real.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(raw)
        os.chmod(tmp, mode)
        os.replace(tmp, real)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return target
