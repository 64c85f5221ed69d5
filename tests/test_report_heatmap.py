"""The confusion heat map shades confusions on their own scale (issue 9, item 15).

Before, one scale for the whole table shaded a large off-diagonal cell (14 confusions) as lightly
as a diagonal cell of 13 beside a diagonal of 50. Now the diagonal is scaled by its own largest
count and the off-diagonal cells by theirs (the largest confusion is the darkest warm cell). The
expected shares are the counts divided by the largest count of their part (13/50, 2/14).
"""

from __future__ import annotations

import re

import numpy as np

from coderel.report.charts import CONFUSION_HEAT, HEAT, confusion_chart, heat_shades
from coderel.report.model import CategoryPanel

MATRIX = ((50, 14, 0), (2, 13, 1), (0, 0, 40))


def _hex(cmap, x: float) -> str:
    r, g, b, _ = cmap(x)
    return f"#{round(r * 255):02x}{round(g * 255):02x}{round(b * 255):02x}"


def test_diagonal_and_confusions_have_separate_scales():
    colours, shade = heat_shades(np.array(MATRIX))
    assert shade[0, 1] == 1.0  # the largest confusion is the darkest confusion
    assert shade[1, 1] == 13 / 50
    assert shade[1, 0] == 2 / 14
    assert colours[0, 1] == _hex(CONFUSION_HEAT, 1.0)
    assert colours[0, 0] == _hex(HEAT, 1.0)
    assert colours[0, 1] != colours[1, 1]
    # with one scale the 14 would have been shaded at 14/50, barely darker than 13/50
    assert shade[0, 1] - shade[1, 1] > 0.5


def test_no_confusions_and_empty_tables_are_calm():
    colours, shade = heat_shades(np.array(((5, 0), (0, 7))))
    assert shade[0, 1] == 0.0
    assert colours[0, 1] == _hex(CONFUSION_HEAT, 0.0)
    _, shade = heat_shades(np.zeros((2, 2)))
    assert not shade.any()


def test_the_chart_draws_each_cell_with_its_colour():
    panel = CategoryPanel(
        variable="species",
        label="Species",
        codes=("1", "2", "3"),
        labels=("Bear", "Elk", "Cougar"),
        matrix=MATRIX,
        matrix_caption="",
        row_title="first coder",
        column_title="second coder",
        category_columns=(),
        category_rows=(),
    )
    svg = confusion_chart(panel)
    fills = dict(
        re.findall(r'<g id="heatmap-species-(\d-\d)">\s*<path[^>]*fill: (#[0-9a-f]{6})', svg)
    )
    assert len(fills) == 9
    assert fills["0-1"] == _hex(CONFUSION_HEAT, 1.0)
    assert fills["1-1"] == _hex(HEAT, 13 / 50)
