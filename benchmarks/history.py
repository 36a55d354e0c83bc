#!/usr/bin/env python3
"""Benchmark: evaluation with and without site history on bench L, measured in one run.

    python benchmarks/history.py [SIZE] [--repeat N] [--points N]

The case (``benchmarks/make_case.py``, default L) gets a ground level of ``--points``
invented survey points (default 200, linear on their Delaunay triangulation) and one history
rule on the base of the made ground: two invented former environments, a tide table with a
datum shift and settlement of the soft alluvium. ``evaluate_project`` runs on the case with and
without the history, alternately, and the best of ``--repeat`` warm runs of each is compared
(target: at most 1.5 times). ``to_core`` (which checks the history bounds for conflicts on
the grid) is timed too. Figures go to ``benchmarks/out/history.json``.
"""

from __future__ import annotations

import argparse
import copy
import json
import os
import platform
import random
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

from make_case import SIZES, make, rect  # noqa: E402

from probewise.app.to_core import to_core  # noqa: E402
from probewise.core.evaluate import evaluate_project  # noqa: E402
from probewise.io.model_file import validate_model  # noqa: E402


def with_history(model: dict, size: str, n_points: int, seed: int) -> dict:
    """The case with an invented ground level, tide table and history rule."""
    w, h, _, _ = SIZES[size]
    rnd = random.Random(seed)
    out = copy.deepcopy(model)
    out["ground_level"] = {
        "datum": "mOD (invented)",
        "points": [
            {"x": rnd.uniform(0, w), "y": rnd.uniform(0, h), "level_m": rnd.uniform(2.8, 3.3)}
            for _ in range(n_points)
        ],
    }
    out["reference_levels"] = {
        "datum_shift_m": -2.0,
        "levels": [{"name": "MHWN", "level_m": 3.9}, {"name": "MHWS", "level_m": 4.6}],
    }
    fill, soft = out["units"][0]["name"], out["units"][1]["name"]
    out["history"] = [
        {
            "name": "Reclamation (invented)",
            "base_of": fill,
            "environments": [
                {"name": "Former marsh", "geometry": rect(0, 0, w * 0.5, h),
                 "level_min": "MHWN", "level_max": "MHWS"},
                {"name": "Former meadow", "geometry": rect(w * 0.5, 0, w, h),
                 "level_min": 2.3, "level_max": 3.0},
            ],
            "outside": None,
            "settlement": {"compressible_unit": soft, "cc": {"min": 0.15, "max": 0.45},
                           "e0": 1.3, "unit_weight_kn_m3": 16.5,
                           "fill_unit_weight_kn_m3": 18.0, "surcharge_kpa": 0.0},
        }
    ]  # fmt: skip
    return out


def best_of(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("size", nargs="?", default="L", choices=["S", "M", "L"])
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--points", type=int, default=200)
    a = ap.parse_args()

    plain_model = validate_model(make(a.size, a.seed))
    hist_model = validate_model(with_history(plain_model, a.size, a.points, a.seed))
    rows = {}
    projects = {}
    for name, model in (("without history", plain_model), ("with history", hist_model)):
        projects[name] = to_core(model)
        rows[name] = {"to_core_s": best_of(lambda m=model: to_core(m), a.repeat)}
    for name in rows:  # warm-up (numba, caches) before timing
        evaluate_project(projects[name])
    times: dict[str, list[float]] = {name: [] for name in rows}
    for _ in range(a.repeat):  # alternate, so load from other processes hits both alike
        for name in rows:
            times[name].append(best_of(lambda p=projects[name]: evaluate_project(p), 1))
    for name in rows:
        rows[name]["evaluate_s"] = min(times[name])
    ratio = rows["with history"]["evaluate_s"] / rows["without history"]["evaluate_s"]
    cells = evaluate_project(projects["with history"]).grid.n_cells

    print(f"probewise history benchmark, case {a.size} (seed {a.seed}), {cells} cells, "
          f"{a.points} ground-level points")  # fmt: skip
    print(f"{os.cpu_count()} CPU, Python {platform.python_version()}")
    print(f"{'case':<18}{'to_core s':>11}{'evaluate s':>12}")
    for name, r in rows.items():
        print(f"{name:<18}{r['to_core_s']:>11.3f}{r['evaluate_s']:>12.3f}")
    print(f"evaluate with / without history: {ratio:.2f}x (target at most 1.5x)")
    out = HERE / "out"
    out.mkdir(exist_ok=True)
    doc = {"size": a.size, "seed": a.seed, "points": a.points, "cells": cells, "rows": rows,
           "ratio": ratio}  # fmt: skip
    (out / "history.json").write_text(json.dumps(doc, indent=1) + "\n")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
