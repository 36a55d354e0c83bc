"""The value of an investigation (server/core/value.py; docs/model.md "The value of an
investigation") against outside references:

- the unit normal linear loss integral G(u) = phi(u) - u (1 - Phi(u)) of Raiffa and Schlaifer
  (Applied Statistical Decision Theory, 1961), which an untruncated quantity element reduces to;
- scipy.integrate.quad of the design quantity over the preposterior density, with the
  truncated quantile from scipy.stats.truncnorm (a truncated quantity element);
- a Monte Carlo simulation of the readings for a choice element (draw the field given the
  existing probes, add reading noise, condition, decide), dense linear algebra throughout;
- the element average's moments against the dense posterior of its sub-points
  (tests/core/dense_reference.py, an independent plain implementation);
- properties (hypothesis): zero information, zero saving; a quantity element's saving is
  >= 0 and grows as probes are added where the bounds do not bite; a choice element with
  V0 = V1 is today's decision.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from core_helpers import tiny_dict
from dense_reference import Dense
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import integrate
from scipy.stats import norm, truncnorm

from probewise.app.to_core import core_polygon, to_core
from probewise.core.analysis import ProjectAnalysis
from probewise.core.element_average import (
    average_cross_covariance,
    condition_average,
    element_average,
    lattice_pair_mean,
    subpoint_offsets_m,
)
from probewise.core.evaluate import GridEvaluator
from probewise.core.model import (
    ChoiceConsequence,
    DesignElement,
    Layout,
    PlannedProbe,
    QuantityConsequence,
)
from probewise.core.value import (
    ValueEvaluator,
    element_cells,
    expected_quantity_cost,
    p_cheaper_allowed,
    quantity_cost,
    unit_normal_linear_loss,
)
from probewise.io.model_file import validate_model

INF = math.inf


def square(x0, y0, x1, y1):
    return core_polygon(
        {"type": "Polygon", "coordinates": [[[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]]}
    )


# ---------------------------------------------------------------- G(u), Raiffa and Schlaifer

# G(u) to 4 decimals, from memory of the table in Raiffa and Schlaifer (1961); the same
# values follow from scipy.stats.norm (checked below, so a misremembered entry would show).
G_TABLE = {-1.0: 1.0833, 0.0: 0.3989, 0.5: 0.1978, 1.0: 0.0833, 2.0: 0.0085}


def test_linear_loss_matches_table_and_scipy():
    for u, g in G_TABLE.items():
        from_scipy = norm.pdf(u) - u * norm.sf(u)  # scipy.stats.norm
        assert from_scipy == pytest.approx(g, abs=6e-5)
        assert float(unit_normal_linear_loss(u)) == pytest.approx(from_scipy, rel=1e-12)


@pytest.mark.parametrize("u", sorted(G_TABLE))
@pytest.mark.parametrize("adverse", ["deeper", "shallower"])
def test_untruncated_quantity_element_is_the_linear_loss_integral(u, adverse):
    """No bounds: E[g(m' + z sqrt(v1))] = s G(u), s = sqrt(v0 - v1), u the standardised
    distance from the mean design depth to the reference (Raiffa and Schlaifer 1961)."""
    m0, v0, v1, p = 6.0, 2.0, 0.75, 0.95
    s = math.sqrt(v0 - v1)
    z = norm.ppf(p if adverse == "deeper" else 1 - p)
    centre = m0 + z * math.sqrt(v1)
    r = centre + u * s if adverse == "deeper" else centre - u * s
    got = expected_quantity_cost(
        [m0], [v0], [v1], [-INF], [INF], p, adverse, QuantityConsequence(1.0, r), 1.0
    )
    assert got == pytest.approx(s * G_TABLE[u], abs=6e-5 * s)


# ---------------------------------------------------------------- quad over the preposterior

QUAD_CASES = [  # m0, v0, v1, lo, hi, p, adverse, reference (invented; bounds that bite)
    (4.0, 1.0, 0.3, 2.5, 6.0, 0.95, "deeper", 0.0),
    (4.0, 1.0, 0.3, 2.5, 6.0, 0.95, "deeper", 5.5),
    (5.5, 2.0, 0.5, 2.0, 6.0, 0.90, "deeper", 4.0),
    (3.0, 1.5, 0.1, 2.5, 8.0, 0.95, "shallower", 3.5),
    (3.0, 1.5, 0.1, 2.5, 8.0, 0.95, "shallower", 20.0),
    (7.0, 4.0, 2.0, 2.0, 7.5, 0.999, "deeper", 1.0),
]


@pytest.mark.parametrize("case", QUAD_CASES)
def test_truncated_quantity_element_against_quad(case):
    """E over m' ~ N(m0, v0 - v1) of g(truncated quantile of N(m', v1)): scipy.integrate.quad
    with scipy.stats.truncnorm.ppf. Tolerance 0.1% of the preposterior spread (quadrature
    across the kink of g; the worst case here is off by 0.03%)."""
    m0, v0, v1, lo, hi, p, adverse, r = case
    q = p if adverse == "deeper" else 1 - p
    s, sd1 = math.sqrt(v0 - v1), math.sqrt(v1)

    def g(mp):
        d = truncnorm.ppf(q, (lo - mp) / sd1, (hi - mp) / sd1, loc=mp, scale=sd1)
        return max(0.0, d - r) if adverse == "deeper" else max(0.0, r - d)

    ref, _ = integrate.quad(
        lambda mp: g(mp) * norm.pdf(mp, m0, s), m0 - 12 * s, m0 + 12 * s, limit=400
    )
    rate, area = 35.0, 25.0
    got = expected_quantity_cost(
        [m0], [v0], [v1], [lo], [hi], p, adverse, QuantityConsequence(rate, r), area
    )
    assert got == pytest.approx(rate * area * ref, abs=rate * area * 1e-3 * s)


def test_quantity_cost_now_uses_the_truncated_quantile():
    """Cost now = rate x A x g(P95 of the truncated posterior) (scipy.stats.truncnorm)."""
    m0, v0, lo, hi = 4.0, 1.0, 2.5, 5.0
    d = truncnorm.ppf(0.95, (lo - m0), (hi - m0), loc=m0, scale=1.0)
    got = quantity_cost([m0], [v0], [lo], [hi], 0.95, "deeper", QuantityConsequence(10, 1.0), 4)
    assert got == pytest.approx(10 * 4 * (d - 1.0), rel=1e-9)


# ---------------------------------------------------------------- the element average


def test_lattice_pair_mean_against_all_pairs():
    """FFT sum over offsets = the plain mean over all ordered pairs (irregular set, weights)."""
    rng = np.random.default_rng(3)
    lattice = np.unique(rng.integers(0, 30, (300, 2)), axis=0)
    weight = rng.uniform(0.5, 2.0, len(lattice))
    step = 1.25
    xy = lattice * step
    h = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    for model, range_m in [("exponential", 20.0), ("gaussian", 15.0), ("spherical", 25.0)]:
        from probewise.core.correlation import correlate

        ref = (np.outer(weight, weight) * correlate(model, h, range_m)).mean()
        got = lattice_pair_mean(lattice, weight, step, model, range_m)
        assert got == pytest.approx(ref, rel=1e-10)


@pytest.fixture(scope="module")
def tiny():
    model = validate_model(tiny_dict())
    project = to_core(model)
    return model, project, ProjectAnalysis(project), GridEvaluator(project)


def _dense_subpoint_posterior(model, sub_xy, k, planned=()):
    """Mean (N,) and covariance (N, N) of boundary k at the sub-points given the existing
    probes (and the variance-only effect of ``planned`` readings), dense and plain."""
    dense = Dense(model)
    pts = [(float(x), float(y), k) for x, y in sub_xy]
    ex = dense.existing_obs()
    obs = [(x, y, kk) for x, y, kk, _, _ in ex] + [(x, y, kk) for x, y, kk, _ in planned]
    tau = [t for *_, t, _ in ex] + [t for *_, t in planned]
    K = np.array([[dense.cov(a, b) for b in obs] for a in obs]) + np.diag(np.square(tau))
    C = np.array([[dense.cov(a, b) for b in obs] for a in pts])
    S = np.array([[dense.cov(a, b) for b in pts] for a in pts])
    mu = np.array([dense.prior_mean(k, x, y) for x, y, _ in pts])
    n_e = len(ex)
    resid = np.array([d - dense.prior_mean(kk, x, y) for x, y, kk, _, d in ex])
    mean = mu + C[:, :n_e] @ np.linalg.solve(K[:n_e, :n_e], resid)
    cov = S - C @ np.linalg.solve(K, C.T)
    return mean, cov


def test_element_average_moments_match_dense_posterior(tiny):
    """M0 = mean of the sub-points' posterior means; V0 = w' S0 w with S0 the dense posterior
    covariance of the sub-points (the element straddles the zone, so the std varies)."""
    model, project, analysis, evaluator = tiny
    element = DesignElement("e", square(75, 50, 90, 65), 1, "deeper", 0.95,
                            ChoiceConsequence(4.0, 1.0, 2.0))  # fmt: skip
    cells = element_cells(evaluator.grid, element)
    avg = element_average(project.ground, evaluator.grid, cells, 1)
    known_cov = average_cross_covariance(
        project.ground, avg, analysis.baseline.observations[0], analysis.baseline.fields[0]
    )
    mean0, var0 = condition_average(analysis.baseline, avg, known_cov)
    offsets = subpoint_offsets_m(evaluator.grid.spacing_m)
    sub = (evaluator.grid.xy_project[cells, None, :] + offsets[None]).reshape(-1, 2)
    mean, cov = _dense_subpoint_posterior(model, sub, 1)
    assert mean0 == pytest.approx(mean.mean(), rel=1e-9)
    assert var0 == pytest.approx(cov.mean(), rel=1e-7)


# ---------------------------------------------------------------- choice: Monte Carlo


def test_choice_probability_against_monte_carlo(tiny):
    """P(cheaper allowed) of the closed form against simulated readings: draw the field at the
    sub-points and the reading points from the dense posterior given the existing probes,
    add each reading's noise, condition on the readings, decide with M + z sqrt(V1) <= T.
    20,000 draws; agreement within 3 standard errors."""
    model, project, analysis, evaluator = tiny
    k, p = 1, 0.95
    footprint = square(70, 50, 90, 70)
    layout = Layout("L", (PlannedProbe("A", "CPT", 75, 60), PlannedProbe("B", "BH", 88, 52)))
    state, _ = analysis.layout_state(layout)
    planned = state.observations[1]
    planned_list = [
        (x + project.origin[0], y + project.origin[1], int(b), float(t))
        for (x, y), b, t in zip(planned.xy, planned.boundary, planned.noise_std_m, strict=True)
    ]
    cells = element_cells(evaluator.grid, DesignElement("e", footprint, k, "deeper", p,
                                                        ChoiceConsequence(1, 0, 1)))  # fmt: skip
    offsets = subpoint_offsets_m(evaluator.grid.spacing_m)
    sub = (evaluator.grid.xy_project[cells, None, :] + offsets[None]).reshape(-1, 2)
    n_sub = len(sub)
    # joint posterior (given existing) of [sub-points, reading points]
    read_xy = [(x, y) for x, y, _, _ in planned_list]
    dense = Dense(model)
    pts = [(float(x), float(y), k) for x, y in sub] + [(x, y, b) for x, y, b, _ in planned_list]
    ex = dense.existing_obs()
    obs = [(x, y, kk) for x, y, kk, _, _ in ex]
    K = np.array([[dense.cov(a, b) for b in obs] for a in obs]) + np.diag(
        [t * t for *_, t, _ in ex]
    )
    C = np.array([[dense.cov(a, b) for b in obs] for a in pts])
    S = np.array([[dense.cov(a, b) for b in pts] for a in pts])
    mu = np.array([dense.prior_mean(kk, x, y) for x, y, kk in pts])
    resid = np.array([d - dense.prior_mean(kk, x, y) for x, y, kk, _, d in ex])
    mean = mu + C @ np.linalg.solve(K, resid)
    cov = S - C @ np.linalg.solve(K, C.T)
    w = np.zeros(len(pts))
    w[:n_sub] = 1.0 / n_sub
    tau = np.array([t for *_, t in planned_list])
    read = np.arange(n_sub, len(pts))
    m0_avg, v0_avg = w @ mean, w @ cov @ w
    c_ar = cov[read] @ w
    k_rr = cov[np.ix_(read, read)] + np.diag(tau**2)
    gain = np.linalg.solve(k_rr, c_ar)
    v1_avg = v0_avg - c_ar @ gain
    z = norm.ppf(p)
    threshold = m0_avg + z * math.sqrt(v1_avg) + 0.2 * math.sqrt(v0_avg - v1_avg)
    assert read_xy  # the layout reads the boundary
    # simulate
    rng = np.random.default_rng(20261204)
    n_draws = 20_000
    evals, evecs = np.linalg.eigh(0.5 * (cov + cov.T))
    root = evecs * np.sqrt(np.clip(evals, 0.0, None))
    field = mean + rng.standard_normal((n_draws, len(pts))) @ root.T
    readings = field[:, read] + rng.standard_normal((n_draws, len(read))) * tau
    m_after = m0_avg + (readings - mean[read]) @ gain
    allowed = m_after + z * math.sqrt(v1_avg) <= threshold
    p_mc = allowed.mean()
    se = math.sqrt(p_mc * (1 - p_mc) / n_draws)
    # the core, through the evaluator
    element = DesignElement("culvert", footprint, k, "deeper", p,
                            ChoiceConsequence(threshold, 10_000.0, 50_000.0))  # fmt: skip
    values = ValueEvaluator(
        replace(project, elements=(element,)),
        evaluator.grid,
        evaluator.baseline.grid.mean_m,
        evaluator.baseline.grid.std_m,
        analysis.baseline,
    )
    result = evaluator.evaluate_layout(layout)
    value = values.layout_value("L", result.cost, result.grid.std_m, state)
    got = value.elements[0].p_cheaper_allowed
    assert 0.2 < p_mc < 0.8  # a probability worth testing
    assert abs(got - p_mc) <= 3 * se
    assert value.elements[0].cost_expected == pytest.approx(50_000 - 40_000 * got)


# ---------------------------------------------------------------- properties

cell_state = st.tuples(
    st.floats(1.0, 20.0),  # m0
    st.floats(0.01, 4.0),  # v0
    st.floats(0.0, 1.0),  # share of v0 remaining after a first layout
    st.floats(0.0, 1.0),  # share of that remaining after more probes
    st.floats(0.5, 0.999),  # p
    st.sampled_from(["deeper", "shallower"]),
)


@settings(max_examples=150, deadline=None)
@given(cell_state, st.floats(-5.0, 5.0))
def test_zero_information_gives_zero_saving(state, shift):
    m0, v0, _, _, p, adverse = state
    con = QuantityConsequence(12.0, m0 + shift)
    lo, hi = m0 - 3.0, m0 + 2.0  # bounds that bite
    args = ([m0], [v0])
    now = quantity_cost(*args, [lo], [hi], p, adverse, con, 25.0)
    after = expected_quantity_cost(*args, [v0], [lo], [hi], p, adverse, con, 25.0)
    assert after == pytest.approx(now, rel=1e-9, abs=1e-9)


@settings(max_examples=150, deadline=None)
@given(cell_state)
def test_quantity_saving_positive_and_growing_without_bounds(state):
    """With the reference depth beyond every likely design depth (g linear) and no bounds,
    the saving is rate x A x |z| (sqrt(v0) - sqrt(v1)) >= 0, larger the more is read."""
    m0, v0, share1, share2, p, adverse = state
    v1 = v0 * share1
    v2 = v1 * share2
    r = -1e3 if adverse == "deeper" else 1e3
    con = QuantityConsequence(12.0, r)

    def saving(v):
        now = quantity_cost([m0], [v0], [-INF], [INF], p, adverse, con, 25.0)
        return now - expected_quantity_cost([m0], [v0], [v], [-INF], [INF], p, adverse, con, 25.0)

    s1, s2 = saving(v1), saving(v2)
    assert s1 >= -1e-7
    assert s2 >= s1 - 1e-7
    z = abs(norm.ppf(p))
    assert s1 == pytest.approx(12.0 * 25.0 * z * (math.sqrt(v0) - math.sqrt(v1)), abs=1e-6)


@settings(
    max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(st.lists(st.tuples(st.floats(5, 195), st.floats(5, 115)), min_size=1, max_size=5))
def test_project_quantity_saving_grows_as_probes_are_added(tiny, spots):
    """Tiny model, a ground-treatment element (base of the clay, deeper adverse, r = 0): each
    added CPT keeps the expected saving >= 0 and never lowers it."""
    _, project, analysis, evaluator = tiny
    element = DesignElement("treat", square(0, 40, 200, 80), 1, "deeper", 0.95,
                            QuantityConsequence(30.0, 0.0))  # fmt: skip
    values = ValueEvaluator(
        replace(project, elements=(element,)),
        evaluator.grid,
        evaluator.baseline.grid.mean_m,
        evaluator.baseline.grid.std_m,
        analysis.baseline,
    )
    last = 0.0
    for n in range(1, len(spots) + 1):
        probes = tuple(PlannedProbe(f"C{i}", "CPT", x, y) for i, (x, y) in enumerate(spots[:n]))
        result = evaluator.evaluate_layout(Layout("L", probes))
        saving = values.layout_value("L", result.cost, result.grid.std_m).expected_saving
        assert saving >= -1e-6
        assert saving >= last - 1e-6 * max(1.0, abs(last))
        last = saving
    if any(40 <= y <= 80 for _, y in spots):  # a CPT on the element reads its boundary
        assert last > 0


@settings(max_examples=200, deadline=None)
@given(cell_state, st.floats(-3.0, 3.0))
def test_choice_with_no_information_is_todays_decision(state, offset):
    m0, v0, _, _, p, adverse = state
    z = norm.ppf(p)
    t = m0 + offset
    allowed_now = (
        m0 + z * math.sqrt(v0) <= t if adverse == "deeper" else (m0 - z * math.sqrt(v0) >= t)
    )
    assert p_cheaper_allowed(m0, v0, v0, p, adverse, t) == (1.0 if allowed_now else 0.0)


def test_options_ranked_by_net_value_with_elements(tiny):
    """With elements, the ranking carries each option's expected saving and net value (those
    of the value evaluator) and puts the highest net value first; without, neither."""
    from probewise.core.options import rank_options

    _, project, analysis, evaluator = tiny
    element = DesignElement("treat", square(0, 40, 200, 80), 1, "deeper", 0.95,
                            QuantityConsequence(30.0, 0.0))  # fmt: skip
    with_elements = replace(project, elements=(element,))
    cheap = Layout("One CPT", (PlannedProbe("C1", "CPT", 100, 60),))
    options = [*project.layouts, cheap]
    kinds = dict.fromkeys((o.name for o in options), "hand")
    ranked = rank_options(with_elements, options, kinds)
    assert [o.net_value for o in ranked] == sorted((o.net_value for o in ranked), reverse=True)
    values = ValueEvaluator(
        with_elements,
        evaluator.grid,
        evaluator.baseline.grid.mean_m,
        evaluator.baseline.grid.std_m,
        analysis.baseline,
    )
    for o in ranked:
        result = evaluator.evaluate_layout(next(lay for lay in options if lay.name == o.name))
        value = values.layout_value(o.name, result.cost, result.grid.std_m)
        assert o.expected_saving == pytest.approx(value.expected_saving)
        assert o.net_value == pytest.approx(value.expected_saving - result.cost)
        assert o.benefit_cost_ratio == pytest.approx(value.expected_saving / result.cost)
    plain = rank_options(project, options, kinds)
    assert all(o.net_value is None and o.expected_saving is None for o in plain)


def test_element_without_a_cell_is_refused(tiny):
    """A footprint between cell centres holds no cell: EmptyElementError names it."""
    from probewise.core.value import EmptyElementError

    _, project, analysis, evaluator = tiny
    element = DesignElement("speck", square(1, 1, 2, 2), 1, "deeper", 0.95,
                            QuantityConsequence(1.0))  # fmt: skip
    with pytest.raises(EmptyElementError) as err:
        ValueEvaluator(
            replace(project, elements=(element,)),
            evaluator.grid,
            evaluator.baseline.grid.mean_m,
            evaluator.baseline.grid.std_m,
            analysis.baseline,
        )
    assert err.value.index == 0 and err.value.name == "speck"
