"""Resource caps, each with a clear message: evaluation-grid cells (coarsened with a notice
above the cap), optimiser candidates (refused, naming --candidate-spacing), uploads and
request bodies (413 naming the limit)."""

from __future__ import annotations

import copy
import json
import math

import numpy as np
import pytest
from corpus import TINY, square
from fastapi.testclient import TestClient
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from reliability_helpers import BASE_URL, store_snapshot

from probewise.app.to_core import to_core
from probewise.cli import main
from probewise.core.evaluate import GridEvaluator, evaluate_project
from probewise.core.geometry import points_in_polygon
from probewise.core.grid import (
    MAX_GRID_CELLS,
    MAX_RASTER_CELLS,
    EmptyGridError,
    evaluation_grid,
    evaluation_grid_capped,
)
from probewise.core.model import Polygon, Site
from probewise.core.optimise import (
    MAX_CANDIDATE_LOCATIONS,
    OptimiseError,
    OptimiseOptions,
    optimise,
)
from probewise.web.app import create_app


def big_site_model(side_m: float, spacing_m: float) -> dict:
    """The tiny model on a square site ``side_m`` across (its other geometry stays inside)."""
    model = copy.deepcopy(TINY)
    model["site"] = square(0, 0, side_m, side_m)
    model["grid_spacing_m"] = spacing_m
    return model


def square_site(side_m: float, spacing_m: float) -> Site:
    ring = np.array([[0, 0], [side_m, 0], [side_m, side_m], [0, side_m], [0, 0]], float)
    return Site(Polygon((ring,)), spacing_m)


# ---------------------------------------------------------------- evaluation grid


def test_a_grid_under_the_cap_is_left_alone():
    site = square_site(200.0, 5.0)
    grid, notice = evaluation_grid_capped(site, (100.0, 100.0))
    plain = evaluation_grid(site, (100.0, 100.0))
    assert notice is None
    np.testing.assert_array_equal(grid.xy, plain.xy)
    assert grid.spacing_m == 5.0


def test_a_grid_over_the_cap_is_coarsened_by_a_whole_factor_with_a_notice():
    """10 km square at 25 m: 400 x 400 = 160,000 cells; the smallest whole factor that
    brings it under 60,000 is 2 (200 x 200 = 40,000 cells of 50 m)."""
    grid, notice = evaluation_grid_capped(square_site(10_000.0, 25.0), (0.0, 0.0))
    assert grid.n_cells == 40_000 and grid.spacing_m == 50.0
    assert notice is not None
    assert notice.startswith("grid_spacing_m")
    assert "160,000" in notice and f"{MAX_GRID_CELLS:,}" in notice and "50 m" in notice


def test_a_long_thin_diagonal_site_never_builds_its_whole_raster():
    """A 20 m wide strip running 10 km on the diagonal: at 1 m its bounding box would be
    7,071 x 7,071 = 50 million cells; the capped grid starts coarser and still covers it."""
    length = 10_000.0 / math.sqrt(2.0)
    ring = np.array(
        [[0, 0], [14.1, -14.1], [length + 14.1, length - 14.1], [length, length], [0, 0]]
    )
    site = Site(Polygon((ring,)), 1.0)
    assert (length / 1.0) ** 2 > MAX_RASTER_CELLS
    grid, notice = evaluation_grid_capped(site, (0.0, 0.0))
    assert 0 < grid.n_cells <= MAX_GRID_CELLS
    assert notice is not None and "about" in notice
    assert points_in_polygon(grid.xy, site.outline).all()


def test_coarsening_that_leaves_no_cell_is_the_empty_grid_error():
    ring = np.array([[0, 0], [3, 0], [0, 3], [0, 0]], float)  # the only centre, (5, 5), is out
    site = Site(Polygon((ring,)), 10.0)
    with pytest.raises(EmptyGridError):
        evaluation_grid_capped(site, (0.0, 0.0))


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    width=st.floats(50.0, 3000.0),
    height=st.floats(50.0, 3000.0),
    spacing=st.floats(0.5, 20.0),
    max_cells=st.integers(50, 5000),
)
def test_capped_grid_invariants(width, height, spacing, max_cells):
    """Whatever the site and spacing: at most max_cells cells, a whole-factor spacing, every
    centre inside the site, and a notice exactly when the spacing changed."""
    ring = np.array([[0, 0], [width, 0], [width, height], [0, height], [0, 0]])
    site = Site(Polygon((ring,)), spacing)
    try:
        grid, notice = evaluation_grid_capped(site, (width / 2, height / 2), max_cells)
    except EmptyGridError:
        return
    factor = grid.spacing_m / spacing
    assert grid.n_cells <= max_cells
    assert factor == pytest.approx(round(factor)) and round(factor) >= 1
    assert (notice is not None) == (round(factor) > 1)
    assert points_in_polygon(grid.xy, site.outline, grid.origin).all()
    assert grid.cell_area_m2 == pytest.approx(grid.spacing_m**2)


def test_grid_evaluator_exposes_the_notice():
    project = to_core(big_site_model(10_000, 25))
    evaluator = GridEvaluator(project)
    assert evaluator.grid.n_cells <= MAX_GRID_CELLS
    assert "over the limit" in evaluator.grid_notice
    assert evaluate_project(project).grid_notice == evaluator.grid_notice
    assert GridEvaluator(to_core(TINY)).grid_notice is None


def test_evaluate_cli_prints_the_notice_on_stderr_and_in_json(tmp_path, capsys):
    path = tmp_path / "big.json"
    path.write_text(json.dumps(big_site_model(10_000, 25)))
    assert main(["evaluate", str(path), "--json"]) == 0
    captured = capsys.readouterr()
    doc = json.loads(captured.out)
    assert doc["notice"].startswith("grid_spacing_m: 25 m would give 160,000")
    assert captured.err == f"notice: {doc['notice']}\n"
    assert main(["evaluate", str(path)]) == 0
    captured = capsys.readouterr()
    assert "Evaluation grid: 40000 cells of 50 m" in captured.out
    assert captured.err.startswith("notice: grid_spacing_m")


def test_evaluate_cli_json_has_no_notice_when_the_grid_fits(capsys):
    from corpus import DATA

    assert main(["evaluate", str(DATA / "tiny-model.json"), "--json"]) == 0
    captured = capsys.readouterr()
    assert "notice" not in json.loads(captured.out)
    assert captured.err == ""


def test_the_api_evaluation_carries_the_notice(tmp_path):
    with TestClient(create_app(tmp_path / "p.db", seed=False), base_url=BASE_URL) as client:
        pid = client.post("/api/projects", json=big_site_model(10_000, 25)).json()["id"]
        answer = client.get(f"/api/projects/{pid}/evaluation")
        assert answer.status_code == 200
        assert "over the limit" in answer.json()["notice"]


# ---------------------------------------------------------------- optimiser candidates


def test_a_candidate_spacing_giving_too_many_locations_is_refused_by_name():
    """200 x 120 m at 1 m: about 24,000 candidate locations, over the cap of 5,000; the
    refusal names the option (field candidate_spacing_m; the CLI prints --candidate-spacing)
    and the finest round spacing allowed (2.5 m: 3,840 locations)."""
    project = to_core(TINY)
    with pytest.raises(OptimiseError) as refused:
        optimise(project, OptimiseOptions(budget=20_000, candidate_spacing_m=1.0))
    text = str(refused.value)
    assert text.startswith("a candidate spacing of 1 m gives about 24,000 candidate locations")
    assert f"limit of {MAX_CANDIDATE_LOCATIONS:,}" in text
    assert "use 2.5 m or more" in text
    assert refused.value.field == "candidate_spacing_m"


@pytest.mark.parametrize("spacing", [0.0, -3.0, math.nan, math.inf])
def test_a_candidate_spacing_that_is_not_a_positive_number_is_refused(spacing):
    with pytest.raises(OptimiseError, match="must be a positive number of metres") as refused:
        optimise(to_core(TINY), OptimiseOptions(budget=20_000, candidate_spacing_m=spacing))
    assert refused.value.field == "candidate_spacing_m"


def test_an_absurd_spacing_is_refused_before_its_grid_is_built():
    """1 mm on a 10 km site would be about 10^14 locations: refused from the site area
    (the optimiser's working grid's area) before any location is placed."""
    project = to_core(big_site_model(10_000, 50))
    with pytest.raises(OptimiseError, match=r"gives about [\d,]{18,} candidate locations"):
        optimise(project, OptimiseOptions(budget=20_000, candidate_spacing_m=0.001))


# ---------------------------------------------------------------- uploads and bodies


def test_upload_and_body_caps_answer_413_naming_the_limit(tmp_path):
    db_path = tmp_path / "p.db"
    app = create_app(db_path, seed=False, max_body_bytes=4096)
    with TestClient(app, base_url=BASE_URL) as client:
        client.post("/api/projects", json=TINY)  # about 4 kB of text: under or over, no harm
        before = store_snapshot(db_path)
        big = json.dumps({**TINY, "notes": "x" * 5000}).encode()
        upload = client.post(
            "/projects/import", files={"model_file": ("big.json", big, "application/json")}
        )
        assert upload.status_code == 413
        assert "uploaded file is larger than the 4096 byte limit for uploads" in upload.text
        body = client.post(
            "/api/projects", content=big, headers={"Content-Type": "application/json"}
        )
        assert body.status_code == 413
        assert body.json() == {"detail": "request body is larger than the 4096 byte limit"}
        assert store_snapshot(db_path) == before
