"""Warnings beside each probe of the schedule: what the crew and the client should know before
the probe is set out.

- inside an exclusion: the probe's point lies in one of the site's exclusion polygons (a
  layout drawn or imported by hand may put it there; the optimiser never does);
- outside the site: the point lies outside the site outline (an outline changed after the
  layout was drawn, and the probes kept);
What the probe may meet in the field (refusal, pre-drilling, a trial pit's reach, entry,
stability and groundwater) is ``probewise.app.probe_warnings``; rows already carry those in
``warnings`` and these are appended after them.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from probewise.core.geometry import points_in_polygon
from probewise.core.model import Project


def placement_warnings(project: Project, rows: Sequence[dict[str, Any]]) -> list[list[str]]:
    """Per row of ``rows`` (schedule rows: id, x, y, warnings): its warnings in words, those it
    carries first."""
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
        out.append(words)
    return out
