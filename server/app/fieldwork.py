"""Fieldwork done: the planned probes of a layout recorded as existing probes of a named stage.

Each planned probe that was drilled gets its as-drilled position, its final depth and the depth
at which it found the base of each unit: a depth, nothing (not found above the final depth: no
reading, as the model file records it) or "absent" (the unit is missing there: its base is
recorded at the base of the unit above, 0 m for the first unit; equal depths, docs/model-file.md).
The new probes carry the stage label (docs/model.md "Readings against predictions"), so the
readings of the stage are checked against what the earlier stages predicted. The layout stays
as the record of the plan and is marked with ``recorded_stage``.

Problems name the field: ``stage``, ``layout``, ``found[i].final_depth_m`` or
``found[i].observed.<unit>`` (``i``: the probe's position in the layout), or for an imported
file ``<file>: <probe id>``. Nothing here writes a store.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass, field

from probewise.errors import InputError
from probewise.io.model_structure import MAX_STAGE_CHARS
from probewise.io.probes_common import DEPTH_TOL_M

ABSENT = "absent"  # what a cell says for a unit the probe passed without meeting


@dataclass(frozen=True)
class ProbeFound:
    """What one planned probe found.

    ``row`` is its position in the layout; ``bases`` maps a unit name to the depth (m) of its
    base or to ``ABSENT``; a unit left out was not found above the final depth.
    """

    row: int
    id: str
    x: float
    y: float
    final_depth_m: float
    bases: dict[str, float | str] = field(default_factory=dict)


class FieldworkError(InputError):
    """Every problem of a fieldwork entry; ``field``/``problem`` are the first one's."""

    def __init__(self, field_name: str, problem: str, problems: list[InputError]):
        super().__init__(field_name, problem)
        self.problems = problems


def layout_entry(model: dict, name: str) -> tuple[int, dict]:
    """The position and the entry of a layout of the model document (InputError ``layout``)."""
    for k, layout in enumerate(model.get("layouts") or []):
        if layout.get("name") == name:
            return k, layout
    known = ", ".join(repr(lay.get("name")) for lay in model.get("layouts") or []) or "none"
    raise InputError("layout", f"no layout is named {name!r} (layouts: {known})")


def used_stages(model: dict) -> dict[str, int]:
    """Stage labels of the existing probes (first met first) with their probe counts."""
    counts: dict[str, int] = {}
    for probe in model.get("existing") or []:
        stage = probe.get("stage")
        if isinstance(stage, str):
            counts[stage] = counts.get(stage, 0) + 1
    return counts


def check_stage_name(model: dict, stage: str) -> str:
    """The stage label, trimmed; refused when empty, too long or already used."""
    text = (stage or "").strip()
    if not text:
        raise InputError("stage", "give the stage a name (e.g. 'Phase 2')")
    if len(text) > MAX_STAGE_CHARS:
        raise InputError("stage", f"is longer than {MAX_STAGE_CHARS} characters")
    used = used_stages(model)
    if text in used:
        raise InputError(
            "stage",
            f"{text!r} is already the stage of {used[text]} existing probe(s); give the new "
            "stage its own name (readings are predicted from earlier stages only)",
        )
    return text


def resolve_bases(
    units: list[str], found: ProbeFound, at: str
) -> tuple[dict[str, float], list[InputError]]:
    """The observed bases of one probe: absences resolved, each base checked.

    ``units``: the units with a base (all but the basal one), top down. Returns the bases
    (unit -> depth m, in unit order) and the problems, each naming ``{at}.observed.<unit>``.
    """
    observed: dict[str, float] = {}
    problems: list[InputError] = []
    above: tuple[str, float] | None = None  # the nearest base above that is known
    for j, unit in enumerate(units):
        where = f"{at}.observed.{unit}"
        value = found.bases.get(unit)
        if value is None:  # not found above the final depth: no reading
            continue
        if value == ABSENT:
            if j == 0:
                value = 0.0
            elif units[j - 1] in observed:
                value = observed[units[j - 1]]
            else:
                problems.append(
                    InputError(
                        where,
                        f"'absent' records the base at the base of {units[j - 1]!r}, which "
                        "is not given; give that depth or this one",
                    )
                )
                continue
        depth = float(value)
        if depth < 0:
            problems.append(InputError(where, f"{depth:g} m is above ground (depths are >= 0)"))
            continue
        if depth > found.final_depth_m + DEPTH_TOL_M:
            problems.append(
                InputError(
                    where,
                    f"{depth:g} m is below the final depth {found.final_depth_m:g} m; leave it "
                    "empty if the base was not found above the final depth",
                )
            )
            continue
        if above is not None and depth < above[1] - DEPTH_TOL_M:
            problems.append(
                InputError(
                    where,
                    f"{depth:g} m is above the base of {above[0]!r} at {above[1]:g} m (depths "
                    "must not decrease down the units; equal depths record an absent unit)",
                )
            )
            continue
        observed[unit] = depth
        above = (unit, depth)
    return observed, problems


def record_fieldwork(
    model: dict, layout_name: str, stage: str, found: list[ProbeFound]
) -> tuple[dict, str]:
    """A new model document with the found probes added as existing probes of ``stage``.

    Returns the document and the revision message. Raises the first InputError (every problem
    of the input is checked before anything is built; nothing is changed in ``model``).
    """
    k, layout = layout_entry(model, layout_name)
    label = check_stage_name(model, stage)
    if layout.get("recorded_stage") in used_stages(model):  # its probes are still there
        raise InputError(
            "layout",
            f"the fieldwork of {layout_name!r} is already recorded as stage "
            f"{layout['recorded_stage']!r}; undo that change to record it again",
        )
    if not found:
        raise InputError("found", "no probe is marked as drilled; tick the probes done")
    planned = layout.get("probes") or []
    units = [u["name"] for u in model["units"][:-1]]
    held = {p["id"] for p in model.get("existing") or []}
    problems: list[InputError] = []
    probes: list[dict] = []
    seen: set[int] = set()
    for item in found:
        at = f"found[{item.row}]"
        if not 0 <= item.row < len(planned) or planned[item.row]["id"] != item.id:
            problems.append(InputError(f"{at}.id", f"{item.id!r} is not a planned probe here"))
            continue
        if item.row in seen:
            problems.append(InputError(f"{at}.id", f"{item.id!r} is given twice"))
            continue
        seen.add(item.row)
        if item.id in held:
            problems.append(
                InputError(
                    f"{at}.id",
                    f"{item.id!r} is already an existing probe; rename the planned probe first",
                )
            )
        if not item.final_depth_m > 0:
            problems.append(InputError(f"{at}.final_depth_m", "must be above 0 m"))
            continue
        observed, bad = resolve_bases(units, item, at)
        problems.extend(bad)
        probes.append(
            {
                "id": item.id,
                "method": planned[item.row]["method"],
                "x": float(item.x),
                "y": float(item.y),
                "final_depth_m": float(item.final_depth_m),
                "observed": observed,
                "stage": label,
            }
        )
    if problems:
        first = problems[0]
        more = len(problems) - 1
        suffix = f" (and {more} more problem{'s' if more > 1 else ''})" if more else ""
        raise FieldworkError(first.field, first.problem + suffix, problems)
    out = copy.deepcopy(model)
    out["existing"] = list(out.get("existing") or []) + probes
    out["layouts"][k]["recorded_stage"] = label
    n = len(probes)
    message = (
        f"Recorded the fieldwork of {layout_name} as stage {label} "
        f"({n} probe{'s' if n != 1 else ''})"
    )
    return out, message


def found_from_probes(
    model: dict, layout_name: str, probes: list[dict], filename: str
) -> list[ProbeFound]:
    """Imported probes (model-file "existing" entries from the probe readers) matched to the
    layout's planned probes by id; an id the layout does not plan is refused, naming it."""
    _, layout = layout_entry(model, layout_name)
    rows = {p["id"]: i for i, p in enumerate(layout.get("probes") or [])}
    unknown = [p["id"] for p in probes if p["id"] not in rows]
    if unknown:
        shown = ", ".join(repr(i) for i in unknown[:10])
        more = f" and {len(unknown) - 10} more" if len(unknown) > 10 else ""
        raise InputError(
            f"{filename}: {unknown[0]}",
            f"probe id(s) {shown}{more} are not planned probes of {layout_name!r}; the ids "
            "in the file must match the layout's",
        )
    return [
        ProbeFound(
            row=rows[p["id"]],
            id=p["id"],
            x=float(p["x"]),
            y=float(p["y"]),
            final_depth_m=float(p["final_depth_m"]),
            bases=dict(p.get("observed") or {}),
        )
        for p in probes
    ]
