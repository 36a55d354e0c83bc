#!/usr/bin/env python3
"""Benchmark: the value of every layout (``probewise value``) against ``evaluate`` on one file.

    python benchmarks/value.py [SIZE] [--repeat N] [--extra-layouts N]

SIZE is S, M or L (default L) of ``benchmarks/make_case.py`` (the invented benchmark cases),
with six invented design elements covering 30% of the site: three quantity and three choice
elements, on two boundaries, both adverse directions. Both runs start from the core project
(validated and converted once): ``evaluate`` is ``evaluate_project``; ``value`` is
``project_values`` (the same evaluation plus the element costs now and after each layout).
Best of ``--repeat`` warm runs each, interleaved, with ``time.perf_counter``; the ratio
value / evaluate is the figure (target: at most 2). ``--extra-layouts N`` adds the invented
stress layouts of ``benchmarks/evaluate.py`` as a second row. Written to
``benchmarks/out/value.json``.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

from evaluate import extra_layouts  # noqa: E402
from make_case import SIZES, make  # noqa: E402

from probewise.app.to_core import to_core  # noqa: E402
from probewise.app.value import project_values  # noqa: E402
from probewise.core.evaluate import evaluate_project  # noqa: E402
from probewise.io.model_file import validate_model  # noqa: E402

SHARE = 0.30  # of the site's area covered by elements


def rect(x0, y0, x1, y1):
    return {"type": "Polygon", "coordinates": [[[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]]}


def invented_elements(size: str) -> list[dict]:
    """Six equal rectangles in the site's full-width lower band (60% of its height), 30% of
    the site's area in all; invented rates, thresholds and costs."""
    w, h, _, _ = SIZES[size]
    area = w * h - (0.4 * w) * (0.4 * h)  # the L-shaped site of make_case
    each = SHARE * area / 6
    ew = w / 5  # three per row with gaps
    eh = each / ew
    rows = (0.02 * h, 0.02 * h + eh + 0.05 * h)
    assert rows[1] + eh < 0.6 * h, "elements must stay in the full-width band"
    specs = [
        ("quantity", "Soft alluvium", "deeper", {"rate_per_m3": 15.0}),
        ("quantity", "Soft alluvium", "deeper", {"rate_per_m3": 12.0, "reference_depth_m": 3.0}),
        ("quantity", "Sand and gravel", "shallower",
         {"rate_per_m3": 8.0, "reference_depth_m": 9.0}),
        ("choice", "Soft alluvium", "deeper",
         {"threshold_depth_m": 5.5, "cheaper_cost": 150000.0, "robust_cost": 400000.0}),
        ("choice", "Soft alluvium", "deeper",
         {"threshold_depth_m": 6.0, "cheaper_cost": 90000.0, "robust_cost": 260000.0}),
        ("choice", "Sand and gravel", "shallower",
         {"threshold_depth_m": 6.0, "cheaper_cost": 200000.0, "robust_cost": 350000.0}),
    ]  # fmt: skip
    out = []
    for i, (kind, base, adverse, con) in enumerate(specs):
        x0 = (0.1 + 1.6 * (i % 3)) * ew
        y0 = rows[i // 3]
        out.append(
            {
                "name": f"Invented {kind} element {i + 1}",
                "geometry": rect(x0, y0, x0 + ew, y0 + eh),
                "base_of": base,
                "adverse": adverse,
                "design_fractile": 0.95,
                "consequence": {"kind": kind, **con},
            }
        )
    return out


def best_of(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def measure(model: dict, repeat: int) -> dict:
    """Best warm times of evaluate and value on one model, interleaved."""
    project = to_core(validate_model(model))
    report = project_values(project)  # warm-up
    evaluate_s, value_s = [], []
    for _ in range(repeat):  # interleaved so a busy moment hits both alike
        evaluate_s.append(best_of(lambda: evaluate_project(project), 1))
        value_s.append(best_of(lambda: project_values(project), 1))
    row = {
        "cells_per_element": [cells for _, cells, _ in report.elements],
        "layouts": len(report.layouts),
        "evaluate_s": min(evaluate_s),
        "value_s": min(value_s),
    }
    row["ratio"] = row["value_s"] / row["evaluate_s"]
    return row


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("size", nargs="?", default="L", choices=["S", "M", "L"])
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--extra-layouts", type=int, default=10)
    a = ap.parse_args()

    model = make(a.size, a.seed)
    model["elements"] = invented_elements(a.size)
    rows = {"as written": measure(model, a.repeat)}
    if a.extra_layouts:
        stressed = dict(model, layouts=model["layouts"] + extra_layouts(model, a.extra_layouts))
        rows[f"+{a.extra_layouts} layouts"] = measure(stressed, a.repeat)

    print(f"probewise value benchmark, case {a.size} (seed {a.seed}), 6 invented elements")
    print(f"{os.cpu_count()} CPU, Python {platform.python_version()}")
    first = rows["as written"]
    print(f"cells per element: {first['cells_per_element']}")
    print(f"{'case':<14}{'layouts':>8}{'evaluate s':>12}{'value s':>10}{'ratio':>8}")
    for name, r in rows.items():
        print(
            f"{name:<14}{r['layouts']:>8}{r['evaluate_s']:>12.3f}{r['value_s']:>10.3f}"
            f"{r['ratio']:>8.2f}"
        )
    print("Target: value at most 2x evaluate.")
    out = HERE / "out"
    out.mkdir(exist_ok=True)
    (out / "value.json").write_text(
        json.dumps({"size": a.size, "seed": a.seed, "rows": rows}, indent=1) + "\n"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
