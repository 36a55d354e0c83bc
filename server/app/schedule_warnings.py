"""Warnings beside each probe of the schedule: what the crew and the client should know before
the probe is set out.

- inside an exclusion: the probe's point lies in one of the site's exclusion polygons (a
  layout drawn or imported by hand may put it there; the optimiser never does);
- outside the site: the point lies outside the site outline (an outline changed after the
  layout was drawn, and the probes kept);
- deep trial pit: a trial pit planned deeper than ``TRIAL_PIT_ENTRY_DEPTH_M``, where nobody
  enters the excavation unsupported;
- refusal expected: the planned depth stops on a unit the method cannot penetrate.

Rows may already carry a ``warnings`` list (other parts of the schedule add theirs); these are
appended after them.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Any

import numpy as np

from probewise.core.geometry import points_in_polygon
from probewise.core.model import Project

# Depth beyond which an unsupported excavation is not entered: common practice in site
# investigation (no published source checked here; local rules govern).
TRIAL_PIT_ENTRY_DEPTH_M = 1.2


def probe_warnings(
    project: Project, rows: Sequence[dict[str, Any]], refusals: Iterable[str] = ()
) -> list[list[str]]:
    """Per row of ``rows`` (schedule rows: id, kind, x, y, depth_m): its warnings in words."""
    refused = set(refusals)
    if not rows:
        return []
    xy = np.array([[float(r["x"]), float(r["y"])] for r in rows], dtype=float)
    inside_site = points_in_polygon(xy, project.site.outline)
    names = project.site.exclusion_names
    excluded: list[list[str]] = [[] for _ in rows]
    for n, polygon in enumerate(project.site.exclusions):
        name = names[n] if n < len(names) else f"exclusion {n + 1}"
        for i in np.flatnonzero(points_in_polygon(xy, polygon)):
            excluded[int(i)].append(name)
    out = []
    for i, row in enumerate(rows):
        words = [str(w) for w in row.get("warnings") or []]
        words.extend(f"inside the exclusion {name}" for name in excluded[i])
        if not inside_site[i]:
            words.append("outside the site outline")
        if row.get("kind") == "trial_pit" and float(row["depth_m"]) > TRIAL_PIT_ENTRY_DEPTH_M:
            words.append(
                f"deep trial pit (over {TRIAL_PIT_ENTRY_DEPTH_M:g} m): no entry without support"
            )
        if row["id"] in refused:
            words.append("refusal expected before the target depth")
        out.append(words)
    return out
