"""One error form per audience: JSON for /api, a flash message for htmx swaps, a page otherwise.

API bodies are ``{"detail": "message"}`` or, for bad input, ``{"detail": [{"field", "problem"}]}``
(FastAPI's own validation errors are rewritten into that form too).
"""

from __future__ import annotations

import logging

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.responses import JSONResponse, Response

from probewise.core.model import ModelLimitError
from probewise.errors import InputError
from probewise.store.errors import (
    JobNotFound,
    NothingToUndo,
    ProjectDeleted,
    ProjectNotFound,
    RevisionNotFound,
    StaleRevision,
    StoreError,
)
from probewise.web.templating import is_htmx, render

log = logging.getLogger(__name__)

# Store refusals and their HTTP status (the most specific class wins: MRO lookup).
STORE_STATUS: dict[type[StoreError], int] = {
    StoreError: 400,
    ProjectNotFound: 404,
    ProjectDeleted: 409,
    RevisionNotFound: 404,
    JobNotFound: 404,
    StaleRevision: 409,
    NothingToUndo: 409,
}

STATUS_TITLES = {
    400: "Bad request",
    403: "Refused",
    404: "Not found",
    405: "Method not allowed",
    409: "Conflict",
    413: "Too large",
    422: "Invalid input",
    500: "Something went wrong",
}


BODY_PARSE_DETAIL = "There was an error parsing the body"  # fastapi.routing's own text


def body_parse_problem(cause: BaseException | None) -> str:
    """Why a request body could not be decoded, from the error FastAPI chained."""
    if isinstance(cause, UnicodeDecodeError):
        return f"is not UTF-8 text (byte {cause.start})"
    if isinstance(cause, RecursionError):
        return "is nested too deeply"
    if isinstance(cause, ValueError) and "digits" in str(cause):
        return "holds a number with too many digits"
    return "could not be read in its declared content type"


def wants_json(request: Request) -> bool:
    return request.url.path.startswith("/api")


def field_path(loc: tuple | list) -> str:
    """('body', 'model', 'units', 0, 'name') -> 'model.units[0].name' (the body prefix goes)."""
    parts = list(loc)
    if parts and parts[0] == "body":
        parts = parts[1:]
    text = ""
    for part in parts:
        if isinstance(part, int):
            text += f"[{part}]"
        else:
            text += f".{part}" if text else str(part)
    return text or "body"


# Pydantic's wording for the common cases, in the model file's plain style.
PLAIN_PROBLEMS = {
    "missing": "is required",
    "dict_type": "must be a JSON object",
    "model_type": "must be a JSON object",
    "model_attributes_type": "must be a JSON object",
    "list_type": "must be a JSON array",
    "int_parsing": "must be a whole number",
    "int_type": "must be a whole number",
    "int_from_float": "must be a whole number",
    "float_parsing": "must be a number",
    "float_type": "must be a number",
    "bool_parsing": "must be true or false",
    "bool_type": "must be true or false",
    "string_type": "must be text",
}


# Bounds on a number, with the limit from the error's context.
BOUND_PROBLEMS = {
    "greater_than": ("gt", "must be above {}"),
    "greater_than_equal": ("ge", "must be at least {}"),
    "less_than": ("lt", "must be below {}"),
    "less_than_equal": ("le", "must be at most {}"),
}


def field_problems_of(exc: RequestValidationError) -> list[dict[str, str]]:
    problems = []
    for error in exc.errors():
        loc = error.get("loc", ())
        kind = error.get("type", "")
        problem = PLAIN_PROBLEMS.get(kind) or str(error.get("msg", "invalid value"))
        if kind in BOUND_PROBLEMS:
            key, words = BOUND_PROBLEMS[kind]
            limit = (error.get("ctx") or {}).get(key)
            if limit is not None:
                problem = words.format(limit)
        if kind == "json_invalid":
            # loc ends in the character offset; name the body, say where
            detail = (error.get("ctx") or {}).get("error", "")
            offset = loc[-1] if loc and isinstance(loc[-1], int) else None
            problem = "not valid JSON" + (f": {detail}" if detail else "")
            if offset is not None:
                problem += f" (at character {offset})"
            loc = ("body",)
        elif kind == "missing" and len(loc) <= 1:
            problem = "a JSON body is required"
        problems.append({"field": field_path(loc), "problem": problem})
    return problems


def error_response(
    request: Request,
    status: int,
    message: str,
    *,
    field_problems: list[dict[str, str]] | None = None,
) -> Response:
    """The error in the form its requester reads."""
    if wants_json(request):
        body = {"detail": field_problems if field_problems is not None else message}
        return JSONResponse(body, status_code=status)
    context = {"status": status, "title": STATUS_TITLES.get(status, "Error"), "message": message}
    if is_htmx(request):
        # Whatever the request targeted, show the message in the page's flash area.
        return render(
            request,
            "_flash.html",
            {"flash": {"kind": "error", "text": message}},
            status_code=status,
            headers={"HX-Retarget": "#flash", "HX-Reswap": "outerHTML"},
        )
    return render(request, "error.html", context, status_code=status)


def install_error_handlers(app: FastAPI) -> None:
    @app.exception_handler(StarletteHTTPException)
    async def on_http_error(request: Request, exc: StarletteHTTPException) -> Response:
        if exc.status_code == 400 and exc.detail == BODY_PARSE_DETAIL:
            # FastAPI's word for a body it cannot decode (not UTF-8, a broken form): say
            # which field, in the same form as any other invalid body.
            problem = body_parse_problem(exc.__cause__)
            problems = [{"field": "body", "problem": problem}]
            status = 422 if wants_json(request) else 400
            return error_response(request, status, f"body: {problem}", field_problems=problems)
        message = exc.detail if isinstance(exc.detail, str) else STATUS_TITLES.get(exc.status_code)
        if exc.status_code == 404 and message == "Not Found":
            message = f"nothing at {request.url.path}"
        response = error_response(request, exc.status_code, str(message or "error"))
        for key, value in (exc.headers or {}).items():
            response.headers[key] = value
        return response

    @app.exception_handler(RequestValidationError)
    async def on_validation_error(request: Request, exc: RequestValidationError) -> Response:
        problems = field_problems_of(exc)
        status = 422 if wants_json(request) else 400
        text = "; ".join(f"{p['field']}: {p['problem']}" for p in problems)
        return error_response(request, status, text, field_problems=problems)

    @app.exception_handler(InputError)
    @app.exception_handler(ModelLimitError)
    async def on_input_error(request: Request, exc: InputError | ModelLimitError) -> Response:
        status = 422 if wants_json(request) else 400
        problems = [{"field": exc.field, "problem": exc.problem}]
        return error_response(request, status, str(exc), field_problems=problems)

    @app.exception_handler(StoreError)
    async def on_store_error(request: Request, exc: StoreError) -> Response:
        status = next((STORE_STATUS[cls] for cls in type(exc).__mro__ if cls in STORE_STATUS), 400)
        return error_response(request, status, exc.message)

    @app.exception_handler(UnicodeEncodeError)
    async def on_unencodable_text(request: Request, exc: UnicodeEncodeError) -> Response:
        # JSON may spell a lone UTF-16 surrogate ("\\ud800"): Python keeps it in a str, but
        # it is not Unicode text and SQLite refuses to store it (the transaction rolls back).
        bad = exc.object[exc.start : exc.end] if isinstance(exc.object, str) else ""
        shown = bad.encode("unicode_escape").decode("ascii") if bad else "a character"
        problem = (
            f"holds {shown}, a lone surrogate that is not valid Unicode text; remove it and "
            "send again"
        )
        status = 422 if wants_json(request) else 400
        return error_response(
            request,
            status,
            f"the submitted text {problem}",
            field_problems=[{"field": "body", "problem": problem}],
        )

    @app.exception_handler(OverflowError)
    async def on_overflow(request: Request, exc: OverflowError) -> Response:
        # A whole number in the URL or a form beyond SQLite's 64-bit integers names nothing
        # that can exist; any other overflow is a fault of ours.
        if "SQLite INTEGER" in str(exc):
            return error_response(
                request, 404, f"nothing at {request.url.path}: a number in it is out of range"
            )
        return await on_unexpected(request, exc)

    @app.exception_handler(Exception)
    async def on_unexpected(request: Request, exc: Exception) -> Response:
        log.exception("unexpected error on %s %s", request.method, request.url.path)
        return error_response(
            request, 500, "the server met an unexpected error; its log has the details"
        )
