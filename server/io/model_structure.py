"""Model-file rules for the optional ground-model structure and stage labels.

Units with a thickness may carry ``nugget`` in [0, 1), ``spread_multiplier`` > 0 and
``mean_shift_m``; the top level may carry ``thickness_correlation``, a list of
``{"units": [name, name], "rho": r}`` with r in (-1, 1) whose lag-0 matrix must be positive
definite; existing probes may carry a ``stage`` text (docs/model-file.md). The fields are
optional extras of schema "probewise/1", kept as given; this module checks them after the
main validation and yields ``InputError(field, problem)`` for each fault.
"""

from __future__ import annotations

import json
from collections.abc import Iterator

import numpy as np

from probewise.errors import InputError

MAX_PAIRS = 200
MAX_STAGE_CHARS = 80
MAX_SPREAD_MULTIPLIER = 100.0
MAX_SHIFT_M = 10_000.0


def _is_number(value: object) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def _show(value: object) -> str:
    text = json.dumps(value, ensure_ascii=False)
    return text if len(text) <= 40 else text[:37] + "..."


def _unit_problems(model: dict) -> Iterator[InputError]:
    last = len(model["units"]) - 1
    for i, unit in enumerate(model["units"]):
        at = f"units[{i}]"
        for key in ("nugget", "spread_multiplier", "mean_shift_m"):
            if key not in unit:
                continue
            value = unit[key]
            if i == last:
                yield InputError(f"{at}.{key}", "the basal unit has no thickness to apply it to")
            elif not _is_number(value):
                yield InputError(f"{at}.{key}", f"must be a number (got {_show(value)})")
            elif key == "nugget" and not 0.0 <= value < 1.0:
                yield InputError(f"{at}.nugget", f"{value:g} is outside [0, 1)")
            elif key == "spread_multiplier" and not 0.0 < value <= MAX_SPREAD_MULTIPLIER:
                yield InputError(
                    f"{at}.spread_multiplier",
                    f"{value:g} must be above 0 and at most {MAX_SPREAD_MULTIPLIER:g}",
                )
            elif key == "mean_shift_m":
                top = unit["thickness_m"]["max"] if unit.get("thickness_m") else 0.0
                if abs(value) > MAX_SHIFT_M:
                    yield InputError(f"{at}.mean_shift_m", f"{value:g} m is too large")
                elif top + value <= 0.0:
                    yield InputError(
                        f"{at}.mean_shift_m",
                        f"{value:g} m moves the maximum thickness ({top:g} m) to 0 or below",
                    )


def _pair_problems(model: dict) -> Iterator[InputError]:
    pairs = model.get("thickness_correlation")
    if pairs is None:
        return
    if not isinstance(pairs, list):
        yield InputError("thickness_correlation", "must be a list of unit pairs")
        return
    if len(pairs) > MAX_PAIRS:
        yield InputError("thickness_correlation", f"has {len(pairs)} pairs; at most {MAX_PAIRS}")
        return
    index = {u["name"]: i for i, u in enumerate(model["units"])}
    n_thick = len(model["units"]) - 1
    matrix = np.eye(max(n_thick, 0))
    seen: dict[tuple[int, int], int] = {}
    sound = True
    for p, pair in enumerate(pairs):
        at = f"thickness_correlation[{p}]"
        if not isinstance(pair, dict):
            yield InputError(at, 'must be {"units": [name, name], "rho": number}')
            sound = False
            continue
        names, rho = pair.get("units"), pair.get("rho")
        if not (isinstance(names, list) and len(names) == 2):
            yield InputError(f"{at}.units", "must name two units")
            sound = False
            continue
        ids = []
        for n, name in enumerate(names):
            if not isinstance(name, str) or name not in index:
                yield InputError(f"{at}.units[{n}]", f"{_show(name)} is not one of the units")
            elif index[name] >= n_thick:
                yield InputError(
                    f"{at}.units[{n}]",
                    f"{_show(name)} is the basal unit, which has no thickness to correlate",
                )
            else:
                ids.append(index[name])
        if len(ids) != 2:
            sound = False
            continue
        if ids[0] == ids[1]:
            yield InputError(f"{at}.units", "names the same unit twice")
            sound = False
            continue
        if not _is_number(rho) or not -1.0 < rho < 1.0:
            shown = f"{rho:g}" if _is_number(rho) else _show(rho)
            yield InputError(f"{at}.rho", f"{shown} must be a number in (-1, 1)")
            sound = False
            continue
        key = (min(ids), max(ids))
        if key in seen:
            yield InputError(
                f"{at}.units", f"pair already given (thickness_correlation[{seen[key]}])"
            )
            sound = False
            continue
        seen[key] = p
        matrix[key] = matrix[key[::-1]] = float(rho)
    if sound and seen and np.linalg.eigvalsh(matrix).min() <= 1e-9:
        yield InputError(
            "thickness_correlation",
            "the correlations together are impossible (the matrix they make is not positive "
            "definite); weaken one of them",
        )


def _stage_problems(model: dict) -> Iterator[InputError]:
    for p, probe in enumerate(model["existing"]):
        if "stage" not in probe or probe["stage"] is None:
            continue
        stage = probe["stage"]
        if not isinstance(stage, str) or not stage.strip():
            yield InputError(
                f"existing[{p}].stage", f"must be a non-empty text (got {_show(stage)})"
            )
        elif len(stage) > MAX_STAGE_CHARS:
            yield InputError(f"existing[{p}].stage", f"is longer than {MAX_STAGE_CHARS} characters")


def ground_structure_problems(model: dict) -> Iterator[InputError]:
    """Faults in the optional structure fields of a model that passed the main validation."""
    yield from _unit_problems(model)
    yield from _pair_problems(model)
    yield from _stage_problems(model)
