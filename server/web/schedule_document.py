"""The schedule as an issued document: document control and health and safety notes.

What the Schedule page's screen-only forms write into the model file (its optional ``document``
and ``safety`` sections, docs/model-file.md) and what the printed schedule reads back. The
edits run through ``probewise.web.edits.run_edit`` like every model edit: one revision each,
undo, problems beside their fields.
"""

from __future__ import annotations

from datetime import date
from typing import Any

from probewise.io.model_document import HAZARDS, MAX_NAME, MAX_NOTE
from probewise.web.forms import FormReader

DOCUMENT_FIELDS = (
    ("reference", "Document reference"),
    ("status", "Issue status"),
    ("prepared_by", "Prepared by"),
    ("checked_by", "Checked by"),
    ("approved_by", "Approved by"),
)
STATUS_SUGGESTIONS = ("Draft", "For comment", "For approval", "For tender", "For construction")


def document_of(model: dict) -> dict[str, Any]:
    """The ``document`` section with every field present (blank when not set)."""
    doc = dict(model.get("document") or {})
    for key, _label in DOCUMENT_FIELDS:
        doc.setdefault(key, "")
    doc["issues"] = list(doc.get("issues") or [])
    return doc


def hazards_of(model: dict) -> list[dict[str, str]]:
    """The hazard headings in printed order, each with its prompt and the project's text."""
    written = (model.get("safety") or {}).get("hazards") or {}
    return [
        {"key": key, "heading": heading, "prompt": prompt, "text": written.get(key, "")}
        for key, (heading, prompt) in HAZARDS.items()
    ]


def safety_notes_of(model: dict) -> str:
    return (model.get("safety") or {}).get("notes") or ""


def edit_document(reader: FormReader, model: dict) -> str:
    """The document control form into ``model["document"]`` (issues are kept)."""
    doc = dict(model.get("document") or {})
    for key, _label in DOCUMENT_FIELDS:
        doc[key] = reader.text(key, f"document.{key}", required=False, max_len=MAX_NAME)
    doc.setdefault("issues", [])
    model["document"] = doc
    return "Changed the schedule's document control"


def edit_safety(reader: FormReader, model: dict) -> str:
    """The health and safety form into ``model["safety"]``: blank headings are left out."""
    hazards = {}
    for key in HAZARDS:
        text = reader.text(
            f"hazard_{key}", f"safety.hazards.{key}", required=False, max_len=MAX_NOTE
        )
        if text:
            hazards[key] = text
    notes = reader.text("notes", "safety.notes", required=False, max_len=MAX_NOTE)
    model["safety"] = {**(model.get("safety") or {}), "notes": notes, "hazards": hazards}
    return "Changed the health and safety notes"


def add_issue(reader: FormReader, model: dict) -> str:
    """One more issue at the end of the revision history; the document's status follows it."""
    doc = dict(model.get("document") or {})
    issues = list(doc.get("issues") or [])
    path = f"document.issues[{len(issues)}]"
    issue = {
        "revision": reader.text("revision", f"{path}.revision", max_len=20),
        "date": reader.text("date", f"{path}.date", max_len=10) or date.today().isoformat(),
        "status": reader.text("status", f"{path}.status", required=False, max_len=MAX_NAME),
        "description": reader.text(
            "description", f"{path}.description", required=False, max_len=MAX_NOTE
        ),
        "by": reader.text("by", f"{path}.by", required=False, max_len=MAX_NAME),
    }
    issues.append(issue)
    doc["issues"] = issues
    if issue["status"]:
        doc["status"] = issue["status"]
    model["document"] = doc
    return f"Recorded issue {issue['revision']} of the schedule"


def remove_last_issue(model: dict) -> str:
    doc = dict(model.get("document") or {})
    issues = list(doc.get("issues") or [])
    if not issues:
        return "Nothing to remove"
    gone = issues.pop()
    doc["issues"] = issues
    model["document"] = doc
    return f"Removed issue {gone.get('revision', '')} from the schedule's history"


def appendix_sources(model: dict) -> list[tuple[str, list[str]]]:
    """The schedule's appendix: where its inputs came from, by heading (empty ones left out)."""
    methods = [f"{m['id']}: {m.get('name') or m['id']}" for m in model.get("methods") or []]
    bounds = [
        f"Base of {b['base_of']}: {b['source']}"
        for b in model.get("bounds") or []
        if b.get("source")
    ]
    stages = sorted({str(p.get("stage")) for p in model.get("existing") or [] if p.get("stage")})
    existing = model.get("existing") or []
    probes = (
        [f"{len(existing)} earlier probes" + (f" (stages: {', '.join(stages)})" if stages else "")]
        if existing
        else []
    )
    sections = [
        ("Investigation methods, rates and prices (the project's own figures)", methods),
        ("Limits on boundary depths", bounds),
        ("Earlier investigation", probes),
    ]
    return [(title, items) for title, items in sections if items]
