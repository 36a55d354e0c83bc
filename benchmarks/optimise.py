#!/usr/bin/env python3
"""Benchmark: the greedy optimiser on the synthetic cases of ``benchmarks/make_case.py``.

    python benchmarks/optimise.py [--budget 60000] [--picks 20] [--skip-reference]

(a) Bench L, budget 60000, default options: wall time of ``optimise`` and the peak resident
    set, measured in a fresh Python process (``resource.getrusage(RUSAGE_CHILDREN)``) so the
    peak is the optimiser's own; a warm-up process first fills numba's on-disk kernel cache,
    as any second run on a machine would find it.
(b) Bench M: the first 5 picks of one mix (all methods, mobilisation paid up front) by the
    fast greedy (``greedy_run``) and by the brute-force reference that re-solves the full
    posterior for every candidate (``greedy_reference``), on the same ``GreedyProblem``:
    identical picks?, gains, and the time ratio.
(c) Bench L, per pick over the first ``--picks`` picks of the all-methods mix: the time of a
    greedy step (search + conditioning on the pick) divided by the time numpy takes to read
    the candidate-by-target cross-covariance ``state.M`` once (``state.M.sum()``, the best of
    5, float64 as the method keeps it): the memory-bandwidth floor of any exact method.

(d) Bench M, CPT only, budgets that buy about 5, 10 and 20 CPTs (mobilisation + n x the median
    CPT candidate cost): the optimiser with its exchange refinement (the whole ``optimise``
    call, planning included) against the spatial simulated annealing of
    ``probewise.core.anneal_reference`` (van Groenigen and Stein, 1998; seed 1, random start,
    every layout scored on the full evaluation grid by the path of ``evaluate``) given 10
    times the optimiser's wall time (the annealing schedule follows the time spent):
    gain ratio (optimiser / annealing, both on the full grid) and time ratio.

Figures are printed and written to ``benchmarks/out/optimise.json``. Cases are built by
``make_case.py`` (the invented benchmark cases).
Targets: (a) at most 20 s and 2 GiB on the project's 2-core machine; (b) ratio at
least 100 with identical picks; (c) per-pick time within 3x of the floor; (d) gain ratio at least
1.00 with time ratio at most 0.1.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import statistics
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

from make_case import make  # noqa: E402


def load_case(size: str):
    from probewise.app.to_core import to_core
    from probewise.io.model_file import validate_model

    return to_core(validate_model(make(size, 1)))


def child(size: str, budget: float) -> int:
    """Run one optimisation and print its figures as JSON (runs in a fresh process)."""
    t0 = time.perf_counter()
    from probewise.core.optimise import OptimiseOptions, optimise

    project = load_case(size)
    t1 = time.perf_counter()
    out = optimise(project, OptimiseOptions(budget=budget))
    t2 = time.perf_counter()
    print(
        json.dumps(
            {
                "import_and_case_s": t1 - t0,
                "optimise_s": t2 - t1,
                "cost": out.result.cost,
                "information_gain_bits": out.result.information_gain_bits,
                "greedy_gain_bits": out.refinement.greedy_gain_bits,
                "refine_s": out.refinement.seconds,
                "refine_moves": out.refinement.moves,
                "probes": len(out.layout.probes),
                "methods": sorted({p.method for p in out.layout.probes}),
                "runs": len(out.runs),
                "picks": sum(len(r.picks) for r in out.runs),
                "optimisation_cells": out.optimisation_cells,
                "candidate_locations": int(len(out.candidates.xy)),
                "candidate_spacing_m": out.candidate_spacing_m,
            }
        )
    )
    return 0


def run_child(size: str, budget: float) -> dict:
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    t0 = time.perf_counter()
    done = subprocess.run(
        [sys.executable, str(Path(__file__).resolve()), "--child", size, str(budget)],
        capture_output=True,
        text=True,
    )
    wall = time.perf_counter() - t0
    if done.returncode:
        raise SystemExit(f"optimise {size} {budget:g} failed:\n{done.stderr}")
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    figures = json.loads(done.stdout)
    figures["process_wall_s"] = wall
    # ru_maxrss of children is the largest child so far: the warm-up is smaller than the run
    figures["peak_rss_mib"] = max(peak, before) / 1024
    return figures


def part_a(budget: float) -> dict:
    run_child("L", 5000.0)  # warm-up: fills the kernel cache for B = 4
    return run_child("L", budget)


def greedy_problem(size: str, budget: float):
    from probewise.core.optimise import OptimiseOptions, prepare_optimisation

    project = load_case(size)
    setup = prepare_optimisation(project, OptimiseOptions(budget=budget))
    left = budget - sum(setup.mobilisation.values())
    return setup, left


def part_b(budget: float, picks: int = 5) -> dict:
    import numpy as np

    from probewise.core.optimise import greedy_run
    from probewise.core.optimise_reference import greedy_reference

    setup, left = greedy_problem("M", budget)
    problem = setup.problem
    allowed = np.ones(len(problem.cand.method_ids), dtype=bool)
    greedy_run(problem, problem.base_state.copy(), allowed, left, setup.min_spacing_m, None, 1)
    t0 = time.perf_counter()
    fast = greedy_run(
        problem, problem.base_state.copy(), allowed, left, setup.min_spacing_m, None, picks
    )
    t_fast = time.perf_counter() - t0
    t0 = time.perf_counter()
    ref = greedy_reference(problem, allowed, left, setup.min_spacing_m, picks)
    t_ref = time.perf_counter() - t0
    same = [(p.location, p.method) for p in fast] == [(p.location, p.method) for p in ref]
    rel = max(abs(a.gain_bits / b.gain_bits - 1) for a, b in zip(fast, ref, strict=True))
    return {
        "candidate_locations": int(len(problem.cand.xy)),
        "candidates": int(problem.cand.valid.sum()),
        "target_slots": int(len(problem.targets.slot_cell)),
        "picks": picks,
        "identical_picks": bool(same),
        "max_relative_gain_difference": rel,
        "picks_fast": [[p.location, problem.cand.method_ids[p.method]] for p in fast],
        "picks_reference": [[p.location, problem.cand.method_ids[p.method]] for p in ref],
        "fast_s": t_fast,
        "reference_s": t_ref,
        "ratio": t_ref / t_fast,
    }


def part_c(budget: float, picks: int) -> dict:
    import numpy as np

    setup, left = greedy_problem("L", budget)
    problem = setup.problem
    cand = problem.cand

    def floor_s(state) -> float:
        best = float("inf")
        for _ in range(5):
            t0 = time.perf_counter()
            state.M.sum()
            best = min(best, time.perf_counter() - t0)
        return best

    warm = problem.base_state.copy()  # loads the cached kernels
    found = problem.best_candidate(warm, cand.valid.copy())
    problem.apply_pick(warm, found[0], found[1])
    del warm
    state = problem.base_state.copy()
    active = cand.valid.copy()
    dist_ok = np.ones(len(cand.local), dtype=bool)
    rows = []
    for _ in range(picks):
        active &= dist_ok[:, None] & (cand.cost <= left + 1e-9)
        t0 = time.perf_counter()
        found = problem.best_candidate(state, active)
        t1 = time.perf_counter()
        if found is None:
            break
        l, j, _ = found
        problem.apply_pick(state, l, j)
        t2 = time.perf_counter()
        left -= cand.cost[l, j]
        dist_ok &= np.hypot(*(cand.local - cand.local[l]).T) >= setup.min_spacing_m
        floor = floor_s(state)
        rows.append({"search_s": t1 - t0, "apply_s": t2 - t1, "floor_s": floor})
    ratios = [(r["search_s"] + r["apply_s"]) / r["floor_s"] for r in rows]
    return {
        "M_shape": list(state.M.shape),
        "M_mib": state.M.nbytes / 2**20,
        "picks": len(rows),
        "median_ratio": statistics.median(ratios),
        "max_ratio": max(ratios),
        "median_step_ms": 1e3 * statistics.median(r["search_s"] + r["apply_s"] for r in rows),
        "median_search_ms": 1e3 * statistics.median(r["search_s"] for r in rows),
        "median_apply_ms": 1e3 * statistics.median(r["apply_s"] for r in rows),
        "median_floor_ms": 1e3 * statistics.median(r["floor_s"] for r in rows),
        "ratios": ratios,
    }


def part_d(sizes=(5, 10, 20), factor: float = 10.0) -> dict:
    import numpy as np

    from probewise.core.anneal_reference import LayoutScorer, anneal_layout
    from probewise.core.optimise import OptimiseOptions, optimise, prepare_optimisation

    project = load_case("M")
    setup = prepare_optimisation(project, OptimiseOptions(budget=1e9, methods=("CPT",)))
    cand = setup.candidates
    j = cand.method_ids.index("CPT")
    typical = float(np.median(cand.cost[cand.valid[:, j], j]))
    scorer = LayoutScorer(project)
    optimise(project, OptimiseOptions(budget=5000.0, methods=("CPT",)))  # loads the kernels
    rows = []
    for n in sizes:
        budget = setup.mobilisation["CPT"] + n * typical
        t0 = time.perf_counter()
        out = optimise(project, OptimiseOptions(budget=budget, methods=("CPT",)))
        t_opt = time.perf_counter() - t0
        t0 = time.perf_counter()
        spacing = out.min_spacing_m
        ann = anneal_layout(
            project, "CPT", n, budget, spacing, 0, 1, scorer=scorer, seconds=factor * t_opt
        )
        t_ann = time.perf_counter() - t0
        moves = ann.iterations
        r = out.refinement
        rows.append(
            {
                "probes": n,
                "budget": budget,
                "greedy_gain_bits": r.greedy_gain_bits,
                "refined_gain_bits": out.result.information_gain_bits,
                "refined_probes": len(out.layout.probes),
                "refined_cost": out.result.cost,
                "moves": r.moves,
                "optimise_s": t_opt,
                "refine_s": r.seconds,
                "anneal_gain_bits": ann.gain_bits,
                "anneal_cost": ann.cost,
                "anneal_moves": moves,
                "anneal_accepted": ann.accepted,
                "anneal_s": t_ann,
                "gain_ratio": out.result.information_gain_bits / ann.gain_bits,
                "greedy_ratio": r.greedy_gain_bits / ann.gain_bits,
                "time_ratio": t_opt / t_ann,
            }
        )
    return {"rows": rows}


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--budget", type=float, default=60000.0)
    ap.add_argument("--picks", type=int, default=20)
    ap.add_argument("--skip-reference", action="store_true", help="skip (b), the slow part")
    ap.add_argument("--skip-anneal", action="store_true", help="skip (d), the slowest part")
    ap.add_argument("--only-anneal", action="store_true", help="run (d) only")
    ap.add_argument("--child", nargs=2, metavar=("SIZE", "BUDGET"), help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.child:
        return child(a.child[0], float(a.child[1]))

    print(f"probewise optimise benchmark; {os.cpu_count()} CPU, Python {platform.python_version()}")
    print(f"load average at start: {', '.join(f'{x:.2f}' for x in os.getloadavg())}")
    out: dict = {"budget": a.budget}
    if not a.only_anneal:
        parts_abc(a, out)
    if not a.skip_anneal:
        rd = out["M_anneal"] = part_d()
        for row in rd["rows"]:
            print(
                f"(d) bench M, CPT, {row['probes']} probes (budget {row['budget']:,.0f}): "
                f"greedy {row['greedy_gain_bits']:.4f}, refined {row['refined_gain_bits']:.4f} "
                f"bits in {row['optimise_s']:.1f} s; annealing {row['anneal_gain_bits']:.4f} "
                f"bits in {row['anneal_s']:.1f} s ({row['anneal_moves']} moves); gain ratio "
                f"{row['gain_ratio']:.3f}, time ratio {row['time_ratio']:.3f}"
                f"   [target: >= 1.00, <= 0.1]"
            )
    out["load_average_end"] = os.getloadavg()
    folder = HERE / "out"
    folder.mkdir(exist_ok=True)
    name = "optimise-anneal.json" if a.only_anneal else "optimise.json"
    (folder / name).write_text(json.dumps(out, indent=1) + "\n")
    return 0


def parts_abc(a, out: dict) -> None:
    ra = out["L_budget"] = part_a(a.budget)
    print(
        f"(a) bench L, budget {a.budget:g}: optimise {ra['optimise_s']:.2f} s "
        f"(process {ra['process_wall_s']:.2f} s), peak RSS {ra['peak_rss_mib']:.0f} MiB; "
        f"{ra['probes']} probes ({', '.join(ra['methods'])}), cost {ra['cost']:,.0f}, "
        f"gain {ra['information_gain_bits']:.3f} bits (greedy {ra['greedy_gain_bits']:.3f}, "
        f"refinement {ra['refine_s']:.1f} s, {ra['refine_moves']} moves); "
        f"{ra['runs']} runs, {ra['picks']} picks, "
        f"{ra['candidate_locations']} locations at {ra['candidate_spacing_m']:g} m, "
        f"{ra['optimisation_cells']} cells   [target: <= 20 s, <= 2048 MiB]"
    )
    if not a.skip_reference:
        rb = out["M_reference"] = part_b(a.budget)
        print(
            f"(b) bench M, first {rb['picks']} picks, all methods: identical picks "
            f"{rb['identical_picks']} (gains agree to {rb['max_relative_gain_difference']:.1e}); "
            f"fast {rb['fast_s'] * 1e3:.1f} ms, reference {rb['reference_s']:.1f} s, "
            f"ratio {rb['ratio']:,.0f}x   [target: identical, >= 100x]"
        )
    rc = out["L_per_pick"] = part_c(a.budget, a.picks)
    print(
        f"(c) bench L, first {rc['picks']} picks: step/floor median {rc['median_ratio']:.2f}, "
        f"max {rc['max_ratio']:.2f} (step {rc['median_step_ms']:.2f} ms = search "
        f"{rc['median_search_ms']:.2f} + apply {rc['median_apply_ms']:.2f}; floor "
        f"{rc['median_floor_ms']:.2f} ms reading M {rc['M_shape']} = {rc['M_mib']:.0f} MiB)"
        f"   [target: <= 3]"
    )


if __name__ == "__main__":
    raise SystemExit(main())
