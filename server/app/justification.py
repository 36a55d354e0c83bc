"""The schedule's justification: a short paragraph written from the numbers, plainly rounded.

It says what the chosen option buys compared with the existing information (the width of
the main boundary's P5-P95 band, the confident share of the site, the information gain) and
compared with the cheapest alternative, and whether the option is Pareto-efficient. Nothing
in it is judgement: every clause restates a number the Compare page shows.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass


@dataclass(frozen=True)
class OptionFigures:
    """What the text needs of one option; ``width_m``/``confident`` are of the main boundary
    (weighted mean P5-P95 width in m, confident share 0..1)."""

    name: str
    cost: float
    duration_days: float
    n_probes: int
    metres: float
    gain_bits: float
    width_m: float | None
    confident: float | None


@dataclass(frozen=True)
class MainBoundary:
    """The boundary of interest the text speaks of (the heaviest), before any new probe."""

    name: str
    tolerance_m: float
    width_m: float
    confident: float | None


def money_text(value: float, currency: str) -> str:
    """Rounded to the nearest 10 above 1,000 (estimates, not quotes), with the currency."""
    rounded = round(value, -1) if abs(value) >= 1000 else round(value)
    text = f"{rounded:,.0f}"
    return f"{currency} {text}" if currency else text


def metres_text(value: float) -> str:
    if value >= 100:
        return f"{value:,.0f} m"
    if value >= 10:
        return f"{value:.1f} m".replace(".0 m", " m")
    return f"{value:.2f} m"


def days_text(value: float) -> str:
    """Fieldwork days as the schedule's tables show them (one decimal below ten days), so the
    text and the tables agree."""
    if value < 1:
        return "under a day"
    if value < 10:
        return f"about {value:.1f} days"
    return f"about {value:.0f} days"


def bits_text(value: float) -> str:
    return f"{value:.2f} bits"


def percent_text(value: float) -> str:
    return f"{100 * value:.0f}%"


def dominating_option(chosen: OptionFigures, others: Sequence[OptionFigures]):
    """Another option with at least the gain for at most the cost, one strictly better."""
    for other in others:
        if (
            other.gain_bits >= chosen.gain_bits
            and other.cost <= chosen.cost
            and (other.gain_bits > chosen.gain_bits or other.cost < chosen.cost)
        ):
            return other
    return None


def justification(
    chosen: OptionFigures,
    main: MainBoundary | None,
    others: Sequence[OptionFigures],
    currency: str = "",
) -> list[str]:
    """Sentences (in order) justifying ``chosen``; ``others`` are the other options."""
    sentences = [
        f"{chosen.name} costs about {money_text(chosen.cost, currency)} (mobilisation included) "
        f"and takes {days_text(chosen.duration_days)} of fieldwork: {chosen.n_probes} "
        f"probe{'s' if chosen.n_probes != 1 else ''}, {metres_text(chosen.metres)} in all."
    ]
    if main is not None and chosen.width_m is not None:
        text = (
            f"Against the existing information alone, it narrows the weighted mean P5\u2013P95 "
            f"band of the base of {main.name} from {metres_text(main.width_m)} to "
            f"{metres_text(chosen.width_m)}"
        )
        if main.confident is not None and chosen.confident is not None:
            before, after = percent_text(main.confident), percent_text(chosen.confident)
            where = (
                f"the share of the site where that band is within twice its tolerance "
                f"({metres_text(2 * main.tolerance_m)})"
            )
            if before == after:
                text += f", while {where} stays at {after}"
            else:
                verb = "lifts" if chosen.confident > main.confident else "lowers"
                text += f" and {verb} {where} from {before} to {after}"
        sentences.append(
            text + f"; over all boundaries of interest it gains {bits_text(chosen.gain_bits)}."
        )
    else:
        sentences.append(
            f"Against the existing information alone it gains {bits_text(chosen.gain_bits)} "
            "over the boundaries of interest."
        )

    if others:
        cheapest = min(others, key=lambda o: (o.cost, -o.gain_bits))
        if cheapest.cost < chosen.cost:
            text = (
                f"The cheapest alternative, {cheapest.name} at "
                f"{money_text(cheapest.cost, currency)}, gains {bits_text(cheapest.gain_bits)}"
            )
            if main is not None and cheapest.width_m is not None:
                text += f" (band {metres_text(cheapest.width_m)})"
            extra_gain = chosen.gain_bits - cheapest.gain_bits
            extra_cost = chosen.cost - cheapest.cost
            if extra_gain > 0:
                text += (
                    f"; {chosen.name} buys {bits_text(extra_gain)} more for "
                    f"{money_text(extra_cost, currency)} more."
                )
            else:
                text += f", as much or more for {money_text(extra_cost, currency)} less."
            sentences.append(text)
        else:
            sentences.append(
                f"It is the cheapest of the {len(others) + 1} options compared; the next, "
                f"{cheapest.name} at {money_text(cheapest.cost, currency)}, gains "
                f"{bits_text(cheapest.gain_bits)}."
            )
        better = dominating_option(chosen, others)
        if better is None:
            sentences.append(
                "No other option compared gains as much for less: it is Pareto-efficient."
            )
        else:
            sentences.append(
                f"It is not Pareto-efficient: {better.name} gains "
                f"{bits_text(better.gain_bits)} for {money_text(better.cost, currency)}."
            )
    if chosen.cost > 0 and math.isfinite(chosen.gain_bits):
        per_k = 1000 * chosen.gain_bits / chosen.cost
        unit = f"1,000 {currency}".strip()
        sentences.append(f"That is {per_k:.3f} bits per {unit} spent.")
    return sentences


# ---------------------------------------------------------------- with design elements
# docs/model.md "The value of an investigation": the justification leads with money, written
# like a letter to a client, every figure quoted from the schedule's design value table
# (``value_table``, the same rounding).

BITS_MEANING = (
    "Information gain is counted in bits: 1 bit = the uncertainty (standard deviation) of a "
    "boundary of interest halved."
)


def signed_money_text(value: float, currency: str) -> str:
    """Money with a word for a loss: "minus GBP 1,230"."""
    text = money_text(abs(value), currency)
    return f"minus {text}" if money_text(value, "").startswith("-") else text


def fractile_text(fractile: float, adverse: str) -> str:
    """The design fractile as the trade writes it: P95 (deeper adverse) or P5 (shallower)."""
    q = fractile if adverse == "deeper" else 1.0 - fractile
    return f"P{100 * q:.4g}"


def chance_text(element) -> str:
    """What the option may do to a choice element's design, as the table shows it."""
    if element.p_cheaper is None:
        return "\u2014"
    if element.cheaper_now:
        return (
            f"confirms the cheaper design {percent_text(element.p_cheaper)}, "
            f"overturns it {percent_text(1.0 - element.p_cheaper)}"
        )
    return f"makes the cheaper design acceptable {percent_text(element.p_cheaper)}"


def value_table(figures) -> dict:
    """The schedule's design value table as text (``figures``: ``ValueFigures``): the rows the
    letter quotes, money without the currency (the header names it)."""
    rows = [
        {
            "name": e.name,
            "boundary": e.boundary,
            "basis": f"{fractile_text(e.fractile, e.adverse)}, {e.adverse} adverse",
            "kind": e.kind,
            "cells": e.cells,
            "width": metres_text(e.width_now_m),
            "level_now": metres_text(e.level_now_m),
            "level_after": metres_text(e.level_after_m),
            "threshold": metres_text(e.threshold_m) if e.threshold_m is not None else "\u2014",
            "cost_now": money_text(e.cost_now, ""),
            "cost_expected": money_text(e.cost_expected, ""),
            "saving": signed_money_text(e.expected_saving, ""),
            "chance": chance_text(e),
        }
        for e in figures.elements
    ]
    return {
        "rows": rows,
        "cost_now": money_text(figures.design_cost_now, ""),
        "cost_expected": money_text(figures.design_cost_expected, ""),
        "saving": signed_money_text(figures.expected_saving, ""),
        "gi_cost": money_text(figures.gi_cost, ""),
        "net_value": signed_money_text(figures.net_value, ""),
    }


def _element_now(e, cur: str) -> str:
    basis = fractile_text(e.fractile, e.adverse)
    known = (
        f"{e.name}: the base of {e.boundary} is known only to within a P5\u2013P95 band of "
        f"{metres_text(e.width_now_m)} on average"
    )
    if e.p_cheaper is None:
        return (
            f"{known}, so it is designed at its cautious level ({basis}, "
            f"{metres_text(e.level_now_m)} on average), which costs about "
            f"{money_text(e.cost_now, cur)}."
        )
    limit = "deeper" if e.adverse == "deeper" else "shallower"
    verdict = (
        f"so the cheaper design stands at {money_text(e.cost_now, cur)}"
        if e.cheaper_now
        else f"so the robust design is needed, at {money_text(e.cost_now, cur)}"
    )
    return (
        f"{known}; the cheaper design needs the cautious level ({basis}) of its average depth no "
        f"{limit} than {metres_text(e.threshold_m)}, and on the existing information that level "
        f"is {metres_text(e.level_now_m)}, {verdict}."
    )


def _element_after(e, cur: str) -> str:
    money = (
        f"expected cost {money_text(e.cost_expected, cur)}, saving "
        f"{signed_money_text(e.expected_saving, cur)}"
    )
    level = f"the cautious level expected at {metres_text(e.level_after_m)}"
    if e.p_cheaper is None:
        return (
            f"For {e.name} it is expected to move the cautious level to "
            f"{metres_text(e.level_after_m)} ({money})."
        )
    if e.cheaper_now:
        return (
            f"For {e.name} it has a {percent_text(e.p_cheaper)} chance of confirming the cheaper "
            f"design and a {percent_text(1.0 - e.p_cheaper)} chance of overturning it ({level}; "
            f"{money})."
        )
    return (
        f"For {e.name} it has a {percent_text(e.p_cheaper)} chance of showing that the cheaper "
        f"design is acceptable after all ({level}; {money})."
    )


def value_letter(figures) -> list[str]:
    """The justification's opening with design elements (``figures``: ``ValueFigures``): what is
    uncertain, what it costs in the design now, what the option is expected to save, net of
    its cost, and the chance it confirms or overturns each design choice."""
    cur = figures.currency
    n = len(figures.elements)
    sentences = [
        f"The design of {n} element{'s' if n != 1 else ''} of the works depends on ground that "
        "is not yet known well enough, so each is designed to a cautious level."
    ]
    sentences += [_element_now(e, cur) for e in figures.elements]
    net = figures.net_value
    verdict = (
        f"a net value of {signed_money_text(net, cur)} after paying for it"
        if net >= 0
        else f"a net value of {signed_money_text(net, cur)}: on these figures the design "
        "savings alone do not pay for it"
    )
    sentences.append(
        f"In all, the uncertainty is priced into the design at about "
        f"{money_text(figures.design_cost_now, cur)} on the existing information. "
        f"{figures.option} costs {money_text(figures.gi_cost, cur)} and is expected to bring "
        f"that to {money_text(figures.design_cost_expected, cur)}: an expected saving of "
        f"{signed_money_text(figures.expected_saving, cur)}, {verdict}."
    )
    sentences += [_element_after(e, cur) for e in figures.elements]
    if figures.best is not None and figures.n_options > 1:
        name, best_net = figures.best
        if name != figures.option:
            sentences.append(
                f"Of the {figures.n_options} options compared, {name} has the highest net value "
                f"({signed_money_text(best_net, cur)})."
            )
        else:
            sentences.append(
                f"None of the other {figures.n_options - 1} options compared has a higher net "
                "value."
            )
    sentences.append(
        "These are expectations over the readings the investigation may return, not promises; "
        "the design value table gives each figure."
    )
    sentences.append(BITS_MEANING)
    return sentences
