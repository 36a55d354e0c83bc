#!/usr/bin/env python3
"""Benchmark: fit the ground model to 200 existing probes x 4 boundaries.

    python benchmarks/fit.py [--probes N]

The case is that of ``benchmarks/readings.py`` (bench L with invented boreholes reading
every boundary). The fit runs once (cold, as ``probewise fit`` does); the target is 60 s.
One evaluate of the same case is timed in the same run as a reference for the machine's
speed. Results go to ``benchmarks/out/fit.json``.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

from readings import case_with_probes  # noqa: E402

from probewise.app.fit import project_fit  # noqa: E402
from probewise.app.to_core import to_core  # noqa: E402
from probewise.core.evaluate import evaluate_project  # noqa: E402
from probewise.io.model_file import validate_model  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--probes", type=int, default=200)
    args = parser.parse_args()
    project = to_core(validate_model(case_with_probes(args.probes)))
    t0 = time.perf_counter()
    evaluate_project(project)
    t_eval = time.perf_counter() - t0
    t0 = time.perf_counter()
    fit = project_fit(project)
    t_fit = time.perf_counter() - t0
    out = {
        "existing_probes": len(project.existing),
        "readings": sum(len(p.observed) for p in project.existing),
        "fitted_units": sum(u.fitted for u in fit.units),
        "fitted_pairs": len(fit.pairs),
        "log_likelihood_conceptual": round(fit.log_likelihood_conceptual, 2),
        "log_likelihood": round(fit.log_likelihood, 2),
        "evaluate_s": round(t_eval, 2),
        "fit_s": round(t_fit, 2),
        "target_fit_s": 60,
    }
    for key, value in out.items():
        print(f"{key:28s} {value}")
    (HERE / "out").mkdir(exist_ok=True)
    (HERE / "out" / "fit.json").write_text(json.dumps(out, indent=2) + "\n")


if __name__ == "__main__":
    main()
