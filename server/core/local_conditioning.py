"""Conditioning on many readings in bounded memory: local conditioning of tiles of targets.

The exact posterior (``probewise.core.posterior``) factors the covariance of *all* readings
and keeps the whitened covariance of every reading with every target: O(m^3) time and
O(m^2 + m B n) memory for m readings and n targets. With thousands of existing probes (or a
long corridor of tens of thousands of cells) that no longer fits a workstation, so beyond a
threshold the targets are conditioned tile by tile:

- the targets (cells or points) are grouped into square tiles whose side holds about an eighth
  of ``nearest_spots`` reading spots on average (a probe reads several boundaries at one spot);
- each tile is conditioned exactly (the same Cholesky conditioning, ``PosteriorState``) on the
  readings of its ``nearest_spots`` nearest existing spots, measured from the tile's extent,
  plus the readings of its ``nearest_spots`` nearest planned spots (planned readings have no
  values; they only reduce the variance);
- a layout reuses each tile's baseline factor and whitened covariances (block Cholesky update).

This is the screening effect of kriging: near readings screen off far ones (Stein, "The
screening effect in kriging", Annals of Statistics, 2002), the basis of nearest-neighbour
conditioning sets in Vecchia approximations (Vecchia 1988; Katzfuss and Guinness, "A general
framework for Vecchia approximations of Gaussian processes", Statistical Science, 2021) and of
local (moving-neighbourhood) kriging (Journel and Huijbregts, Mining Geostatistics, 1978).
Its error is one-sided for the variance: a Gaussian conditioned on a subset of the readings
has a variance no smaller than conditioned on all of them, so the local std is never below
the exact one; the excess is checked against the exact computation (tests/core/
test_core_local_conditioning.py: within 1% at every cell of bench L with 500 existing probes).

Memory: per tile a factor of at most ``(r, r)`` and whitened covariances ``(r, B, n_t)``,
r = readings of 2 x ``nearest_spots`` spots; never a matrix of all readings. Tiles are kept
for reuse by layouts up to ``KEEP_BYTES`` in all; beyond it a layout solves them again.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from threadpoolctl import threadpool_limits

from probewise.core.blocks import CellBlocks, block_cross_covariance
from probewise.core.covariance import cross_covariance_all, distinct_spots
from probewise.core.field import prior_boundary_moments, unit_fields
from probewise.core.geometry import polygon_area_m2
from probewise.core.grid import MAX_GRID_CELLS
from probewise.core.model import GroundModel, Site
from probewise.core.posterior import Observations, PosteriorState, Prediction, condition

# Exact conditioning while readings <= EXACT_MAX_READINGS and readings x evaluation cells <=
# EXACT_MAX_READING_CELLS (the whitened covariances then hold at most 8 M entries per
# boundary, 256 MiB for four boundaries, about 0.5 GiB at the peak of an evaluation); local
# conditioning beyond either.
EXACT_MAX_READINGS = 4_000
EXACT_MAX_READING_CELLS = 8_000_000
REACH_RANGES = 3.0  # readings farther than this many of the longest range are left out
NEAREST_SPOTS = 300  # existing (and planned) reading spots each tile is conditioned on
TILE_SHARE = 0.3  # share of those spots a tile holds on average
MAX_TILE_TARGETS = 1_024  # keeps a tile's whitened covariances small on sparse sites
KEEP_BYTES = 256 * 2**20  # tiles' factors and covariances kept for reuse by layouts

EXACT_NEEDED = (
    "{readings} existing readings over this grid are beyond exact conditioning (evaluate "
    'conditions locally beyond it, docs/model.md "Many readings"); {what} needs the exact '
    "posterior: thin the existing probes (e.g. one CPT of each dense cluster) or use a "
    "coarser grid_spacing_m to run it"
)


def one_blas_thread():
    """A context running BLAS on one thread. Tiles are factored one after another, each of a
    few hundred to about a thousand readings: at that size BLAS threads cost more than they
    gain (bench L with 5,000 existing probes: 12.5 s on two threads, 9.6 s on one)."""
    return threadpool_limits(limits=1, user_api="blas")


class ExactStateNeededError(ValueError):
    """A computation needs the Cholesky factor of all readings, which a local state has not."""


@dataclass(frozen=True)
class ConditioningInfo:
    """How the existing readings were conditioned on (reported by ``evaluate``).

    ``method`` is "exact" or "local"; ``nearest_spots`` and ``tile_m`` are None for exact.
    """

    method: str
    readings: int
    spots: int
    nearest_spots: int | None = None
    tile_m: float | None = None

    def describe(self) -> str:
        """One line for a readable table."""
        if self.method == "exact":
            return f"Conditioning: exact on all {self.readings} existing readings"
        return (
            f"Conditioning: local on {self.readings} existing readings at {self.spots} spots "
            f"(each tile of targets on its {self.nearest_spots} nearest existing and planned "
            f"spots; std never below the exact one; docs/model.md)"
        )


@dataclass(frozen=True, eq=False)
class LocalPrediction(Prediction):
    """A prediction made tile by tile; ``white`` is empty, ``tiles`` holds per tile
    ``(target index (n_t,), tile state, tile prediction)`` and ``planned`` the number of
    planned readings it includes, so a layout reuses each tile's baseline solve."""

    tiles: tuple = ()
    planned: int = 0


def use_local(n_readings: int, n_cells: int) -> bool:
    """True when exact conditioning would exceed the thresholds above."""
    return n_readings > EXACT_MAX_READINGS or n_readings * n_cells > EXACT_MAX_READING_CELLS


def estimated_cells(site: Site) -> int:
    """Evaluation cells of a site, from its area (at most ``MAX_GRID_CELLS``: a finer grid is
    coarsened)."""
    g = float(site.grid_spacing_m)
    cells = int(math.ceil(polygon_area_m2(site.outline) / (g * g))) if g > 0 else 0
    return min(cells, MAX_GRID_CELLS)


def condition_scaled(
    ground: GroundModel,
    origin: tuple[float, float],
    known: Observations,
    n_cells: int,
) -> PosteriorState | LocalState:
    """The exact state (:func:`probewise.core.posterior.condition`) within the thresholds,
    else a :class:`LocalState`.

    Parameters
    ----------
    known : Observations
        The existing readings, ``m`` of them.
    n_cells : int
        Evaluation cells the state will be asked about (for the memory threshold).
    """
    if use_local(known.size, n_cells):
        return LocalState(ground, origin, known)
    return condition(ground, origin, known)


def conditioning_info(state) -> ConditioningInfo:
    """What :class:`ConditioningInfo` says of a state (exact or local)."""
    if isinstance(state, LocalState):
        return ConditioningInfo(
            "local",
            state.known.size,
            len(state.existing.spots),
            state.nearest_spots,
            state.tile_m,
        )
    known = state.observations[0]
    return ConditioningInfo("exact", known.size, len(distinct_spots(known.xy)[0]))


def take_observations(obs: Observations, index: np.ndarray) -> Observations:
    """A subset of readings, in their order."""
    return Observations(
        obs.xy[index], obs.boundary[index], obs.noise_std_m[index], obs.value_m[index],
        obs.probe[index],
    )  # fmt: skip


def concat_observations(blocks: tuple[Observations, ...]) -> Observations:
    """Several blocks of readings as one."""
    if not blocks:
        return Observations.empty()
    return Observations(
        *(np.concatenate([getattr(b, k) for b in blocks]) for k in Observations.__annotations__)
    )


def take_blocks(blocks: CellBlocks, index: np.ndarray) -> CellBlocks:
    """The cells ``index`` of a grid's blocks."""
    n, q = blocks.n_cells, blocks.q
    return CellBlocks(
        xy=blocks.xy[index],
        fields=blocks.fields.take(index),
        sub_xy=blocks.sub_xy.reshape(n, q, 2)[index].reshape(-1, 2),
        sub_std_m=np.ascontiguousarray(blocks.sub_std_m[index]),
        prior_mean_m=blocks.prior_mean_m[index],
        prior_var_m2=blocks.prior_var_m2[index],
        spacing_m=blocks.spacing_m,
        per_side=blocks.per_side,
        sub_load_m=None if blocks.sub_load_m is None else blocks.sub_load_m[index],
    )


def nearest_spot_readings(
    spots: np.ndarray,
    spot_of: np.ndarray,
    lo: np.ndarray,
    hi: np.ndarray,
    count: int,
    reach_m: float = math.inf,
) -> np.ndarray:
    """Readings at the ``count`` spots nearest a rectangle (0 inside it), none farther than
    ``reach_m`` from it.

    Parameters
    ----------
    spots : (u, 2) float
    spot_of : (m,) int
        Spot of each reading.
    lo, hi : (2,) float
        Corners of the rectangle.
    reach_m : float
        Spots farther away are left out even when fewer than ``count`` remain.

    Returns
    -------
    (r,) int
        Indices of the readings, ascending.
    """
    gap = np.maximum(np.maximum(lo - spots, spots - hi), 0.0)
    d2 = np.einsum("ij,ij->i", gap, gap)
    chosen = d2 <= reach_m * reach_m
    if np.count_nonzero(chosen) > count:
        nearest = np.zeros(len(spots), dtype=bool)
        nearest[np.argpartition(d2, count - 1)[:count]] = True
        chosen &= nearest
    return np.flatnonzero(chosen[spot_of])


def group_tiles(xy: np.ndarray, tile_m: float, max_targets: int) -> list[np.ndarray]:
    """Targets grouped into square tiles of side ``tile_m``: a list of index arrays
    (each at most ``max_targets`` long; a fuller tile is split in runs)."""
    if len(xy) == 0:
        return []
    key = np.floor((xy - xy.min(axis=0)) / tile_m).astype(np.int64)
    _, tile_of = np.unique(key, axis=0, return_inverse=True)
    order = np.argsort(tile_of.reshape(-1), kind="stable")
    cuts = np.flatnonzero(np.diff(tile_of.reshape(-1)[order])) + 1
    out = []
    for run in np.split(order, cuts):
        out.extend(run[i : i + max_targets] for i in range(0, len(run), max_targets))
    return out


class LocalState:
    """Existing readings (and planned blocks) conditioned on tile by tile.

    Duck-types the parts of :class:`probewise.core.posterior.PosteriorState` the evaluation
    and planning use (``predict``, ``extend``, ``observations``); :func:`probewise.core.blocks.
    predict_cells` hands cells to :meth:`predict_cells`. Computations that need the factor of
    all readings (``chol``) raise :class:`ExactStateNeededError`.

    Attributes
    ----------
    known : Observations
        The existing readings (``m``).
    planned : tuple of Observations
        Planned blocks, values ignored.
    spots : (u, 2) float
        Distinct spots of the existing readings.
    tile_m : float
        Side of a tile (m).
    """

    def __init__(
        self,
        ground,
        origin,
        known,
        planned=(),
        nearest_spots=NEAREST_SPOTS,
        tile_share=TILE_SHARE,
    ):
        self.ground: GroundModel = ground
        self.origin: tuple[float, float] = (float(origin[0]), float(origin[1]))
        self.known: Observations = known
        self.planned: tuple[Observations, ...] = tuple(planned)
        self.nearest_spots = int(nearest_spots)
        self.tile_share = float(tile_share)
        spots = distinct_spots(known.xy)[0]
        span = np.ptp(spots, axis=0) if len(spots) else np.zeros(2)
        area_per_spot = max(float(np.prod(np.maximum(span, 1.0))), 1.0) / max(len(spots), 1)
        # a tile holds a small share of the spots it is conditioned on, so targets at its
        # corners keep neighbours on every side
        self.tile_m = max(math.sqrt(self.nearest_spots * self.tile_share * area_per_spot), 1.0)
        # beyond REACH_RANGES of the longest practical range every unit's correlation is below
        # about 1e-4 (exponential; the others less): such readings are left out even when
        # fewer than nearest_spots are nearer (sparse probes along a corridor)
        ranges = [u.correlation.range_m for u in ground.units[: ground.n_boundaries]]
        self.reach_m = REACH_RANGES * max(ranges, default=math.inf)
        self.existing = SpotIndex(known)

    @property
    def observations(self) -> tuple[Observations, ...]:
        return (self.known, *self.planned)

    @property
    def fields(self):
        raise ExactStateNeededError(self.exact_needed())

    @property
    def n_observations(self) -> int:
        return int(sum(o.size for o in self.observations))

    @property
    def block_sizes(self) -> tuple[int, ...]:
        return tuple(o.size for o in self.observations)

    @property
    def chol(self):
        raise ExactStateNeededError(self.exact_needed())

    def nearest(self, index: SpotIndex, lo: np.ndarray, hi: np.ndarray) -> Observations:
        """The readings of ``index`` a tile spanning ``lo``-``hi`` is conditioned on."""
        return take_observations(index.obs, self.nearest_index(index, lo, hi))

    def nearest_index(self, index: SpotIndex, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
        """:meth:`nearest` as indices ``(r,)`` into ``index.obs``, ascending."""
        return nearest_spot_readings(
            index.spots, index.spot_of, lo, hi, self.nearest_spots, self.reach_m
        )

    def exact_near(self, lo: np.ndarray, hi: np.ndarray) -> PosteriorState:
        """The exact state on the readings a tile spanning ``lo``-``hi`` is conditioned on:
        its nearest existing spots, then each planned block's nearest."""
        state = condition(self.ground, self.origin, self.nearest(self.existing, lo, hi))
        for block in self.planned:
            state = state.extend(self.nearest(SpotIndex(block), lo, hi))
        return state

    def exact_needed(self, what: str = "this computation") -> str:
        """Why ``what`` cannot run on this state, in words."""
        return EXACT_NEEDED.format(readings=self.known.size, what=what)

    def extend(self, planned: Observations) -> LocalState:
        """A new state with a block of planned readings appended (values ignored)."""
        if planned.size == 0:
            return self
        return LocalState(
            self.ground,
            self.origin,
            self.known,
            (*self.planned, planned),
            self.nearest_spots,
            self.tile_share,
        )

    def predict(self, xy: np.ndarray, base: Prediction | None = None) -> Prediction:
        """Prior and posterior of every boundary at points ``(n, 2)``, tile by tile."""
        xy = np.asarray(xy, dtype=float).reshape(-1, 2)
        fields = base.fields if base is not None else unit_fields(self.ground, xy, self.origin)
        prior_mean, prior_var = prior_boundary_moments(fields)

        def tile_targets(idx):
            xy_t, f_t = xy[idx], fields.take(idx)

            def cross(obs, f_obs):
                return cross_covariance_all(self.ground, obs.xy, obs.boundary, f_obs, xy_t, f_t)

            return xy_t, f_t, prior_mean[idx], prior_var[idx], cross, 0.0

        return self._predict(xy, fields, prior_mean, prior_var, tile_targets, base)[0]

    def predict_cells(self, blocks: CellBlocks, base: Prediction | None = None) -> Prediction:
        """Prior and posterior of the cell average of every boundary, tile by tile."""
        targets = self._cell_targets(blocks)
        pm, pv = blocks.prior_mean_m, blocks.prior_var_m2
        return self._predict(blocks.xy, blocks.fields, pm, pv, targets, base)[0]

    def predict_cells_alternatives(
        self,
        blocks: CellBlocks,
        alternatives: tuple[Observations, ...],
        on_progress: Callable[[float], None] | None = None,
    ) -> tuple[LocalPrediction, tuple[LocalPrediction, ...]]:
        """This state's cell prediction and one for each block of planned readings added to
        it alone, in one sweep of the tiles: each tile is conditioned on the existing readings
        once and extended by each block (a layout each). ``on_progress`` gets the share of
        tiles done (0 to 1) after each tile."""
        targets = self._cell_targets(blocks)
        pm, pv = blocks.prior_mean_m, blocks.prior_var_m2
        out = self._predict(
            blocks.xy, blocks.fields, pm, pv, targets, None, tuple(alternatives), on_progress
        )
        return out[0], out[1:]

    def _cell_targets(self, blocks: CellBlocks):
        """``tile_targets`` of :meth:`_predict` for the cells of ``blocks``."""

        def tile_targets(idx):
            tile = take_blocks(blocks, idx)

            def cross(obs, f_obs):
                return block_cross_covariance(self.ground, obs.xy, obs.boundary, f_obs, tile)

            pm, pv = tile.prior_mean_m, tile.prior_var_m2
            return tile.xy, tile.fields, pm, pv, cross, 0.5 * blocks.spacing_m

        return tile_targets

    def _predict(
        self,
        xy,
        fields,
        prior_mean,
        prior_var,
        tile_targets,
        base,
        alternatives=(),
        on_progress=None,
    ):
        """Shared by points and cells (see :meth:`_sweep_tiles`), on one BLAS thread."""
        with one_blas_thread():
            return self._sweep_tiles(
                xy, fields, prior_mean, prior_var, tile_targets, base, alternatives, on_progress
            )

    def _sweep_tiles(
        self, xy, fields, prior_mean, prior_var, tile_targets, base, alternatives, on_progress
    ):
        """``tile_targets(idx)`` gives a tile's targets as
        ``(xy, fields, prior mean, prior var, cross, half extent of a target)``. Returns this
        state's prediction and one per block of ``alternatives`` (planned readings, each added
        to this state alone)."""
        planned_all = concat_observations(self.planned)
        done = base.planned if isinstance(base, LocalPrediction) else 0
        new = SpotIndex(take_observations(planned_all, np.arange(done, planned_all.size)))
        alts = [SpotIndex(a) for a in alternatives]
        if isinstance(base, LocalPrediction):
            tiles_in = [(idx, st, pr) for idx, st, pr in base.tiles]
        else:
            groups = group_tiles(xy, self.tile_m, MAX_TILE_TARGETS)
            tiles_in = [(idx, None, None) for idx in groups]
        moments = [(prior_mean.copy(), prior_var.copy()) for _ in range(1 + len(alts))]
        tiles_out, kept_bytes = [], 0
        for done_tiles, (idx, state_t, pred_t) in enumerate(tiles_in, start=1):
            xy_t, f_t, pm_t, pv_t, cross, half = tile_targets(idx)
            lo, hi = xy_t.min(axis=0) - half, xy_t.max(axis=0) + half
            if state_t is None:  # first solve, or a tile not kept within the budget
                state_t, pred_t = self.exact_near(lo, hi), None  # every planned block too
            elif new.obs.size:
                state_t = state_t.extend(self.nearest(new, lo, hi))
            pred_t = state_t.predict_targets(xy_t, f_t, pm_t, pv_t, cross, pred_t)
            moments[0][0][idx], moments[0][1][idx] = pred_t.mean_m, pred_t.var_m2
            for k, alt in enumerate(alts, start=1):
                alt_t = state_t.extend(self.nearest(alt, lo, hi))
                alt_pred = alt_t.predict_targets(xy_t, f_t, pm_t, pv_t, cross, pred_t)
                moments[k][0][idx], moments[k][1][idx] = alt_pred.mean_m, alt_pred.var_m2
            # keep the tile's factor and whitened covariances while they fit the budget, so
            # a layout reuses them; beyond it the layout solves the tile again
            r = state_t.n_observations
            kept_bytes += 8 * (r * r + sum(w.size for w in pred_t.white))
            if kept_bytes <= KEEP_BYTES and not alts:
                tiles_out.append((idx, state_t, pred_t))
            else:
                tiles_out.append((idx, None, None))
            if on_progress is not None:
                on_progress(done_tiles / len(tiles_in))
        unkept = tuple((idx, None, None) for idx, _, _ in tiles_out)
        return tuple(
            LocalPrediction(
                xy, fields, prior_mean, prior_var, mean, var, (),
                tuple(tiles_out) if k == 0 else unkept,
                planned_all.size + (alts[k - 1].obs.size if k else 0),
            )
            for k, (mean, var) in enumerate(moments)
        )  # fmt: skip


class SpotIndex:
    """A block of readings with its distinct spots, for picking those nearest a tile."""

    def __init__(self, obs: Observations):
        self.obs = obs
        self.spots, self.spot_of, _ = distinct_spots(obs.xy)
