"""The Methods page's requirements and what each method delivers (its two sections and their
edit routes; docs/model-file.md "Requirements" and "What a method delivers").

Forms are rows: a blank row adds one, a row whose name (or parameter, or method) is cleared
is dropped. Counts are passed on as typed when they are not whole numbers so the model-file
validator names the field and the problem.
"""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Request

from probewise.io.model_requirements import HOW_MANY, required_count
from probewise.web.deps import Db
from probewise.web.edits import EditPage, FormReader, PostedForm, item_at

KIND_OPTIONS = [
    ("sample", "Sample"),
    ("in_situ", "In-situ test"),
    ("installation", "Installation"),
    ("log", "Log"),
]
HOW_OPTIONS = [
    ("every_m", "one every (m)"),
    ("per_unit", "per unit reached"),
    ("per_probe", "per probe"),
    ("continuous", "continuous profile"),
]
# EN ISO 22475-1 sampling categories and the EN 1997-2 quality classes they can give (from
# memory: A gives classes 1-5, B 3-5, C 5 only).
CATEGORY_OPTIONS = [("", "—"), ("A", "A"), ("B", "B"), ("C", "C")]
CLASS_OPTIONS = [("", "—")] + [(str(n), str(n)) for n in range(1, 6)]


def whole(value: Any) -> Any:
    """A typed count as an int when it is a whole number; else as typed (the validator says)."""
    if isinstance(value, float) and value.is_integer():
        return int(value)
    return value


def requirements_context(model: dict) -> dict[str, Any]:
    """What the two sections show: requirements with each test count's basis."""
    req = model.get("requirements") or {}
    tests = []
    for need in req.get("tests") or []:
        try:
            count, basis = required_count(need)
        except (KeyError, TypeError):
            count, basis = None, ""
        tests.append({"need": need, "count": count, "basis": basis})
    return {
        "req": req,
        "req_tests": tests,
        "delivery_kinds": KIND_OPTIONS,
        "delivery_how": HOW_OPTIONS,
        "sample_categories": CATEGORY_OPTIONS,
        "sample_classes": CLASS_OPTIONS,
        "method_pairs": [("", "—")] + [(m["id"], m["id"]) for m in model.get("methods") or []],
        "unit_pairs": [(u["name"], u["name"]) for u in model.get("units") or []],
    }


def read_requirements(reader: FormReader, model: dict) -> dict:
    """The requirements form into a ``requirements`` dict."""
    ids = [m["id"] for m in model.get("methods") or []]
    out: dict[str, Any] = {"min_probes": {}, "calibration": [], "tests": []}
    for k, mid in enumerate(ids):
        n = reader.number(f"min_{k}", f"requirements.min_probes.{mid}", required=False)
        if n is not None:
            out["min_probes"][mid] = whole(n)
    for i in range(int(reader.raw("cal_rows") or 0) + 1):
        mid = reader.raw(f"cal_method_{i}").strip()
        if not mid:
            continue
        at = f"requirements.calibration[{len(out['calibration'])}]"
        out["calibration"].append(
            {
                "method": mid,
                "for": reader.all(f"cal_for_{i}"),
                "per": whole(reader.number(f"cal_per_{i}", f"{at}.per")),
                "within_m": reader.number(f"cal_within_{i}", f"{at}.within_m"),
            }
        )
    for i in range(int(reader.raw("test_rows") or 0) + 1):
        parameter = reader.raw(f"test_param_{i}").strip()
        if not parameter:
            continue
        at = f"requirements.tests[{len(out['tests'])}]"
        need: dict[str, Any] = {
            "unit": reader.raw(f"test_unit_{i}").strip(),
            "parameter": parameter,
            "test": reader.text(f"test_name_{i}", f"{at}.test", required=False),
        }
        count = reader.number(f"test_count_{i}", f"{at}.count", required=False)
        if count is not None:
            need["count"] = whole(count)
        else:
            need["characteristic"] = {
                "cov": reader.number(f"test_cov_{i}", f"{at}.characteristic.cov"),
                "max_reduction": reader.number(
                    f"test_red_{i}", f"{at}.characteristic.max_reduction"
                ),
                "v_known": reader.flag(f"test_known_{i}"),
            }
        out["tests"].append(need)
    if notes := (model.get("requirements") or {}).get("notes"):
        out["notes"] = notes
    return out


def read_delivers(reader: FormReader, path: str) -> list[dict]:
    """One method's deliveries form into a ``delivers`` list."""
    out = []
    for i in range(int(reader.raw("rows") or 0) + 1):
        name = reader.raw(f"name_{i}").strip()
        if not name:
            continue
        at = f"{path}.delivers[{len(out)}]"
        item: dict[str, Any] = {"kind": reader.raw(f"kind_{i}").strip(), "name": name}
        how = reader.choice(f"how_{i}", f"{at}.every_m", HOW_MANY)
        if how == "continuous":
            item["continuous"] = True
        elif how:
            amount = reader.number(f"amount_{i}", f"{at}.{how}")
            item[how] = amount if how == "every_m" else whole(amount)
        item["units"] = reader.all(f"units_{i}")
        item["parameters"] = [
            p.strip() for p in reader.raw(f"parameters_{i}").split(",") if p.strip()
        ]
        if item["kind"] == "sample":
            if reader.raw(f"class_{i}").strip():
                item["quality_class"] = whole(reader.number(f"class_{i}", f"{at}.quality_class"))
            if cat := reader.raw(f"category_{i}").strip():
                item["category"] = cat
        out.append(item)
    return out


def add_requirement_routes(router: APIRouter, page: EditPage) -> None:
    """The two edit routes, answered with the Methods page ``page``."""

    @router.post("/projects/{project_id}/methods/requirements")
    def save_requirements(request: Request, project_id: int, form: PostedForm, db: Db):
        reader = FormReader(form)

        def edit(model: dict) -> str:
            model["requirements"] = read_requirements(reader, model)
            return "Changed the requirements"

        return page.edit(
            request,
            db,
            project_id,
            form,
            edit,
            reader=reader,
            fallback="requirements",
            own=("methods", "currency", "requirements"),
        )

    @router.post("/projects/{project_id}/methods/{index:int}/delivers")
    def save_delivers(request: Request, project_id: int, index: int, form: PostedForm, db: Db):
        reader = FormReader(form)

        def edit(model: dict) -> str:
            method = item_at(model.get("methods") or [], index, f"methods[{index}]", "method")
            method["delivers"] = read_delivers(reader, f"methods[{index}]")
            return f"Changed what method {method['id']} delivers"

        return page.edit(
            request,
            db,
            project_id,
            form,
            edit,
            reader=reader,
            fallback=f"methods[{index}].delivers",
        )
