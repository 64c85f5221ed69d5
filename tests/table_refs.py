"""Weak references to the table of codings a command reads, for tests that check it is dead.

The memory tests of ``agree``, ``report`` and ``merge`` stand in for the command's
``read_project`` with :func:`recording`, which keeps weak references to the codings, their frame
and their problems; :func:`alive` names those still alive at a point of the command. The oracle is
Python's own reference counting: no garbage collection is forced.
"""

from __future__ import annotations

import weakref
from collections.abc import Callable
from typing import Any


def recording(read_project: Callable[..., Any], refs: dict[str, weakref.ref]) -> Callable[..., Any]:
    """``read_project`` that also puts weak references to what it read into ``refs``."""

    def reading(*args: Any, **kwargs: Any) -> Any:
        codings = read_project(*args, **kwargs)
        refs.update(
            codings=weakref.ref(codings),
            frame=weakref.ref(codings.frame),
            problems=weakref.ref(codings.problems),
        )
        return codings

    return reading


def alive(refs: dict[str, weakref.ref]) -> list[str]:
    """The names in ``refs`` whose object is still alive."""
    return [name for name, ref in refs.items() if ref() is not None]
