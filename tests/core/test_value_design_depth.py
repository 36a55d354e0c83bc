"""The expected design depth after a layout (``expected_design_depth_m``), against closed forms
and numerical integration with scipy (docs/model.md "The value of an investigation")."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate
from scipy.stats import norm, truncnorm

from probewise.core.value import design_depth_m, expected_design_depth_m


@pytest.mark.parametrize("adverse", ["deeper", "shallower"])
def test_untruncated_expected_design_depth_is_mean_plus_z_std_after(adverse):
    # E[m' + z sd1] with m' ~ N(m0, v0 - v1) is m0 + z sd1 (linearity of expectation).
    m0 = np.array([3.0, 5.5, 8.0])
    v0 = np.array([1.0, 2.25, 0.5])
    v1 = np.array([0.25, 1.0, 0.5])
    inf = np.full(3, np.inf)
    got = expected_design_depth_m(m0, v0, v1, -inf, inf, 0.95, adverse)
    z = norm.ppf(0.95 if adverse == "deeper" else 0.05)
    np.testing.assert_allclose(got, m0 + z * np.sqrt(v1), rtol=0, atol=1e-9)


@pytest.mark.parametrize("adverse", ["deeper", "shallower"])
def test_truncated_expected_design_depth_against_quad(adverse):
    # The design depth is the truncated-normal quantile (scipy truncnorm.ppf); its expectation
    # over m' ~ N(m0, v0 - v1) is integrated numerically with scipy.integrate.quad.
    m0, v0, v1, lo, hi, p = 4.0, 1.2, 0.3, 2.5, 5.0, 0.9
    q = p if adverse == "deeper" else 1 - p
    sd1, spread = np.sqrt(v1), np.sqrt(v0 - v1)

    def depth(m):
        return truncnorm.ppf(q, (lo - m) / sd1, (hi - m) / sd1, loc=m, scale=sd1)

    reference, _ = integrate.quad(
        lambda m: depth(m) * norm.pdf(m, m0, spread), m0 - 10 * spread, m0 + 10 * spread, limit=200
    )
    got = expected_design_depth_m([m0], [v0], [v1], [lo], [hi], p, adverse)[0]
    assert got == pytest.approx(reference, abs=2e-3)
    # the investigation moves the cautious level towards the likely one
    now = design_depth_m(m0, v0, lo, hi, p, adverse)
    assert (got < now) if adverse == "deeper" else (got > now)


def test_no_information_keeps_the_design_depth_now():
    m0, v0 = np.array([2.0, 6.0]), np.array([0.8, 2.0])
    lo, hi = np.array([0.5, 4.0]), np.array([4.0, 9.0])
    got = expected_design_depth_m(m0, v0, v0, lo, hi, 0.95, "deeper")
    np.testing.assert_allclose(got, design_depth_m(m0, v0, lo, hi, 0.95, "deeper"), atol=1e-12)
