"""Fitting a project's ground model to its existing readings, and the JSON document of
``probewise fit`` (docs/model-file.md, "CLI output contract")."""

from __future__ import annotations

from probewise.core.analysis import existing_observations
from probewise.core.fit import FitResult, fit_model
from probewise.core.local_conditioning import one_blas_thread
from probewise.core.model import Project


def project_fit(project: Project) -> FitResult:
    """Maximum-likelihood fit of the project's model to its existing readings."""
    obs = existing_observations(project.existing, project.methods, project.origin)
    with one_blas_thread():  # many small factorisations: threads only fight over cores
        return fit_model(project.ground, project.origin, obs, tuple(p.id for p in project.existing))


def fit_json(project: Project, fit: FitResult) -> dict:
    """``{"units": [...], "thickness_correlation": [...], "log_likelihood",
    "log_likelihood_conceptual"}`` plus ``"warnings"``; units carry ``"fitted"`` (false where
    the readings cannot tell and the model's value is kept)."""
    names = [u.name for u in project.ground.units]
    return {
        "units": [
            {
                "name": names[u.index],
                "spread_multiplier": u.spread_multiplier,
                "range_m": u.range_m,
                "nugget": u.nugget,
                "mean_shift_m": u.mean_shift_m,
                "conceptual_range_m": u.conceptual_range_m,
                "fitted": u.fitted,
            }
            for u in fit.units
        ],
        "thickness_correlation": [
            {"units": [names[i], names[j]], "rho": float(r)} for i, j, r in fit.pairs
        ],
        "log_likelihood": fit.log_likelihood,
        "log_likelihood_conceptual": fit.log_likelihood_conceptual,
        "warnings": list(fit.warnings),
    }


def adopt_fit(model: dict, fit_doc: dict) -> dict:
    """A copy of a model document with a fit written in (what adopting it means)."""
    import copy

    out = copy.deepcopy(model)
    by_name = {u["name"]: u for u in fit_doc["units"]}
    for unit in out["units"]:
        got = by_name.get(unit["name"])
        if got is None or unit.get("correlation") is None:
            continue
        unit["spread_multiplier"] = got["spread_multiplier"]
        unit["correlation"]["range_m"] = got["range_m"]
        unit["nugget"] = got["nugget"]
        unit["mean_shift_m"] = got["mean_shift_m"]
    if fit_doc["thickness_correlation"]:
        out["thickness_correlation"] = fit_doc["thickness_correlation"]
    return out


RANGE_FACTORS = (0.5, 1.0, 2.0)


def with_ranges_scaled(project: Project, factor: float) -> Project:
    """The project with every unit's practical range multiplied by ``factor``."""
    import dataclasses

    units = tuple(
        u
        if u.correlation is None
        else dataclasses.replace(
            u,
            correlation=dataclasses.replace(u.correlation, range_m=u.correlation.range_m * factor),
        )
        for u in project.ground.units
    )
    return dataclasses.replace(project, ground=dataclasses.replace(project.ground, units=units))


def range_sensitivity(project: Project) -> dict:
    """The model file's layouts ranked with every practical range x0.5, x1 and x2.

    The best option is the one with the most information gain per unit cost; the answer says
    whether it stays best at every factor: ``{"best": {factor: name}, "order": {factor:
    [{"name", "gain_per_cost"} by gain per cost]}, "holds": bool}`` (factors as text keys).
    """
    from probewise.core.options import rank_options

    layouts = [lay for lay in project.layouts if lay.probes]
    kinds = {lay.name: "hand" for lay in layouts}
    best, order = {}, {}
    for factor in RANGE_FACTORS:
        ranked = rank_options(with_ranges_scaled(project, factor), layouts, kinds)
        by_value = sorted(
            (o for o in ranked if o.gain_per_cost is not None),
            key=lambda o: (-o.gain_per_cost, o.name),
        )
        order[f"{factor:g}"] = [
            {"name": o.name, "gain_per_cost": o.gain_per_cost} for o in by_value
        ]
        best[f"{factor:g}"] = by_value[0].name if by_value else None
    named = [b for b in best.values() if b is not None]
    return {"best": best, "order": order, "holds": bool(named) and len(set(named)) == 1}
