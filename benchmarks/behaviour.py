#!/usr/bin/env python3
"""Benchmark: the behaviour check on 200 probes x 500 test results (100,000 readings).

    python benchmarks/behaviour.py [--probes N] [--per-probe N]

The case is the invented reclaimed strip demo (seed_data/demo-reclaimed-strip.json) with its
existing probes replaced by N invented CPTs spread over the strip (those east of the mapped
former environments have no history bound and are left out), each with 500 results: qc, fs
and u2 at 100 depths and dilatometer p0 and p1 at 100 more (values invented). Timed: import
of the results from a CSV table (read, put on the probes, the whole model file validated),
conversion of the model, and the check itself (domains, derived indices, bootstrap intervals
and tests of every parameter). The reference, in the same run: pandas.read_csv of the same
table plus scipy.stats.mannwhitneyu and ks_2samp on every parameter (the bare parse and
tests). Peak RSS is the process's. A progress bar shows on a terminal. Results go to
``benchmarks/out/behaviour.json``.
"""

from __future__ import annotations

import argparse
import io
import json
import resource
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from probewise.app.behaviour import behaviour_report  # noqa: E402
from probewise.app.to_core import to_core  # noqa: E402
from probewise.io.model_file import validate_model  # noqa: E402
from probewise.io.tests_in import merge_tests, read_tests  # noqa: E402

DEMO = HERE.parent / "seed_data" / "demo-reclaimed-strip.json"
FILL = "Hydraulic fill and made ground"


def progress(step: int, total: int, label: str) -> None:
    if not sys.stderr.isatty():
        return
    width = 30
    done = int(width * step / total)
    sys.stderr.write(f"\r[{'#' * done}{'.' * (width - done)}] {step}/{total} {label:<28}")
    if step == total:
        sys.stderr.write("\n")
    sys.stderr.flush()


def case(n_probes: int, per_probe: int, seed: int = 5) -> tuple[dict, bytes]:
    """The model with ``n_probes`` invented CPTs and the CSV table of their results."""
    model = json.loads(DEMO.read_text())
    rng = np.random.default_rng(seed)
    depths = per_probe // 5  # 3 CPT parameters and 2 DMT ones at as many depths each
    lines = ["probe,depth_m,parameter,value,unit"]
    existing = []
    for i in range(n_probes):
        pid = f"P{i + 1:03d}"
        base = rng.uniform(1.0, 6.0)  # invented fill base
        existing.append(
            {
                "id": pid,
                "method": "CPT",
                "x": round(float(rng.uniform(2, 398)), 1),
                "y": round(float(rng.uniform(2, 118)), 1),
                "final_depth_m": 20.0,
                "observed": {FILL: round(base, 2)},
            }
        )
        z = np.round(np.linspace(0.2, 19.8, depths), 2)
        soft = z > base
        qc = np.where(soft, 0.3 + 0.04 * z, 6.0) * rng.lognormal(0, 0.25, depths)
        fs = np.where(soft, 8.0, 40.0) * rng.lognormal(0, 0.3, depths)
        u2 = 9.81 * np.maximum(0, z - 2.5) + np.where(soft, 120.0, 0.0) * rng.uniform(
            0.5, 1, depths
        )
        p0 = np.where(soft, 60 + 8 * z, 250.0) * rng.lognormal(0, 0.2, depths)
        p1 = p0 + np.where(soft, 60.0, 600.0) * rng.lognormal(0, 0.2, depths)
        zd = np.round(z + 0.05, 2)
        for name, unit, values, at in (
            ("qc", "MPa", qc, z),
            ("fs", "kPa", fs, z),
            ("u2", "kPa", u2, z),
            ("p0", "kPa", p0, zd),
            ("p1", "kPa", p1, zd),
        ):
            lines += [
                f"{pid},{d:.2f},{name},{v:.4g},{unit}" for d, v in zip(at, values, strict=True)
            ]
    model["existing"] = existing
    model["layouts"] = []
    return model, ("\n".join(lines) + "\n").encode()


def reference(table: bytes) -> float:
    import pandas as pd
    from scipy.stats import ks_2samp, mannwhitneyu

    t0 = time.perf_counter()
    frame = pd.read_csv(io.BytesIO(table))
    for _, group in frame.groupby("parameter"):
        values = group["value"].to_numpy()
        thirds = np.array_split(values, 3)
        for other in (thirds[0], thirds[2]):
            mannwhitneyu(thirds[1], other, alternative="two-sided")
            ks_2samp(thirds[1], other)
    return time.perf_counter() - t0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--probes", type=int, default=200)
    parser.add_argument("--per-probe", type=int, default=500)
    args = parser.parse_args()
    steps = 5
    progress(0, steps, "building the case")
    model, table = case(args.probes, args.per_probe)
    base = validate_model(model)
    progress(1, steps, "importing the table")
    t0 = time.perf_counter()
    read = read_tests(table, base, filename="bench.csv")
    merged = validate_model(merge_tests(base, read))
    t_import = time.perf_counter() - t0
    progress(2, steps, "converting the model")
    t0 = time.perf_counter()
    project = to_core(merged)
    t_convert = time.perf_counter() - t0
    progress(3, steps, "classifying and comparing")
    t0 = time.perf_counter()
    report = behaviour_report(merged, project, FILL)
    t_check = time.perf_counter() - t0
    progress(4, steps, "reference (pandas + scipy)")
    t_ref = reference(table)
    progress(5, steps, "done")
    total = t_import + t_convert + t_check
    rss_mib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    out = {
        "readings": read.total,
        "probes": args.probes,
        "domains": report.domains,
        "parameters": len(report.parameters),
        "import_s": round(t_import, 2),
        "convert_s": round(t_convert, 2),
        "check_s": round(t_check, 2),
        "total_s": round(total, 2),
        "reference_s": round(t_ref, 2),
        "ratio": round(total / t_ref, 1),
        "peak_rss_mib": round(rss_mib),
        "target": "10 s, 1 GiB",
    }
    (HERE / "out").mkdir(exist_ok=True)
    (HERE / "out" / "behaviour.json").write_text(json.dumps(out, indent=1) + "\n")
    print(json.dumps(out, indent=1))


if __name__ == "__main__":
    main()
