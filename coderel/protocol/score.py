"""Training against an answer key: each trainee's agreement with the key, per variable.

The key is one coding of the training units (the lead researcher's agreed coding), read from any
sheet coderel reads, optionally with a ``note`` column (one note per unit) or ``<variable>_note``
columns explaining the key's choices. Per trainee and variable: percent agreement with the key,
Cohen's kappa (Cohen 1960) and, for ordinal variables, weighted kappa (Cohen 1968), each with its
large-sample standard error (Fleiss, Cohen & Everitt 1969) and a seeded bootstrap interval over the
key's units (one weight matrix for every trainee and variable, :mod:`coderel.stats.bootstrap`);
Krippendorff's alpha of the trainee and the key at the variable's level; the confusion matrix
trainee x key; and pass or fail against the codebook's training threshold.

Which coefficient decides pass or fail (a convention of ours, named in every output): Cohen's
kappa for nominal variables, quadratic weighted kappa for ordinal ones (Cohen 1968; Fleiss &
Cohen 1973), Krippendorff's alpha of the trainee and the key for numeric and multi-select ones.
The threshold is ``thresholds.training`` of the codebook, else its reliable threshold (.800 by
convention, Krippendorff 2004). Agreement with a key says whether the trainee codes as the key
does; it is no proof that the key is right.

References
----------
Cohen, J. (1960). A coefficient of agreement for nominal scales. *Educational and Psychological
Measurement*, 20(1), 37-46.
Cohen, J. (1968). Weighted kappa. *Psychological Bulletin*, 70(4), 213-220.
Fleiss, J. L., & Cohen, J. (1973). The equivalence of weighted kappa and the intraclass
correlation coefficient as measures of reliability. *Educational and Psychological Measurement*,
33(3), 613-619.
Fleiss, J. L., Cohen, J., & Everitt, B. S. (1969). Large sample standard errors of kappa and
weighted kappa. *Psychological Bulletin*, 72(5), 323-327.
Krippendorff, K. (2004). *Content Analysis* (2nd ed.). Sage.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from coderel.agree import MIN_UNITS_FOR_INTERVAL, Estimate, min_replicates
from coderel.agree.driver import check_settings
from coderel.agree.matrices import build_targets
from coderel.codebook import Codebook, Variable
from coderel.codings import Codings, none_for_na
from coderel.errors import DataProblems, UsageError
from coderel.problems import Problems, make_problem
from coderel.stats.bootstrap import evaluate_plans, make_weights
from coderel.stats.counts import confusion_table
from coderel.stats.intervals import interval
from coderel.stats.kappa import cohen_kappa_table
from coderel.stats.plan import build_plan

#: The coefficients reported per trainee and variable, in display order.
SCORE_COEFFICIENTS: tuple[str, ...] = (
    "percent_agreement",
    "cohen_kappa",
    "weighted_kappa_linear",
    "weighted_kappa_quadratic",
    "krippendorff_alpha",
)
_SE_WEIGHTS = {
    "cohen_kappa": "identity",
    "weighted_kappa_linear": "linear",
    "weighted_kappa_quadratic": "quadratic",
}
#: A note for every unit of the key.
NOTE_COLUMN = "note"
#: A note for one variable: ``<variable>_note``.
NOTE_SUFFIX = "_note"
PASS = "pass"
BELOW = "below threshold"
TOO_FEW = "too few units"
UNDEFINED = "undefined"


def judged_by(var: Variable) -> str:
    """The coefficient that decides pass or fail for a variable (a convention, see above)."""
    if var.is_categorical and not var.multiple:
        return "weighted_kappa_quadratic" if var.level == "ordinal" else "cohen_kappa"
    return "krippendorff_alpha"


def note_columns(codebook: Codebook) -> tuple[str, ...]:
    """Columns a key may hold beside the variables: ``note`` and ``<variable>_note``."""
    return (NOTE_COLUMN, *(v.name + NOTE_SUFFIX for v in codebook.variables))


def key_codebook(codebook: Codebook) -> Codebook:
    """The codebook as the key is read: its note columns count as text columns."""
    extra = tuple(c for c in note_columns(codebook) if c not in codebook.text_columns)
    return dataclasses.replace(codebook, text_columns=(*codebook.text_columns, *extra))


@dataclass(frozen=True)
class VariableScore:
    """One trainee on one variable against the key."""

    trainee: str
    variable: str
    label: str
    level: str
    units: int
    judged_by: str
    threshold: float
    coefficients: dict[str, Estimate]
    verdict: str
    differences: int
    categories: tuple[Any, ...] = ()
    #: Rows the trainee's categories, columns the key's, in codebook order.
    confusion: tuple[tuple[int, ...], ...] | None = None

    @property
    def judged(self) -> Estimate | None:
        return self.coefficients.get(self.judged_by)

    def to_dict(self) -> dict[str, Any]:
        return {
            "trainee": self.trainee,
            "variable": self.variable,
            "label": self.label,
            "level": self.level,
            "units": self.units,
            "judged_by": self.judged_by,
            "threshold": self.threshold,
            "verdict": self.verdict,
            "differences": self.differences,
            **{k: e.to_dict() for k, e in self.coefficients.items()},
            "categories": list(self.categories),
            "confusion": [list(r) for r in self.confusion] if self.confusion else None,
        }


@dataclass(frozen=True)
class TraineeSummary:
    """One trainee over every variable."""

    trainee: str
    units: int
    units_outside_key: int
    variables: int
    passed: int
    below: tuple[str, ...]
    differences: int

    @property
    def verdict(self) -> str:
        return PASS if not self.below else BELOW

    def to_dict(self) -> dict[str, Any]:
        return {**dataclasses.asdict(self), "below": list(self.below), "verdict": self.verdict}


@dataclass(frozen=True)
class ScoreResult:
    """Every trainee against the key: scores per variable, summaries, feedback rows."""

    key_coder: str
    key_units: int
    trainees: tuple[str, ...]
    scores: tuple[VariableScore, ...]
    summaries: tuple[TraineeSummary, ...]
    feedback: dict[str, pd.DataFrame] = field(default_factory=dict)
    replicates: int = 0
    seed: int = 0
    method: str = "bca"
    ci_level: float = 0.95
    notes: tuple[str, ...] = ()

    def score(self, trainee: str, variable: str) -> VariableScore:
        for s in self.scores:
            if s.trainee == trainee and s.variable == variable:
                return s
        raise KeyError((trainee, variable))

    def summary(self, trainee: str) -> TraineeSummary:
        for s in self.summaries:
            if s.trainee == trainee:
                return s
        raise KeyError(trainee)

    def to_frame(self) -> pd.DataFrame:
        """Tidy: one row per trainee, variable and coefficient."""
        rows = []
        for s in self.scores:
            for key, est in s.coefficients.items():
                lo, hi = est.ci if est.ci else (None, None)
                rows.append(
                    {
                        "trainee": s.trainee,
                        "variable": s.variable,
                        "level": s.level,
                        "units": s.units,
                        "coefficient": key,
                        "estimate": est.estimate,
                        "ci_low": lo,
                        "ci_high": hi,
                        "se": est.se,
                        "reason": est.reason,
                        "judged": key == s.judged_by,
                        "threshold": s.threshold,
                        "verdict": s.verdict,
                    }
                )
        return pd.DataFrame(rows)

    def to_dict(self) -> dict[str, Any]:
        return {
            "key": {"coder": self.key_coder, "units": self.key_units},
            "trainees": [s.to_dict() for s in self.summaries],
            "bootstrap": {
                "replicates": self.replicates,
                "seed": self.seed,
                "method": self.method,
                "ci_level": self.ci_level,
            },
            "scores": [s.to_dict() for s in self.scores],
            "notes": list(self.notes),
        }


def _finite(value: float | None) -> float | None:
    return None if value is None or not math.isfinite(value) else float(value)


def _check_key(key: Codings, trainees: Codings) -> tuple[str, list[str]]:
    """The key's coder and its units; every problem with the key raised at once."""
    coders = key.coders
    problems = Problems()
    if len(coders) != 1:
        problems.append(
            make_problem(
                "key-not-one-coder",
                f"the key holds {len(coders)} coders ({', '.join(coders) or 'none'}); a key is "
                "one coding of the training units",
                file=", ".join(sorted({str(f) for f in key.frame["file"].dropna()})) or None,
                hint="give one sheet (or one coder's rows of a long table) as --key",
            )
        )
        raise DataProblems("the answer key is not one coding", problems=problems)
    key_coder = coders[0]
    if key_coder in trainees.coders:
        raise UsageError(
            f"the key's coder {key_coder!r} is also among the trainees' sheets: keep the key out "
            "of the trainees' files and folders"
        )
    coded = set(trainees.frame["unit"])
    frame = key.frame
    for unit in key.units:
        if unit in coded:
            continue
        rows = frame[frame["unit"] == unit]
        first = rows.iloc[0] if len(rows) else None
        problems.append(
            make_problem(
                "key-unit-not-coded",
                f"unit {unit} is in the key but no trainee coded it",
                file=None if first is None else first["file"],
                sheet=None if first is None else first["sheet"],
                cell=None if first is None else none_for_na(first["cell"]),
                unit=unit,
                hint="give the trainees' sheets for this unit too, or take it out of the key",
            )
        )
    if problems:
        raise DataProblems(
            f"{len(problems)} unit(s) of the key were coded by no trainee", problems=problems
        )
    return key_coder, key.units


def _display(var: Variable, value: Any, missing: Any, applies: Any) -> str:
    """A value as a trainer reads it: ``code = label``, several joined by ``; ``."""
    if value is None:
        if missing is not None:
            return var.display(missing)
        if applies is False:
            return "(does not apply)"
        return "(blank)"
    if isinstance(value, tuple):
        return "; ".join(var.display(c) for c in value) if value else "(none chosen)"
    if isinstance(value, float):
        return str(int(value)) if value.is_integer() else repr(value)
    return var.display(value)


def _cells(codings: Codings) -> dict[tuple[str, str, str], tuple[Any, Any, Any]]:
    f = codings.frame
    return {
        (u, c, v): (val, miss, app)
        for u, c, v, val, miss, app in zip(
            f["unit"],
            f["coder"],
            f["variable"],
            f["value"],
            f["missing"],
            f["applies"],
            strict=True,
        )
    }


def _texts(codings: Codings) -> dict[tuple[str, str], dict[str, str]]:
    out: dict[tuple[str, str], dict[str, str]] = {}
    t = codings.texts
    for u, c, col, text in zip(t["unit"], t["coder"], t["column"], t["text"], strict=True):
        if text is not None and text == text:
            out.setdefault((str(u), str(c)), {})[str(col)] = str(text)
    return out


def _feedback(
    cb: Codebook,
    trainee: str,
    key_coder: str,
    units: list[str],
    cells: dict[tuple[str, str, str], tuple[Any, Any, Any]],
    texts: dict[tuple[str, str], dict[str, str]],
    coded: set[str],
) -> pd.DataFrame:
    """One row per unit and variable where the trainee's value differs from the key's."""
    rows = []
    for unit in units:
        if unit not in coded:
            continue
        key_text = texts.get((unit, key_coder), {})
        own_text = texts.get((unit, trainee), {})
        for var in cb.variables:
            k = cells.get((unit, key_coder, var.name))
            t = cells.get((unit, trainee, var.name))
            kd = _display(var, *(k or (None, None, None)))
            td = _display(var, *(t or (None, None, None)))
            if kd == td:
                continue
            note = key_text.get(var.name + NOTE_SUFFIX) or key_text.get(NOTE_COLUMN)
            row = {
                "unit": unit,
                "variable": var.name,
                "trainee_value": td,
                "key_value": kd,
                "key_note": note,
            }
            for col in cb.text_columns:
                row[col] = key_text.get(col) or own_text.get(col)
            rows.append(row)
    columns = ["unit", "variable", "trainee_value", "key_value", "key_note", *cb.text_columns]
    return pd.DataFrame(rows, columns=columns, dtype=object)


def _verdict(est: Estimate | None, units: int, threshold: float) -> str:
    if units < MIN_UNITS_FOR_INTERVAL:
        return TOO_FEW
    if est is None or est.estimate is None:
        return UNDEFINED
    return PASS if est.estimate >= threshold else BELOW


def score(
    key: Codings,
    trainees: Codings,
    *,
    replicates: int = 2000,
    seed: int = 20261202,
    ci_level: float = 0.95,
    interval_method: str = "bca",
    progress: Callable[[int, int], None] | None = None,
) -> ScoreResult:
    """Score every trainee against the answer key, per variable.

    Parameters
    ----------
    key
        One coding of the training units (read with :func:`key_codebook` to keep its notes).
    trainees
        The trainees' codings of (some of) the same units, same codebook.
    replicates, seed, ci_level, interval_method
        The bootstrap: one set of unit weights over the key's units, each weight a pure
        function of (seed, unit ID, replicate) (:mod:`coderel.stats.bootstrap`).
    progress
        Called as ``progress(done, total)``.

    Returns
    -------
    ScoreResult
        Per trainee and variable the coefficients with intervals, the confusion matrix and the
        verdict; per trainee a summary and the feedback rows (where the trainee differs).

    Raises
    ------
    DataProblems
        The key is not one coder, or holds units that no trainee coded.
    UsageError
        No trainee, the key's coder among the trainees, or bad bootstrap settings.
    """
    check_settings(replicates, seed, ci_level, interval_method)
    if not trainees.coders:
        raise UsageError("no trainee's coding was read: give the trainees' sheets as DATA")
    key_coder, units = _check_key(key, trainees)
    cb = trainees.codebook
    names = trainees.coders
    in_key = set(units)
    trainee_frame = trainees.frame[trainees.frame["unit"].isin(in_key)]
    both = Codings.from_records(cb, pd.concat([trainee_frame, key.frame], ignore_index=True))
    coders = [*names, key_coder]
    targets = [t for t in build_targets(both, coders, units) if t.kind == "variable"]
    key_col = len(names)
    jobs = []
    for t in targets:
        if not (t.x[:, key_col] >= 0).any():
            continue  # the key gives no value of this variable: nothing to score against
        for i, name in enumerate(names):
            jobs.append((t, i, name, t.x[:, [i, key_col]]))
    plans = [build_plan(x, t.scale) for t, _, _, x in jobs]
    # keyed by unit ID (seed, unit, replicate): the order of files and rows changes nothing
    weights = make_weights(units, replicates, seed)
    evaluated = evaluate_plans(
        plans, weights, progress=(lambda d, n: progress(d, n)) if progress else None
    )
    cells = _cells(both)
    texts = {**_texts(trainees), **_texts(key)}
    coded_by = {
        name: set(trainee_frame.loc[trainee_frame["coder"] == name, "unit"]) for name in names
    }
    feedback = {
        name: _feedback(cb, name, key_coder, units, cells, texts, coded_by[name]) for name in names
    }
    diff_counts = {name: feedback[name]["variable"].value_counts().to_dict() for name in names}
    enough_reps = replicates >= min_replicates(ci_level)
    scores = []
    for (t, _i, name, x), ev in zip(jobs, evaluated, strict=True):
        pairable = (x >= 0).all(axis=1)
        n = int(pairable.sum())
        perfect = n > 0 and bool(np.all(x[pairable, 0] == x[pairable, 1]))
        table = confusion_table(x[:, 0], x[:, 1], t.scale.size) if t.categories else None
        coefs: dict[str, Estimate] = {}
        for key_name in SCORE_COEFFICIENTS:
            e = ev.get(key_name)
            if e is None:
                continue
            point = _finite(e.point)
            if point is None:
                coefs[key_name] = Estimate(
                    None, reason="no-variation" if n >= 2 else "too-few-units"
                )
                continue
            reason = None
            ci = None
            if n < MIN_UNITS_FOR_INTERVAL:
                reason = "too-few-units"
            elif perfect:
                reason = "perfect-agreement"
            elif not enough_reps:
                reason = "too-few-replicates" if replicates else None
            else:
                ci = interval(e.replicates, e.point, e.jackknife, ci_level, interval_method)
            se = None
            if key_name in _SE_WEIGHTS and table is not None:
                se = _finite(cohen_kappa_table(table, _SE_WEIGHTS[key_name])[1])
            coefs[key_name] = Estimate(point, ci, se, reason)
        judge = judged_by(t.var)
        threshold = cb.thresholds_for(t.name).training_threshold
        scores.append(
            VariableScore(
                trainee=name,
                variable=t.name,
                label=t.label,
                level=t.level,
                units=n,
                judged_by=judge,
                threshold=threshold,
                coefficients=coefs,
                verdict=_verdict(coefs.get(judge), n, threshold),
                differences=int(diff_counts[name].get(t.name, 0)),
                categories=t.categories,
                confusion=tuple(tuple(int(c) for c in r) for r in table)
                if table is not None
                else None,
            )
        )
    summaries = []
    all_units = trainees.frame.groupby("coder")["unit"].agg(lambda s: set(s))
    for name in names:
        mine = [s for s in scores if s.trainee == name]
        below = tuple(s.variable for s in mine if s.verdict == BELOW)
        summaries.append(
            TraineeSummary(
                trainee=name,
                units=len(coded_by[name]),
                units_outside_key=len(all_units.get(name, set()) - in_key),
                variables=len(mine),
                passed=sum(s.verdict == PASS for s in mine),
                below=below,
                differences=len(feedback[name]),
            )
        )
    notes = [
        "pass or fail compares Cohen's kappa (nominal), quadratic weighted kappa (ordinal) or "
        "alpha (numeric, multi-select) with the training threshold, a convention; agreement "
        "with the key is not proof that the key is right",
    ]
    outside = [s for s in summaries if s.units_outside_key]
    if outside:
        notes.append(
            "units outside the key are not scored: "
            + ", ".join(f"{s.trainee} {s.units_outside_key}" for s in outside)
        )
    short = [s for s in summaries if s.units < len(units)]
    if short:
        notes.append(
            f"the key holds {len(units)} units; coded fewer: "
            + ", ".join(f"{s.trainee} {s.units}" for s in short)
        )
    return ScoreResult(
        key_coder=key_coder,
        key_units=len(units),
        trainees=tuple(names),
        scores=tuple(scores),
        summaries=tuple(summaries),
        feedback=feedback,
        replicates=replicates,
        seed=seed,
        method=interval_method,
        ci_level=ci_level,
        notes=tuple(notes),
    )
