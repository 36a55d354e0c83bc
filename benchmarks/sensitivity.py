#!/usr/bin/env python3
"""Benchmark: the ranking's sensitivity (five rankings) against one ranking of the same model.

    python benchmarks/sensitivity.py [--repeat N]

The case is the invented demo project (seed_data/demo-project.json: three layouts, design
elements, so every ranking carries the value of each option). The reference is one
``rank_options`` of the model as entered in the same run; the figure is the ratio of
``ranking_sensitivity`` (the ranking as entered reused, four changed models ranked afresh) to
it, best of ``--repeat`` runs each. Results go to ``benchmarks/out/sensitivity.json``.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from probewise.app.sensitivity import ranking_sensitivity  # noqa: E402
from probewise.app.to_core import to_core  # noqa: E402
from probewise.core.options import rank_options  # noqa: E402


def best_of(repeat: int, run) -> tuple[float, object]:
    best, out = float("inf"), None
    for _ in range(repeat):
        start = time.perf_counter()
        out = run()
        best = min(best, time.perf_counter() - start)
    return best, out


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    model = json.loads((HERE.parent / "seed_data" / "demo-project.json").read_text())
    project = to_core(model)
    kinds = {lay["name"]: "hand" for lay in model["layouts"]}
    one_s, ranking = best_of(args.repeat, lambda: rank_options(project, project.layouts, kinds))
    all_s, sens = best_of(args.repeat, lambda: ranking_sensitivity(project, kinds, ranking=ranking))
    result = {
        "case": "demo (3 layouts, design elements)",
        "one_ranking_s": one_s,
        "sensitivity_s": all_s,
        "ratio": all_s / one_s,
        "holds": sens.holds,
    }
    out = HERE / "out"
    out.mkdir(exist_ok=True)
    (out / "sensitivity.json").write_text(json.dumps(result, indent=1))
    print(
        f"sensitivity {all_s:.2f} s against one ranking {one_s:.2f} s: {all_s / one_s:.1f}x "
        f"(the best option {'holds' if sens.holds else 'changes'})"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
