"""Number formats shared by the three renderers (one place, so the forms agree)."""

from __future__ import annotations

from coderel.report.methods_text import fmt_coef, fmt_interval, reason_text
from coderel.report.model import Coefficient

#: Coefficients shown as percentages rather than as bounded coefficients.
PERCENT_KEYS: frozenset[str] = frozenset({"percent_agreement"})


def pct(value: float | None, digits: int = 1) -> str:
    """A proportion as a percentage: ``0.923 -> '92.3%'``; ``–`` when unknown."""
    if value is None:
        return "–"
    return f"{100 * value:.{digits}f}%"


def coef_value(c: Coefficient) -> str:
    """The estimate as shown in tables: ``.842`` or ``92.3%``; ``undefined`` without a value."""
    if c.estimate is None:
        return "undefined"
    if c.key in PERCENT_KEYS:
        return pct(c.estimate)
    return fmt_coef(c.estimate, 3)


def coef_interval(c: Coefficient) -> str:
    """The interval as shown in tables: ``[.791, .880]`` or ``[85.1%, 96.0%]``; may be empty."""
    if c.estimate is None or c.ci_low is None or c.ci_high is None:
        return ""
    if c.key in PERCENT_KEYS:
        return f"[{pct(c.ci_low)}, {pct(c.ci_high)}]"
    return fmt_interval(c.ci_low, c.ci_high, 3)


def coef_full(c: Coefficient) -> str:
    """Estimate and interval in one string, or ``undefined (reason)``."""
    if c.estimate is None:
        return f"undefined ({reason_text(c.reason)})" if c.reason else "undefined"
    interval = coef_interval(c)
    return f"{coef_value(c)} {interval}".strip()


def plain(value: object) -> str:
    """Any table cell as text: floats in [-1, 1] journal style, others as they are."""
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        if -1.0 <= value <= 1.0:
            return fmt_coef(value, 3)
        return f"{value:,.2f}"
    return str(value)
