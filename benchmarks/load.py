#!/usr/bin/env python3
"""Bounded load test of the web app on loopback.

    python benchmarks/load.py [--clients 20] [--seconds 30] [--quick] [--projects 3]
                              [--think-ms 500] [--seed 7]

Starts ``probewise serve`` on a free 127.0.0.1 port over a fresh temporary database (the
invented demo project, duplicated to ``--projects`` projects), warms every page once, then
runs ``--clients`` simulated users for ``--seconds`` (``--quick``: 5 s). Each user works on
one project and repeats: wait a random think time (uniform 0..think-ms), then one action:

- ``page`` (75%): a page view, chosen at random among the projects list and the project's
  Overview, Site, Ground model, Existing, Methods, Options and Compare pages (the Compare
  page's frame: its results arrive as a fragment, counted below);
- ``edit`` (10%): a JSON API save (PUT) of the project with the revision the user last saw
  (a change to a unit's description). Another user may have saved in between: that 409 is
  the optimistic-concurrency answer, counted as ``stale`` and not as an error; the user
  reloads the project and goes on;
- ``evaluate`` (15%): the Compare results fragment, the Schedule page (it prints the
  evaluated layout) or ``GET /api/projects/{id}/evaluation``: every layout evaluated on the
  current revision, so recomputed after each edit.

An error is a transport failure, a timeout, a 5xx, or any 4xx other than an edit's 409.
Latency is measured per request from send to the last byte (``time.perf_counter``) by one
asyncio event loop driving httpx, so the clients' own overhead stays small. Reported: requests,
throughput, errors, stale edits and p50/p95/max latency per kind; the machine's CPU count
and load average before and after (the figures depend on what else runs). Written to
``benchmarks/out/load.json`` (the server's log beside it, ``load-serve.log``). Exit status 1
when any request failed.
"""

from __future__ import annotations

import argparse
import asyncio
import json
import os
import platform
import random
import shutil
import tempfile
import time
from pathlib import Path

import httpx

from probewise.local_server import ServerStartError, free_port, start_server, stop_server

HERE = Path(__file__).resolve().parent
OUT = HERE / "out"
PAGE_P95_TARGET_MS = 500.0

PAGES = (
    "/",
    "/projects/{pid}",
    "/projects/{pid}/site",
    "/projects/{pid}/ground",
    "/projects/{pid}/existing",
    "/projects/{pid}/methods",
    "/projects/{pid}/options",
    "/projects/{pid}/compare",
)
# Answers that carry evaluated numbers: recomputed for every new revision (after an edit).
EVALUATIONS = (
    "/projects/{pid}/compare/results",
    "/projects/{pid}/schedule",
    "/api/projects/{pid}/evaluation",
)
MIX = (("page", 0.75), ("edit", 0.10), ("evaluate", 0.15))


def percentile(values: list[float], q: float) -> float | None:
    """Nearest-rank percentile (q in 0..100); None for no values."""
    if not values:
        return None
    ordered = sorted(values)
    rank = max(1, min(len(ordered), round(q / 100.0 * len(ordered) + 0.5)))
    return ordered[rank - 1]


class Recorder:
    def __init__(self) -> None:
        self.latency_ms: dict[str, list[float]] = {kind: [] for kind, _ in MIX}
        self.by_route: dict[str, list[float]] = {}
        self.errors: dict[str, int] = {kind: 0 for kind, _ in MIX}
        self.error_samples: list[str] = []
        self.stale = 0

    def error(self, kind: str, what: str) -> None:
        self.errors[kind] += 1
        if len(self.error_samples) < 20:
            self.error_samples.append(f"{kind}: {what}")


async def timed(client: httpx.AsyncClient, method: str, url: str, **kwargs):
    start = time.perf_counter()
    answer = await client.request(method, url, **kwargs)
    await answer.aread()
    return answer, (time.perf_counter() - start) * 1000.0


async def user(
    n: int,
    client: httpx.AsyncClient,
    pid: int,
    stop_at: float,
    think_s: float,
    rng: random.Random,
    rec: Recorder,
) -> None:
    kinds = [k for k, _ in MIX]
    weights = [w for _, w in MIX]
    route = ""
    project = (await client.get(f"/api/projects/{pid}")).json()
    edits = 0
    while True:
        await asyncio.sleep(rng.uniform(0.0, think_s))
        if time.perf_counter() >= stop_at:
            return
        kind = rng.choices(kinds, weights)[0]
        try:
            if kind == "page":
                route = rng.choice(PAGES)
                url = route.format(pid=pid)
                answer, ms = await timed(client, "GET", url)
                ok = answer.status_code == 200
            elif kind == "evaluate":
                route = rng.choice(EVALUATIONS)
                url = route.format(pid=pid)
                answer, ms = await timed(client, "GET", url)
                ok = answer.status_code == 200
            else:
                edits += 1
                model = json.loads(json.dumps(project["model"]))
                model["units"][0]["description"] = f"Edited under load by user {n} ({edits})"
                body = {"model": model, "expected_revision": project["revision"]}
                route = "PUT /api/projects/{pid}"
                url = f"/api/projects/{pid}"
                answer, ms = await timed(client, "PUT", url, json=body)
                ok = answer.status_code in (200, 409)
                if answer.status_code == 200:
                    project = {**project, "model": model, "revision": answer.json()["revision"]}
                elif answer.status_code == 409:
                    rec.stale += 1
                    project = (await client.get(url)).json()  # reload, as the page says
        except (httpx.TransportError, httpx.TimeoutException) as exc:
            rec.error(kind, f"{type(exc).__name__}: {exc}")
            continue
        rec.latency_ms[kind].append(ms)
        rec.by_route.setdefault(route, []).append(ms)
        if not ok:
            rec.error(kind, f"{url} answered {answer.status_code}: {answer.text[:200]}")


async def run_load(base: str, pids: list[int], clients: int, seconds: float, think_s: float,
                   seed: int) -> tuple[Recorder, float]:  # fmt: skip
    rec = Recorder()
    # Idle connections are dropped by the client before uvicorn's own 5 s keep-alive timeout,
    # so a request never races the server closing its connection (a browser would retry it).
    limits = httpx.Limits(
        max_connections=clients + 5, max_keepalive_connections=clients + 5, keepalive_expiry=2.0
    )
    async with httpx.AsyncClient(base_url=base, timeout=60.0, limits=limits) as client:
        # warm every page and evaluation of every project once (JIT, caches), untimed
        for pid in pids:
            for url in PAGES + EVALUATIONS:
                (await client.get(url.format(pid=pid))).raise_for_status()
        start = time.perf_counter()
        stop_at = start + seconds
        await asyncio.gather(
            *(
                user(
                    n, client, pids[n % len(pids)], stop_at, think_s, random.Random(seed + n), rec
                )  # fmt: skip
                for n in range(clients)
            )
        )
        elapsed = time.perf_counter() - start
    return rec, elapsed


def summary(rec: Recorder, elapsed: float, args: argparse.Namespace, load_before, load_after):
    kinds = {}
    for kind, values in rec.latency_ms.items():
        kinds[kind] = {
            "requests": len(values),
            "errors": rec.errors[kind],
            "p50_ms": percentile(values, 50),
            "p95_ms": percentile(values, 95),
            "max_ms": max(values) if values else None,
        }
    total = sum(len(v) for v in rec.latency_ms.values())
    page_p95 = kinds["page"]["p95_ms"]
    return {
        "config": {
            "clients": args.clients,
            "seconds": args.seconds,
            "projects": args.projects,
            "think_ms_max": args.think_ms,
            "mix": dict(MIX),
            "seed": args.seed,
        },
        "machine": {
            "cpus": os.cpu_count(),
            "python": platform.python_version(),
            "platform": platform.platform(),
            "load_average_before": load_before,
            "load_average_after": load_after,
        },
        "elapsed_s": round(elapsed, 2),
        "requests": total,
        "throughput_rps": round(total / elapsed, 1) if elapsed > 0 else None,
        "errors": sum(rec.errors.values()),
        "error_samples": rec.error_samples,
        "stale_edits_409": rec.stale,
        "kinds": kinds,
        "routes": {
            route: {"requests": len(v), "p50_ms": percentile(v, 50), "p95_ms": percentile(v, 95)}
            for route, v in sorted(rec.by_route.items())
        },
        "page_p95_target_ms": PAGE_P95_TARGET_MS,
        "page_p95_met": page_p95 is not None and page_p95 <= PAGE_P95_TARGET_MS,
    }


def print_report(doc: dict) -> None:
    def ms(value):
        return "-" if value is None else f"{value:.0f}"

    cfg = doc["config"]
    print(
        f"{cfg['clients']} clients x {cfg['seconds']:g} s on {cfg['projects']} projects "
        f"(think 0-{cfg['think_ms_max']} ms); {doc['machine']['cpus']} CPUs, load average "
        f"{doc['machine']['load_average_before']} before, "
        f"{doc['machine']['load_average_after']} after"
    )
    print(f"{'kind':<10}{'requests':>10}{'errors':>8}{'p50 ms':>9}{'p95 ms':>9}{'max ms':>9}")
    for kind, k in doc["kinds"].items():
        print(
            f"{kind:<10}{k['requests']:>10}{k['errors']:>8}{ms(k['p50_ms']):>9}"
            f"{ms(k['p95_ms']):>9}{ms(k['max_ms']):>9}"
        )
    print(
        f"total {doc['requests']} requests in {doc['elapsed_s']} s: {doc['throughput_rps']} "
        f"requests/s, {doc['errors']} errors, {doc['stale_edits_409']} stale edits (409)"
    )
    verdict = "met" if doc["page_p95_met"] else "NOT met"
    print(f"page views p95 {ms(doc['kinds']['page']['p95_ms'])} ms: target "
          f"{doc['page_p95_target_ms']:.0f} ms {verdict}")  # fmt: skip
    for sample in doc["error_samples"]:
        print(f"error: {sample}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--clients", type=int, default=20)
    parser.add_argument("--seconds", type=float, default=30.0)
    parser.add_argument("--quick", action="store_true", help="5 seconds")
    parser.add_argument("--projects", type=int, default=3, help="projects the users share")
    parser.add_argument("--think-ms", type=float, default=500.0, help="longest think time")
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("-o", "--output", default=str(OUT / "load.json"))
    args = parser.parse_args(argv)
    if args.quick:
        args.seconds = 5.0
    if args.clients < 1 or args.seconds <= 0 or args.projects < 1 or args.think_ms < 0:
        parser.error("--clients, --seconds and --projects must be positive, --think-ms >= 0")

    workdir = Path(tempfile.mkdtemp(prefix="probewise-load-"))
    port = free_port()
    try:
        process = start_server(workdir / "load.db", port, workdir / "serve.log", cwd=HERE.parent)
    except ServerStartError as exc:
        raise SystemExit(str(exc)) from None
    base = f"http://127.0.0.1:{port}"
    try:
        first = min(p["id"] for p in httpx.get(f"{base}/api/projects").json())  # the first demo
        pids = [first]
        while len(pids) < args.projects:
            copy = httpx.post(f"{base}/api/projects/{first}/duplicate")
            copy.raise_for_status()
            pids.append(copy.json()["id"])
        load_before = [round(x, 2) for x in os.getloadavg()]
        rec, elapsed = asyncio.run(
            run_load(base, pids, args.clients, args.seconds, args.think_ms / 1000.0, args.seed)
        )
        load_after = [round(x, 2) for x in os.getloadavg()]
    finally:
        stop_server(process)
        kept = OUT / "load-serve.log"
        if (workdir / "serve.log").is_file():  # the server's own account, for any error
            kept.parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(workdir / "serve.log", kept)
        shutil.rmtree(workdir, ignore_errors=True)
    doc = summary(rec, elapsed, args, load_before, load_after)
    print_report(doc)
    out = Path(args.output)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps(doc, indent=2) + "\n")
    print(f"wrote {out}")
    return 1 if doc["errors"] else 0


if __name__ == "__main__":
    raise SystemExit(main())
