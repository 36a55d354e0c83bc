"""The fast path against an independent dense implementation of docs/model.md (to 1e-6 m).

Source: docs/model.md "Probability model" and "Numbers reported for a layout", implemented plainly
in tests/core/dense_reference.py (dense matrices, np.linalg.solve, scipy.stats.truncnorm).
"""

from __future__ import annotations

import numpy as np
import pytest
from core_helpers import shift_model, tiny_dict
from dense_reference import Dense

from probewise.app.contract import evaluation_json
from probewise.app.to_core import core_layout, to_core
from probewise.core.analysis import ProjectAnalysis
from probewise.core.evaluate import evaluate_project

TOL = 1e-6


def _compare_metrics(got: dict, ref: dict):
    assert list(got) == list(ref)
    for name in ref:
        for key, value in ref[name].items():
            if value is None:
                assert got[name][key] is None, (name, key)
            else:
                assert got[name][key] == pytest.approx(value, rel=1e-9, abs=TOL), (name, key)


@pytest.fixture(scope="module")
def tiny_with_extras():
    """The tiny model plus a bound inside a polygon and a layout with depth overrides and a
    probe that refuses, so every rule is exercised."""
    model = tiny_dict()
    model["bounds"].append(
        {
            "base_of": "Alluvial clay",
            "min_depth_m": 3.5,
            "max_depth_m": 7.0,
            "geometry": {
                "type": "Polygon",
                "coordinates": [[[0, 0], [60, 0], [60, 120], [0, 120], [0, 0]]],
            },
        }
    )
    model["layouts"].append(
        {
            "name": "Mixed with overrides",
            "probes": [
                {"id": "D1", "method": "DMT", "x": 100, "y": 60},
                {"id": "C1", "method": "CPT", "x": 30, "y": 30},  # on top of HBH1
                {"id": "B1", "method": "BH", "x": 175, "y": 10, "depth_m": 3.0},
                {"id": "B2", "method": "BH", "x": 10, "y": 110, "depth_m": 20.0},
            ],
        }
    )
    return model


@pytest.fixture(scope="module")
def dense_result(tiny_with_extras):
    return Dense(tiny_with_extras).evaluate()


def test_evaluate_matches_dense_reference(tiny_with_extras, dense_result):
    got = evaluation_json(evaluate_project(to_core(tiny_with_extras)))
    _compare_metrics(got["baseline"]["boundaries"], dense_result["baseline"]["boundaries"])
    assert len(got["layouts"]) == len(dense_result["layouts"])
    for lay, ref in zip(got["layouts"], dense_result["layouts"], strict=True):
        assert lay["name"] == ref["name"]
        _compare_metrics(lay["boundaries"], ref["boundaries"])
        for key in ("cost", "metres", "duration_days", "information_gain_bits"):
            assert lay[key] == pytest.approx(ref[key], rel=1e-9, abs=TOL), (lay["name"], key)
        for probe, rp in zip(lay["probes"], ref["probes"], strict=True):
            assert probe["id"] == rp["id"]
            assert probe["depth_m"] == pytest.approx(rp["depth_m"], abs=TOL)
            assert probe["observes"] == rp["observes"]


def test_point_posterior_matches_dense_reference(tiny_with_extras):
    project = to_core(tiny_with_extras)
    analysis = ProjectAnalysis(project)
    dense = Dense(tiny_with_extras)
    pts = [(100.0, 60.0), (30.0, 30.0), (5.0, 115.0), (-40.0, 200.0), (199.0, 119.0)]
    for layout in [None, *tiny_with_extras["layouts"]]:
        core_lay = None if layout is None else core_layout(layout)
        post = analysis.at_points(np.array(pts), core_lay)
        planned = []
        if layout is not None:
            for p, _, observes in dense.plan(layout):
                tau = dense.method(p["method"])["precision_m"]
                planned += [(p["x"], p["y"], k, tau[dense.names[k]]) for k in observes]
        mean, var = dense.posterior(pts, planned)
        np.testing.assert_allclose(post.mean_m, mean, atol=TOL)
        np.testing.assert_allclose(post.std_m, np.sqrt(var), atol=TOL)
        for i, (x, y) in enumerate(pts):
            for k in range(dense.B):
                lo, hi = dense.bounds(k, x, y)
                sd = np.sqrt(var[i, k])
                assert post.p05_m[i, k] == pytest.approx(
                    dense.quantile(mean[i, k], sd, lo, hi, 0.05), abs=TOL
                )
                assert post.p95_m[i, k] == pytest.approx(
                    dense.quantile(mean[i, k], sd, lo, hi, 0.95), abs=TOL
                )


def test_projected_coordinates_lose_no_precision(tiny_with_extras):
    """6-7 digit projected coordinates (the tiny model moved by 512000, 6190000) give the
    same numbers to 1e-6: the core works relative to the site centre."""
    base = evaluation_json(evaluate_project(to_core(tiny_with_extras)))
    moved_model = shift_model(tiny_with_extras, 512000.0, 6190000.0)
    moved = evaluation_json(evaluate_project(to_core(moved_model)))
    _compare_metrics(moved["baseline"]["boundaries"], base["baseline"]["boundaries"])
    for a, b in zip(moved["layouts"], base["layouts"], strict=True):
        _compare_metrics(a["boundaries"], b["boundaries"])
        for key in ("cost", "metres", "duration_days", "information_gain_bits"):
            assert a[key] == pytest.approx(b[key], abs=TOL)
        for pa, pb in zip(a["probes"], b["probes"], strict=True):
            assert pa["x"] == pb["x"] + 512000.0 and pa["y"] == pb["y"] + 6190000.0
            assert pa["depth_m"] == pytest.approx(pb["depth_m"], abs=TOL)
            assert pa["observes"] == pb["observes"]
    pts = np.array([[100.0, 60.0], [12.5, 7.5]])
    p0 = ProjectAnalysis(to_core(tiny_with_extras)).at_points(pts)
    p1 = ProjectAnalysis(to_core(moved_model)).at_points(pts + [512000.0, 6190000.0])
    for field in ("mean_m", "std_m", "p05_m", "p95_m"):
        np.testing.assert_allclose(getattr(p1, field), getattr(p0, field), atol=TOL)


def test_benchmark_case_s_matches_dense_reference():
    """The L-shaped synthetic case S of benchmarks/make_case.py (four boundaries, a zone, an
    area, refusal on Bedrock and on Sand and gravel) with a mixed layout added."""
    import importlib.util
    from pathlib import Path

    path = Path(__file__).resolve().parents[2] / "benchmarks" / "make_case.py"
    spec = importlib.util.spec_from_file_location("make_case", path)
    make_case = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(make_case)
    model = make_case.make("S", 3)
    model["layouts"].append(
        {
            "name": "Mixed",
            "probes": [
                {"id": "C1", "method": "CPT", "x": 70.0, "y": 40.0},
                {"id": "C2", "method": "CPT", "x": 150.0, "y": 60.0},
                {"id": "D1", "method": "DMT", "x": 40.0, "y": 120.0},
                {"id": "B1", "method": "BH", "x": 110.0, "y": 20.0},
            ],
        }
    )
    ref = Dense(model).evaluate()
    got = evaluation_json(evaluate_project(to_core(model)))
    _compare_metrics(got["baseline"]["boundaries"], ref["baseline"]["boundaries"])
    for lay, rl in zip(got["layouts"], ref["layouts"], strict=True):
        _compare_metrics(lay["boundaries"], rl["boundaries"])
        for key in ("cost", "metres", "duration_days", "information_gain_bits"):
            assert lay[key] == pytest.approx(rl[key], rel=1e-9, abs=TOL), (lay["name"], key)
        assert [p["observes"] for p in lay["probes"]] == [p["observes"] for p in rl["probes"]]
