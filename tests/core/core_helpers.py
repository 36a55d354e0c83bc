"""Small builders of core objects for the core tests (invented values)."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from probewise.core.model import Correlation, GroundModel, ThicknessRange, Unit

DATA = Path(__file__).resolve().parents[1] / "data"


def tiny_dict() -> dict:
    return json.loads((DATA / "tiny-model.json").read_text())


def one_unit_ground(model: str, range_m: float, mean: float, std: float) -> GroundModel:
    """A one-unit model (one thickness over a basal unit): D_0 = T_0 ~ (mean, std^2).

    A uniform range of half-width std*sqrt(3) has exactly that mean and std.
    """
    half = std * math.sqrt(3.0)
    rng = ThicknessRange(mean - half, mean, mean + half, "uniform")
    return GroundModel((Unit("Upper", rng, Correlation(model, range_m)), Unit("Basal", None, None)))


def shift_model(model: dict, dx: float, dy: float) -> dict:
    """The same model with every coordinate moved by (dx, dy)."""

    def move(value):
        if isinstance(value, dict):
            out = {}
            for k, v in value.items():
                if k == "coordinates":
                    out[k] = move_coords(v)
                elif k == "x":
                    out[k] = v + dx
                elif k == "y":
                    out[k] = v + dy
                else:
                    out[k] = move(v)
            return out
        if isinstance(value, list):
            return [move(v) for v in value]
        return value

    def move_coords(c):
        if isinstance(c[0], (int, float)):
            return [c[0] + dx, c[1] + dy]
        return [move_coords(v) for v in c]

    return move(model)


def points(rng: np.random.Generator, n: int, size: float = 100.0) -> np.ndarray:
    return rng.uniform(0.0, size, (n, 2))
