"""The web app (FastAPI + Jinja2 + htmx). Entry point: ``probewise.web.app.create_app``.

Adding a workflow page (for example the Site step):
- ``server/web/routes_site.py``: an ``APIRouter(include_in_schema=False)``; take the database
  as ``db: Db`` (server/web/deps.py); build the context with
  ``workflow.project_context(project, "site")`` plus the page's own data.
- list the router in ``ROUTERS`` (app.py) and give the step its ``path`` in workflow.py; the
  navigation bar then links it.
- templates: ``site.html`` extends ``project_page.html`` (sets ``step_title`` and ``content``)
  and includes ``_site.html``, the fragment, whose one root element has the id its htmx swaps
  target (``<section id="site">``). GET answers with ``render_page_or_fragment``; form actions
  with ``render_action`` (fragment for htmx, redirect for a plain post, page + 4xx on error).
- messages: put ``notice={"kind": "ok" | "error" | "warning", "text": ...}`` in the fragment's
  context and include ``_notice.html``; errors raised anywhere (InputError, store errors,
  HTTPException) reach the page's floating ``#flash`` for htmx requests (errors.py).
- pages that inform design show ``{% include "_caution.html" %}`` (the footer has it too).

Rules the templates live by: autoescape is on and StrictUndefined makes a missing variable an
error (use ``x is defined`` / ``dict.get``); the Content-Security-Policy allows scripts and
styles from /static only, so no inline ``<script>``, ``<style>``, ``style=`` or ``on...=``
attributes (put behaviour in static/js/, looks in static/css/probewise.css).
"""
