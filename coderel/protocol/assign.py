"""Who codes which unit: every coder codes the reliability sample, the rest is shared out.

* Every coder gets every unit of the reliability sample (drawn by ``coderel draw``).
* The remaining units of the corpus are dealt out for single coding (``per_unit=1``): in a seeded
  random order, one coder after the other, so that coders' counts differ by at most one.
* With ``per_unit=k`` (k >= 2) each remaining unit goes to a group of k coders; the groups are
  all k-subsets of the coders in a seeded order, dealt in turn (rotating pairs for k = 2), so
  group counts differ by at most one; the units of the last, incomplete round go to the groups
  whose coders have the fewest units so far, which keeps coders' loads balanced too. The spread
  of both is stated.
* Optionally (``blend``) each coder's list mixes reliability and other units in a seeded random
  order, so that coders cannot tell which units are checked (common practice in content
  analysis, no source). Otherwise the reliability units come first.

The result depends only on the seed, the SET of corpus units, the SET of reliability units and
the set of coders (IDs and coder names are sorted before anything is drawn).
"""

from __future__ import annotations

import hashlib
import json
import os
from collections.abc import Sequence
from dataclasses import dataclass
from itertools import combinations
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from coderel.codebook import Codebook
from coderel.errors import UsageError
from coderel.io.atomic import refuse_overwriting_inputs, sha256_file, write_text
from coderel.io.tables import csv_text
from coderel.progress import Progress, report
from coderel.protocol.manifest import digest_lines, manifest_text, parse_seed, unit_list_text
from coderel.protocol.population import read_units
from coderel.template import check_coder_names, write_templates

RELIABILITY = "reliability"
SINGLE = "single"
SHARED = "shared"
RELIABILITY_FILE = "reliability-units.txt"
ASSIGNMENT_FILE = "assignment.csv"
MANIFEST_FILE = "assignment.manifest.json"


def coder_list_file(coder: str) -> str:
    """The file name of a coder's unit list."""
    return f"units-{coder}.txt"


@dataclass(frozen=True)
class Assignment:
    """Each coder's units and the design that produced them."""

    coders: tuple[str, ...]
    reliability: tuple[str, ...]
    lists: dict[str, tuple[str, ...]]
    roles: dict[tuple[str, str], str]
    per_unit: int
    seed: int
    blend: bool
    remaining: int
    groups: dict[tuple[str, ...], int]

    def load(self, coder: str) -> int:
        return len(self.lists[coder])

    def balance(self) -> dict[str, Any]:
        """Spread (max - min) of units per coder beyond the reliability sample, and per group."""
        own = [self.load(c) - len(self.reliability) for c in self.coders]
        groups = list(self.groups.values())
        return {
            "own_units_per_coder": {
                "min": min(own),
                "max": max(own),
                "spread": max(own) - min(own),
            },
            "units_per_group": (
                {"min": min(groups), "max": max(groups), "spread": max(groups) - min(groups)}
                if groups
                else None
            ),
        }

    def to_frame(self) -> pd.DataFrame:
        """One row per coder: units in the list, of which reliability and own units."""
        rows = []
        for c in self.coders:
            rows.append(
                {
                    "coder": c,
                    "units": self.load(c),
                    "reliability": len(self.reliability),
                    "own": self.load(c) - len(self.reliability),
                }
            )
        return pd.DataFrame(rows)

    def long_frame(self) -> pd.DataFrame:
        """One row per coder and unit, in each coder's list order, with the unit's role."""
        rows = [
            {"coder": c, "position": i, "unit": u, "role": self.roles[(c, u)]}
            for c in self.coders
            for i, u in enumerate(self.lists[c], start=1)
        ]
        return pd.DataFrame(rows, columns=["coder", "position", "unit", "role"])

    def groups_frame(self) -> pd.DataFrame:
        return pd.DataFrame(
            [{"coders": " + ".join(g), "units": n} for g, n in self.groups.items()],
            columns=["coders", "units"],
        )


def assign_units(
    corpus: Sequence[str],
    reliability: Sequence[str],
    coders: Sequence[str],
    seed: int,
    *,
    per_unit: int = 1,
    blend: bool = False,
) -> Assignment:
    """Give every coder the reliability units and share the remaining units out, balanced.

    Parameters
    ----------
    corpus
        Every unit to code (unique IDs).
    reliability
        The reliability sample: units every coder codes; all must be in ``corpus``.
    coders
        Coder names (valid file names; order does not matter).
    seed
        Seed of ``numpy.random.Generator(PCG64(seed))``.
    per_unit
        Coders per remaining unit: 1 (single coding) up to the number of coders.
    blend
        Mix reliability and other units in each coder's list in a seeded random order.
    """
    seed = parse_seed(seed)
    names = sorted(check_coder_names(list(coders)))
    if len(names) < 2:
        raise UsageError("give two or more coders: the reliability sample is coded by every coder")
    if (
        isinstance(per_unit, bool)
        or not isinstance(per_unit, int)
        or not 1 <= per_unit <= len(names)
    ):
        raise UsageError(
            f"--per-unit must be a whole number from 1 to the number of coders ({len(names)}), "
            f"not {per_unit!r}"
        )
    corpus_set = set(corpus)
    if len(corpus_set) != len(corpus):
        raise UsageError("the corpus lists a unit more than once")
    rel = sorted(set(reliability))
    absent = [u for u in rel if u not in corpus_set]
    if absent:
        raise UsageError(
            f"{len(absent)} reliability unit(s) are not in the corpus (first: "
            f"{', '.join(repr(u) for u in absent[:3])}); draw the reliability sample from the "
            "same corpus"
        )
    rel_set = set(rel)
    remaining = sorted(corpus_set - rel_set)
    rng = np.random.Generator(np.random.PCG64(seed))
    order = [remaining[i] for i in rng.permutation(len(remaining))]
    all_groups = list(combinations(names, per_unit))
    groups = [all_groups[i] for i in rng.permutation(len(all_groups))]
    counts = dict.fromkeys(groups, 0)
    own: dict[str, list[str]] = {c: [] for c in names}
    n_groups = len(groups)
    full = len(order) - len(order) % n_groups
    for i, unit in enumerate(order[:full]):
        g = groups[i % n_groups]
        counts[g] += 1
        for c in g:
            own[c].append(unit)
    for unit, g in _last_round(order[full:], groups, names).items():
        counts[g] += 1
        for c in g:
            own[c].append(unit)
    role_own = SINGLE if per_unit == 1 else SHARED
    lists: dict[str, tuple[str, ...]] = {}
    roles: dict[tuple[str, str], str] = {}
    for c in names:
        mine = sorted(own[c])
        units = rel + mine
        if blend:
            units = [units[i] for i in rng.permutation(len(units))]
        lists[c] = tuple(units)
        roles.update({(c, u): RELIABILITY for u in rel})
        roles.update({(c, u): role_own for u in mine})
    return Assignment(
        tuple(names),
        tuple(rel),
        lists,
        roles,
        per_unit,
        seed,
        blend,
        len(remaining),
        {g: counts[g] for g in sorted(counts)} if per_unit > 1 else {},
    )


def _last_round(
    units: list[str], groups: list[tuple[str, ...]], names: list[str]
) -> dict[str, tuple[str, ...]]:
    """Groups for the units of the last, incomplete round: each group at most once, and coders'
    counts within one of each other.

    Greedy first (the unused group whose coders have the fewest units), then exchanges: while
    one coder has two more units than another, a chosen group holding the first and not the
    second is replaced by the same group with the second in the first's place, when that group
    is not chosen yet. Such a group always exists (the first coder is in more chosen groups than
    the second), and each exchange lowers the sum of squared counts, so the loop ends.
    """
    load = dict.fromkeys(names, 0)
    chosen: dict[str, tuple[str, ...]] = {}
    used: set[tuple[str, ...]] = set()
    for unit in units:
        free = [g for g in groups if g not in used]
        g = min(free, key=lambda g: (sum(load[c] for c in g), max(load[c] for c in g)))
        used.add(g)
        chosen[unit] = g
        for c in g:
            load[c] += 1
    while units and max(load.values()) - min(load.values()) > 1:
        hi = max(names, key=lambda c: (load[c], c))
        lo = min(names, key=lambda c: (load[c], c))
        for unit, g in chosen.items():
            if hi in g and lo not in g:
                swapped = tuple(sorted(lo if c == hi else c for c in g))
                if swapped not in used:
                    used.discard(g)
                    used.add(swapped)
                    chosen[unit] = swapped
                    load[hi] -= 1
                    load[lo] += 1
                    break
        else:  # pragma: no cover - impossible by the argument above
            break
    return chosen


@dataclass(frozen=True)
class AssignRun:
    """A finished assignment with the files written."""

    assignment: Assignment
    folder: Path
    files: dict[str, Path]
    manifest: dict[str, Any]


def assign_to_files(
    corpus: str | os.PathLike[str],
    reliability: str | os.PathLike[str],
    coders: Sequence[str],
    out_dir: str | os.PathLike[str],
    *,
    seed: Any,
    id_column: str | None,
    per_unit: int = 1,
    blend: bool = False,
    codebook: Codebook | None = None,
    templates_dir: str | os.PathLike[str] | None = None,
    overwrite: bool = False,
    progress: Progress | None = None,
) -> AssignRun:
    """Read the corpus and the reliability list, assign, and write the lists and the manifest.

    Writes into ``out_dir``: ``units-<coder>.txt`` per coder, ``reliability-units.txt`` (the
    record of the reliability sample), ``assignment.csv`` (coder, position, unit, role) and
    ``assignment.manifest.json``. With ``templates_dir`` (and ``codebook``), one coding workbook
    per coder pre-filled with that coder's list (:func:`coderel.template.write_templates`),
    recorded in the manifest with its SHA-256. ``progress`` is told of each phase
    (:mod:`coderel.progress`).
    """
    if templates_dir is not None and codebook is None:
        raise UsageError("coding workbooks need the codebook (--codebook)")
    folder = Path(out_dir)
    if folder.exists() and not folder.is_dir():
        raise UsageError(f"the output {folder.name!r} is a file, not a folder")
    report(progress, 0, 1, "reading the corpus")
    corpus_table = read_units(corpus, id_column, what="corpus")
    rel_table = read_units(reliability, id_column, what="reliability list")
    result = assign_units(
        corpus_table.ids, rel_table.ids, coders, seed, per_unit=per_unit, blend=blend
    )
    texts = {coder_list_file(c): unit_list_text(list(result.lists[c])) for c in result.coders}
    texts[RELIABILITY_FILE] = unit_list_text(list(result.reliability))
    texts[ASSIGNMENT_FILE] = csv_text(result.long_frame())
    targets = {name: folder / name for name in [*texts, MANIFEST_FILE]}
    refuse_overwriting_inputs(targets.values(), [Path(corpus), Path(reliability)])
    sha = {name: hashlib.sha256(t.encode("utf-8")).hexdigest() for name, t in texts.items()}
    body = {
        "command": "assign",
        "corpus": {
            "file": corpus_table.file,
            "sha256": corpus_table.sha256,
            "units": len(corpus_table.ids),
            "id_set_sha256": digest_lines(sorted(corpus_table.ids)),
        },
        "reliability": {
            "file": rel_table.file,
            "sha256": rel_table.sha256,
            "units": len(result.reliability),
        },
        "coders": list(result.coders),
        "per_unit": result.per_unit,
        "seed": result.seed,
        "blend": result.blend,
        "remaining_units": result.remaining,
        "per_coder": [
            {
                "coder": c,
                "units": result.load(c),
                "reliability": len(result.reliability),
                "own": result.load(c) - len(result.reliability),
                "file": coder_list_file(c),
                "sha256": sha[coder_list_file(c)],
            }
            for c in result.coders
        ],
        "groups": [{"coders": list(g), "units": n} for g, n in result.groups.items()],
        "balance": result.balance(),
        "files": {name: sha[name] for name in sorted(sha)},
    }
    for name, text in texts.items():
        write_text(targets[name], text)
    if templates_dir is not None and codebook is not None:
        books = write_templates(
            codebook,
            list(result.coders),
            templates_dir,
            {c: list(result.lists[c]) for c in result.coders},
            overwrite=overwrite,
            inputs=[Path(corpus), Path(reliability), *targets.values()],
            progress=progress,
        )
        body["templates"] = [{"file": p.name, "sha256": sha256_file(p)} for p in books]
    manifest = manifest_text(body)
    write_text(targets[MANIFEST_FILE], manifest)
    return AssignRun(result, folder, targets, json.loads(manifest))
