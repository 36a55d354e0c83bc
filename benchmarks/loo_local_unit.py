#!/usr/bin/env python3
"""Leave-one-out check: a locally present unit, absent units kept, and plain kriging.

    python benchmarks/loo_local_unit.py [--holes N] [--seed S]

An invented reclaimed site (the tiny test model's 200 m x 120 m plot, units renamed Fill,
Marine deposit, Alluvium, Weathered rock): fill of smoothly varying thickness, a lens of
marine deposit met by a few holes only, alluvium thickening eastward. The ground is made by
a process of our own (sines, a cone-shaped lens, Gaussian noise), not by probewise's model.
Each hole in turn is left out; the others are existing probes and probewise predicts the
three boundary depths at the hole left out (posterior mean). Three ways of bringing the holes
in are compared:

- A: absent units dropped (the marine base recorded only where met), marine range 0/0/6 PERT;
- B: absent units kept (equal depths), the same 0/0/6 range;
- C: absent units kept, the marine range suggested from the holes that met it (P5 / median /
  P95) with the share of holes that met it as its presence.

The reference is ordinary kriging of each boundary depth on its own (gstools.krige.Ordinary,
exponential covariance of the same practical range, sill the sample variance, nugget 1% of
it), fed the same holes as B and C. Fill and alluvium ranges come from P5 / median / P95 of
all holes in every case. Mean absolute errors are printed and written to
``benchmarks/out/loo_local_unit.json``. Not a timing benchmark: the figures are errors (m).
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from probewise.app.to_core import to_core  # noqa: E402
from probewise.core.analysis import ProjectAnalysis  # noqa: E402
from probewise.io.model_file import validate_model  # noqa: E402

UNITS = ["Fill", "Marine deposit", "Alluvium"]
RENAME = {
    "Made ground": "Fill",
    "Alluvial clay": "Marine deposit",
    "River gravel": "Alluvium",
    "Mudstone": "Weathered rock",
}
RANGE_M = 80.0
LENS = (60.0, 60.0, 24.0)  # centre x, y and radius of the marine lens (m)


def invented_ground(n_holes: int, seed: int) -> list[dict]:
    """Holes on a jittered grid with their true unit thicknesses (m)."""
    gen = np.random.default_rng(seed)
    nx = int(round(math.sqrt(n_holes * 200 / 120)))
    ny = int(math.ceil(n_holes / nx))
    holes = []
    for j in range(ny):
        for i in range(nx):
            if len(holes) == n_holes:
                break
            x = (i + 0.5) * 200 / nx + gen.uniform(-4, 4)
            y = (j + 0.5) * 120 / ny + gen.uniform(-4, 4)
            fill = 3.0 + 1.0 * math.sin(x / 40) + 0.5 * math.cos(y / 30) + gen.normal(0, 0.2)
            r = math.hypot(x - LENS[0], y - LENS[1])
            marine = 5.0 * (1 - r / LENS[2]) if r < LENS[2] else 0.0
            alluvium = 6.0 + 0.01 * x + gen.normal(0, 0.3)
            holes.append({"id": f"H{len(holes) + 1:02d}", "x": x, "y": y,
                          "t": (max(fill, 0.3), marine, alluvium)})  # fmt: skip
    return holes


def true_bases(hole: dict) -> np.ndarray:
    return np.cumsum(hole["t"])


def probe_of(hole: dict, keep_absent: bool) -> dict:
    bases = true_bases(hole)
    observed = {u: round(float(b), 3) for u, b in zip(UNITS, bases, strict=True)}
    if not keep_absent and hole["t"][1] == 0.0:
        del observed["Marine deposit"]
    return {"id": hole["id"], "method": "BH", "x": hole["x"], "y": hole["y"],
            "final_depth_m": round(float(bases[-1]) + 2.0, 3), "observed": observed}  # fmt: skip


def quantile_range(values: list[float]) -> dict:
    lo, mid, hi = np.quantile(values, [0.05, 0.5, 0.95])
    return {"min": round(float(lo), 2), "likely": round(float(mid), 2),
            "max": round(float(hi), 2), "shape": "pert"}  # fmt: skip


def base_model(holes: list[dict], case: str) -> dict:
    text = (HERE.parent / "tests" / "data" / "tiny-model.json").read_text()
    for old, new in RENAME.items():
        text = text.replace(f'"{old}"', f'"{new}"')
    model = json.loads(text)
    model.update(zones=[], bounds=[], layouts=[], existing=[])
    for k, unit in enumerate(model["units"][:-1]):
        unit["correlation"] = {"model": "exponential", "range_m": RANGE_M}
        unit["thickness_m"] = quantile_range([h["t"][k] for h in holes])
    marine = model["units"][1]
    if case in ("A", "B"):
        marine["thickness_m"] = {"min": 0, "likely": 0, "max": 6, "shape": "pert"}
    else:
        present = [h["t"][1] for h in holes if h["t"][1] > 0]
        marine["thickness_m"] = quantile_range(present)
        marine["presence"] = round(len(present) / len(holes), 3)
    return model


def probewise_loo(holes: list[dict], case: str) -> np.ndarray:
    """(n, 3) predicted boundary depths at each hole, the hole left out."""
    model = base_model(holes, case)
    probes = [probe_of(h, keep_absent=case != "A") for h in holes]
    out = np.empty((len(holes), 3))
    for i, hole in enumerate(holes):
        model["existing"] = probes[:i] + probes[i + 1 :]
        analysis = ProjectAnalysis(to_core(validate_model(model)))
        out[i] = analysis.at_points(np.array([[hole["x"], hole["y"]]])).mean_m[0]
    return out


def kriging_loo(holes: list[dict]) -> np.ndarray:
    """(n, 3) ordinary-kriging predictions (gstools), each boundary on its own."""
    import gstools as gs

    xy = np.array([[h["x"], h["y"]] for h in holes])
    depths = np.array([true_bases(h) for h in holes])
    out = np.empty_like(depths)
    for k in range(3):
        var = float(np.var(depths[:, k]))
        cov = gs.Exponential(dim=2, var=0.99 * var, len_scale=RANGE_M / 3, nugget=0.01 * var)
        for i in range(len(holes)):
            keep = np.arange(len(holes)) != i
            krige = gs.krige.Ordinary(cov, cond_pos=xy[keep].T, cond_val=depths[keep, k])
            field, _var = krige(xy[i : i + 1].T, return_var=True)
            out[i, k] = float(np.asarray(field).ravel()[0])
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--holes", type=int, default=80)
    parser.add_argument("--seed", type=int, default=20261204)
    args = parser.parse_args()
    holes = invented_ground(args.holes, args.seed)
    truth = np.array([true_bases(h) for h in holes])
    met = sum(h["t"][1] > 0 for h in holes)
    print(f"{len(holes)} invented holes; marine deposit met in {met}")
    rows = {"kriging": kriging_loo(holes)}
    for case in ("A", "B", "C"):
        rows[case] = probewise_loo(holes, case)
    ref = float(np.mean(np.abs(rows["kriging"] - truth)))
    result = {"holes": len(holes), "marine_met": met, "cases": {}}
    heads = ("MAE fill", "MAE marine", "MAE alluv", "MAE all", "/ kriging")
    print(f"{'case':<8} " + " ".join(f"{h:>10}" for h in heads))
    for name, pred in rows.items():
        err = np.abs(pred - truth)
        per = err.mean(axis=0)
        allm = float(err.mean())
        cells = [f"{v:10.3f}" for v in (*per, allm)] + [f"{allm / ref:10.2f}"]
        print(f"{name:<8} " + " ".join(cells))
        result["cases"][name] = {"mae_m": [float(v) for v in per], "mae_all_m": allm,
                                 "ratio_to_kriging": allm / ref}  # fmt: skip
    out = HERE / "out"
    out.mkdir(exist_ok=True)
    (out / "loo_local_unit.json").write_text(json.dumps(result, indent=2))


if __name__ == "__main__":
    main()
