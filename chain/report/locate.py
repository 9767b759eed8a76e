"""Where a value sits in a JSON text: line and column from a path of keys and indices."""

from __future__ import annotations

import json

__all__ = ["json_position"]

_DECODER = json.JSONDecoder(parse_constant=lambda word: None)
_SPACE = " \t\r\n"


def _skip(text: str, i: int) -> int:
    while i < len(text) and text[i] in _SPACE:
        i += 1
    return i


def _descend(text: str, i: int, part) -> int:
    """Position of member ``part`` (key or index) of the object/array starting at ``i``; -1 if absent."""
    opening = text[i]
    i = _skip(text, i + 1)
    index = 0
    while i < len(text) and text[i] not in "]}":
        if opening == "{":
            key, i = json.decoder.scanstring(text, i + 1)  # type: ignore[attr-defined]  # there at run time; typeshed omits it
            i = _skip(text, i)
            i = _skip(text, i + 1)  # the colon
            if key == part:
                return i
        elif index == part:
            return i
        _, i = _DECODER.raw_decode(text, i)
        index += 1
        i = _skip(text, i)
        if i < len(text) and text[i] == ",":
            i = _skip(text, i + 1)
    return -1


def json_position(text: str, path) -> tuple[int, int, str]:
    """(line, column, line text) of the value at ``path`` in the JSON ``text``.

    Walks only the containers on the path and skips every other value with
    the C decoder, so a large report is located quickly.  Where the path
    ends early (a missing key), the deepest container found is given.
    """
    i = _skip(text, 0)
    for part in path:
        if i >= len(text) or text[i] not in "{[":
            break
        found = _descend(text, i, part)
        if found < 0:
            break
        i = found
    line = text.count("\n", 0, i) + 1
    start = text.rfind("\n", 0, i) + 1
    end = text.find("\n", i)
    return line, i - start + 1, text[start: end if end >= 0 else len(text)]
