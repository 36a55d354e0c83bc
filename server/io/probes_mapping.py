"""Layers to project units: by geology code, then by ordered text rules on the description.

A code mapping (code -> unit, or "-" to leave the code out) decides every layer of a mapped
code. Where it does not decide, text rules ``PATTERN=UNIT`` are tried in order against the
layer's description and the first that matches decides (``UNIT`` "-" leaves the layer out).
A pattern is a case-insensitive substring, or a regular expression when written ``/.../``
(Python's ``re`` syntax, also case-insensitive). Each rule reports how many layers it caught,
with examples, so a rule that catches too much or nothing shows in the preview.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from probewise.errors import InputError
from probewise.io.probes_common import IGNORE_CODES, Ags4Holes, _unit_lookup

MAX_EXAMPLES = 3
MAX_PATTERN_CHARS = 200


@dataclass(frozen=True)
class TextRule:
    """One ordered rule: layers whose description matches ``pattern`` go to ``unit``."""

    pattern: str  # as written, e.g. "(FILL)" or "/marine\\s+deposit/"
    unit: str | None  # a unit name of the model, None to leave the layer out
    regex: re.Pattern = field(repr=False, compare=False)

    @property
    def unit_label(self) -> str:
        return self.unit if self.unit is not None else "(left out)"

    def matches(self, text: str) -> bool:
        return self.regex.search(text) is not None


@dataclass
class RuleHits:
    """What one rule caught: the number of layers and a few examples ("BH3 2-5 m: ...")."""

    rule: TextRule
    layers: int = 0
    examples: list[str] = field(default_factory=list)


@dataclass(frozen=True)
class LayerUnits:
    """The decision for every layer of a file: (hole id, layer index) -> unit index or None."""

    unit_of: dict[tuple[str, int], int | None]
    by_code: int  # layers decided by the code mapping
    hits: list[RuleHits]  # per rule, in rule order
    undecided: dict[str, int]  # code -> layers that neither a code nor a rule decided


def parse_text_rules(items: list[str] | None, model: dict, option: str) -> list[TextRule]:
    """Rules from ``["PATTERN=UNIT", ...]`` (the last "=" splits), in the order given.

    InputError naming ``option`` and the rule for an empty pattern, a bad regular expression
    or a unit the model does not have.
    """
    rules = []
    for item in items or []:
        pattern, sep, unit = item.rpartition("=")
        rules.append(make_text_rule(pattern if sep else "", unit, model, f"{option} {item!r}"))
    return rules


def make_text_rule(pattern: str, unit: str, model: dict, where: str) -> TextRule:
    """One rule (see parse_text_rules); ``where`` names the rule in messages."""
    units, by_lower = _unit_lookup(model)
    pattern = pattern.strip()
    if not pattern:
        raise InputError(where, "expected PATTERN=UNIT with a pattern before the last '='")
    if len(pattern) > MAX_PATTERN_CHARS:
        raise InputError(where, f"the pattern is over {MAX_PATTERN_CHARS} characters")
    if len(pattern) > 2 and pattern.startswith("/") and pattern.endswith("/"):
        try:
            regex = re.compile(pattern[1:-1], re.IGNORECASE)
        except re.error as exc:
            raise InputError(where, f"is not a valid regular expression ({exc})") from None
    else:
        regex = re.compile(re.escape(pattern), re.IGNORECASE)
    text = unit.strip()
    if text in IGNORE_CODES:
        return TextRule(pattern, None, regex)
    name = by_lower.get(text.lower())
    if name is None:
        raise InputError(where, f"'{text}' is not a unit of the model ({', '.join(units)})")
    return TextRule(pattern, name, regex)


def decide_layers(
    holes: Ags4Holes, code_to_unit: dict[str, int | None], rules: list[TextRule], model: dict
) -> LayerUnits:
    """Every layer's unit: the code mapping first, then the first text rule that matches."""
    units, _ = _unit_lookup(model)
    index = {name: i for i, name in enumerate(units)}
    hits = [RuleHits(rule) for rule in rules]
    unit_of: dict[tuple[str, int], int | None] = {}
    undecided: dict[str, int] = {}
    by_code = 0
    for hole in holes.holes:
        for n, layer in enumerate(hole.layers):
            if layer.code in code_to_unit:
                unit_of[(hole.id, n)] = code_to_unit[layer.code]
                by_code += 1
                continue
            for hit in hits:
                if hit.rule.matches(layer.description):
                    unit = hit.rule.unit
                    unit_of[(hole.id, n)] = None if unit is None else index[unit]
                    hit.layers += 1
                    if len(hit.examples) < MAX_EXAMPLES:
                        hit.examples.append(
                            f"{hole.id} {layer.top_m:g}-{layer.base_m:g} m: {layer.description}"
                        )
                    break
            else:
                undecided[layer.code] = undecided.get(layer.code, 0) + 1
    return LayerUnits(unit_of, by_code, hits, undecided)


def undecided_error(undecided: dict[str, int], field_name: str = "mapping") -> InputError:
    """The refusal for layers no code mapping nor text rule placed."""
    shown = ", ".join(f"{code} ({n} layer{'s' if n != 1 else ''})" for code, n in undecided.items())
    return InputError(
        field_name,
        f"no unit for geology code(s) {shown}; map each code to a unit or leave it out, "
        "or add a text rule that matches their descriptions",
    )
