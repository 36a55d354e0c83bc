#!/usr/bin/env python3
"""Benchmark: evaluate with many existing probes and on a corridor (local conditioning).

    python benchmarks/scale.py [--skip-optimise]

Rows, each measured in its own child process (so its peak resident set is its own):

- ``L500 exact``: bench L (``benchmarks/make_case.py``) with invented existing CPTs (4
  readings each) up to 500 existing probes, conditioned exactly (the thresholds of
  ``probewise.core.local_conditioning`` lifted): the reference of this run;
- ``L500 local``: the same case as ``probewise evaluate`` runs it (local conditioning);
- ``L5000 local``: bench L with 5,000 existing probes (4,970 CPTs; 19,954 readings), the
  most the model file accepts;
- ``C evaluate``: the invented 5 km x 200 m corridor (40,000 cells at 5 m, 400 existing
  boreholes);
- ``C optimise``: ``probewise optimise --budget 100000`` on the corridor (skipped with
  ``--skip-optimise``).

Wall time (``time.perf_counter``), traced peak (``tracemalloc``) and the child's peak resident
set (``resource.getrusage``). The machine is shared: the load (``os.getloadavg``) is printed
before and after, and every figure should be read against the exact reference of the same
run. Targets: ``L5000 local`` at most 10 s and 1 GiB; the corridor optimisation at most 60 s
and 2 GiB. Figures go to ``benchmarks/out/scale.json``.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import time
import tracemalloc
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))


def build(case: str):
    from make_case import add_existing_cpts, make

    from probewise.app.to_core import to_core
    from probewise.io.model_file import validate_model

    size, total = case[0], case[1:]
    model = make(size, 1)
    if total:  # invented CPTs up to that many existing probes in all
        model = add_existing_cpts(model, int(total) - len(model["existing"]))
    return to_core(validate_model(model))


def run_one(case: str, mode: str) -> dict:
    """One row, in this process."""
    from probewise.core import local_conditioning

    if mode == "exact":  # lift the thresholds: the reference path
        local_conditioning.EXACT_MAX_READINGS = 10**12
        local_conditioning.EXACT_MAX_READING_CELLS = 10**18
    project = build(case)
    tracemalloc.start()
    t0 = time.perf_counter()
    if mode == "optimise":
        from probewise.core.optimise import OptimiseError, OptimiseOptions, optimise

        try:
            result = optimise(project, OptimiseOptions(budget=100_000))
            extra = {"probes": len(result.layout.probes)}
        except OptimiseError as exc:
            extra = {"refused": str(exc)}
    else:
        from probewise.core.evaluate import evaluate_project

        evaluation = evaluate_project(project)
        extra = {
            "cells": evaluation.grid.n_cells,
            "conditioning": evaluation.conditioning.method,
            "grid_notice": evaluation.grid_notice,
        }
    wall = time.perf_counter() - t0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return {
        "case": case,
        "mode": mode,
        "readings": int(sum(len(p.observed) for p in project.existing)),
        "wall_s": wall,
        "traced_peak_mib": peak / 2**20,
        "max_rss_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
        **extra,
    }


ROWS = [
    ("L500", "exact"),
    ("L500", "local"),
    ("L5000", "local"),
    ("C", "local"),
    ("C", "optimise"),
]


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--skip-optimise", action="store_true")
    ap.add_argument("--one", nargs=2, metavar=("CASE", "MODE"), help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.one:
        print(json.dumps(run_one(*a.one)))
        return 0
    load_before = os.getloadavg()
    rows = []
    for case, mode in ROWS:
        if mode == "optimise" and a.skip_optimise:
            continue
        done = subprocess.run(
            [sys.executable, __file__, "--one", case, mode],
            capture_output=True,
            text=True,
            check=True,
        )
        rows.append(json.loads(done.stdout.strip().splitlines()[-1]))
        print(json.dumps(rows[-1]), flush=True)
    load_after = os.getloadavg()
    exact = next(r for r in rows if r["case"] == "L500" and r["mode"] == "exact")
    print(f"\n{os.cpu_count()} CPU; load average before {load_before}, after {load_after}")
    head = f"{'case':<10}{'mode':<10}{'readings':>9}{'wall s':>9}{'x exact':>9}{'peak MiB':>10}"
    print(head + f"{'RSS MiB':>9}")
    print("-" * (len(head) + 9))
    for r in rows:
        print(
            f"{r['case']:<10}{r['mode']:<10}{r['readings']:>9}{r['wall_s']:>9.2f}"
            f"{r['wall_s'] / exact['wall_s']:>9.2f}{r['traced_peak_mib']:>10.1f}"
            f"{r['max_rss_mib']:>9.1f}"
        )
    print("x exact: wall time over the exact L500 reference of this run.")
    out = HERE / "out"
    out.mkdir(exist_ok=True)
    (out / "scale.json").write_text(
        json.dumps({"load_before": load_before, "load_after": load_after, "rows": rows}, indent=1)
        + "\n"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
