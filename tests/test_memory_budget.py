"""The memory budget of ``--memory``: sizes as bytes, and the default share of the machine.

The bounds are our own convention (common practice, no source): larger weight blocks bought no
speed where measured (docs/scale.md), so the default stays small beside the data's summaries.
"""

from __future__ import annotations

import pytest

from coderel import memory
from coderel.errors import UsageError


@pytest.mark.parametrize(
    ("text", "expected"),
    [("2GB", 2 * 2**30), ("512MB", 512 * 2**20), ("1.5G", int(1.5 * 2**30)), ("800m", 800 * 2**20)],
)
def test_sizes_are_read_in_powers_of_1024(text: str, expected: int) -> None:
    assert memory.parse_memory(text) == expected


@pytest.mark.parametrize("text", ["lots", "2 parsecs", "-1GB", "8MB"])
def test_a_size_that_is_not_one_or_too_small_is_a_usage_error(text: str) -> None:
    with pytest.raises(UsageError):
        memory.parse_memory(text)


@pytest.mark.parametrize(
    ("physical", "expected"),
    [
        (24 * 2**30, 256 * 2**20),  # this machine: the ceiling
        (4 * 2**30, 128 * 2**20),  # a small laptop: the floor
        (12 * 2**30, 192 * 2**20),  # a sixty-fourth in between
        (None, 256 * 2**20),  # the system does not say
    ],
)
def test_default_budget_is_a_share_of_the_machine_between_bounds(
    monkeypatch: pytest.MonkeyPatch, physical: int | None, expected: int
) -> None:
    monkeypatch.setattr(memory, "physical_memory", lambda: physical)
    assert memory.default_budget() == expected
    assert memory.parse_memory(None) == expected
    assert memory.parse_memory("auto") == expected
