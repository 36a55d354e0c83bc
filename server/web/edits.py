"""Editing a project from a form: load, apply, validate, save as a revision, map the errors.

Every model-editing page (Site, Ground model, Existing, Methods) posts its forms here through
``run_edit``; the pages differ only in the edit function they pass and in how they render.

- ``FormReader`` reads form fields leniently: a number that does not parse is kept as typed
  (so the page shows it back) and recorded as a problem of its model path.
- ``run_edit(db, project_id, expected_revision, edit, ...)`` refuses a stale page (409, store
  unchanged), applies ``edit(model) -> message`` to a copy, checks the result with the
  model-file validator (every problem, not only the first), saves it with ``save_project``
  and returns an ``EditResult`` the page renders: the new state and a notice, or the user's
  input with each problem beside its field (422).
- ``FieldErrors`` places problems in templates: ``errors.at("units[2].thickness_m")`` gives
  the problems at that model path or below it; problems on parts the page does not show (an
  existing probe broken by reordering units) go to the edit's ``fallback`` slot.
- ``run_undo`` undoes the last change for any page; ``last_change`` names it for the header.
- ``EditPage`` is one page: its templates and context, and the edits every page has (a field
  edit, adding an item from an add form, removing one, storing an imported file, undo).
"""

from __future__ import annotations

import copy
import re
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import Annotated, Any

import sqlite_utils
from fastapi import Depends, Request
from starlette.datastructures import FormData, UploadFile

from server.errors import InputError
from server.io.model_file import validate_all
from server.numbers import read_number
from server.store import (
    StoredProject,
    get_project,
    list_revisions,
    save_project,
    undo,
)
from server.store.errors import NothingToUndo, ProjectDeleted, StaleRevision
from server.web.deps import Db
from server.web.templating import (
    is_htmx,
    render,
    render_action,
    render_page_or_fragment,
)

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

    def number(self, name: str, path: str, *, required: bool = True) -> float | str | None:
        """A float; None when blank (a problem if required); the text as typed when bad."""
        text = self.raw(name).strip()
        if not text:
            if required:
                self.problem(path, "is required")
            return None
        try:
            return read_number(text, path, decimal_comma=True)
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


# ---------------------------------------------------------------- errors in templates


def path_is_under(path: str, prefix: str) -> bool:
    """``units[2].thickness_m.min`` is under ``units[2]`` and ``units[2].thickness_m``."""
    if not prefix:
        return True
    return path == prefix or path.startswith(prefix + ".") or path.startswith(prefix + "[")


@dataclass(frozen=True)
class Problem:
    field: str
    problem: str
    label: str  # the field in words: 'Unit "Alluvial clay", thickness_m'


class FieldErrors:
    """Problems of one refused edit, looked up by the model path of a form field.

    ``own``: path prefixes the page shows fields for; a problem under none of them (or at the
    top level) is shown at ``fallback`` as well as in the summary.
    """

    def __init__(
        self,
        problems: Iterable[Problem] = (),
        *,
        own: Iterable[str] = (),
        fallback: str | None = None,
    ):
        self.problems = list(problems)
        self.own = tuple(own)
        self.fallback = fallback

    def __bool__(self) -> bool:
        return bool(self.problems)

    def __len__(self) -> int:
        return len(self.problems)

    def _foreign(self, problem: Problem) -> bool:
        return not any(path_is_under(problem.field, prefix) for prefix in self.own)

    def at(self, path: str) -> list[str]:
        """Messages for the field at ``path`` and anything below it (one input's slot)."""
        return [p.problem for p in self.problems if path_is_under(p.field, path)]

    def exact(self, path: str) -> list[str]:
        """Messages at ``path`` itself (a group's or an item's slot); the fallback slot also
        gets the problems of parts the page does not show, named in words."""
        found = [p.problem for p in self.problems if p.field == path]
        if self.fallback is not None and path == self.fallback:
            found += [f"{p.label}: {p.problem}" for p in self.problems if self._foreign(p)]
        return found

    def has(self, path: str) -> bool:
        return bool(self.at(path)) or (path == self.fallback and bool(self.exact(path)))

    def any_under(self, *paths: str) -> bool:
        return any(self.has(p) for p in paths)


NO_ERRORS = FieldErrors()


def _quoted(items: list[Any], index: int, key: str, what: str) -> str:
    try:
        return f'{what} "{items[index][key]}"'
    except (IndexError, KeyError, TypeError):
        return f"{what} {index + 1}"


def describe_field(model: dict, path: str) -> str:
    """A model path in words for a message list: ``existing[3].observed.X`` -> 'Probe "BH1" ...'."""
    match = re.match(r"^([a-z_]+)\[(\d+)\](.*)$", path)
    if not match:
        return {
            "crs": "Coordinate system",
            "grid_spacing_m": "Grid spacing",
            "site": "Site outline",
            "name": "Project name",
            "currency": "Currency label",
            "units": "Units",
        }.get(path.split(".")[0].split("[")[0], path) + (
            f" ({path.split('.', 1)[1]})" if "." in path and not path.startswith("site") else ""
        )
    key, index_text, rest = match.groups()
    index = int(index_text)
    whats = {
        "units": ("name", "Unit"),
        "zones": ("name", "Zone"),
        "areas_of_interest": ("name", "Area of interest"),
        "exclusions": ("name", "Exclusion"),
        "methods": ("id", "Method"),
        "existing": ("id", "Probe"),
        "layouts": ("name", "Layout"),
    }
    items = model.get(key) if isinstance(model.get(key), list) else []
    if key in whats:
        name_key, what = whats[key]
        head = _quoted(items, index, name_key, what)
    elif key in ("boundaries_of_interest", "bounds"):
        what = "Boundary of interest" if key == "boundaries_of_interest" else "Bound"
        try:
            head = f"{what} on the base of {items[index]['base_of']}"
        except (IndexError, KeyError, TypeError):
            head = f"{what} {index + 1}"
    else:
        head = path
        rest = ""
    rest = rest.lstrip(".")
    if key == "layouts" and rest.startswith("probes["):
        inner = re.match(r"^probes\[(\d+)\]\.?(.*)$", rest)
        if inner:
            probes = items[index].get("probes", []) if index < len(items) else []
            head += ", " + _quoted(probes, int(inner.group(1)), "id", "probe")
            rest = inner.group(2)
    return f"{head}, {_rest_in_words(rest)}" if rest else head


_REST_WORDS = (
    (r"^observed\.(.+)$", r"observed base of \1"),
    (r"^precision_m\.(.+)$", r"precision for the base of \1"),
    (r"^units\.(.+)\.thickness_m(.*)$", r"thickness of \1\2"),
    (r"^thickness_m\b", "thickness"),
    (r"^correlation\.range_m$", "correlation range"),
    (r"^cannot_penetrate\[\d+\]$", "cannot penetrate"),
    (r"^final_depth_m$", "final depth"),
    (r"^tolerance_m$", "tolerance"),
)


def _rest_in_words(rest: str) -> str:
    for pattern, words in _REST_WORDS:
        rest = re.sub(pattern, words, rest)
    return rest.replace("_m.", " ").replace(".", " ")


def field_errors(
    model: dict,
    problems: Iterable[InputError],
    *,
    own: Iterable[str] = (),
    fallback: str | None = None,
    remap: Callable[[str], str] | None = None,
) -> FieldErrors:
    items = []
    for problem in problems:
        path = remap(problem.field) if remap else problem.field
        items.append(Problem(path, problem.problem, describe_field(model, problem.field)))
    return FieldErrors(items, own=own, fallback=fallback)


# ---------------------------------------------------------------- running an edit


class EditRefused(InputError):  # noqa: N818 - reads as what happened: the edit was refused
    """An edit the page refuses on purpose (removing a unit others refer to...): status 409."""


@dataclass
class EditResult:
    """What a page renders after an edit, an undo or a refusal."""

    project: StoredProject  # as stored now (after the save, or unchanged)
    model: dict  # the model to show: the user's input when refused, else the stored one
    errors: FieldErrors = field(default_factory=lambda: NO_ERRORS)
    notice: dict | None = None
    status_code: int = 200
    saved: bool = False
    draft: dict[str, str] = field(default_factory=dict)  # the submitted fields, when refused

    @property
    def refused(self) -> bool:
        return self.status_code >= 400


def stale_notice(project: StoredProject, expected: int, page_url: str | None) -> dict:
    text = (
        f"Not saved: the project changed since this page was loaded (it is now at revision "
        f"{project.revision}; the page showed revision {expected}). The page below shows the "
        "current state; check it and make your change again."
    )
    notice = {"kind": "error", "text": text}
    if page_url:
        notice["link"] = {"href": page_url, "text": "Reload the page"}
    return notice


def run_edit(
    db: sqlite_utils.Database,
    project_id: int,
    expected_revision: int,
    edit: Callable[[dict], str],
    *,
    reader: FormReader | None = None,
    own: Iterable[str] = (),
    fallback: str | None = None,
    remap: Callable[[str], str] | None = None,
    keep_input: bool = True,
    page_url: str | None = None,
) -> EditResult:
    """Apply ``edit`` to the project's model and save it as a new revision.

    ``edit(model)`` changes the model dict in place (a deep copy) and returns the revision
    message ("Changed thickness of Alluvial clay"); it may raise InputError (a problem of the
    request: 422) or EditRefused (409). ``reader``: the FormReader the edit read its fields
    with; its problems count as validation problems. ``keep_input``: when refused, show the
    edited model (field edits: the user's values stay in the form) or the stored one
    (structural edits such as adding or moving, whose indices would not match the store).
    ``own``/``fallback``/``remap`` place the problems (see FieldErrors).
    """
    project = get_project(db, project_id)
    draft = reader.values() if reader else {}
    if project.deleted:
        notice = {"kind": "error", "text": "Not saved: this project is deleted (read only)."}
        return EditResult(project, project.model, notice=notice, status_code=409)
    if expected_revision != project.revision:
        notice = stale_notice(project, expected_revision, page_url)
        return EditResult(project, project.model, notice=notice, status_code=409)

    def refused(model: dict, problems: list[InputError], status: int, keep: bool) -> EditResult:
        errors = field_errors(model, problems, own=own, fallback=fallback, remap=remap)
        count = len(problems)
        text = (
            "Not saved: " + problems[0].problem
            if count == 1
            else f"Not saved: {count} problems, each shown beside its field."
        )
        if count == 1 and status == 422:
            text = f"Not saved: {errors.problems[0].label}: {problems[0].problem}."
        return EditResult(
            project,
            model if keep else project.model,
            errors=errors,
            notice={"kind": "error", "text": text},
            status_code=status,
            draft=draft,
        )

    model = copy.deepcopy(project.model)
    try:
        message = edit(model)
    except EditRefused as exc:
        return refused(project.model, [exc], 409, keep=False)
    except InputError as exc:
        problems = (reader.problems if reader else []) + [exc]
        return refused(model, problems, 422, keep=keep_input)

    parse_problems = list(reader.problems) if reader else []
    checked = [
        p
        for p in validate_all(model)
        if not any(
            path_is_under(p.field, q.field) or path_is_under(q.field, p.field)
            for q in parse_problems
        )
    ]
    problems = parse_problems + checked
    if problems:
        return refused(model, problems, 422, keep=keep_input)
    if _same_model(model, project.model):
        notice = {"kind": "info", "text": "Nothing changed, so nothing was saved."}
        return EditResult(project, project.model, notice=notice)
    try:
        revision = save_project(db, project_id, model, expected_revision, message)
    except StaleRevision:
        project = get_project(db, project_id)
        notice = stale_notice(project, expected_revision, page_url)
        return EditResult(project, project.model, notice=notice, status_code=409)
    except ProjectDeleted:
        notice = {"kind": "error", "text": "Not saved: this project is deleted (read only)."}
        return EditResult(project, project.model, notice=notice, status_code=409)
    except InputError as exc:  # the store's own check; validate_all should have caught it
        return refused(model, [exc], 422, keep=keep_input)
    saved = get_project(db, project_id)
    notice = {"kind": "ok", "text": f"Saved as revision {revision}: {message}."}
    return EditResult(saved, saved.model, notice=notice, saved=True)


def _same_model(edited: dict, stored: dict) -> bool:
    """Equal after the validator's normalisation (5 and 5.0 are the same number)."""
    from server.io.model_file import validate_model

    try:
        return validate_model(edited) == stored
    except InputError:
        return False


def run_undo(db: sqlite_utils.Database, project_id: int, expected_revision: int) -> EditResult:
    """Undo the last change (the store's undo chain); refusals come back as notices (409)."""
    try:
        revision = undo(db, project_id, expected_revision=expected_revision)
    except (StaleRevision, NothingToUndo, ProjectDeleted) as exc:
        project = get_project(db, project_id)
        notice = {"kind": "error", "text": f"Not undone: {exc.message}."}
        return EditResult(project, project.model, notice=notice, status_code=409)
    project = get_project(db, project_id)
    notice = {
        "kind": "ok",
        "text": f"Undone: {last_change(db, project_id)}; now at revision {revision}.",
    }
    return EditResult(project, project.model, notice=notice, saved=True)


def last_change(db: sqlite_utils.Database, project_id: int) -> str:
    """The message of the current revision ("Changed thickness of Alluvial clay")."""
    revisions = list_revisions(db, project_id)
    return revisions[-1].message if revisions else ""


# ---------------------------------------------------------------- small shared edit pieces


def item_at(items: list, index: int, path: str, what: str) -> dict:
    """``items[index]`` or a clear refusal (the page is older than the list)."""
    if not 0 <= index < len(items):
        raise EditRefused(path, f"there is no {what} number {index + 1}; reload the page")
    return items[index]


# ---------------------------------------------------------------- page context and rendering


def page_context(
    db: sqlite_utils.Database,
    project: StoredProject,
    step: str,
    *,
    result: EditResult | None = None,
    page_url: str,
    fragment_id: str,
) -> dict[str, Any]:
    """What every model-editing page's templates need (see templates/_edit_head.html)."""
    from server.web.workflow import project_context

    context = project_context(project, step)
    context.update(
        model=result.model if result else project.model,
        stored=project.model,
        errors=result.errors if result else NO_ERRORS,
        notice=result.notice if result else None,
        draft=result.draft if result and result.refused else {},
        last_change=last_change(db, project.id),
        page_url=page_url,
        fragment_id=fragment_id,
        readonly=project.deleted,
    )
    return context


# ---------------------------------------------------------------- one model-editing page


@dataclass(frozen=True)
class ImportArea:
    """Where a page shows an import's preview and its problems: a template whose root element
    has id ``element_id``, swapped alone for htmx so the chosen file stays in its form."""

    template: str  # "_site_import_preview.html"
    element_id: str  # "site-import-preview"


@dataclass(frozen=True)
class EditPage:
    """One model-editing page: its templates, URL and page-specific context.

    ``step`` names everything: the workflow step, the URL part after /projects/{id}/, the page
    and fragment templates ("site.html", "_site.html") and the fragment's root element id.
    ``extra(db, project, model, result)`` returns what the page's own templates need beyond
    ``page_context`` (built from ``model``, the model being shown). ``own``: the model parts
    the page shows fields for (see FieldErrors); the default of every edit made here.
    """

    step: str  # "site"
    title: str  # h1 ("Site")
    extra: Callable[..., dict[str, Any]]
    own: tuple[str, ...] = ()

    @property
    def slug(self) -> str:
        return self.step

    @property
    def page(self) -> str:
        return f"{self.step}.html"

    @property
    def fragment(self) -> str:
        return f"_{self.step}.html"

    @property
    def fragment_id(self) -> str:
        return self.step

    def url(self, project_id: int) -> str:
        return f"/projects/{project_id}/{self.slug}"

    def context(
        self,
        db: sqlite_utils.Database,
        project: StoredProject,
        result: EditResult | None = None,
        **more: Any,
    ) -> dict[str, Any]:
        context = page_context(
            db,
            project,
            self.step,
            result=result,
            page_url=self.url(project.id),
            fragment_id=self.fragment_id,
        )
        context["page_title"] = self.title
        context.update(self.extra(db, project, context["model"], result))
        context.update(more)
        return context

    def show(self, request: Request, db: sqlite_utils.Database, project_id: int, **more: Any):
        """GET: the page, or its fragment for htmx."""
        project = get_project(db, project_id)
        return render_page_or_fragment(
            request, self.page, self.fragment, self.context(db, project, None, **more)
        )

    def answer(self, request: Request, db: sqlite_utils.Database, result: EditResult, **more):
        """POST: the refreshed fragment (htmx), a redirect (plain post) or the page + 4xx."""
        return render_action(
            request,
            self.page,
            self.fragment,
            lambda: self.context(db, result.project, result, **more),
            redirect_to=self.url(result.project.id),
            status_code=result.status_code,
        )

    def edit(
        self,
        request: Request,
        db: sqlite_utils.Database,
        project_id: int,
        form: Mapping[str, Any] | FormData,
        edit: Callable[[dict], str],
        *,
        reader: FormReader | None = None,
        more: Mapping[str, Any] | None = None,
        more_when_refused: Mapping[str, Any] | None = None,
        **options: Any,
    ):
        """Run ``edit`` on the project (see run_edit) and answer with this page.

        ``more``: extra template context; ``more_when_refused``: extra context only when the
        edit was refused (a row that stays open for editing). ``own`` defaults to the page's.
        """
        options.setdefault("own", self.own)
        result = run_edit(
            db,
            project_id,
            expected_revision_of(form),
            edit,
            reader=reader,
            page_url=self.url(project_id),
            **options,
        )
        extra = dict(more or {})
        if result.refused and result.status_code == 422:
            extra.update(more_when_refused or {})
        return self.answer(request, db, result, **extra)

    def add_item(
        self,
        request: Request,
        db: sqlite_utils.Database,
        project_id: int,
        form: Mapping[str, Any] | FormData,
        key: str,
        slot: str,
        fill: Callable[[FormReader, str, dict, dict], str],
    ):
        """Append an item read from an add form to the list ``model[key]``; answer the page.

        ``fill(reader, path, item, model)`` reads the form into the new, empty ``item`` (model
        path ``path``) and returns the revision message. The add form's fields are named under
        ``slot`` ("new_probe.id"): the problems of the list's items are shown there; a refusal
        shows the stored list with the add form as typed (the draft).
        """
        reader = FormReader(form)

        def edit(model: dict) -> str:
            items = model.setdefault(key, [])
            item: dict[str, Any] = {}
            message = fill(reader, f"{key}[{len(items)}]", item, model)
            items.append(item)
            return message

        def remap(field: str) -> str:
            return re.sub(rf"^{re.escape(key)}\[\d+\]", slot, field)

        return self.edit(
            request,
            db,
            project_id,
            form,
            edit,
            reader=reader,
            own=(slot,),
            fallback=slot,
            remap=remap,
            keep_input=False,
        )

    def remove_item(
        self,
        request: Request,
        db: sqlite_utils.Database,
        project_id: int,
        form: Mapping[str, Any] | FormData,
        key: str,
        index: int,
        what: str,
        message: Callable[[dict], str],
        *,
        check: Callable[[dict, dict], None] | None = None,
    ):
        """Remove ``model[key][index]`` (a ``what``: "bound") and answer the page.

        ``check(model, item)`` may refuse with EditRefused (the item is still referred to);
        ``message(item)`` is the revision message. Problems are shown at the item's row.
        """
        path = f"{key}[{index}]"

        def edit(model: dict) -> str:
            items = model.get(key) or []
            item = item_at(items, index, path, what)
            if check is not None:
                check(model, item)
            del items[index]
            return message(item)

        return self.edit(request, db, project_id, form, edit, fallback=path, keep_input=False)

    def answer_import(
        self,
        request: Request,
        db: sqlite_utils.Database,
        project: StoredProject,
        reader: FormReader,
        area: ImportArea,
        error: InputError | None,
        **state: Any,
    ):
        """An import's preview or problem: ``area`` alone (htmx) or the page holding it.

        ``state``: what the area's template shows (the preview); ``error`` is shown in it, 422.
        """
        status = 422 if error else 200
        context = self.context(db, project, None, **state)
        context["import_error"] = error and {"field": error.field, "problem": error.problem}
        context["import_form"] = reader.values()
        if is_htmx(request):
            headers = {"HX-Retarget": f"#{area.element_id}", "HX-Reswap": "outerHTML"}
            return render(request, area.template, context, status_code=status, headers=headers)
        return render(request, self.page, context, status_code=status)

    def save_import(
        self,
        request: Request,
        db: sqlite_utils.Database,
        project: StoredProject,
        reader: FormReader,
        area: ImportArea,
        imported: dict,
        message: str,
        *,
        file_field: str,
        warning: str = "",
        **state: Any,
    ):
        """Store ``imported`` (the whole model after an import) as a new revision.

        Saved: the page, its notice followed by ``warning`` ("Left out: ..."). Refused by the
        model checks: ``area`` with the first problem, as a problem of the file
        (``file_field``); other refusals (a stale page): the page.
        """

        def edit(model: dict) -> str:
            model.clear()
            model.update(imported)
            return message

        result = run_edit(
            db,
            project.id,
            expected_revision_of(reader.form),
            edit,
            own=self.own,
            page_url=self.url(project.id),
        )
        if result.saved and warning:
            result.notice = {"kind": "warning", "text": f"{result.notice['text']} {warning}."}
        if result.refused and result.status_code == 422:
            first = result.errors.problems[0]
            error = InputError(file_field, f"{first.label}: {first.problem}")
            return self.answer_import(request, db, project, reader, area, error, **state)
        return self.answer(request, db, result)

    def add_undo_route(self, router: Any) -> None:
        """POST /projects/{id}/<slug>/undo: undo the last change and show this page again."""

        def undo_last_change(request: Request, project_id: int, form: PostedForm, db: Db):
            result = run_undo(db, project_id, expected_revision_of(form))
            return self.answer(request, db, result)

        router.add_api_route(
            f"/projects/{{project_id}}/{self.slug}/undo",
            undo_last_change,
            methods=["POST"],
            name=f"undo_{self.step}",
        )
