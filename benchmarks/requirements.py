#!/usr/bin/env python3
"""Benchmark: the optimiser with requirements against the same optimisation without them.

    python benchmarks/requirements.py [--budget 60000] [--repeats 2]

Bench L (``make_case.py``), budget 60000, default options, the whole ``optimise`` call
(planning included) without requirements and with invented ones: at least 2 BH, one BH per
6 CPT or DMT within 100 m (common practice, no source), and 9 su results in the soft alluvium
(EN 1990 Annex D: V = 0.3 unknown, characteristic value at most 60% below the mean) from BH
tube samples every metre. Runs alternate (without, with) after one warm-up of each, so both
see the same machine; the figure is the ratio of the medians. The layout with requirements is
checked to meet them (``probewise.core.requirements.requirement_status``).
Target: ratio at most 1.5. Figures are printed and written to
``benchmarks/out/requirements.json``.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

from make_case import make  # noqa: E402

SOFT = "Soft alluvium"


def with_requirements(model: dict) -> dict:
    for method in model["methods"]:
        if method["id"] == "BH":
            method["delivers"] = [
                {"kind": "sample", "name": "Thin-wall tube", "quality_class": 1,
                 "category": "A", "every_m": 1.0, "units": [SOFT], "parameters": ["su"]}
            ]  # fmt: skip
    model["requirements"] = {
        "min_probes": {"BH": 2},
        "calibration": [{"method": "BH", "for": ["CPT", "DMT"], "per": 6, "within_m": 100}],
        "tests": [{"unit": SOFT, "parameter": "su",
                   "characteristic": {"cov": 0.3, "max_reduction": 0.6}}],
    }  # fmt: skip
    return model


def main() -> int:
    from probewise.app.to_core import to_core
    from probewise.core.analysis import ProjectAnalysis
    from probewise.core.optimise import OptimiseOptions, optimise
    from probewise.core.requirements import requirement_status
    from probewise.io.model_file import validate_model

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--budget", type=float, default=60000.0)
    ap.add_argument("--repeats", type=int, default=2)
    a = ap.parse_args()
    print(f"load average at start: {', '.join(f'{x:.2f}' for x in os.getloadavg())}")
    plain = to_core(validate_model(make("L", 1)))
    required = to_core(validate_model(with_requirements(make("L", 1))))
    options = OptimiseOptions(budget=a.budget)
    times: dict[str, list[float]] = {"without": [], "with": []}
    outs = {}
    for n in range(a.repeats + 1):
        for label, project in (("without", plain), ("with", required)):
            t0 = time.perf_counter()
            outs[label] = optimise(project, options)
            elapsed = time.perf_counter() - t0
            if n:  # the first round warms the kernel cache
                times[label].append(elapsed)
            print(f"{'warm-up ' if not n else ''}{label}: {elapsed:.1f} s")
    out = outs["with"]
    status = requirement_status(ProjectAnalysis(required), out.result.plans)
    methods = [p.method for p in out.layout.probes]
    doc = {
        "budget": a.budget,
        "without_s": times["without"],
        "with_s": times["with"],
        "ratio": statistics.median(times["with"]) / statistics.median(times["without"]),
        "without_gain_bits": outs["without"].result.information_gain_bits,
        "with_gain_bits": out.result.information_gain_bits,
        "with_probes": {m: methods.count(m) for m in sorted(set(methods))},
        "without_probes": {
            m: [p.method for p in outs["without"].layout.probes].count(m)
            for m in sorted({p.method for p in outs["without"].layout.probes})
        },
        "meets": status.met,
        "unmet": list(status.unmet),
        "load_average_end": os.getloadavg(),
    }
    print(
        f"bench L, budget {a.budget:,.0f}: without {statistics.median(times['without']):.1f} s "
        f"({doc['without_gain_bits']:.3f} bits, {doc['without_probes']}), with requirements "
        f"{statistics.median(times['with']):.1f} s ({doc['with_gain_bits']:.3f} bits, "
        f"{doc['with_probes']}, meets: {status.met}); ratio {doc['ratio']:.2f} [target <= 1.5]"
    )
    folder = HERE / "out"
    folder.mkdir(exist_ok=True)
    (folder / "requirements.json").write_text(json.dumps(doc, indent=1) + "\n")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
