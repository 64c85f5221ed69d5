"""Stability (test-retest, intra-coder reliability): a coder against their own second coding.

Krippendorff (2004, *Content Analysis*, 2nd ed., section 11.1) calls the agreement of one coder
with themselves on the same units at two times *stability*, the weakest of the three kinds of
reliability (stability, reproducibility, accuracy): it shows that a coder is consistent, not
that two coders would agree. Per coder and variable it is computed with the same coefficients
as agreement between coders (alpha at the variable's level, Cohen's kappa where categorical,
the intraclass correlations where numeric), treating the two occasions as two coders over the
units coded on both; intervals come from the same seeded bootstrap.

The second occasion comes from an ``occasion`` column of a long table
(:mod:`coderel.io.occasions`) or from a separate sheet attached with :func:`add_occasion`.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import pandas as pd

from coderel.agree import AgreementResult, agreement
from coderel.codings import OCCASION_COLUMNS, Codings
from coderel.errors import CoderelError, ExitCode, UsageError
from coderel.progress import report

FIRST = "first occasion"
SECOND = "second occasion"
#: The label given to an occasion attached from a file (``--occasion NAME=PATH``).
ATTACHED = "second"


class StabilityError(CoderelError):
    """The occasions cannot be compared (no common units, no second occasion at all)."""

    exit_code = ExitCode.DATA_PROBLEMS


@dataclass(frozen=True)
class CoderStability:
    """One coder's two occasions: how many units were recoded, after how long, and agreement
    between the occasions (the two "coders" of :attr:`agreement` are the two occasions)."""

    coder: str
    first_occasion: str
    second_occasion: str
    units_recoded: int
    common_units: int
    days: int | None
    agreement: AgreementResult | None

    def to_dict(self) -> dict[str, Any]:
        return {
            "coder": self.coder,
            "first_occasion": self.first_occasion or None,
            "second_occasion": self.second_occasion or None,
            "units_recoded": self.units_recoded,
            "common_units": self.common_units,
            "days_between": self.days,
            "variables": (
                [v.to_dict() for v in self.agreement.variables] if self.agreement else []
            ),
        }


@dataclass(frozen=True)
class StabilityResult:
    """Stability of every coder with a second occasion, with the bootstrap's settings."""

    coders: tuple[CoderStability, ...]
    replicates: int
    seed: int
    method: str
    ci_level: float

    def to_dict(self) -> dict[str, Any]:
        return {
            "bootstrap": {
                "replicates": self.replicates,
                "seed": self.seed,
                "method": self.method,
                "ci_level": self.ci_level,
            },
            "stability": [c.to_dict() for c in self.coders],
        }

    def to_frame(self) -> pd.DataFrame:
        """Tidy: one row per coder, variable and coefficient."""
        frames = []
        for c in self.coders:
            if c.agreement is None:
                continue
            frame = c.agreement.to_frame()
            frame.insert(0, "coder", c.coder)
            frame.insert(1, "days_between", c.days)
            frames.append(frame)
        return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()


def add_occasion(codings: Codings, coder: str, second: Codings) -> Codings:
    """``codings`` with ``second`` attached as ``coder``'s second occasion.

    ``second`` holds one coder (any name: it is taken as ``coder``) or several, one of them
    named ``coder``. When ``second`` itself holds two occasions (a long table with an
    ``occasion`` column), its later occasion is the recoding and its labels are kept. Raises
    :class:`UsageError` when ``coder`` is not a coder of ``codings`` or cannot be found in
    ``second``.
    """
    if coder not in codings.coders:
        known = ", ".join(codings.coders) or "none"
        raise UsageError(
            f"--occasion names the coder {coder!r}, who is not in the data (coders: {known}); "
            "write it as --occasion CODER=PATH with a coder of the first occasion"
        )
    # A file with an occasion column holds both occasions: its later one is the recoding, and
    # its labels (dates) say when the two took place.
    own = second.occasions
    frame = own if not own.empty else second.frame
    names = list(dict.fromkeys(frame["coder"]))
    if len(names) > 1:
        if coder not in names:
            raise UsageError(
                f"the second occasion of {coder!r} holds the coders {', '.join(names)}, none of "
                f"them {coder!r}; give a file with {coder!r}'s recoding only"
            )
        frame = frame[frame["coder"] == coder]
    if frame.empty:
        raise StabilityError(f"the second occasion of {coder!r} holds no codings")
    if own.empty:
        later = frame.assign(coder=coder, occasion=ATTACHED, first_occasion="")
    else:
        later = frame.assign(coder=coder)
    previous = codings.occasions
    if not previous.empty and coder in set(previous["coder"]):
        raise UsageError(f"{coder!r} has a second occasion already; give one per coder")
    joined = pd.concat([previous, later], ignore_index=True) if len(previous) else later
    return Codings(
        codebook=codings.codebook,
        frame=codings.frame,
        texts=codings.texts,
        problems=codings.problems,
        sources=(*codings.sources, *second.sources),
        occasions=joined.reindex(columns=list(OCCASION_COLUMNS)).reset_index(drop=True),
    )


def days_between(first: str, second: str) -> int | None:
    """Whole days from ``first`` to ``second`` when both labels are dates, else ``None``."""
    if not first or not second:
        return None
    a = pd.to_datetime(first, errors="coerce", format="ISO8601")
    b = pd.to_datetime(second, errors="coerce", format="ISO8601")
    if pd.isna(a) or pd.isna(b):
        return None
    return int((b - a).days)


def _coded_units(frame: pd.DataFrame) -> set[str]:
    has = frame["value"].notna() | frame["missing"].notna()
    return set(frame.loc[has, "unit"])


def stability(
    codings: Codings,
    *,
    replicates: int = 2000,
    seed: int = 20261202,
    ci_level: float = 0.95,
    interval_method: str = "bca",
    icc_ordinal: bool = False,
    progress: Callable[[int, int], None] | None = None,
) -> StabilityResult:
    """Agreement of each coder with their own second occasion, per variable.

    Parameters
    ----------
    codings
        Codings whose :attr:`~coderel.codings.Codings.occasions` hold second occasions.
    replicates, seed, ci_level, interval_method, icc_ordinal
        As for :func:`coderel.agree.agreement`.

    Raises
    ------
    StabilityError
        When there is no second occasion, or no coder's two occasions share a unit.

    References
    ----------
    Krippendorff, K. (2004). *Content Analysis: An Introduction to Its Methodology* (2nd ed.),
    section 11.1 (stability, reproducibility, accuracy). Sage.
    """
    later = codings.occasions
    if later.empty:
        raise StabilityError(
            "no second occasion: give a coder's recoding with --occasion CODER=PATH, or an "
            "'occasion' column in a long table (unit, coder, variable, value, occasion)"
        )
    order = [c for c in codings.coders if c in set(later["coder"])]
    out: list[CoderStability] = []
    for i, coder in enumerate(order):
        second = later[later["coder"] == coder]
        first = codings.frame[codings.frame["coder"] == coder]
        recoded = _coded_units(second)
        common = recoded & _coded_units(first)
        label_2 = str(second["occasion"].iloc[0])
        label_1 = str(second["first_occasion"].iloc[0] or "")
        result = None
        if common:
            both = pd.concat(
                [
                    first[first["unit"].isin(common)].assign(coder=FIRST),
                    second[second["unit"].isin(common)].assign(coder=SECOND),
                ],
                ignore_index=True,
            )
            pair = Codings.from_records(codings.codebook, both)

            def step(done: int, total: int, phase: str | None = None, i: int = i) -> None:
                report(progress, i * total + done, len(order) * total, phase)

            result = agreement(
                pair,
                replicates=replicates,
                seed=seed,
                ci_level=ci_level,
                interval_method=interval_method,
                icc_ordinal=icc_ordinal,
                progress=step,
            )
        out.append(
            CoderStability(
                coder,
                label_1,
                label_2,
                len(recoded),
                len(common),
                days_between(label_1, label_2),
                result,
            )
        )
    if not any(c.common_units for c in out):
        names = ", ".join(f"{c.coder} ({c.units_recoded} recoded)" for c in out)
        raise StabilityError(
            f"no unit was coded on both occasions by the same coder ({names}): check that the "
            "second occasion uses the same unit IDs as the first"
        )
    return StabilityResult(tuple(out), replicates, seed, interval_method, ci_level)
