"""Jinja2 environment (autoescaped), template filters and the render helpers every route uses.

Templates live in templates/ at the repository top level. Fragments are named ``_thing.html``,
have one root element whose id is their swap target, and are included by their page so the
first load and an htmx swap produce the same markup.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Mapping
from datetime import datetime
from pathlib import Path
from typing import Any

import jinja2
from fastapi import Request
from fastapi.templating import Jinja2Templates
from starlette.responses import RedirectResponse, Response

from probewise.caution import CAUTION
from probewise.core.priors import DEFAULT_SHAPE, THICKNESS_SHAPES
from probewise.resources import STATIC_DIR, TEMPLATES_DIR
from probewise.web.symbols import symbol_svg

METHOD_KIND_LABELS = {
    "borehole": "Borehole",
    "cpt": "CPT",
    "dmt": "DMT",
    "trial_pit": "Trial pit",
    "other": "Other",
}


def find_htmx_path(static_dir: Path = STATIC_DIR) -> str:
    """URL path of the vendored htmx (its version is in the file name)."""
    found = sorted((static_dir / "vendor").glob("htmx-*.min.js"))
    return f"/static/vendor/{found[-1].name}" if found else ""


def format_number(value: Any, digits: int = 2) -> str:
    """A number with at most ``digits`` decimals and no trailing zeros; a dash when absent."""
    if value is None or value == "":
        return "\u2014"
    try:
        number = float(value)
    except (TypeError, ValueError):
        return str(value)
    if not math.isfinite(number):
        return str(number)
    text = f"{number:,.{digits}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text == "-0" else text


def format_coordinate(value: Any, digits: int = 2) -> str:
    """A coordinate: no thousands separators, at most ``digits`` decimals."""
    return format_number(value, digits).replace(",", "")


def format_money(value: Any) -> str:
    """Amounts with thousands separators; pence only when there are any."""
    if value is None or value == "":
        return "\u2014"
    number = float(value)
    return f"{number:,.0f}" if number == round(number) else f"{number:,.2f}"


def format_when(value: Any) -> str:
    """An ISO timestamp as 'YYYY-MM-DD HH:MM' (UTC as stored)."""
    if value is None or value == "":
        return "\u2014"
    if isinstance(value, datetime):
        moment = value
    else:
        try:
            moment = datetime.fromisoformat(str(value).replace("Z", "+00:00"))
        except ValueError:
            return str(value)
    suffix = " UTC" if moment.utcoffset() is not None and not moment.utcoffset() else ""
    return moment.strftime("%Y-%m-%d %H:%M") + suffix


def kind_label(kind: str) -> str:
    return METHOD_KIND_LABELS.get(kind, str(kind).replace("_", " ").capitalize())


def format_money_whole(value: object) -> str:
    """An estimate in whole currency units with thousands separators; a dash when absent."""
    if value is None or value == "":
        return "\u2014"
    number = float(value)  # type: ignore[arg-type]
    return f"{number:,.0f}" if math.isfinite(number) else "\u2014"


def format_percent(value: object) -> str:
    """A share 0..1 as a whole percentage; a dash when absent (boundary not of interest)."""
    if value is None or value == "":
        return "\u2014"
    return f"{100 * float(value):.0f}%"  # type: ignore[arg-type]


def format_input_number(value: Any) -> str:
    """A number for an input's value: exact (never rounded, so saving keeps it), no '.0'."""
    if value is None:
        return ""
    if isinstance(value, bool) or not isinstance(value, int | float):
        return str(value)
    text = repr(float(value))
    return text[:-2] if text.endswith(".0") else text


def field_id(path: str) -> str:
    """An HTML id for a model path: ``units[2].thickness_m`` -> ``f-units-2-thickness_m``."""
    return "f-" + (re.sub(r"[^A-Za-z0-9_]+", "-", path).strip("-") or "form")


def shape_label(name: str) -> str:
    """A thickness shape's label (``pert`` -> ``PERT``) from the one registry of shapes."""
    shape = THICKNESS_SHAPES.get(name)
    return shape.label if shape else str(name)


def build_environment(templates_dir: Path = TEMPLATES_DIR) -> jinja2.Environment:
    """The one Jinja environment: every filter and global the templates use is set here."""
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(templates_dir)),
        autoescape=True,  # every template, whatever its extension
        undefined=jinja2.StrictUndefined,  # a typo in a template fails loudly in the tests
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters.update(
        num=format_number,
        coord=format_coordinate,
        money=format_money,
        when=format_when,
        kind_label=kind_label,
        shape_label=shape_label,
        money0=format_money_whole,
        percent=format_percent,
        inum=format_input_number,
    )
    env.globals.update(
        caution=CAUTION,
        htmx_js=find_htmx_path(),
        default_shape=DEFAULT_SHAPE,
        field_id=field_id,
        probe_symbol=symbol_svg,
    )
    return env


templates = Jinja2Templates(env=build_environment())


def is_htmx(request: Request) -> bool:
    """An htmx request that wants a fragment (not a boosted page load)."""
    headers = request.headers
    return (
        headers.get("hx-request") == "true"
        and headers.get("hx-boosted") != "true"
        and headers.get("hx-history-restore-request") != "true"
    )


def render(
    request: Request,
    name: str,
    context: Mapping[str, Any] | None = None,
    *,
    status_code: int = 200,
    headers: Mapping[str, str] | None = None,
) -> Response:
    """Render one template; pages and fragments vary on HX-Request for caches."""
    merged_headers = {"Vary": "HX-Request", **(headers or {})}
    return templates.TemplateResponse(
        request, name, dict(context or {}), status_code=status_code, headers=merged_headers
    )


def render_page_or_fragment(
    request: Request,
    page: str,
    fragment: str,
    context: Mapping[str, Any] | None = None,
    *,
    status_code: int = 200,
) -> Response:
    """The fragment for an htmx swap, else the whole page (which includes the fragment)."""
    name = fragment if is_htmx(request) else page
    return render(request, name, context, status_code=status_code)


def render_action(
    request: Request,
    page: str,
    fragment: str,
    build_context: Callable[[], Mapping[str, Any]],
    *,
    redirect_to: str,
    status_code: int = 200,
) -> Response:
    """Answer a form action (a POST).

    htmx gets the refreshed fragment (with whatever notice the context carries); a plain form
    post that succeeded is redirected to ``redirect_to`` (post/redirect/get); one that failed
    gets the whole page with its message and the error status.
    """
    if not is_htmx(request) and status_code < 400:
        return RedirectResponse(redirect_to, status_code=303)
    return render_page_or_fragment(
        request, page, fragment, build_context(), status_code=status_code
    )
