"""Requirements and what methods deliver, from the model document into the core
(``probewise.core.requirements``), and the one status of a layout against them."""

from __future__ import annotations

import dataclasses

from probewise.core.model import (
    CalibrationRequirement,
    Delivery,
    Project,
    Requirements,
    TestRequirement,
)
from probewise.io.model_requirements import required_count


def core_delivery(spec: dict, index: dict[str, int]) -> Delivery:
    return Delivery(
        kind=spec["kind"],
        name=spec["name"],
        parameters=tuple(spec.get("parameters") or ()),
        units=tuple(index[u] for u in spec.get("units") or ()),
        every_m=spec.get("every_m"),
        per_unit=spec.get("per_unit"),
        per_probe=spec.get("per_probe"),
        continuous=bool(spec.get("continuous")),
        quality_class=spec.get("quality_class"),
        category=spec.get("category"),
    )


def core_requirements(spec: dict | None, index: dict[str, int]) -> Requirements | None:
    if not spec:
        return None
    tests = []
    for need in spec.get("tests") or []:
        count, basis = required_count(need)
        tests.append(
            TestRequirement(
                index[need["unit"]], need["parameter"], count, need.get("test", ""), basis
            )
        )
    return Requirements(
        min_probes=tuple((m, int(n)) for m, n in (spec.get("min_probes") or {}).items()),
        calibration=tuple(
            CalibrationRequirement(
                c["method"], tuple(c["for"]), int(c["per"]), float(c["within_m"])
            )
            for c in spec.get("calibration") or []
        ),
        tests=tuple(tests),
    )


def with_requirements(project: Project, model: dict) -> Project:
    """``project`` with its methods' deliveries, existing tests and requirements."""
    index = {u["name"]: i for i, u in enumerate(model["units"])}
    delivers = {m["id"]: m.get("delivers") or [] for m in model.get("methods") or []}
    tests = {str(e["id"]): e.get("tests") or [] for e in model.get("existing") or []}
    if not any(delivers.values()) and not any(tests.values()) and not model.get("requirements"):
        return project
    methods = {
        mid: dataclasses.replace(m, delivers=tuple(core_delivery(d, index) for d in delivers[mid]))
        for mid, m in project.methods.items()
    }
    existing = tuple(
        dataclasses.replace(
            p,
            tests=tuple(
                (float(t["depth_m"]), str(t["parameter"]))
                for t in tests.get(p.id, [])
                if isinstance(t, dict) and "depth_m" in t and "parameter" in t
            ),
        )
        for p in project.existing
    )
    return dataclasses.replace(
        project,
        methods=methods,
        existing=existing,
        requirements=core_requirements(model.get("requirements"), index),
    )


def statuses_json(entries: list[dict], statuses) -> None:
    """Add ``requirements_met`` and ``unmet`` to each layout entry (in place) when the model
    has requirements (``statuses`` from ``probewise.core.options.layout_statuses``)."""
    for entry, status in zip(entries, statuses, strict=True):
        if status is not None:
            entry.update(requirements_met=status.met, unmet=list(status.unmet))


def statuses_text(names, statuses) -> list[str]:
    """Lines saying whether each layout meets the requirements (none without them)."""
    out = []
    for name, status in zip(names, statuses, strict=True):
        if status is None:
            continue
        if status.met:
            out.append(f"  {name}: meets every requirement")
        else:
            out.append(f"  {name}: misses " + "; ".join(status.unmet))
    return ["", "Requirements", *out] if out else []
