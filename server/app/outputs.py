"""What the exports write: the schedule rows of a layout and the posterior on the grid."""

from __future__ import annotations

from probewise.app.project import core_project, find_layout
from probewise.errors import InputError


def schedule_probe_rows(model: dict, layout_name: str) -> list[dict]:
    """The schedule rows of a layout (the same rows ``probewise schedule`` writes).

    Adapter to the core: planned depth and observed set against the existing probes
    (docs/model.md "Planned depth", "Observed set").
    """
    from probewise.app.schedule import probe_rows
    from probewise.core.analysis import ProjectAnalysis

    project = core_project(model)
    analysis = ProjectAnalysis(project)
    layout = find_layout(project, layout_name)
    if not layout.probes:
        raise InputError("--layout", f"layout {layout_name!r} has no probes")
    return probe_rows(project, analysis.plan(layout))


def posterior_grid(model: dict, layout_name: str | None):
    """(xy (n, 2) project coordinates, boundary names, fields {name: (n, B)}) on the grid.

    Adapter to the core: the evaluation grid of the site, conditioned on the existing probes
    and, when named, the layout's planned probes; each cell is the average of the depth over
    the cell (docs/model.md "Numbers reported for a layout"); P50 is the median of the truncated
    posterior, like P5 and P95.
    """

    from probewise.core.analysis import ProjectAnalysis
    from probewise.core.bounds import truncated_quantiles
    from probewise.core.grid import EmptyGridError, evaluation_grid

    project = core_project(model)
    analysis = ProjectAnalysis(project)
    layout = find_layout(project, layout_name) if layout_name else None
    try:
        grid = evaluation_grid(project.site, analysis.origin)
    except EmptyGridError as exc:
        raise InputError("grid_spacing_m", str(exc)) from None
    post = analysis.at_cells(grid, layout)
    xy = post.xy
    p50 = truncated_quantiles(post.mean_m, post.std_m, post.lo_m, post.hi_m, 0.5)
    fields = {
        "mean_m": post.mean_m,
        "std_m": post.std_m,
        "p05_m": post.p05_m,
        "p50_m": p50,
        "p95_m": post.p95_m,
    }
    return xy, project.ground.boundary_names, fields
