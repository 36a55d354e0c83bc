"""The schedule's template filters; the justification text itself is built outside the web.

``server.app.justification`` writes the paragraph from the numbers (shared with
``probewise schedule``); its names are re-exported here for the pages that used them.
"""

from __future__ import annotations

import math

from server.app.justification import (
    MainBoundary,
    OptionFigures,
    bits_text,
    days_text,
    dominating_option,
    justification,
    metres_text,
    money_text,
    percent_text,
)

__all__ = [
    "MainBoundary",
    "OptionFigures",
    "bits_text",
    "days_text",
    "dominating_option",
    "format_money_whole",
    "format_percent",
    "justification",
    "metres_text",
    "money_text",
    "percent_text",
    "register_template_filters",
]


# ---------------------------------------------------------------- template filters


def format_money_whole(value: object) -> str:
    """An estimate in whole currency units with thousands separators; a dash when absent."""
    if value is None or value == "":
        return "\u2014"
    number = float(value)  # type: ignore[arg-type]
    return f"{number:,.0f}" if math.isfinite(number) else "\u2014"


def format_percent(value: object) -> str:
    """A share 0..1 as a whole percentage; a dash when absent (boundary not of interest)."""
    if value is None or value == "":
        return "\u2014"
    return f"{100 * float(value):.0f}%"  # type: ignore[arg-type]


def register_template_filters() -> None:
    from server.web.templating import templates

    templates.env.filters.setdefault("money0", format_money_whole)
    templates.env.filters.setdefault("percent", format_percent)


register_template_filters()
