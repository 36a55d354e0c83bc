"""The model file's optional ``document`` and ``safety`` sections: the schedule as an issued
document (docs/model-file.md "Document control and health and safety notes").

- ``document``: who prepared, checked and approved the schedule, its issue status, a reference,
  and the revision history of its issues (newest last).
- ``safety``: health and safety notes for the site, free text under the usual headings (buried
  services, unexploded ordnance, contamination, water, access, permits) plus general notes.

Both are fields of ``probewise.io.model_schema.ModelFile``; nothing numeric depends on them.
"""

from __future__ import annotations

import datetime as dt
from typing import Annotated

from pydantic import AfterValidator, BaseModel, ConfigDict, Field

from probewise.io.model_common import ProblemError

MAX_NAME = 120
MAX_NOTE = 4000

# key: (heading, prompt). The order is the printed order.
HAZARDS: dict[str, tuple[str, str]] = {
    "buried_services": (
        "Buried services",
        "Which utility records were obtained; cable avoidance tool and hand-dug inspection pits "
        "before any probe; services known near the probes.",
    ),
    "unexploded_ordnance": (
        "Unexploded ordnance",
        "Outcome of a desk study or risk assessment; whether specialist clearance or "
        "magnetometer-led probing is needed.",
    ),
    "contamination": (
        "Contamination",
        "Known or suspected contaminated ground or groundwater; protective equipment, "
        "arisings and waste disposal.",
    ),
    "water": (
        "Water",
        "Work near or over water, flooding, tides; groundwater strikes, artesian pressure; "
        "sealing of holes.",
    ),
    "access": (
        "Access",
        "Entry routes, ground bearing for rigs, overhead lines, traffic management, "
        "working hours, landowner contacts.",
    ),
    "permits": (
        "Permits and consents",
        "Permits to dig, landowner and regulator consents, protected species or sites, "
        "notifications required before work starts.",
    ),
}


def _text(max_len: int):
    def check(value: str) -> str:
        if len(value) > max_len:
            raise ProblemError("", f"is too long ({len(value)} characters; at most {max_len})")
        return value

    return AfterValidator(check)


def _required(value: str) -> str:
    if not value.strip():
        raise ProblemError("", "must not be empty")
    return value


def _iso_date(value: str) -> str:
    try:
        dt.date.fromisoformat(value)
    except ValueError:
        raise ProblemError("", f'must be a date written YYYY-MM-DD (not "{value}")') from None
    return value


Short = Annotated[str, _text(MAX_NAME)]
Note = Annotated[str, _text(MAX_NOTE)]


class _Base(BaseModel):
    model_config = ConfigDict(
        strict=True, allow_inf_nan=False, extra="allow", populate_by_name=True
    )


class Issue(_Base):
    """One issue of the schedule: its revision mark, date, status and what changed."""

    revision: Annotated[str, AfterValidator(_required), _text(20)]
    date: Annotated[str, AfterValidator(_iso_date)]
    status: Short = ""
    description: Note = ""
    by: Short = ""


class DocumentControl(_Base):
    reference: Short = ""
    prepared_by: Short = ""
    checked_by: Short = ""
    approved_by: Short = ""
    status: Short = ""
    issues: list[Issue] = Field(default_factory=list)


def _known_hazards(value: dict[str, str]) -> dict[str, str]:
    for key in value:
        if key not in HAZARDS:
            raise ProblemError(key, f"is not a hazard heading (known: {', '.join(HAZARDS)})")
    return value


class SafetyNotes(_Base):
    notes: Note = ""
    hazards: Annotated[dict[str, Note], AfterValidator(_known_hazards)] = Field(
        default_factory=dict
    )
