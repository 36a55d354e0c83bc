"""Readings simulated from known parameters, for the fit's recovery checks (invented)."""

from __future__ import annotations

import dataclasses

import numpy as np

from probewise.core.model import Correlation, GroundModel, ThicknessRange, Unit
from probewise.core.posterior import Observations
from probewise.core.readings import observation_moments

TRUTH = {
    "spread_multiplier": (1.5, 0.8),
    "range_m": (60.0, 150.0),
    "nugget": (0.2, 0.0),
    "mean_shift_m": (0.5, -0.7),
    "rho": -0.5,
}


def two_units() -> GroundModel:
    """The conceptual model the fit starts from: two thickness units over a basal one."""
    return GroundModel(
        (
            Unit("Fill", ThicknessRange(0.5, 1.5, 3.0), Correlation("exponential", 40.0)),
            Unit("Clay", ThicknessRange(2.0, 4.0, 8.0), Correlation("matern32", 100.0)),
            Unit("Gravel", None, None),
        )
    )


def true_ground() -> GroundModel:
    base = two_units()
    units = tuple(
        dataclasses.replace(
            base.units[i],
            spread_multiplier=TRUTH["spread_multiplier"][i],
            mean_shift_m=TRUTH["mean_shift_m"][i],
            correlation=dataclasses.replace(
                base.units[i].correlation,
                range_m=TRUTH["range_m"][i],
                nugget=TRUTH["nugget"][i],
            ),
        )
        for i in range(2)
    ) + (base.units[2],)
    return dataclasses.replace(base, units=units, thickness_correlation=((0, 1, TRUTH["rho"]),))


def simulated_readings(n_probes: int, seed: int, size_m: float = 600.0) -> Observations:
    """Every probe reads both boundaries (precision 0.1 m); depths drawn from the truth."""
    rng = np.random.default_rng(seed)
    xy = np.repeat(rng.uniform(0.0, size_m, (n_probes, 2)), 2, axis=0)
    bnd = np.tile([0, 1], n_probes)
    obs = Observations.build(
        xy,
        bnd,
        np.full(2 * n_probes, 0.1),
        np.zeros(2 * n_probes),
        np.repeat(np.arange(n_probes), 2),
    )
    mean, _, cov = observation_moments(true_ground(), (0.0, 0.0), obs)
    return dataclasses.replace(obs, value_m=rng.multivariate_normal(mean, cov))
