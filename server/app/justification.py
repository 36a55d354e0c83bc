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
