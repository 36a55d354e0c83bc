"""Editing a project from a form: load, apply, validate, save as a revision, map the errors.

Every model-editing page (Site, Ground model, Existing, Methods) posts its forms here through
``run_edit``; the pages differ only in the edit function they pass and in how they render.

- ``FormReader`` (``probewise.web.forms``) reads form fields leniently: a number that does not
  parse is kept as typed (so the page shows it back) and recorded as a problem of its path.
- ``run_edit(db, project_id, expected_revision, edit, ...)`` refuses a stale page (409, store
  unchanged), applies ``edit(model) -> message`` to a copy, checks the result once with the
  model-file validator (``check_model``: every problem, not only the first), saves the
  checked document with ``save_project`` (which does not check it again) and returns an
  ``EditResult`` the page renders: the new state and a notice, or the user's input with each
  problem beside its field (422).
- ``FieldErrors`` (``probewise.web.field_errors``) places problems in templates:
  ``errors.at("units[2].thickness_m")`` gives the problems at that model path or below it;
  problems on parts the page does not show (an existing probe broken by reordering units) go
  to the edit's ``fallback`` slot.
- ``run_undo`` undoes the last change for any page; ``last_change`` names it for the header.
- ``EditPage`` is one page: its templates and context, and the edits every page has (a field
  edit, adding an item from an add form, removing one, storing an imported file, undo).
"""

from __future__ import annotations

import copy
import re
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

import sqlite_utils
from fastapi import Request
from starlette.datastructures import FormData

from probewise.errors import InputError
from probewise.io.model_file import ValidModel, check_model
from probewise.store import (
    StoredProject,
    get_project,
    list_revisions,
    save_project,
    undo,
)
from probewise.store.errors import NothingToUndo, ProjectDeleted, StaleRevision
from probewise.web.deps import Db
from probewise.web.field_errors import NO_ERRORS, FieldErrors, field_errors, path_is_under
from probewise.web.forms import (  # noqa: F401 - the pages read their forms through edits
    FormReader,
    PostedForm,
    expected_revision_of,
    read_form,
)
from probewise.web.templating import (
    is_htmx,
    render,
    render_action,
    render_page_or_fragment,
)

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

    valid, problems = _checked(model, reader)
    if problems or valid is None:
        return refused(model, problems, 422, keep=keep_input)
    if valid.document == project.model:  # equal after normalising: 5 and 5.0 are one number
        notice = {"kind": "info", "text": "Nothing changed, so nothing was saved."}
        return EditResult(project, project.model, notice=notice)
    return _save(db, project, valid, expected_revision, message, page_url)


def _checked(model: dict, reader: FormReader | None) -> tuple[ValidModel | None, list[InputError]]:
    """The one validation of a save: the form's own problems first, then the model's, leaving
    out a model problem at, above or under a field the form already faulted."""
    parse_problems = list(reader.problems) if reader else []
    valid, found = check_model(model)
    checked = [
        p
        for p in found
        if not any(
            path_is_under(p.field, q.field) or path_is_under(q.field, p.field)
            for q in parse_problems
        )
    ]
    return valid, parse_problems + checked


def _save(
    db: sqlite_utils.Database,
    project: StoredProject,
    valid: ValidModel,
    expected_revision: int,
    message: str,
    page_url: str | None,
) -> EditResult:
    """Store a checked model as the next revision; a stale page or a deleted project: 409."""
    try:
        revision = save_project(db, project.id, valid, expected_revision, message)
    except StaleRevision:
        project = get_project(db, project.id)
        notice = stale_notice(project, expected_revision, page_url)
        return EditResult(project, project.model, notice=notice, status_code=409)
    except ProjectDeleted:
        notice = {"kind": "error", "text": "Not saved: this project is deleted (read only)."}
        return EditResult(project, project.model, notice=notice, status_code=409)
    saved = get_project(db, project.id)
    notice = {"kind": "ok", "text": f"Saved as revision {revision}: {message}."}
    return EditResult(saved, saved.model, notice=notice, saved=True)


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
    from probewise.web.workflow import project_context

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
