"""Hard bounds on the fill base from the site's history (docs/model.md "Levels and site
history").

Where fill buried a natural surface, the fill base is that former surface, since settled.
The first mapped former environment containing a point gives the former surface level there
as a band [F_min, F_max] (project datum); outside every environment an optional default band,
else no bound. The fill's weight has since consolidated the soft unit beneath (Terzaghi's 1D
primary consolidation, normally consolidated, water table at the former surface), so the
fill base now lies in [F_min - S_max, F_max - S_min]; as a depth below ground level GL:

    [max(0, GL - F_max + S_min), GL - F_min + S_max].

S_max takes Cc max, the unit's maximum thickness there and F = F_min (the thickest fill);
S_min takes Cc min, its minimum thickness and F = F_max.

References: Terzaghi, K. (1943) Theoretical Soil Mechanics, Wiley; Craig, R.F. / Knappett,
J.A. (2012) Craig's Soil Mechanics, 8th ed., ch. 7; Das, B.M. Principles of Geotechnical
Engineering, ch. 11.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from probewise.core.field import UnitFields
from probewise.core.geometry import points_in_polygon
from probewise.core.model import HistoryRule, Settlement

GAMMA_WATER_KN_M3 = 9.81
SUBLAYER_M = 0.5  # thickness the compressible unit is split into, at most

NO_BOUND = -2  # environment code: no history bound at the point
OUTSIDE = -1  # environment code: the rule's default band outside every environment


def reference_level_m(
    value: float | str, levels_m: dict[str, float], datum_shift_m: float = 0.0
) -> float:
    """A level in the project datum: a number as it is, a name from the reference table
    plus the table's datum shift (KeyError for a name not in the table)."""
    if isinstance(value, str):
        return float(levels_m[value]) + float(datum_shift_m)
    return float(value)


def former_surface(
    rule: HistoryRule, xy: np.ndarray, origin: tuple[float, float] = (0.0, 0.0)
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Band of the former surface level at points.

    Parameters
    ----------
    rule : HistoryRule
    xy : (n, 2) float
        Points relative to ``origin``.
    origin : (2,) float

    Returns
    -------
    (level_min_m, level_max_m, environment) : ((n,) float, (n,) float, (n,) int)
        Levels in the project datum, ``nan`` where there is no bound; ``environment`` is the
        index of the first environment containing the point, ``OUTSIDE`` where the default
        band applies, ``NO_BOUND`` where none does.
    """
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    n = len(xy)
    env = np.full(n, NO_BOUND, dtype=int)
    lo = np.full(n, np.nan)
    hi = np.full(n, np.nan)
    for e, spec in enumerate(rule.environments):
        free = env == NO_BOUND
        if not free.any():
            break
        hit = np.zeros(n, dtype=bool)
        hit[free] = points_in_polygon(xy[free], spec.polygon, origin)
        env[hit] = e
        lo[hit], hi[hit] = spec.level_min_m, spec.level_max_m
    if rule.outside is not None:
        rest = env == NO_BOUND
        env[rest] = OUTSIDE
        lo[rest], hi[rest] = rule.outside
    return lo, hi, env


def consolidation_settlement_m(
    cc: float,
    e0: float,
    effective_unit_weight_kn_m3: float,
    load_kpa: np.ndarray,
    thickness_m: np.ndarray,
    sublayer_m: float = SUBLAYER_M,
    top_stress_kpa: float = 0.0,
) -> np.ndarray:
    """Terzaghi 1D primary consolidation of a normally consolidated layer, by sublayers.

    S = sum_j Cc / (1 + e0) h log10((s'_j + dq) / s'_j), the layer of thickness H split into
    n = ceil(H / sublayer_m) equal sublayers of thickness h = H / n, s'_j = g' (j - 1/2) h the
    effective stress at the middle of sublayer j before loading (water table at the layer's
    top; plus ``top_stress_kpa`` of overburden above it), dq a uniform load (the one-layer
    formula of Craig's Soil Mechanics, 8th ed., ch. 7, applied per sublayer).

    Parameters
    ----------
    cc, e0 : float
        Compression index and initial void ratio.
    effective_unit_weight_kn_m3 : float
        g' = g_sat - g_w (> 0).
    load_kpa : (n,) float
        Added vertical stress; values <= 0 give no settlement.
    thickness_m : (n,) float
        H >= 0.
    sublayer_m : float
        Largest sublayer thickness.
    top_stress_kpa : float
        Effective stress at the top of the layer before loading (0 under the former surface).

    Returns
    -------
    (n,) float
        Settlement (m), >= 0.
    """
    load = np.maximum(np.asarray(load_kpa, dtype=float).reshape(-1), 0.0)
    thick = np.maximum(np.asarray(thickness_m, dtype=float).reshape(-1), 0.0)
    load, thick = np.broadcast_arrays(load, thick)
    # the tolerance keeps H an exact multiple of the sublayer (1.0 m -> 2, not 3)
    n_sub = np.ceil(thick / sublayer_m - 1e-9).astype(int)
    out = np.zeros(len(thick))
    if not n_sub.size or n_sub.max() <= 0:
        return out
    h = np.where(n_sub > 0, thick / np.maximum(n_sub, 1), 0.0)
    for j in range(1, int(n_sub.max()) + 1):
        live = (n_sub >= j) & (load > 0)
        if not live.any():
            continue
        stress = top_stress_kpa + effective_unit_weight_kn_m3 * (j - 0.5) * h[live]
        out[live] += h[live] * np.log10((stress + load[live]) / stress)
    return cc / (1.0 + e0) * out


@dataclass(frozen=True, eq=False)
class HistoryBand:
    """A history rule evaluated at ``n`` points; arrays ``(n,)``, ``nan`` where no bound.

    ``former_*`` are levels (m, project datum), ``settlement_*`` (m) and ``*_depth_m`` the
    resulting depth bound on the rule's boundary; ``environment`` as in
    :func:`former_surface`.
    """

    former_min_m: np.ndarray
    former_max_m: np.ndarray
    settlement_min_m: np.ndarray
    settlement_max_m: np.ndarray
    min_depth_m: np.ndarray
    max_depth_m: np.ndarray
    environment: np.ndarray

    @property
    def bounded(self) -> np.ndarray:
        """``(n,)`` bool: where the rule bounds its boundary."""
        return self.environment != NO_BOUND


def settlement_range_m(
    spec: Settlement | None,
    ground_level_m: np.ndarray,
    former_min_m: np.ndarray,
    former_max_m: np.ndarray,
    fields: UnitFields,
) -> tuple[np.ndarray, np.ndarray]:
    """(S_min, S_max) at points, each ``(n,)`` (m); zero without a settlement block."""
    if spec is None:
        zero = np.zeros(len(ground_level_m))
        return zero, zero
    g_eff = spec.unit_weight_kn_m3 - GAMMA_WATER_KN_M3
    c = spec.compressible_unit

    def load(former_m):
        return spec.fill_unit_weight_kn_m3 * (ground_level_m - former_m) + spec.surcharge_kpa

    s_min = consolidation_settlement_m(
        spec.cc_min, spec.e0, g_eff, load(former_max_m), fields.min_m[:, c], spec.sublayer_m
    )
    s_max = consolidation_settlement_m(
        spec.cc_max, spec.e0, g_eff, load(former_min_m), fields.max_m[:, c], spec.sublayer_m
    )
    return s_min, s_max


def history_band(
    rule: HistoryRule,
    ground_level_m: np.ndarray,
    fields: UnitFields,
    xy: np.ndarray,
    origin: tuple[float, float] = (0.0, 0.0),
) -> HistoryBand:
    """The former surface, its settlement and the depth bound of a rule at points.

    Parameters
    ----------
    rule : HistoryRule
    ground_level_m : (n,) float
        GL at the points (project datum).
    fields : UnitFields
        Thickness priors at the points (the compressible unit's min and max thickness).
    xy : (n, 2) float
        Points relative to ``origin``.
    origin : (2,) float

    Returns
    -------
    HistoryBand
    """
    gl = np.asarray(ground_level_m, dtype=float).reshape(-1)
    f_min, f_max, env = former_surface(rule, xy, origin)
    bounded = env != NO_BOUND
    s_min, s_max = np.full(len(gl), np.nan), np.full(len(gl), np.nan)
    if bounded.any():
        s_lo, s_hi = settlement_range_m(
            rule.settlement, gl[bounded], f_min[bounded], f_max[bounded], fields.take(bounded)
        )
        s_min[bounded], s_max[bounded] = s_lo, s_hi
    min_depth = np.maximum(0.0, gl - f_max + s_min)
    max_depth = gl - f_min + s_max
    return HistoryBand(f_min, f_max, s_min, s_max, min_depth, max_depth, env)
