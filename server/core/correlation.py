"""Correlation of a unit's thickness with horizontal distance, practical-range convention.

The practical range r is the distance at which the correlation falls to about 5%
(docs/model.md, "Probability model"). The models, one entry each in ``CORRELATION_MODELS``:

- exponential: exp(-3 h / r);
- gaussian: exp(-3 h^2 / r^2);
- spherical: 1 - 1.5 (h/r) + 0.5 (h/r)^3 for h < r, else 0;
- matern32, matern52: Matérn with smoothness 3/2 and 5/2 (``server/core/matern.py``: the
  scale factor is solved so that the correlation is 5% at r).

A unit's nugget eta in [0, 1) adds variation with no spatial structure:
rho(h) = (1 - eta) rho_model(h) + eta [h = 0] (:func:`correlate_unit`); only exactly
coincident points share the nugget.

Adding a model is one entry in ``CORRELATION_MODELS``: the model file's allowed names and the
Ground page's choices derive from it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from probewise.core.matern import matern32, matern52


@dataclass(frozen=True)
class CorrelationModel:
    """One correlation model: its name in the model file, a label for people, its formula.

    ``formula`` maps the scaled distance ``h / r`` (array of float >= 0, any shape) to the
    correlation (same shape, 1 at 0).
    """

    name: str
    label: str
    formula: Callable[[np.ndarray], np.ndarray]


def _exponential(h: np.ndarray) -> np.ndarray:
    return np.exp(-3.0 * h)


def _gaussian(h: np.ndarray) -> np.ndarray:
    return np.exp(-3.0 * h * h)


def _spherical(h: np.ndarray) -> np.ndarray:
    hc = np.minimum(h, 1.0)
    return np.where(h < 1.0, 1.0 - 1.5 * hc + 0.5 * hc**3, 0.0)


# The one list of correlation models, in the order the model file and the pages show them.
CORRELATION_MODELS: dict[str, CorrelationModel] = {
    m.name: m
    for m in (
        CorrelationModel("exponential", "Exponential", _exponential),
        CorrelationModel("gaussian", "Gaussian", _gaussian),
        CorrelationModel("spherical", "Spherical", _spherical),
        CorrelationModel("matern32", "Matérn 3/2", matern32),
        CorrelationModel("matern52", "Matérn 5/2", matern52),
    )
}
CORRELATION_MODEL_NAMES: tuple[str, ...] = tuple(CORRELATION_MODELS)


def correlate(model: str, h_m: np.ndarray, range_m: float) -> np.ndarray:
    """Correlation at horizontal distances ``h_m`` (any shape) for a model and practical range.

    Parameters
    ----------
    model : str
        A name in ``CORRELATION_MODELS``.
    h_m : array of float, any shape
        Distances (m), non-negative.
    range_m : float
        Practical range r > 0 (m).

    Returns
    -------
    array of float, shape of ``h_m``, in [0, 1] with 1 at h = 0.
    """
    entry = CORRELATION_MODELS.get(model)
    if entry is None:
        raise ValueError(f"unknown correlation model {model!r}")
    return entry.formula(np.asarray(h_m, dtype=float) / float(range_m))


def correlate_unit(corr, h_m: np.ndarray) -> np.ndarray:
    """A unit's correlation at distances ``h_m`` (any shape), its nugget included.

    ``corr`` is a ``probewise.core.model.Correlation``; with nugget 0 this is exactly
    :func:`correlate`.
    """
    rho = correlate(corr.model, h_m, corr.range_m)
    eta = float(getattr(corr, "nugget", 0.0))
    if eta:
        rho = (1.0 - eta) * rho + eta * (np.asarray(h_m) == 0.0)
    return rho


def pairwise_distance_m(xy_a: np.ndarray, xy_b: np.ndarray) -> np.ndarray:
    """Horizontal distances between two point sets: ``(na, 2), (nb, 2) -> (na, nb)`` (m)."""
    xy_a = np.asarray(xy_a, dtype=float).reshape(-1, 2)
    xy_b = np.asarray(xy_b, dtype=float).reshape(-1, 2)
    dx = xy_a[:, None, 0] - xy_b[None, :, 0]
    dy = xy_a[:, None, 1] - xy_b[None, :, 1]
    dx *= dx
    dy *= dy
    dx += dy
    return np.sqrt(dx, out=dx)
