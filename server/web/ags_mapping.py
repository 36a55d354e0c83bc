"""The mapping step of an AGS import on the Existing information page.

Each geology code gets a project unit (guessed from the words its descriptions share with
the unit names), layers no code places go by ordered text rules on their description
(server/io/probes_mapping.py), and each location type gets a method (guessed from the
trade's usual type codes).
"""

from __future__ import annotations

import re
from typing import Any

from probewise.errors import InputError
from probewise.io import probes_in
from probewise.web.edits import FormReader

# Words too common in soil descriptions to tell units apart when guessing the mapping.
STOPWORDS = frozenset(
    [
        "and",
        "with",
        "of",
        "the",
        "grey",
        "brown",
        "dark",
        "light",
        "soft",
        "firm",
        "stiff",
        "dense",
        "loose",
        "weak",
        "strong",
        "invented",
        "inferred",
        "sandy",
        "silty",
        "clayey",
        "gravelly",
    ]
)


def _words(text: str) -> set[str]:
    return {w for w in re.findall(r"[a-z]+", text.lower()) if len(w) > 2 and w not in STOPWORDS}


def guess_unit(code: str, description: str, units: list[str]) -> str:
    """The unit whose name shares most words with the code's description (or '' if unclear)."""
    by_lower = {u.lower(): u for u in units}
    if code.lower() in by_lower:
        return by_lower[code.lower()]
    words = _words(description) | _words(code)
    scores = [(len(words & _words(u)), u) for u in units]
    best = max((s for s, _u in scores), default=0)
    winners = [u for s, u in scores if s == best]
    return winners[0] if best > 0 and len(winners) == 1 else ""


KIND_BY_TYPE = {
    "borehole": {"CP", "RC", "RO", "WS", "DS", "BH", "CR", "OP", "ROC"},
    "cpt": {"CPT", "CPTU", "SCPT", "SCPTU"},
    "dmt": {"DMT", "SDMT"},
    "trial_pit": {"TP", "TT", "PIT", "HP"},
}


def guess_method(hole_type: str, methods: list[dict]) -> str:
    """A method for an AGS location type (LOCA_TYPE, HOLE_TYPE): the same id, else the first
    of the kind the type usually means (CP: borehole, CPT: cpt...), else one whose id starts
    with it, else ''."""
    upper = hole_type.upper()
    for m in methods:
        if m["id"].upper() == upper:
            return m["id"]
    for kind, types in KIND_BY_TYPE.items():
        if upper in types:
            for m in methods:
                if m.get("kind") == kind:
                    return m["id"]
    for m in methods:
        if upper and m["id"].upper().startswith(upper):
            return m["id"]
    return ""


def ags4_state(
    holes: probes_in.Ags4Holes, reader: FormReader, model: dict, filename: str
) -> dict[str, Any]:
    """The mapping step: codes with counts and the chosen units, types with the chosen methods."""
    units = [u["name"] for u in model["units"]]
    methods = model.get("methods") or []
    rules_text = reader.raw("text_rules")
    rules = read_text_rules(rules_text, model)
    submitted = {
        reader.raw(f"code_{n}"): reader.raw(f"unit_{n}")
        for n in range(500)
        if reader.raw(f"code_{n}")
    }
    codes = []
    for code, description, count in probes_in.ags4_legends(holes):
        chosen = submitted.get(code)
        if chosen is None:  # first reading: a guess, unless text rules are to decide
            chosen = "" if rules else guess_unit(code, description, units)
        codes.append({"code": code, "description": description, "count": count, "unit": chosen})
    mapping = {c["code"]: c["unit"] for c in codes if c["unit"]}
    decided = probes_in.decide_layers(
        holes, probes_in.resolve_mapping(mapping, model), rules, model
    )
    for c in codes:
        c["by_rules"] = not c["unit"] and c["code"] not in decided.undecided
        c["undecided"] = decided.undecided.get(c["code"], 0)
    type_counts: dict[str, int] = {}
    for hole in holes.holes:
        type_counts[hole.type] = type_counts.get(hole.type, 0) + 1
    sent_types = {
        reader.raw(f"type_{n}"): reader.raw(f"method_{n}")
        for n in range(100)
        if f"type_{n}" in reader.form
    }
    types = [
        {"type": t, "count": n, "method": sent_types.get(t, guess_method(t, methods))}
        for t, n in sorted(type_counts.items())
    ]
    return {
        "filename": filename,
        "format": holes.format,
        "n_holes": len(holes.holes),
        "codes": codes,
        "types": types,
        "unit_names": units,
        "result": None,
        "file_problems": list(holes.problems),
        "rules_text": rules_text,
        "rules": rules,
        "rule_hits": decided.hits,
        "thickness": None,
        "undecided": decided.undecided,
    }


MAX_TEXT_RULES = 100


def read_text_rules(text: str, model: dict) -> list[probes_in.TextRule]:
    """Text rules from the form, one ``PATTERN = UNIT`` a line, in order (blank lines skipped)."""
    rules = []
    for n, line in enumerate(text.splitlines(), start=1):
        if not line.strip():
            continue
        pattern, sep, unit = line.rpartition("=")
        where = f"text_rules line {n}"
        rules.append(probes_in.make_text_rule(pattern if sep else "", unit, model, where))
    if len(rules) > MAX_TEXT_RULES:
        raise InputError("text_rules", f"{len(rules)} rules; at most {MAX_TEXT_RULES}")
    return rules
