#!/usr/bin/env python3
"""Benchmark: check every reading of 500 existing probes x 4 boundaries against its prediction.

    python benchmarks/readings.py [--probes N] [--repeat N]

The case is bench L of ``benchmarks/make_case.py`` (invented) with its existing probes
replaced by N boreholes (default 500) that read all four boundaries (values invented). The
reference is one ``evaluate_project`` of the same case in the same run; the figure is the
ratio of ``probewise readings`` (leave one probe out, and by stage) to it, best of
``--repeat`` warm runs each. Results go to ``benchmarks/out/readings.json``.
"""

from __future__ import annotations

import argparse
import json
import random
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

from make_case import make  # noqa: E402

from probewise.app.readings import project_readings  # noqa: E402
from probewise.app.to_core import to_core  # noqa: E402
from probewise.core.evaluate import evaluate_project  # noqa: E402
from probewise.io.model_file import validate_model  # noqa: E402

STEPS_M = [(0.3, 1.2), (2.0, 7.0), (1.0, 4.0), (3.0, 9.0)]  # thickness draws per unit


def case_with_probes(n: int, seed: int = 7) -> dict:
    """Bench L with ``n`` invented boreholes reading every boundary, in three stages."""
    model = make("L", 1)
    rnd = random.Random(seed)
    names = [u["name"] for u in model["units"][:-1]]
    existing = []
    for i in range(n):
        while True:
            x, y = rnd.uniform(0, 600), rnd.uniform(0, 400)
            if not (x > 360 and y > 240):
                break
        depth, observed = 0.0, {}
        for name, (lo, hi) in zip(names, STEPS_M, strict=True):
            depth = round(depth + rnd.uniform(lo, hi), 2)
            observed[name] = depth
        existing.append(
            {
                "id": f"E{i + 1:03d}",
                "method": "BH",
                "x": round(x, 1),
                "y": round(y, 1),
                "final_depth_m": depth + 1.0,
                "observed": observed,
                "stage": f"Stage {i % 3 + 1}",
            }
        )
    model["existing"] = existing
    return model


def best_of(repeat: int, fn) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--probes", type=int, default=500)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    project = to_core(validate_model(case_with_probes(args.probes)))
    readings = sum(len(p.observed) for p in project.existing)
    project_readings(project)  # warm up (numba, imports)
    evaluate_project(project)
    t_eval = best_of(args.repeat, lambda: evaluate_project(project))
    t_loo = best_of(args.repeat, lambda: project_readings(project))
    t_stage = best_of(args.repeat, lambda: project_readings(project, by_stage=True))
    out = {
        "existing_probes": len(project.existing),
        "readings": readings,
        "evaluate_s": round(t_eval, 3),
        "readings_s": round(t_loo, 3),
        "readings_by_stage_s": round(t_stage, 3),
        "ratio_readings_to_evaluate": round(t_loo / t_eval, 2),
        "ratio_by_stage_to_evaluate": round(t_stage / t_eval, 2),
        "target_ratio": 3.0,
    }
    for key, value in out.items():
        print(f"{key:32s} {value}")
    (HERE / "out").mkdir(exist_ok=True)
    (HERE / "out" / "readings.json").write_text(json.dumps(out, indent=2) + "\n")


if __name__ == "__main__":
    main()
