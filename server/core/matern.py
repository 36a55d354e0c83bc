"""Matérn correlations (smoothness 3/2 and 5/2) in the practical-range convention.

With u = c h / r (h the distance, r the practical range):

- Matérn 3/2: (1 + u) exp(-u);
- Matérn 5/2: (1 + u + u^2 / 3) exp(-u)

(Rasmussen and Williams, Gaussian Processes for Machine Learning, 2006, eq. 4.17, with their
length scale l = sqrt(3) r / c and sqrt(5) r / c). The scale factor c is solved so that the
correlation is exactly 5% at h = r (scipy.optimize.brentq): c = 4.7439 for 3/2 and 5.9186
for 5/2. (The exponential and gaussian models use c = 3, which gives 4.98% at r.)
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import brentq

PRACTICAL_CORRELATION = 0.05


def _shape_32(u):
    return (1.0 + u) * np.exp(-u)


def _shape_52(u):
    return (1.0 + u + u * u / 3.0) * np.exp(-u)


def practical_scale(shape) -> float:
    """The c with ``shape(c) == 0.05``: a Matérn shape reaches 5% at u = c."""
    return float(brentq(lambda u: shape(u) - PRACTICAL_CORRELATION, 1.0, 20.0, xtol=1e-14))


MATERN32_SCALE = practical_scale(_shape_32)
MATERN52_SCALE = practical_scale(_shape_52)


def matern32(h: np.ndarray) -> np.ndarray:
    """Matérn 3/2 at scaled distances ``h = distance / practical range`` (any shape)."""
    return _shape_32(MATERN32_SCALE * np.asarray(h, dtype=float))


def matern52(h: np.ndarray) -> np.ndarray:
    """Matérn 5/2 at scaled distances ``h = distance / practical range`` (any shape)."""
    return _shape_52(MATERN52_SCALE * np.asarray(h, dtype=float))
