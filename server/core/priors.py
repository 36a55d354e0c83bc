"""Thickness priors: the shapes a unit's thickness range may take, their moments and density.

Closed forms (docs/model.md, "Probability model") for the range (min a, likely b, max c):

- uniform: mean (a+c)/2, variance (c-a)^2/12;
- triangular: mean (a+b+c)/3, variance (a^2+b^2+c^2-ab-ac-bc)/18;
- PERT (lambda 4): mean (a+4b+c)/6, variance (mean-a)(c-mean)/7.

The PERT variance is that of the beta distribution with alpha = 1 + 4(b-a)/(c-a),
beta = 1 + 4(c-b)/(c-a) scaled to [a, c] (checked against scipy.stats in the tests).

Adding a shape is one entry in ``THICKNESS_SHAPES``: the model file's allowed names, the
Ground page's choices and its density chart derive from it.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

from probewise.core.model import ThicknessRange

PERT_LAMBDA = 4.0


@dataclass(frozen=True)
class ThicknessShape:
    """One thickness shape: its name in the model file, a label for people and its maths.

    ``moments(a, b, c)`` gives (mean, variance) in m and m^2 for min a, likely b, max c;
    ``distribution(a, b, c)`` gives the scipy.stats frozen distribution (for density charts
    and checks; the model itself uses only the moments).
    """

    name: str
    label: str
    moments: Callable[[float, float, float], tuple[float, float]]
    distribution: Callable[[float, float, float], object]


def _uniform_moments(a: float, b: float, c: float) -> tuple[float, float]:
    return (a + c) / 2.0, (c - a) ** 2 / 12.0


def _triangular_moments(a: float, b: float, c: float) -> tuple[float, float]:
    return (a + b + c) / 3.0, (a * a + b * b + c * c - a * b - a * c - b * c) / 18.0


def _pert_moments(a: float, b: float, c: float) -> tuple[float, float]:
    mean = (a + PERT_LAMBDA * b + c) / (PERT_LAMBDA + 2.0)
    return mean, (mean - a) * (c - mean) / (PERT_LAMBDA + 3.0)


# scipy.stats is imported inside the distribution functions: it is slow to import and only
# the charts and the tests need it.
def _uniform_distribution(a: float, b: float, c: float):
    from scipy import stats

    return stats.uniform(loc=a, scale=c - a)


def _triangular_distribution(a: float, b: float, c: float):
    from scipy import stats

    return stats.triang((b - a) / (c - a), loc=a, scale=c - a)


def _pert_distribution(a: float, b: float, c: float):
    from scipy import stats

    span = c - a
    alpha = 1.0 + PERT_LAMBDA * (b - a) / span
    beta = 1.0 + PERT_LAMBDA * (c - b) / span
    return stats.beta(alpha, beta, loc=a, scale=span)


# The one list of thickness shapes, in the order the model file and the pages show them.
THICKNESS_SHAPES: dict[str, ThicknessShape] = {
    s.name: s
    for s in (
        ThicknessShape("pert", "PERT", _pert_moments, _pert_distribution),
        ThicknessShape("triangular", "Triangular", _triangular_moments, _triangular_distribution),
        ThicknessShape("uniform", "Uniform", _uniform_moments, _uniform_distribution),
    )
}
SHAPE_NAMES: tuple[str, ...] = tuple(THICKNESS_SHAPES)
DEFAULT_SHAPE = "pert"


def _shape_of(rng: ThicknessRange) -> ThicknessShape:
    shape = THICKNESS_SHAPES.get(rng.shape)
    if shape is None:
        raise ValueError(f"unknown thickness shape {rng.shape!r}")
    return shape


def thickness_moments(rng: ThicknessRange) -> tuple[float, float]:
    """Mean and standard deviation (m) of a thickness prior.

    Parameters
    ----------
    rng : ThicknessRange
        ``min_m <= likely_m <= max_m`` and a shape in ``THICKNESS_SHAPES``.

    Returns
    -------
    (mean_m, std_m) : tuple of float
    """
    mean, var = _shape_of(rng).moments(float(rng.min_m), float(rng.likely_m), float(rng.max_m))
    return mean, math.sqrt(max(var, 0.0))


def presence_moments(mean_m: float, std_m: float, presence: float) -> tuple[float, float]:
    """Mean and standard deviation (m) of a locally present unit's thickness.

    The thickness is 0 (the unit absent) with probability ``1 - presence`` and otherwise
    follows the range's distribution (mean ``mean_m``, std ``std_m``). The moments of this
    mixture are exact: mean p*mu, variance p*s^2 + p*(1 - p)*mu^2 (law of total variance).
    The model then carries them as a Gaussian (moment matching; docs/model.md "Locally
    present units" says what that does and does not capture).

    Parameters
    ----------
    mean_m, std_m : float
        Moments of the thickness where the unit is present (e.g. ``thickness_moments``).
    presence : float
        Probability ``p`` in (0, 1] that the unit is present; 1 returns the inputs.

    Returns
    -------
    (mean_m, std_m) : tuple of float
    """
    p = float(presence)
    if not 0.0 < p <= 1.0:
        raise ValueError(f"presence {p!r} is not in (0, 1]")
    if p == 1.0:
        return float(mean_m), float(std_m)
    var = p * std_m**2 + p * (1.0 - p) * mean_m**2
    return p * mean_m, math.sqrt(var)


def thickness_distribution(rng: ThicknessRange):
    """The scipy.stats frozen distribution of a thickness prior (PERT = beta on [min, max])."""
    return _shape_of(rng).distribution(float(rng.min_m), float(rng.likely_m), float(rng.max_m))
