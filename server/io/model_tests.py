"""Model-file rules for test results on existing probes and the behaviour settings.

Existing probes may carry ``"tests": [{"depth_m", "parameter", "value", "unit"}]``: results by
depth (docs/model-file.md). The top level may carry ``"behaviour": {"water_depth_m",
"fill_unit_weight_kn_m3", "natural_unit_weight_kn_m3", "cone_area_ratio"}`` (each optional),
the stresses the derived indices use (docs/model.md "Behaviour of the potential band"). Both
are optional extras of schema "probewise/1", kept as given; this module checks them after the
main validation and yields ``InputError(field, problem)`` for each fault.
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterator

from probewise.core.insitu import PARAMETER_BY_NAME, STORED, unit_factor
from probewise.errors import InputError

MAX_TESTS_PER_PROBE = 20_000
MAX_TESTS = 200_000
TEST_KEYS = ("depth_m", "parameter", "value", "unit")
# key -> (lowest allowed, strictly above it?, highest allowed)
SETTINGS = {
    "water_depth_m": (0.0, False, 10_000.0),
    "fill_unit_weight_kn_m3": (0.0, True, 30.0),
    "natural_unit_weight_kn_m3": (9.81, True, 30.0),
    "cone_area_ratio": (0.0, True, 1.0),
}


def _is_number(value: object) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool) and math.isfinite(value)


def _show(value: object) -> str:
    text = json.dumps(value, ensure_ascii=False)
    return text if len(text) <= 40 else text[:37] + "..."


def parameter_problem(name: object) -> str | None:
    """Why ``name`` is not a stored test parameter, or None when it is one."""
    if not isinstance(name, str) or not name.strip():
        return f"must be a parameter name (got {_show(name)})"
    if name in PARAMETER_BY_NAME and PARAMETER_BY_NAME[name].derived:
        needs = ", ".join(PARAMETER_BY_NAME[name].needs)
        return f"{_show(name)} is derived (from {needs}); store what it comes from"
    if name not in STORED:
        return f"{_show(name)} is not a known parameter (known: {', '.join(STORED)})"
    return None


def unit_problem(parameter: str, unit: object) -> str | None:
    """Why ``unit`` is not accepted for a stored ``parameter``, or None."""
    spec = PARAMETER_BY_NAME[parameter]
    if not isinstance(unit, str) or unit_factor(spec, unit) is None or unit != unit.strip():
        allowed = ", ".join(repr(u) for u in spec.units)
        return f"{_show(unit)} is not a unit of {parameter} (use {allowed})"
    return None


_SOUND_PAIRS = frozenset((name, unit) for name in STORED for unit in PARAMETER_BY_NAME[name].units)
_NUMBER_TYPES = (int, float)


def _plainly_sound(test: object, final_depth_m: float) -> bool:
    """The quick path for a result written the usual way (exact names, plain numbers; floats
    are finite after stage 2); anything else goes through :func:`_test_problems`."""
    if type(test) is not dict:
        return False
    depth, value = test.get("depth_m"), test.get("value")
    return (
        type(depth) in _NUMBER_TYPES
        and type(value) in _NUMBER_TYPES
        and 0 <= depth <= final_depth_m
        and (test.get("parameter"), test.get("unit")) in _SOUND_PAIRS
    )


def _test_problems(at: str, test: object, final_depth_m: float) -> Iterator[InputError]:
    if not isinstance(test, dict):
        yield InputError(at, 'must be {"depth_m", "parameter", "value", "unit"}')
        return
    for key in TEST_KEYS:
        if key not in test:
            yield InputError(f"{at}.{key}", "is missing")
            return
    depth, value = test["depth_m"], test["value"]
    if not _is_number(depth) or depth < 0:
        yield InputError(f"{at}.depth_m", f"must be a depth >= 0 m (got {_show(depth)})")
    elif depth > final_depth_m:
        yield InputError(
            f"{at}.depth_m",
            f"{depth:g} m is below the probe's final depth ({final_depth_m:g} m)",
        )
    problem = parameter_problem(test["parameter"])
    if problem:
        yield InputError(f"{at}.parameter", problem)
    else:
        problem = unit_problem(test["parameter"], test["unit"])
        if problem:
            yield InputError(f"{at}.unit", problem)
    if not _is_number(value):
        yield InputError(f"{at}.value", f"must be a number (got {_show(value)})")


def _settings_problems(model: dict) -> Iterator[InputError]:
    if "behaviour" not in model or model["behaviour"] is None:
        return
    settings = model["behaviour"]
    if not isinstance(settings, dict):
        yield InputError("behaviour", "must be an object of settings")
        return
    for key, value in settings.items():
        if key not in SETTINGS:
            continue  # extra fields are kept, as elsewhere in the model file
        low, strict, high = SETTINGS[key]
        inside = _is_number(value) and (value > low if strict else value >= low) and value <= high
        if not inside:
            side = "above" if strict else "at least"
            yield InputError(
                f"behaviour.{key}", f"must be a number {side} {low:g} and at most {high:g}"
            )


def tests_problems(model: dict) -> Iterator[InputError]:
    """Faults in the test results and the behaviour settings of a model that passed the main
    validation."""
    total = 0
    for p, probe in enumerate(model["existing"]):
        if "tests" not in probe or probe["tests"] is None:
            continue
        tests = probe["tests"]
        at = f"existing[{p}].tests"
        if not isinstance(tests, list):
            yield InputError(at, "must be a list of test results")
            continue
        if len(tests) > MAX_TESTS_PER_PROBE:
            yield InputError(at, f"has {len(tests)} results; at most {MAX_TESTS_PER_PROBE}")
            continue
        total += len(tests)
        if total > MAX_TESTS:
            yield InputError(at, f"brings the test results to over {MAX_TESTS} in the file")
            return
        final = probe["final_depth_m"]
        for j, test in enumerate(tests):
            if _plainly_sound(test, final):
                continue
            yield from _test_problems(f"{at}[{j}]", test, final)
    yield from _settings_problems(model)
