"""Loops in a name -> name mapping (``applies_when`` conditions, ``renamed_from`` chains)."""

from __future__ import annotations

from collections.abc import Mapping


def loops(parent: Mapping[str, str]) -> list[list[str]]:
    """Each loop of ``parent`` once, as the names in order from the first name that enters it.

    Following ``parent`` from a name either ends (a name with no parent) or comes back to a name
    already seen. A loop is reported from the first start (in the mapping's order) that lies on
    it, e.g. ``{"a": "b", "b": "a", "c": "a"}`` gives ``[["a", "b"]]``.
    """
    found: list[list[str]] = []
    reported: set[str] = set()
    for start in parent:
        path: list[str] = []
        current: str | None = start
        while current is not None and current not in path:
            path.append(current)
            current = parent.get(current)
        if current == start and start not in reported:
            reported.update(path)
            found.append(path)
    return found
