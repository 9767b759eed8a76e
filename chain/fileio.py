"""Writing output files whole or not at all."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

__all__ = ["write_atomically"]


def write_atomically(path: str | os.PathLike, data: bytes | str) -> Path:
    """Write ``data`` (text as UTF-8) to ``path`` through a temporary file in
    the same folder, renamed over the target at the end, so that a failure
    never leaves a half-written file behind.  Returns the path written."""
    target = Path(path)
    raw = data.encode("utf-8") if isinstance(data, str) else data
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", dir=target.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(raw)
        os.replace(tmp, target)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return target
