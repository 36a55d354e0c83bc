"""The web app: server-rendered pages with htmx fragments, a JSON API and the static files.

``create_app`` is the one entry point (``probewise serve`` and the tests call it). Routes live
in small modules, one per page or concern; to add a page, write ``routes_<page>.py`` with an
``APIRouter``, list it in ROUTERS and give its workflow step a path in workflow.py.
"""

from __future__ import annotations

import logging
from collections.abc import AsyncIterator, Iterable
from contextlib import asynccontextmanager
from pathlib import Path

from fastapi import FastAPI
from fastapi.staticfiles import StaticFiles

from probewise.resources import DEMO_PROJECT_PATHS, STATIC_DIR
from probewise.store import mark_interrupted_jobs, seed_demos_if_empty
from probewise.web import (
    routes_api,
    routes_behaviour,
    routes_compare,
    routes_elements,
    routes_evaluation,
    routes_existing,
    routes_fieldwork,
    routes_ground,
    routes_history,
    routes_jobs,
    routes_methods,
    routes_options,
    routes_overview,
    routes_projects,
    routes_readings,
    routes_schedule,
    routes_schedule_lab,
    routes_sensitivity,
    routes_site,
    routes_value,
)
from probewise.web.deps import database_of
from probewise.web.errors import install_error_handlers
from probewise.web.routes_evaluation import install_evaluation_wait
from probewise.web.security import MAX_BODY_BYTES, SecurityMiddleware, allowed_hosts_for

log = logging.getLogger(__name__)

ROUTERS = (
    routes_projects.router,
    routes_overview.router,
    routes_api.router,
    routes_site.router,
    routes_ground.router,
    routes_history.router,
    routes_existing.router,
    routes_fieldwork.router,
    routes_readings.router,
    routes_behaviour.router,
    routes_methods.router,
    routes_options.router,
    routes_compare.router,
    routes_schedule.router,
    routes_sensitivity.router,
    routes_schedule_lab.router,
    routes_jobs.router,
    routes_evaluation.router,
    routes_elements.router,
    routes_value.router,
)


def create_app(
    db_path: Path,
    *,
    bound_host: str = "127.0.0.1",
    seed: bool = True,
    extra_hosts: Iterable[str] = (),
    max_body_bytes: int = MAX_BODY_BYTES,
) -> FastAPI:
    """Build the app over the SQLite file at ``db_path``.

    bound_host: the address the server listens on; with the loopback names it is the only
    Host header accepted (DNS-rebinding guard). extra_hosts: further names to accept (the
    machine's own names when bound to every interface; tests may add "testserver").
    On startup the database is opened (and migrated), jobs left running by a previous process
    are marked interrupted and, when ``seed`` is set and the database holds no project, the
    invented demo projects are loaded.
    """

    @asynccontextmanager
    async def lifespan(app: FastAPI) -> AsyncIterator[None]:
        db = database_of(app)
        mark_interrupted_jobs(db)
        if seed:
            present = [p for p in DEMO_PROJECT_PATHS if p.is_file()]
            for missing in sorted(set(DEMO_PROJECT_PATHS) - set(present)):
                log.warning("demo project %s is missing; not seeded", missing)
            if present:
                seed_demos_if_empty(db, present)
        try:
            yield
        finally:
            db = getattr(app.state, "db", None)
            if db is not None:
                app.state.db = None
                db.close()

    app = FastAPI(
        title="probewise",
        summary="Scope a ground investigation: projects and their model files.",
        version="0.1.0",
        lifespan=lifespan,
        # Swagger UI and ReDoc load scripts from a CDN, which the local-only policy forbids;
        # the schema itself is served at /openapi.json.
        docs_url=None,
        redoc_url=None,
    )
    app.state.db_path = Path(db_path)
    app.state.db = None
    install_evaluation_wait(app)  # page loads may defer a slow evaluation (inside the checks)
    app.add_middleware(
        SecurityMiddleware,
        allowed_hosts=allowed_hosts_for(bound_host, extra_hosts),
        max_body_bytes=max_body_bytes,
    )
    install_error_handlers(app)
    app.mount("/static", StaticFiles(directory=STATIC_DIR), name="static")
    for router in ROUTERS:
        app.include_router(router)
    return app
