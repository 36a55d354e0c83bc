#!/usr/bin/env python3
"""Benchmark: median server time of each project page on the demo (target: <= 200 ms).

    python benchmarks/pages.py [--repeat N] [--json OUT]

A fresh database in a temporary folder is seeded with the invented demo; every page of the
workflow bar (those built), the projects list, the map data, a thickness chart and two
edits (a unit's thickness saved, then undone) are requested N times (default 30) through
FastAPI's TestClient. "Server" time is measured inside the app (an ASGI wrapper from the
request's arrival to the last byte of the answer); "client" time adds the in-process test
client. The first request of each page is a warm-up and not counted. Figures are printed as
a table and, with --json, written to a file.
"""

from __future__ import annotations

import argparse
import json
import platform
import statistics
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from fastapi.testclient import TestClient  # noqa: E402

from probewise.web.app import create_app  # noqa: E402
from probewise.web.workflow import WORKFLOW_STEPS  # noqa: E402

BASE_URL = "http://127.0.0.1"


class Timed:
    """ASGI wrapper: seconds from a request's arrival to the end of its answer."""

    def __init__(self, app):
        self.app = app
        self.last_s = 0.0

    async def __call__(self, scope, receive, send):
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        start = time.perf_counter()

        async def timed_send(message):
            await send(message)
            if message["type"] == "http.response.body" and not message.get("more_body"):
                self.last_s = time.perf_counter() - start

        await self.app(scope, receive, timed_send)


def measure(client: TestClient, timed: Timed, request, repeat: int) -> tuple[float, float, int]:
    """(median server ms, median client ms, status) over ``repeat`` calls after a warm-up."""
    status = request().status_code
    server, wall = [], []
    for _ in range(repeat):
        start = time.perf_counter()
        answer = request()
        wall.append(time.perf_counter() - start)
        server.append(timed.last_s)
        status = max(status, answer.status_code)
    return statistics.median(server) * 1e3, statistics.median(wall) * 1e3, status


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=30)
    parser.add_argument("--json", type=Path, default=None, help="write the figures here")
    args = parser.parse_args()

    rows = []
    with tempfile.TemporaryDirectory() as folder:
        app = create_app(Path(folder) / "bench.db")
        timed = Timed(app)
        with TestClient(timed, base_url=BASE_URL) as client:
            pages = [("Projects list", "/")]
            pages += [
                (step.label, step.path.format(project_id=1)) for step in WORKFLOW_STEPS if step.path
            ]
            pages += [
                ("Site map data (JSON)", "/projects/1/site.json"),
                ("Thickness chart (SVG, cached)", "/projects/1/charts/thickness/1.svg?rev=1"),
            ]
            for label, url in pages:
                server, wall, status = measure(
                    client, timed, lambda url=url: client.get(url), args.repeat
                )
                rows.append(
                    {
                        "page": label,
                        "url": url,
                        "server_ms": server,
                        "client_ms": wall,
                        "status": status,
                    }
                )

            # An edit and its undo, in turns: each saves a revision (validate + store + render).
            unit = client.get("/api/projects/1").json()["model"]["units"][1]
            state = {"turn": 0}

            def edit_or_undo():
                revision = client.get("/api/projects/1").json()["revision"]
                state["turn"] += 1
                if state["turn"] % 2:
                    t, c = unit["thickness_m"], unit["correlation"]
                    data = {
                        "expected_revision": str(revision),
                        "name": unit["name"],
                        "description": unit.get("description", ""),
                        "min": str(t["min"]),
                        "likely": str(t["likely"]),
                        "max": str(t["max"] + 0.5),
                        "shape": t["shape"],
                        "correlation_model": c["model"],
                        "range_m": str(c["range_m"]),
                    }
                    url = "/projects/1/ground/units/1"
                else:
                    data, url = {"expected_revision": str(revision)}, "/projects/1/ground/undo"
                return client.post(url, data=data, headers={"HX-Request": "true"})

            server, wall, status = measure(client, timed, edit_or_undo, args.repeat)
            rows.append(
                {
                    "page": "Edit: save a unit / undo (htmx POST)",
                    "url": "/projects/1/ground/units/1",
                    "server_ms": server,
                    "client_ms": wall,
                    "status": status,
                }
            )

    width = max(len(r["page"]) for r in rows)
    print(
        f"Median of {args.repeat} requests each on the demo ({platform.python_version()}, "
        f"{platform.machine()}); budget 200 ms server time per page"
    )
    print(f"{'page':<{width}}  {'server ms':>9}  {'client ms':>9}  status")
    for r in rows:
        print(
            f"{r['page']:<{width}}  {r['server_ms']:>9.1f}  {r['client_ms']:>9.1f}  {r['status']}"
        )
    if args.json:
        args.json.write_text(json.dumps({"repeat": args.repeat, "rows": rows}, indent=2) + "\n")
    return 0 if all(r["status"] < 400 for r in rows) else 1


if __name__ == "__main__":
    raise SystemExit(main())
