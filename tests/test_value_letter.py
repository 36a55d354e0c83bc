"""The justification's letter with design elements (docs/model.md "The value of an
investigation"): what it says of a choice the readings may confirm or overturn, of an option
that does not pay for itself, and that it quotes the design value table's own text."""

from __future__ import annotations

from probewise.app.design_value import ElementFigures, ValueFigures
from probewise.app.justification import value_letter, value_table

CHOICE = ElementFigures(
    name="Culvert bed",
    kind="choice",
    boundary="Alluvial clay",
    adverse="deeper",
    fractile=0.95,
    cells=40,
    width_now_m=2.345,
    level_now_m=4.61,
    level_after_m=4.3,
    cost_now=100_000.0,
    cost_expected=130_004.0,
    p_cheaper=0.8,
    cheaper_now=True,
    threshold_m=5.0,
    cheaper_cost=100_000.0,
    robust_cost=250_000.0,
)
QUANTITY = ElementFigures(
    name="Soil mixing",
    kind="quantity",
    boundary="Alluvial clay",
    adverse="shallower",
    fractile=0.9,
    cells=64,
    width_now_m=1.5,
    level_now_m=3.21,
    level_after_m=3.4,
    cost_now=12_345.0,
    cost_expected=11_000.0,
)


def figures(gi_cost: float) -> ValueFigures:
    return ValueFigures("Grid A", "EUR", gi_cost, (CHOICE, QUANTITY), ("Grid B", 5_000.0), 3)


def test_a_choice_the_readings_may_overturn_is_said_with_both_chances():
    text = " ".join(value_letter(figures(8_000.0)))
    assert "80% chance of confirming the cheaper design and a 20% chance of overturning it" in text
    # a choice can lose money: the cheaper design now may be overturned (30,004 more expected)
    assert "saving minus EUR 30,000" in text
    assert "the cheaper design stands at EUR 100,000" in text


def test_an_option_that_does_not_pay_for_itself_says_so_and_names_the_best():
    figs = figures(8_000.0)
    # net value = (112,345 - 141,004) - 8,000 = -36,659 (worked by hand)
    assert round(figs.net_value) == -36_659
    text = " ".join(value_letter(figs))
    assert "a net value of minus EUR 36,660" in text and "do not pay for it" in text
    assert "Of the 3 options compared, Grid B has the highest net value (EUR 5,000)" in text
    assert "P10" in text  # 0.9 with shallower adverse: the cautious level is the P10


def test_the_letter_quotes_the_table_text():
    figs = figures(8_000.0)
    table = value_table(figs)
    text = " ".join(value_letter(figs))
    for row in table["rows"]:
        for key in ("width", "level_now", "level_after", "cost_now", "cost_expected"):
            assert row[key] in text, (row["name"], key)
    for key in ("cost_now", "cost_expected", "gi_cost"):
        assert table[key] in text, key
    assert table["net_value"] == "minus 36,660"
