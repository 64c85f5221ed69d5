"""Generic blocks of the report (a heading, a table of text, a note, a chart) and the protocol's
parts of a report: coder diagnostics, training against the key, reliability across rounds.

The renderers draw every block the same way, so a new part of the report needs no new renderer
code; :mod:`coderel.report.protocol` builds these blocks from the protocol's results.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import pandas as pd


@dataclass(frozen=True)
class Block:
    """A titled table of text cells, with an optional chart (by id) and a note below."""

    title: str
    headers: tuple[str, ...] = ()
    rows: tuple[tuple[str, ...], ...] = ()
    numeric: tuple[int, ...] = ()
    note: str = ""
    chart: str | None = None
    caption: str = ""
    block_id: str = ""


@dataclass(frozen=True)
class ProtocolParts:
    """The protocol's parts of a report, ready to render."""

    coders: tuple[Block, ...] = ()
    training: tuple[Block, ...] = ()
    rounds: tuple[Block, ...] = ()
    #: Sheet name -> plain-number table for the xlsx report.
    frames: Mapping[str, pd.DataFrame] = field(default_factory=dict)
    #: Chart id -> SVG text.
    charts: Mapping[str, str] = field(default_factory=dict)
    #: JSON-ready results (``coder_diagnostics``, ``training``, ``rounds``).
    data: Mapping[str, Any] = field(default_factory=dict)
