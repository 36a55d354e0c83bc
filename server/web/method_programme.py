"""The Methods page's refusal rules, rigs and moves of a method, and the project's cost items
(docs/model-file.md "Refusal, programme and cost items"): reading the posted forms into the
model document. The validator names any bad value by its field path."""

from __future__ import annotations

from probewise.io.model_programme import COST_ITEM_KEYS, MAX_RULES
from probewise.web.forms import FormReader


def _whole(value):
    """A whole number typed as one (``2`` or ``2.0``) as an int; anything else as read."""
    if isinstance(value, float) and value.is_integer():
        return int(value)
    return value


def read_method_programme(reader: FormReader, path: str, method: dict) -> None:
    """Rigs, move days, proof of refusal and refusal rules of one method's form into
    ``method``; blank fields leave the key out (its default applies), fields the form does
    not carry leave the method as it was."""
    for key in ("rigs", "move_days"):
        if key not in reader.form:
            continue
        value = reader.number(key, f"{path}.{key}", required=False)
        method.pop(key, None)
        if value is not None:
            method[key] = _whole(value) if key == "rigs" else value
    if reader.raw("proves_refusal_shown"):
        method.pop("proves_refusal", None)
        if not reader.flag("proves_refusal"):
            method["proves_refusal"] = False
    if "refusal_unit_0" not in reader.form:
        return
    rules = []
    for i in range(MAX_RULES):
        if f"refusal_unit_{i}" not in reader.form:
            break
        unit = reader.raw(f"refusal_unit_{i}").strip()
        if not unit:
            continue  # a blank row: no rule
        at = f"{path}.refusal[{len(rules)}]"
        rule: dict = {"unit": unit}
        chance = reader.number(f"refusal_chance_{i}", f"{at}.chance", required=False)
        rule["chance"] = 1.0 if chance is None else chance
        per_metre = reader.number(
            f"predrill_per_metre_{i}", f"{at}.predrill.per_metre", required=False, money=True
        )
        rate = reader.number(f"predrill_rate_{i}", f"{at}.predrill.metres_per_day", required=False)
        if per_metre is not None or rate is not None:
            rule["predrill"] = {"per_metre": 0.0 if per_metre is None else per_metre}
            if rate is None:
                reader.problem(f"{at}.predrill.metres_per_day", "is required to pre-drill")
            else:
                rule["predrill"]["metres_per_day"] = rate
        rules.append(rule)
    method.pop("refusal", None)
    if rules:
        method["refusal"] = rules


def read_cost_items(reader: FormReader, model: dict) -> str:
    """The cost items form into ``model["cost_items"]`` (blank = 0); the change in words."""
    items = {}
    for key in COST_ITEM_KEYS:
        value = reader.number(key, f"cost_items.{key}", required=False, money=True)
        items[key] = 0.0 if value is None else value
    model["cost_items"] = items
    return "Changed the cost items"
