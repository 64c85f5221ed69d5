"""Long tables as the parts of one dataset: a coder's rows spread over several files.

A folder of long Parquet (or CSV) tables is read as one dataset (a long table written in parts,
for example partitioned by unit): a coder may have rows in any part. Each part is read on its own
(:mod:`coderel.io.long_columnar` or the row reader), which adds a record without a value for every
variable a coder did not give a unit in that part; once all parts are read, :func:`merge_long_parts`
keeps one record per unit, coder and variable: the written one, or the first written one when a
unit's variable was given in two parts (the later one is a ``duplicate-unit`` error, as a repeat
inside one table is).
"""

from __future__ import annotations

from collections.abc import Collection

import numpy as np
import pandas as pd

from coderel.codings import none_for_na
from coderel.problems import Problems

_KEY = ["unit", "coder", "variable"]


def merge_long_parts(
    frame: pd.DataFrame, coders: Collection[str], problems: Problems
) -> pd.DataFrame:
    """One record per (unit, coder, variable) for ``coders``, whose rows came from several long
    tables; report a value given in two parts (``duplicate-unit``) and keep the first.

    ``frame`` is the reader's table (records in reading order; a record made for a variable the
    coder did not give has no cell)."""
    spread = frame["coder"].isin(set(coders)).to_numpy()
    if not spread.any():
        return frame
    sub = frame.loc[spread, [*_KEY, "cell", "file"]]
    given = sub["cell"].notna().to_numpy()
    # written records first, each group in reading order
    order = np.lexsort((np.arange(len(sub)), ~given))
    ranked = sub.iloc[order]
    repeat = ranked.duplicated(_KEY, keep="first").to_numpy()
    if not repeat.any():
        return frame
    drop = ranked.index[repeat]
    twice = repeat & given[order]
    if twice.any():
        first = ranked[~repeat].set_index(_KEY)[["file", "cell"]]
        again = ranked[twice]
        where = first.reindex(pd.MultiIndex.from_frame(again[_KEY]))
        for (idx, row), (file, cell) in zip(
            again.iterrows(), where.itertuples(index=False), strict=True
        ):
            full = frame.loc[idx]
            problems.add(
                "duplicate-unit",
                f"unit {row['unit']}, variable {row['variable']} appears again (first in "
                f"{file}, {cell}); this row was not read",
                hint="delete the repeated row",
                unit=row["unit"],
                coder=row["coder"],
                variable=row["variable"],
                file=full["file"],
                sheet=full["sheet"],
                cell=none_for_na(full["cell"]),
                line=full["_line"] if "_line" in frame.columns else None,
            )
    return frame.drop(index=drop).reset_index(drop=True)
