"""Reading a posted form: the FastAPI dependency and a lenient reader that collects problems.

``FormReader`` reads fields by name; a number that does not parse is kept as typed (so the
page shows it back) and recorded as a problem of its model path, never raised.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from typing import Annotated, Any

from fastapi import Depends, Request
from starlette.datastructures import FormData, UploadFile

from probewise.errors import InputError
from probewise.numbers import read_number

FORM_MAX_FIELDS = 5000  # a precision table or a zone's overrides: far below this
FORM_MAX_FILES = 4


# ---------------------------------------------------------------- reading forms


async def read_form(request: Request) -> FormData:
    """FastAPI dependency: the posted form (urlencoded or multipart), fields by name."""
    return await request.form(max_files=FORM_MAX_FILES, max_fields=FORM_MAX_FIELDS)


# In a route signature: ``def save(form: PostedForm): ...`` (a sync route runs in a thread)
PostedForm = Annotated[FormData, Depends(read_form)]


class FormReader:
    """Reads one submitted form, collecting problems by model path instead of raising."""

    def __init__(self, form: Mapping[str, Any] | FormData):
        self.form = form
        self.problems: list[InputError] = []

    def raw(self, name: str) -> str:
        value = self.form.get(name)
        if value is None or isinstance(value, UploadFile):
            return ""
        return str(value)

    def values(self) -> dict[str, str]:
        """The text fields as submitted (what an add form shows back after a refusal)."""
        items = self.form.multi_items() if isinstance(self.form, FormData) else self.form.items()
        return {k: str(v) for k, v in items if not isinstance(v, UploadFile)}

    def problem(self, path: str, text: str) -> None:
        self.problems.append(InputError(path, text))

    def text(self, name: str, path: str, *, required: bool = True, max_len: int = 200) -> str:
        value = self.raw(name).strip()
        if required and not value:
            self.problem(path, "is required")
        elif len(value) > max_len:
            self.problem(path, f"is longer than {max_len} characters")
        return value

    def number(
        self, name: str, path: str, *, required: bool = True, money: bool = False
    ) -> float | str | None:
        """A float; None when blank (a problem if required); the text as typed when bad.

        A decimal comma is read ("4,5"); for ``money`` thousands separators come first, so
        "2,500" is 2500 there and 2.5 elsewhere."""
        text = self.raw(name).strip()
        if not text:
            if required:
                self.problem(path, "is required")
            return None
        try:
            return read_number(text, path, decimal_comma=True, money=money)
        except InputError as exc:
            self.problems.append(exc)
            return text

    def choice(self, name: str, path: str, choices: Iterable[str]) -> str:
        value = self.raw(name).strip()
        allowed = list(choices)
        if value not in allowed:
            shown = ", ".join(allowed)
            self.problem(path, f"must be one of {shown}" if value else "choose one")
        return value

    def flag(self, name: str) -> bool:
        return self.raw(name).strip().lower() in {"1", "true", "on", "yes"}

    def all(self, name: str) -> list[str]:
        if isinstance(self.form, FormData):
            return [str(v) for v in self.form.getlist(name) if not isinstance(v, UploadFile)]
        value = self.form.get(name)
        return [] if value is None else [str(value)]

    def file(self, name: str) -> UploadFile | None:
        value = self.form.get(name)
        if isinstance(value, UploadFile) and value.filename:
            return value
        return None


def expected_revision_of(form: Mapping[str, Any] | FormData) -> int:
    """The revision the page was showing (the hidden ``expected_revision`` field)."""
    text = str(form.get("expected_revision") or "").strip()
    if not text.isdigit():
        raise InputError(
            "expected_revision", "is missing or not a whole number; reload the page and retry"
        )
    return int(text)
