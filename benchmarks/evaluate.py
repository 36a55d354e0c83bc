#!/usr/bin/env python3
"""Benchmark: evaluate every layout of a synthetic case on its full evaluation grid.

    python benchmarks/evaluate.py [SIZE] [--repeat N] [--extra-layouts N]

SIZE is S, M or L (default L) of ``benchmarks/make_case.py`` (the invented benchmark
cases). The case is
validated and converted as the CLI does, then ``evaluate_project`` runs on it: the first
(cold) run and the best of ``--repeat`` warm runs are timed with ``time.perf_counter``; peak
memory is the traced peak of the evaluation (``tracemalloc``, numpy buffers included) and the
process's peak resident set (``resource.getrusage``). ``--extra-layouts N`` adds N invented
layouts (CPT and borehole grids of growing density) as a stress row. Figures are printed and
written to ``benchmarks/out/evaluate.json``.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import sys
import time
import tracemalloc
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

from make_case import make  # noqa: E402

from probewise.app.to_core import to_core  # noqa: E402
from probewise.core.evaluate import evaluate_project  # noqa: E402
from probewise.io.model_file import validate_model  # noqa: E402


def extra_layouts(model: dict, count: int) -> list[dict]:
    """Invented layouts on regular grids inside the site's lower band (all inside the site)."""
    ring = model["site"]["coordinates"][0]
    w = max(p[0] for p in ring)
    h = max(p[1] for p in ring) * 0.6
    out = []
    for n in range(count):
        step = 120 - 8 * (n % 12)  # 120 m down to 32 m
        method = "CPT" if n % 2 == 0 else "BH"
        probes = [
            {"id": f"{method}{i + 1:03d}", "method": method, "x": float(x), "y": float(y)}
            for i, (x, y) in enumerate(
                (x, y)
                for x in range(step // 2, int(w), step)
                for y in range(step // 2, int(h), step)
            )
        ]
        out.append({"name": f"Stress grid {n + 1} ({method} at {step} m)", "probes": probes})
    return out


def measure(project, repeat: int) -> dict:
    tracemalloc.start()
    t0 = time.perf_counter()
    evaluation = evaluate_project(project)
    cold = time.perf_counter() - t0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    warm = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        evaluate_project(project)
        warm.append(time.perf_counter() - t0)
    return {
        "cells": evaluation.grid.n_cells,
        "boundaries": len(evaluation.boundary_names),
        "existing_probes": len(project.existing),
        "existing_readings": int(sum(len(e.observed) for e in project.existing)),
        "layouts": len(evaluation.layouts),
        "planned_probes": sum(len(r.plans) for r in evaluation.layouts),
        "max_planned_readings": max(
            (sum(len(p.observes) for p in r.plans) for r in evaluation.layouts), default=0
        ),
        "cold_s": cold,
        "warm_best_s": min(warm) if warm else cold,
        "traced_peak_mib": peak / 2**20,
        "max_rss_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
    }


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("size", nargs="?", default="L", choices=["S", "M", "L"])
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--extra-layouts", type=int, default=10)
    a = ap.parse_args()

    model = validate_model(make(a.size, a.seed))
    t0 = time.perf_counter()
    project = to_core(model)
    convert_s = time.perf_counter() - t0

    rows = {"as written": measure(project, a.repeat)}
    if a.extra_layouts:
        stressed = dict(model, layouts=model["layouts"] + extra_layouts(model, a.extra_layouts))
        rows[f"+{a.extra_layouts} layouts"] = measure(to_core(validate_model(stressed)), a.repeat)

    print(f"probewise evaluate benchmark, case {a.size} (seed {a.seed}), to_core {convert_s:.3f} s")
    print(f"{os.cpu_count()} CPU, Python {platform.python_version()}")
    head = (
        f"{'case':<14}{'cells':>7}{'layouts':>9}{'probes':>8}{'max obs':>9}"
        f"{'cold s':>9}{'warm s':>9}{'peak MiB':>10}{'RSS MiB':>9}"
    )
    print(head)
    print("-" * len(head))
    for name, r in rows.items():
        print(
            f"{name:<14}{r['cells']:>7}{r['layouts']:>9}{r['planned_probes']:>8}"
            f"{r['existing_readings'] + r['max_planned_readings']:>9}"
            f"{r['cold_s']:>9.3f}{r['warm_best_s']:>9.3f}{r['traced_peak_mib']:>10.1f}"
            f"{r['max_rss_mib']:>9.1f}"
        )
    print("Targets (case L as written): at most 2 s wall and 1 GiB peak memory.")
    out = HERE / "out"
    out.mkdir(exist_ok=True)
    (out / "evaluate.json").write_text(
        json.dumps({"size": a.size, "seed": a.seed, "to_core_s": convert_s, "rows": rows}, indent=1)
        + "\n"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
