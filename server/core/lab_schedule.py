"""The laboratory testing schedule of a layout (docs/optimiser.md "Requirements").

For every test requirement whose parameter samples deliver: how many results are still needed
(the requirement's count less the results existing probes recorded), which planned holes
give samples of the unit, how many each (up to what the hole can give: its sample deliveries
counted on the unit's expected band, ``probewise.core.requirements``) and at which target
depths. Samples are shared out one hole at a time in turn (holes in layout order), so they
spread over the site. Target depths are spaced evenly in the part of the unit the hole is
sure to meet: below the P95 depth of the unit's top and above the P5 depth of its base (the
current posterior at the hole); where that band is empty (the unit may be thin there), in the
expected band (means), and the row says so.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from probewise.core.requirements import counts_in_unit, delivers_parameter, unit_band_m


@dataclass(frozen=True)
class LabRow:
    """Samples for one test from one hole: count and target depths (m below ground)."""

    probe: str
    method: str
    samples: int
    depths_m: tuple[float, ...]
    band_top_m: float
    band_base_m: float
    sure_band: bool  # the band is where the hole is sure to meet the unit (P95 top, P5 base)


@dataclass(frozen=True)
class LabNeed:
    """One test requirement: results needed, recorded already, scheduled, and the rows."""

    unit: str
    parameter: str
    test: str
    needed: int
    existing: int
    scheduled: int
    rows: tuple[LabRow, ...]

    @property
    def short(self) -> int:
        return max(self.needed - self.existing - self.scheduled, 0)


def target_depths_m(top_m: float, base_m: float, count: int) -> tuple[float, ...]:
    """``count`` depths at the middles of equal slices of ``[top_m, base_m]``."""
    step = (base_m - top_m) / count
    return tuple(float(top_m + (i + 0.5) * step) for i in range(count))


def _hole_bands(analysis, plans, unit: int):
    """Per hole: expected band (means) and sure band (P95 top, P5 base) of ``unit``, ``(n,)``
    arrays each, cut at the planned depth."""
    xy = np.array([(p.probe.x, p.probe.y) for p in plans], dtype=float)
    post = analysis.at_points(xy)
    depth = np.array([p.depth_m for p in plans], dtype=float)
    top, base = unit_band_m(post.mean_m, unit)
    sure_top = np.zeros(len(plans)) if unit == 0 else post.p95_m[:, unit - 1]
    sure_base = post.p05_m[:, unit] if unit < post.mean_m.shape[1] else np.full(len(plans), np.inf)
    return top, np.minimum(base, depth), sure_top, np.minimum(sure_base, depth)


def lab_schedule(analysis, plans, existing_counts: np.ndarray) -> tuple[LabNeed, ...]:
    """The laboratory schedule of planned probes ``plans`` (``ProbePlan``).

    Parameters
    ----------
    analysis : ProjectAnalysis
    plans : sequence of ProbePlan
    existing_counts : (R,) int
        Results the existing probes recorded towards each test requirement.

    Returns
    -------
    tuple of LabNeed
        One per test requirement that some method's samples deliver, in requirement order.
    """
    project = analysis.project
    req = project.requirements
    if req is None or not req.tests:
        return ()
    out = []
    for r, need in enumerate(req.tests):
        sampled = {
            mid: [d for d in m.delivers if d.kind == "sample" and delivers_parameter(d, need)]
            for mid, m in project.methods.items()
        }
        if not any(sampled.values()):
            continue
        holes = [p for p in plans if sampled.get(p.probe.method)]
        rows: list[LabRow] = []
        left = max(need.count - int(existing_counts[r]), 0)
        if holes and left:
            top, base, sure_top, sure_base = _hole_bands(analysis, holes, need.unit)
            depth = np.array([p.depth_m for p in holes])
            capacity = np.zeros(len(holes), dtype=int)
            for d in dict.fromkeys(x for p in holes for x in sampled[p.probe.method]):
                mine = np.array([d in sampled[p.probe.method] for p in holes])
                capacity += np.where(mine, counts_in_unit(d, top, base, depth), 0)
            take = np.zeros(len(holes), dtype=int)
            while left and (take < capacity).any():  # one sample a hole in turn
                for h in np.flatnonzero(take < capacity):
                    if left == 0:
                        break
                    take[h] += 1
                    left -= 1
            for h, plan in enumerate(holes):
                if take[h] == 0:
                    continue
                sure = bool(sure_base[h] - sure_top[h] > 1e-6)
                lo, hi = (sure_top[h], sure_base[h]) if sure else (top[h], base[h])
                rows.append(
                    LabRow(
                        plan.probe.id,
                        plan.probe.method,
                        int(take[h]),
                        target_depths_m(float(lo), float(hi), int(take[h])),
                        float(lo),
                        float(hi),
                        sure,
                    )
                )
        out.append(
            LabNeed(
                project.ground.units[need.unit].name,
                need.parameter,
                need.test,
                need.count,
                int(existing_counts[r]),
                sum(row.samples for row in rows),
                tuple(rows),
            )
        )
    return tuple(out)
