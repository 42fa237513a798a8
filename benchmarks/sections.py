"""Sections of BENCHMARKS.md that one benchmark writes between its own markers and the others keep."""
from __future__ import annotations

from pathlib import Path


def replace_section(path: Path, text: str, start: str, end: str) -> None:
    """Replace the section between ``start`` and ``end`` with ``text`` (which carries the markers), or put it
    before the analysis, or at the end of a report that has neither."""
    old = path.read_text() if path.exists() else ""
    if start in old and end in old:
        new = old[:old.index(start)] + text + old[old.index(end) + len(end):]
    elif "## Analysis" in old:
        new = old.replace("## Analysis", text + "\n\n## Analysis", 1)
    else:
        new = old + ("\n" if old else "") + text + "\n"
    path.write_text(new)
