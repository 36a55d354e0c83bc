"""Readings against predictions beyond exact conditioning (probewise.core.readings,
``predict_locally``) against the exact leave-one-probe-out.

Method: the probes of a tile of spots are predicted from the readings of the tile's nearest
spots (screening effect; Vecchia 1988; Katzfuss and Guinness, Statistical Science 2021;
docs/model.md "Many readings"). Checked: with every spot in each neighbourhood the result is
the exact one; on bench L with 500 existing CPTs the predicted std is within 1% of exact and
never below it.
"""

from __future__ import annotations

import numpy as np
import pytest
from test_core_local_conditioning import bench_case

from probewise.core import local_conditioning
from probewise.core.analysis import ProjectAnalysis
from probewise.core.readings import check_readings


def exact_and_local(project, monkeypatch, stage=None):
    analysis = ProjectAnalysis(project)
    obs = analysis.existing
    exact = check_readings(project.ground, analysis.origin, obs, stage)
    monkeypatch.setattr(local_conditioning, "EXACT_MAX_READINGS", 0)  # the same readings, local
    local = check_readings(project.ground, analysis.origin, obs, stage)
    return exact, local


def test_every_spot_in_reach_gives_the_exact_check(monkeypatch):
    # bench S with 250 CPTs: 256 spots, fewer than the 300 of a neighbourhood
    exact, local = exact_and_local(bench_case("S", 250), monkeypatch)
    np.testing.assert_allclose(local.predicted_std_m, exact.predicted_std_m, rtol=1e-6)
    np.testing.assert_allclose(local.z, exact.z, rtol=1e-6, atol=1e-8)


def test_stages_checked_locally_match_exact_with_every_spot(monkeypatch):
    project = bench_case("S", 250)
    stage = (np.arange(ProjectAnalysis(project).existing.size) // 400).astype(int)
    exact, local = exact_and_local(project, monkeypatch, stage)
    np.testing.assert_allclose(local.predicted_std_m, exact.predicted_std_m, rtol=1e-6)
    np.testing.assert_allclose(local.z, exact.z, rtol=1e-6, atol=1e-8)


@pytest.mark.slow
def test_local_check_within_one_percent_of_exact_on_bench_l_500(monkeypatch):
    exact, local = exact_and_local(bench_case("L", 500), monkeypatch)
    ratio = local.predicted_std_m / exact.predicted_std_m
    assert ratio.min() >= 1.0 - 1e-9  # fewer readings never predict more sharply
    assert ratio.max() <= 1.01
    # the mean is moved by the nearby readings only: up to about half a posterior std where
    # the readings disagree with the model's smoothness (the invented CPTs' depths are
    # independent draws; docs/model.md "Many readings")
    shift = np.abs(local.predicted_mean_m - exact.predicted_mean_m) / exact.predicted_std_m
    assert shift.max() <= 0.5
    assert np.mean(local.flag == exact.flag) >= 0.99  # the same readings flagged


def test_fit_beyond_its_cap_uses_a_fixed_random_subset_of_whole_probes():
    from probewise.core.fit import FIT_MAX_READINGS, subset_for_fit

    obs = ProjectAnalysis(bench_case("S", 1_001)).existing
    assert obs.size > FIT_MAX_READINGS
    subset, note = subset_for_fit(obs)
    assert FIT_MAX_READINGS - 8 <= subset.size <= FIT_MAX_READINGS  # probes of 4 readings
    for probe in np.unique(subset.probe):  # whole probes: every reading of a kept probe
        assert np.count_nonzero(subset.probe == probe) == np.count_nonzero(obs.probe == probe)
    assert f"{subset.size} readings" in note and f"{obs.size} readings" in note
    again, _ = subset_for_fit(obs)
    assert np.array_equal(again.probe, subset.probe)  # the same subset on every run
    small = ProjectAnalysis(bench_case("S", 10)).existing
    assert subset_for_fit(small) == (small, None)
