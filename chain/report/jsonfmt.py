"""The JSON report: the document of :func:`chain.report.data.report_data`, serialised.

Written with two-space indentation, keys in the document's fixed order, UTF-8
(``ensure_ascii=False``) and never ``NaN``/``Infinity`` (absent and
non-finite values are already ``null`` in the document).  The layout is
``chain-report/1``: ``docs/report-format.md`` and ``chain/report/schema.json``.
"""

from __future__ import annotations

import json
from typing import Any, Sequence

from chain.report.base import check_sections, study_sections

__all__ = ["JsonRenderer", "SECTION_KEYS", "dumps"]

#: report section → the top-level keys of the document it holds
SECTION_KEYS = {
    "header": ("schema", "tool", "netlist"),
    "safety": ("safety",),
    "stages": ("stages", "couplings"),
    "overall": ("overall",),
    "response": ("response",),
    "stability": ("stability",),
    "sensitivity": ("sensitivity",),
    "headroom": ("headroom",),
    "noise": ("noise",),
    "diagnostics": ("diagnostics",),
    "stage_details": ("operating_points",),
    "rails": ("rails",),
    "capacitors": ("capacitors",),
    "settings": ("settings", "solve_options", "dc_solve"),
    "parts": ("parts",),
}


def dumps(document: dict[str, Any]) -> str:
    """``document`` as JSON text ending in a newline (see the module docstring)."""
    return json.dumps(document, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


class JsonRenderer:
    """The same method set as the text renderers; each method returns the
    document's entries of its section, and :meth:`render` serialises them."""

    def __init__(self, *, heading: str = "chain report"):
        self.heading = heading  # not part of the document

    def render(self, data: dict[str, Any], sections: Sequence[str] | None = None) -> str:
        """JSON text of ``data``; with ``sections``, a partial document holding
        ``schema`` and the keys of those sections only (not a valid full report)."""
        chosen = check_sections(sections)
        parts: dict[str, Any] = {"schema": data["schema"]}
        extra = study_sections()
        for name in chosen:
            parts.update({name: data.get(name)} if name in extra else getattr(self, name)(data))
        order = list(data)
        return dumps({k: parts[k] for k in order if k in parts})

    @staticmethod
    def _pick(data: dict[str, Any], section: str) -> dict[str, Any]:
        return {k: data[k] for k in SECTION_KEYS[section]}

    def header(self, data):
        return self._pick(data, "header")

    def safety(self, data):
        return self._pick(data, "safety")

    def settings(self, data):
        return self._pick(data, "settings")

    def stages(self, data):
        return self._pick(data, "stages")

    def stage_details(self, data):
        return self._pick(data, "stage_details")

    def overall(self, data):
        return self._pick(data, "overall")

    def response(self, data):
        return self._pick(data, "response")

    def stability(self, data):
        return {"stability": data["stability"]} if "stability" in data else {}

    def sensitivity(self, data):
        return {"sensitivity": data["sensitivity"]} if "sensitivity" in data else {}

    def rails(self, data):
        return self._pick(data, "rails")

    def capacitors(self, data):
        return self._pick(data, "capacitors")

    def headroom(self, data):
        return self._pick(data, "headroom")

    def noise(self, data):
        return {"noise": data.get("noise")}

    def diagnostics(self, data):
        return self._pick(data, "diagnostics")

    def parts(self, data):
        return self._pick(data, "parts")
