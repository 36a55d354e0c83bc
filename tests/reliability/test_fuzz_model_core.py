"""Property tests (hypothesis) of the model validator and of the core's reported numbers.

The validator: any text or value either validates or raises InputError naming a field,
never anything else; it does not change its input; it is idempotent; its range rule is the
contract's (0 <= min <= likely <= max, min < max). tests/test_model_file.py already mutates
one path of a valid model at a time; here whole texts are corrupted and ranges are checked
against the rule written out independently.

The core: for random layouts on the tiny model, the numbers docs/model.md reports keep their
invariants: a probe never raises a posterior variance (so adding one never lowers the
information gain, and gain >= 0); cost rises with every probe; widths and stds are positive
and confident fractions lie in [0, 1]; the order of probes does not matter; Pareto flags
are consistent (no flagged option dominated, every unflagged one dominated).
"""

from __future__ import annotations

import copy
import json
import math

import numpy as np
import pytest
from corpus import TINY
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from probewise.app.to_core import to_core
from probewise.core.evaluate import GridEvaluator, pareto_flags
from probewise.core.model import Layout, PlannedProbe
from probewise.errors import InputError
from probewise.io.model_file import MAX_DEPTH_M, parse_model_text, validate_all, validate_model

SETTINGS = settings(max_examples=80, deadline=None, suppress_health_check=list(HealthCheck))
TINY_TEXT = json.dumps(TINY)


# ---------------------------------------------------------------- the validator


def check_refusal(error: InputError) -> None:
    assert error.field, str(error)
    assert error.problem, str(error)
    assert "\n" not in str(error)
    assert "Input should" not in error.problem  # no pydantic jargon


@SETTINGS
@given(
    cuts=st.lists(
        st.tuples(st.integers(0, len(TINY_TEXT) - 1), st.integers(0, 8), st.text(max_size=4)),
        min_size=1,
        max_size=4,
    )
)
def test_corrupted_text_validates_or_names_a_field(cuts):
    """Delete a few characters here and there, insert others: JSON errors, type errors,
    broken geometry... every outcome is a model or an InputError."""
    text = TINY_TEXT
    for at, length, insert in cuts:
        text = text[:at] + insert + text[at + length :]
    try:
        model = parse_model_text(text)
    except InputError as error:
        check_refusal(error)
    else:
        assert validate_model(model) == model


@SETTINGS
@given(st.binary(max_size=200))
def test_arbitrary_bytes_as_text_name_the_model(data):
    try:
        parse_model_text(data.decode("utf-8", "replace"))
    except InputError as error:
        check_refusal(error)


NUMBERS = st.one_of(
    st.floats(-5, 20, allow_nan=False),
    st.sampled_from([0.0, 0.5, 1.0, 1.0, 2.0, math.nan, math.inf, -math.inf, MAX_DEPTH_M + 1]),
)


@SETTINGS
@given(a=NUMBERS, b=NUMBERS, c=NUMBERS, shape=st.sampled_from(["pert", "triangular", "uniform"]))
def test_range_rule_is_the_contract(a, b, c, shape):
    """docs/model-file.md: 0 <= a <= b <= c and a < c (finite depths, at most MAX_DEPTH_M)."""
    model = copy.deepcopy(TINY)
    model["units"][2]["thickness_m"] = {"min": a, "likely": b, "max": c, "shape": shape}
    finite = all(math.isfinite(v) and 0 <= v <= MAX_DEPTH_M for v in (a, b, c))
    expected_valid = finite and a <= b <= c and a < c
    try:
        validate_model(model)
    except InputError as error:
        check_refusal(error)
        assert not expected_valid, str(error)
        assert error.field.startswith("units[2].thickness_m"), str(error)
    else:
        assert expected_valid


@SETTINGS
@given(
    ring=st.lists(st.tuples(st.integers(-50, 250), st.integers(-50, 170)), min_size=0, max_size=7),
    close=st.booleans(),
)
def test_any_site_ring_validates_or_names_the_site(ring, close):
    """Random rings (bow ties, spikes, repeats, too short, open): a valid site or a refusal
    that names the site; the input is never changed."""
    coords = [list(p) for p in ring]
    if close and coords:
        coords.append(list(coords[0]))
    model = copy.deepcopy(TINY)
    model["site"] = {"type": "Polygon", "coordinates": [coords]}
    frozen = copy.deepcopy(model)
    try:
        validate_model(model)
    except InputError as error:
        check_refusal(error)
        assert error.field.startswith(("site", "existing", "layouts", "grid_spacing_m")), error
    assert model == frozen


@settings(max_examples=40, deadline=None, suppress_health_check=list(HealthCheck))
@given(
    path=st.sampled_from(["grid_spacing_m", "units[0].thickness_m.max", "existing[0].x"]),
    value=st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=3)),
)
def test_first_problem_of_validate_all_is_the_one_validate_model_raises(path, value):
    from corpus import mutated

    model = mutated(path, value)
    problems = validate_all(model)
    try:
        validate_model(model)
    except InputError as error:
        assert problems and str(problems[0]) == str(error)
    else:
        assert problems == []


# ---------------------------------------------------------------- the core's numbers

PROJECT = to_core(TINY)
EVALUATOR = GridEvaluator(PROJECT)
METHODS = tuple(PROJECT.methods)


@st.composite
def layouts(draw, min_size=0, max_size=6):
    n = draw(st.integers(min_size, max_size))
    probes = []
    for i in range(n):
        x = draw(st.floats(1.0, 199.0))
        y = draw(st.floats(1.0, 119.0))
        method = draw(st.sampled_from(METHODS))
        depth = draw(st.one_of(st.none(), st.floats(1.0, 20.0)))
        probes.append(PlannedProbe(f"P{i}", method, x, y, depth))
    return Layout("random", tuple(probes))


def variances(result) -> np.ndarray:
    return result.grid.std_m**2


@SETTINGS
@given(layout=layouts(min_size=0, max_size=5), extra=layouts(min_size=1, max_size=2))
def test_a_probe_never_raises_variance_nor_lowers_gain(layout, extra):
    base = EVALUATOR.evaluate_layout(layout)
    added = tuple(PlannedProbe(f"X{p.id}", p.method, p.x, p.y, p.depth_m) for p in extra.probes)
    more = Layout("more", layout.probes + added)
    bigger = EVALUATOR.evaluate_layout(more)
    tol = 1e-9
    assert base.information_gain_bits >= -tol
    assert bigger.information_gain_bits >= base.information_gain_bits - 1e-7
    assert np.all(variances(bigger) <= variances(base) + tol)
    assert np.all(variances(base) <= EVALUATOR.base_pred.var_m2 + tol)
    assert bigger.cost > base.cost
    assert bigger.metres >= base.metres and bigger.duration_days >= base.duration_days


@SETTINGS
@given(layout=layouts(min_size=1, max_size=6), seed=st.integers(0, 2**16))
def test_reported_numbers_are_in_range_and_ignore_probe_order(layout, seed):
    result = EVALUATOR.evaluate_layout(layout)
    order = np.random.default_rng(seed).permutation(len(layout.probes))
    shuffled = EVALUATOR.evaluate_layout(Layout("s", tuple(layout.probes[i] for i in order)))
    assert shuffled.information_gain_bits == pytest.approx(result.information_gain_bits, abs=1e-7)
    assert shuffled.cost == pytest.approx(result.cost)
    for name, metrics in result.boundaries.items():
        assert metrics.std_mean_m >= 0 and metrics.width90_mean_m >= 0
        assert metrics.uncertain_volume_m3 >= 0
        if metrics.confident_fraction is not None:
            assert 0.0 <= metrics.confident_fraction <= 1.0
        assert metrics.std_mean_m <= EVALUATOR.baseline.boundaries[name].std_mean_m + 1e-9
        other = shuffled.boundaries[name]
        assert other.width90_mean_m == pytest.approx(metrics.width90_mean_m, abs=1e-7)
    post = result.grid
    assert np.all(post.p05_m <= post.p95_m + 1e-9)
    assert result.gain_per_cost == pytest.approx(result.information_gain_bits / result.cost)


@SETTINGS
@given(points=st.lists(st.tuples(st.integers(0, 20), st.integers(0, 20)), min_size=1, max_size=8))
def test_pareto_flags_are_consistent(points):
    costs = [float(c) for c, _ in points]
    gains = [float(g) for _, g in points]
    flags = pareto_flags(costs, gains)
    assume(len(points) >= 1)
    assert any(flags)

    def dominates(j: int, i: int) -> bool:
        return (
            gains[j] >= gains[i]
            and costs[j] <= costs[i]
            and (gains[j] > gains[i] or costs[j] < costs[i])
        )

    for i, flag in enumerate(flags):
        dominated = any(dominates(j, i) for j in range(len(points)) if j != i)
        assert flag == (not dominated)
