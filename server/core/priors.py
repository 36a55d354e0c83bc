"""Thickness priors: mean and standard deviation of a unit's thickness from its range.

Closed forms of docs/model.md "Probability model" for the range (min a, likely b, max c):

- uniform: mean (a+c)/2, variance (c-a)^2/12;
- triangular: mean (a+b+c)/3, variance (a^2+b^2+c^2-ab-ac-bc)/18;
- PERT (lambda 4): mean (a+4b+c)/6, variance (mean-a)(c-mean)/7.

The PERT variance is that of the beta distribution with alpha = 1 + 4(b-a)/(c-a),
beta = 1 + 4(c-b)/(c-a) scaled to [a, c] (checked against scipy.stats in the tests).
"""

from __future__ import annotations

import math

from server.core.model import ThicknessRange


def thickness_moments(rng: ThicknessRange) -> tuple[float, float]:
    """Mean and standard deviation (m) of a thickness prior.

    Parameters
    ----------
    rng : ThicknessRange
        ``min_m <= likely_m <= max_m`` and a shape in ``server.core.model.SHAPES``.

    Returns
    -------
    (mean_m, std_m) : tuple of float
    """
    a, b, c = float(rng.min_m), float(rng.likely_m), float(rng.max_m)
    if rng.shape == "uniform":
        mean = (a + c) / 2.0
        var = (c - a) ** 2 / 12.0
    elif rng.shape == "triangular":
        mean = (a + b + c) / 3.0
        var = (a * a + b * b + c * c - a * b - a * c - b * c) / 18.0
    elif rng.shape == "pert":
        mean = (a + 4.0 * b + c) / 6.0
        var = (mean - a) * (c - mean) / 7.0
    else:
        raise ValueError(f"unknown thickness shape {rng.shape!r}")
    return mean, math.sqrt(max(var, 0.0))
