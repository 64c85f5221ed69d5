"""How library functions tell the caller how far a long phase has gone.

A function whose work can take more than a second or two on big inputs takes an optional
``progress`` callback and calls it as ``progress(done, total)`` while it works, or as
``progress(done, total, phase)`` when a new phase starts: ``phase`` is a short description in
plain words ("reading coder_ana.xlsx", "checking values"). The library never draws anything
itself (no rich, no typer here): the command line passes a callback that shows a bar on stderr
when stderr is a terminal (:func:`coderel.cli.common.delayed_progress`), scripts pass their own
or none.
"""

from __future__ import annotations

from collections.abc import Callable

#: ``progress(done, total)`` or ``progress(done, total, phase)``; see the module docstring.
Progress = Callable[..., None]


def report(progress: Progress | None, done: int, total: int, phase: str | None = None) -> None:
    """Call ``progress`` if there is one; with ``phase`` only when a phase is named."""
    if progress is None:
        return
    if phase is None:
        progress(done, total)
    else:
        progress(done, total, phase)


__all__ = ["Progress", "report"]
