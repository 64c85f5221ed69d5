"""Memory budgets: ``--memory 2GB`` as bytes, and the default share of the machine.

The budget bounds the blocks that big computations hold at once (the bootstrap's unit weights,
the jackknife, record batches while reading); the data's own per-unit summaries come on top.
"""

from __future__ import annotations

import contextlib
import ctypes
import gc
import os
import re
import sys

from coderel.errors import UsageError

#: Share of the machine's physical memory used as the default budget (common practice, no
#: source: leaves room for the per-unit summaries, the interpreter and other programs).
DEFAULT_SHARE = 1 / 64
#: Bounds of the default budget. Larger blocks bought no speed where measured (docs/scale.md:
#: the crowd set's agree took 64.9 s with 256 MB and 65.8 s with 1 GB, peaking at 2.16 and
#: 2.64 GB), so the ceiling keeps the weight blocks small beside the data's own summaries.
DEFAULT_FLOOR = 128 * 2**20
DEFAULT_CEILING = 256 * 2**20
#: The smallest budget accepted from the command line.
MINIMUM = 16 * 2**20

_UNITS = {"": 1, "B": 1, "K": 2**10, "M": 2**20, "G": 2**30, "T": 2**40}
_PATTERN = re.compile(r"^\s*(\d+(?:\.\d+)?)\s*([KMGT]?)(?:I?B)?\s*$", re.IGNORECASE)


def physical_memory() -> int | None:
    """The machine's physical memory in bytes, or ``None`` where the system does not say."""
    try:
        return int(os.sysconf("SC_PAGE_SIZE")) * int(os.sysconf("SC_PHYS_PAGES"))
    except (AttributeError, ValueError, OSError):
        return None


def default_budget() -> int:
    """A sixty-fourth of physical memory, between 128 MB and 256 MB."""
    total = physical_memory()
    if not total:
        return DEFAULT_CEILING
    return int(min(max(total * DEFAULT_SHARE, DEFAULT_FLOOR), DEFAULT_CEILING))


def parse_memory(text: str | None) -> int:
    """Bytes from ``2GB``, ``512MB``, ``1.5G``, ``800M`` (powers of 1024); ``None``: the default.

    Raises
    ------
    UsageError
        On text that is not a size, or a size below 16 MB.
    """
    if text is None or not str(text).strip() or str(text).strip().lower() == "auto":
        return default_budget()
    match = _PATTERN.match(str(text))
    if not match:
        raise UsageError(f"--memory takes a size such as 2GB or 512MB, not {text!r}")
    value = int(float(match.group(1)) * _UNITS[match.group(2).upper()])
    if value < MINIMUM:
        raise UsageError(f"--memory must be at least 16MB, not {text!r}")
    return value


def format_bytes(value: float) -> str:
    """1536 -> '1.5 KB', 2147483648 -> '2.0 GB' (powers of 1024)."""
    for unit in ("B", "KB", "MB", "GB"):
        if abs(value) < 1024 or unit == "GB":
            return f"{value:.0f} {unit}" if unit == "B" else f"{value:.1f} {unit}"
        value /= 1024
    return f"{value:.1f} GB"


def release_freed() -> None:
    """Give the memory of objects just dropped back to the system.

    A garbage collection (pandas frames hold reference cycles); the unused pages of pyarrow's
    memory pool (its text columns), when pyarrow is loaded; and on Linux with glibc,
    ``malloc_trim(0)``: glibc keeps freed blocks below its (growing) mmap threshold in the heap,
    and after reading a long table about 0.3 GB of them (measured on the crowd benchmark set)
    would otherwise stay resident through the bootstrap.
    """
    gc.collect()
    pyarrow = sys.modules.get("pyarrow")
    if pyarrow is not None:
        pyarrow.default_memory_pool().release_unused()
    if sys.platform.startswith("linux"):
        # another C library than glibc (musl) has no malloc_trim
        with contextlib.suppress(OSError, AttributeError):
            ctypes.CDLL(None).malloc_trim(0)
