"""The bad-input corpus: every way a user, a file or another program can hand probewise
nonsense, as data. ``test_corpus.py`` runs each case through its channel and checks the
answer: the expected HTTP status or exit status, a message naming the field (and, where
given, words of the problem), and nothing stored.

A case is ``Case(id, channel, payload, expect, field, words)``:

- ``channel`` says how the payload travels:
  ``api``    JSON API request: ``payload = {"method", "path", "json" | "content", "headers"}``;
  ``upload`` model-file import form (multipart): ``payload = (filename, bytes)`` or None
             for a post without a file;
  ``form``   a page's form post (urlencoded): ``payload = {"path", "data", "headers"}``;
  ``cli``    ``probewise ARGS``: ``payload = {"argv": [...], "files": {name: content}}``;
             files are written into a fresh folder named ``{dir}`` in argv.
- Paths and form values may hold ``{pid}`` (the project under test), ``{rev}`` (its current
  revision) and ``{stale}`` (an older revision, for optimistic-concurrency cases).
- ``payload`` may be a callable returning the payload, so big inputs (a million probes) are
  built only when their case runs.
- ``expect`` is the HTTP status (channels api, upload, form) or exit status (cli).
- ``field`` must appear in the message (the field path, the form field, the CLI option);
  ``words`` must appear in it too.

To add form cases for a new page, append ``Case(..., "form", {"path": ..., "data": ...},
400, "the_field", "words")`` entries to ``FORM_CASES`` below; nothing else changes.
"""

from __future__ import annotations

import io
import json
import math
import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from model_edits import DELETE, edited

DATA = Path(__file__).resolve().parents[1] / "data"
TINY: dict = json.loads((DATA / "tiny-model.json").read_text())
MILLION = 10**6


@dataclass(frozen=True)
class Case:
    id: str
    channel: str
    payload: Any
    expect: int
    field: str
    words: str = ""
    note: str = field(default="", compare=False)

    def resolved_payload(self) -> Any:
        return resolve(self.payload)


def resolve(value: Any) -> Any:
    """Call the builders of lazy parts (at any depth of dicts, lists and tuples)."""
    if callable(value):
        return resolve(value())
    if isinstance(value, dict):
        return {k: resolve(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return type(value)(resolve(v) for v in value)
    return value


# ---------------------------------------------------------------- builders


def mutated(path: str, value: object, base: dict | None = None) -> dict:
    """A deep copy of the tiny model (or ``base``) with the item at ``path`` replaced."""
    return edited(base if base is not None else TINY, path, value)


def model_bytes(model: dict) -> bytes:
    """JSON text as Python writes it: NaN and Infinity come out as the bare words."""
    return json.dumps(model, allow_nan=True).encode()


def square(x0: float, y0: float, x1: float, y1: float) -> dict:
    ring = [[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]
    return {"type": "Polygon", "coordinates": [ring]}


def rng(a: float, b: float, c: float, shape: str = "pert") -> dict:
    return {"min": a, "likely": b, "max": c, "shape": shape}


BOW_TIE = {"type": "Polygon", "coordinates": [[[0, 0], [200, 120], [200, 0], [0, 120], [0, 0]]]}
EMPTY_SITE = {"type": "Polygon", "coordinates": []}
TEN_KM_SITE = square(0, 0, 10_000, 10_000)


def ten_km_site_at_one_metre() -> dict:
    return {**mutated("site", TEN_KM_SITE), "grid_spacing_m": 1}


def many_existing_bytes(n: int) -> bytes:
    """A model file with ``n`` existing probes, written straight as text (no big dict)."""
    head = json.dumps({**TINY, "existing": []})[:-1]  # drop the closing brace
    head = head.replace('"existing": []', '"existing": [PROBES]')
    probe = '{"id": "P%d", "method": "BH", "x": 50, "y": 50, "final_depth_m": 5, "observed": {}}'
    probes = ", ".join(probe % i for i in range(n))
    return (head.replace("PROBES", probes) + "}").encode()


def lone_surrogate_bytes() -> bytes:
    """Valid JSON text whose name spells a lone UTF-16 surrogate (not Unicode text)."""
    return json.dumps(TINY).replace("Tiny example", "\\ud800 Tiny example").encode()


def nested_bytes(depth: int) -> bytes:
    return b"[" * depth + b"]" * depth


def put_body(model: dict, revision: str = "{rev}") -> str:
    """A PUT body as text (placeholders filled at run time)."""
    return json.dumps({"model": model, "expected_revision": "__REV__"}, allow_nan=True).replace(
        '"__REV__"', revision
    )


def zip_bytes(members: dict[str, bytes]) -> bytes:
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as zf:
        for name, content in members.items():
            zf.writestr(name, content)
    return buf.getvalue()


def feature_collection(*geometries: dict) -> bytes:
    features = [
        {"type": "Feature", "properties": {"name": f"F{i}"}, "geometry": g}
        for i, g in enumerate(geometries)
    ]
    return json.dumps({"type": "FeatureCollection", "features": features}).encode()


# ---------------------------------------------------------------- JSON API bodies


def api_create(case_id: str, model: Any, field_: str, words: str = "", expect: int = 422) -> Case:
    """POST /api/projects with a model (a dict, or raw bytes)."""
    if isinstance(model, bytes) or callable(model):
        payload = {"method": "POST", "path": "/api/projects", "content": model}
    else:
        payload = {"method": "POST", "path": "/api/projects", "content": model_bytes(model)}
    return Case(case_id, "api", payload, expect, field_, words)


API_CASES = [
    # wrong types
    api_create("api-grid-as-text", mutated("grid_spacing_m", "5"), "grid_spacing_m", "number"),
    api_create("api-grid-as-bool", mutated("grid_spacing_m", True), "grid_spacing_m", "number"),
    api_create("api-units-as-object", mutated("units", {"a": 1}), "units", "must be a list"),
    api_create("api-unit-name-number", mutated("units[1].name", 7), "units[1].name", "text"),
    api_create("api-top-level-array", b"[1, 2, 3]", "body", "JSON object"),
    api_create("api-not-json", b'{"schema": "probewise/1",', "body", "not valid JSON"),
    api_create("api-empty-body", b"", "body", ""),
    api_create("api-nested-deep", lambda: nested_bytes(100_000), "body", "nested too deeply"),
    api_create("api-digits", b"1" + b"0" * 5000, "body", "too many digits"),
    api_create("api-lone-surrogate", lone_surrogate_bytes(), "name", "not valid Unicode"),
    # missing fields
    api_create("api-missing-site", mutated("site", DELETE), "site", "is required"),
    api_create("api-missing-units", mutated("units", DELETE), "units", "is required"),
    api_create(
        "api-missing-range-max",
        mutated("units[0].thickness_m.max", DELETE),
        "units[0].thickness_m.max",
        "is required",
    ),
    api_create("api-schema-version", mutated("schema", "probewise/9"), "schema", "probewise/1"),
    # NaN and infinity
    api_create("api-grid-nan", mutated("grid_spacing_m", math.nan), "grid_spacing_m", "finite"),
    api_create(
        "api-range-infinity",
        mutated("units[0].thickness_m.max", math.inf),
        "units[0].thickness_m.max",
        "finite",
    ),
    api_create(
        "api-coordinate-nan",
        mutated("existing[0].x", math.nan),
        "existing[0].x",
        "finite",
    ),
    api_create(
        "api-huge-integer",
        model_bytes(mutated("grid_spacing_m", 10**400)),
        "grid_spacing_m",
        "too large",
    ),
    # negative, zero and reversed ranges
    api_create(
        "api-range-negative",
        mutated("units[0].thickness_m.min", -0.5),
        "units[0].thickness_m.min",
        ">= 0",
    ),
    api_create(
        "api-range-zero-width",
        mutated("units[0].thickness_m", rng(1.0, 1.0, 1.0)),
        "units[0].thickness_m",
        "max must be above min",
    ),
    api_create(
        "api-range-reversed",
        mutated("units[2].thickness_m", rng(4.0, 3.5, 3.0)),
        "units[2].thickness_m",
        "min 4.0 is above max 3.0",
    ),
    api_create(
        "api-bound-reversed",
        mutated("bounds[0].min_depth_m", 2.0),
        "bounds[0]",
        "must be below max_depth_m",
    ),
    api_create(
        "api-correlation-range-zero",
        mutated("units[0].correlation.range_m", 0),
        "units[0].correlation.range_m",
        "> 0",
    ),
    api_create("api-grid-zero", mutated("grid_spacing_m", 0), "grid_spacing_m", "> 0"),
    api_create("api-grid-negative", mutated("grid_spacing_m", -5), "grid_spacing_m", "> 0"),
    api_create(
        "api-weight-negative",
        mutated("boundaries_of_interest[0].weight", -1),
        "boundaries_of_interest[0].weight",
        "> 0",
    ),
    api_create(
        "api-cost-negative",
        mutated("methods[0].cost.per_metre", -95),
        "methods[0].cost.per_metre",
        ">= 0",
    ),
    # unknown units (of measure: CRS in degrees or feet), unknown methods and models
    api_create("api-crs-degrees", mutated("crs", "EPSG:4326"), "crs", "geographic"),
    api_create("api-crs-feet", mutated("crs", "EPSG:2227"), "crs", "foot"),
    api_create("api-crs-unknown", mutated("crs", "EPSG:99999"), "crs", "not a CRS"),
    api_create(
        "api-unknown-shape",
        mutated("units[0].thickness_m.shape", "lognormal"),
        "units[0].thickness_m.shape",
        "pert",
    ),
    api_create(
        "api-unknown-correlation",
        mutated("units[0].correlation.model", "matern"),
        "units[0].correlation.model",
        "exponential",
    ),
    api_create("api-unknown-method-kind", mutated("methods[0].kind", "drill"), "methods[0].kind"),
    api_create(
        "api-unknown-method-id",
        mutated("existing[0].method", "RC"),
        "existing[0].method",
        "not one of the method ids",
    ),
    api_create(
        "api-unknown-unit",
        mutated("boundaries_of_interest[0].base_of", "Peat"),
        "boundaries_of_interest[0].base_of",
        "not one of the units",
    ),
    # geometry: empty site, self-intersection, probes outside
    api_create("api-empty-site", mutated("site", EMPTY_SITE), "site.coordinates", "ring"),
    api_create("api-site-bow-tie", mutated("site", BOW_TIE), "site.coordinates", "intersection"),
    api_create(
        "api-site-point",
        mutated("site", {"type": "Point", "coordinates": [1, 2]}),
        "site.type",
        "Polygon",
    ),
    api_create(
        "api-existing-outside", mutated("existing[0].x", 5000), "existing[0]", "outside the site"
    ),
    api_create(
        "api-planned-outside",
        mutated("layouts[0].probes[0].y", -40),
        "layouts[0].probes[0]",
        "outside the site",
    ),
    # sizes: a million probes, a 1 m grid on a 10 km site
    api_create(
        "api-million-probes",
        lambda: many_existing_bytes(MILLION),
        "",
        "20 MB limit",
        expect=413,
    ),
    api_create("api-6000-probes", lambda: many_existing_bytes(6000), "existing", "at most 5000"),
    api_create(
        "api-1m-grid-10km-site", ten_km_site_at_one_metre(), "grid_spacing_m", "at most 250000"
    ),
    # names: blank, and text that is not Unicode (HTML and other scripts are valid names)
    api_create("api-name-blank", mutated("name", " \t "), "name", "must not be empty"),
    api_create("api-unit-name-blank", mutated("units[0].name", ""), "units[0].name", "empty"),
    # edits through PUT: wrong types, stale revisions, bad models, bad ids
    Case(
        "api-put-stale",
        "api",
        {"method": "PUT", "path": "/api/projects/{pid}", "content": put_body(TINY, "{stale}")},
        409,
        "revision",
        "reload",
    ),
    Case(
        "api-put-no-revision",
        "api",
        {"method": "PUT", "path": "/api/projects/{pid}", "json": {"model": TINY}},
        422,
        "expected_revision",
        "is required",
    ),
    Case(
        "api-put-revision-text",
        "api",
        {"method": "PUT", "path": "/api/projects/{pid}", "content": put_body(TINY, '"two"')},
        422,
        "expected_revision",
        "whole number",
    ),
    Case(
        "api-put-revision-fraction",
        "api",
        {"method": "PUT", "path": "/api/projects/{pid}", "content": put_body(TINY, "1.5")},
        422,
        "expected_revision",
        "whole number",
    ),
    Case(
        "api-put-model-text",
        "api",
        {"method": "PUT", "path": "/api/projects/{pid}", "content": put_body("a model")},
        422,
        "model",
        "JSON object",
    ),
    Case(
        "api-put-reversed-range",
        "api",
        {
            "method": "PUT",
            "path": "/api/projects/{pid}",
            "content": put_body(mutated("units[0].thickness_m", rng(2.0, 1.0, 0.5))),
        },
        422,
        "model.units[0].thickness_m",
        "above",
    ),
    Case(
        "api-put-nan",
        "api",
        {
            "method": "PUT",
            "path": "/api/projects/{pid}",
            "content": put_body(mutated("grid_spacing_m", math.nan)),
        },
        422,
        "model.grid_spacing_m",
        "finite",
    ),
    Case(
        "api-put-html-unit-reference",
        "api",
        {
            "method": "PUT",
            "path": "/api/projects/{pid}",
            "content": put_body(mutated("bounds[0].base_of", "<script>alert(1)</script>")),
        },
        422,
        "model.bounds[0].base_of",
        "not one of the units",
    ),
    Case(
        "api-put-unknown-project",
        "api",
        {"method": "PUT", "path": "/api/projects/404404", "content": put_body(TINY, "1")},
        404,
        "404404",
    ),
    Case(
        "api-put-id-overflow",
        "api",
        {"method": "PUT", "path": "/api/projects/99999999999999999999", "content": put_body(TINY)},
        422,
        "project_id",
        "at most",
    ),
    Case(
        "api-put-too-large",
        "api",
        lambda: {
            "method": "PUT",
            "path": "/api/projects/{pid}",
            "content": b'{"model": {"notes": "' + b"x" * (21 * 2**20) + b'"}}',
        },
        413,
        "",
        "limit",
    ),
    Case(
        "api-undo-stale",
        "api",
        {
            "method": "POST",
            "path": "/api/projects/{pid}/undo",
            "content": '{"expected_revision": {stale}}',
        },
        409,
        "revision",
    ),
    Case(
        "api-undo-revision-text",
        "api",
        {"method": "POST", "path": "/api/projects/{pid}/undo", "json": {"expected_revision": "x"}},
        422,
        "expected_revision",
        "whole number",
    ),
    Case(
        "api-get-id-text", "api", {"method": "GET", "path": "/api/projects/abc"}, 422, "project_id"
    ),
    Case(
        "api-list-flag-text",
        "api",
        {"method": "GET", "path": "/api/projects?include_deleted=perhaps"},
        422,
        "include_deleted",
        "true or false",
    ),
    Case(
        "api-evaluation-id-zero",
        "api",
        {"method": "GET", "path": "/api/projects/0/evaluation"},
        422,
        "project_id",
        "at least 1",
    ),
]


# ---------------------------------------------------------------- uploads (model-file import)


def upload(case_id: str, content: Any, field_: str, words: str = "", expect: int = 400) -> Case:
    return Case(case_id, "upload", ("model.json", content), expect, field_, words)


UPLOAD_CASES = [
    upload("upload-empty", b"", "model_file", "is empty"),
    upload("upload-not-json", b"probewise, please", "model_file", "not valid JSON"),
    upload("upload-binary", b"\x89PNG\r\n\x1a\n\x00\x00\xff", "model_file", "UTF-8"),
    upload(
        "upload-nan-literal",
        model_bytes(mutated("grid_spacing_m", math.nan)),
        "grid_spacing_m",
        "finite",
    ),
    upload(
        "upload-infinity-literal",
        model_bytes(mutated("methods[0].max_depth_m", -math.inf)),
        "methods[0].max_depth_m",
        "finite",
    ),
    upload(
        "upload-reversed-range",
        model_bytes(mutated("units[1].thickness_m", rng(6.0, 3.0, 1.0))),
        "units[1].thickness_m",
        "above",
    ),
    upload("upload-bow-tie-site", model_bytes(mutated("site", BOW_TIE)), "site", "intersection"),
    upload("upload-empty-site", model_bytes(mutated("site", EMPTY_SITE)), "site", "ring"),
    upload(
        "upload-probe-outside",
        model_bytes(mutated("existing[1].y", 500)),
        "existing[1]",
        "outside the site",
    ),
    upload(
        "upload-unknown-unit",
        model_bytes(mutated("methods[0].precision_m.Peat", 0.1)),
        "methods[0].precision_m.Peat",
        "not one of the units",
    ),
    upload(
        "upload-unknown-method-kind",
        model_bytes(mutated("methods[1].kind", "sonic")),
        "methods[1].kind",
    ),
    upload("upload-lone-surrogate", lone_surrogate_bytes(), "", "not valid Unicode"),
    upload("upload-6000-probes", lambda: many_existing_bytes(6000), "existing", "at most 5000"),
    upload(
        "upload-1m-grid-10km-site",
        model_bytes(ten_km_site_at_one_metre()),
        "grid_spacing_m",
        "at most 250000",
    ),
    upload(
        "upload-over-the-cap",
        lambda: b" " * (21 * 2**20),
        "",
        "limit for uploads",
        expect=413,
    ),
    Case("upload-no-file", "upload", None, 400, "model_file", "choose a model file"),
]


# ---------------------------------------------------------------- form posts of the pages

FORM_CASES = [
    Case(
        "form-undo-revision-text",
        "form",
        {"path": "/projects/{pid}/undo", "data": {"expected_revision": "three"}},
        400,
        "expected_revision",
        "whole number",
    ),
    Case(
        "form-undo-revision-nan",
        "form",
        {"path": "/projects/{pid}/undo", "data": {"expected_revision": "NaN"}},
        400,
        "expected_revision",
    ),
    Case(
        "form-undo-stale",
        "form",
        {"path": "/projects/{pid}/undo", "data": {"expected_revision": "{stale}"}},
        409,
        "revision",
        "reload",
    ),
    Case(
        "form-restore-missing-revision",
        "form",
        {"path": "/projects/{pid}/revisions/999/restore", "data": {}},
        404,
        "revision 999",
    ),
    Case(
        "form-restore-revision-text",
        "form",
        {"path": "/projects/{pid}/revisions/latest/restore", "data": {}},
        400,
        "number",
    ),
    Case(
        "form-restore-stale",
        "form",
        {"path": "/projects/{pid}/revisions/1/restore", "data": {"expected_revision": "{stale}"}},
        409,
        "revision",
    ),
    Case(
        "form-restore-revision-overflow",
        "form",
        {"path": "/projects/{pid}/revisions/99999999999999999999999/restore", "data": {}},
        404,
        "out of range",
    ),
    Case(
        "form-duplicate-id-overflow",
        "form",
        {"path": "/projects/99999999999999999999999/duplicate", "data": {}},
        404,
        "out of range",
    ),
    Case(
        "form-delete-missing-project",
        "form",
        {"path": "/projects/404404/delete", "data": {}},
        404,
        "404404",
    ),
]


# The model-editing pages (Site, Ground model, Options) and the optimiser job. Each edit
# carries the revision its page showed; "{rev}" is the current one.
UNIT_FORM = {  # the Ground model form of units[0] ("Made ground") as the page posts it
    "expected_revision": "{rev}",
    "name": "Made ground",
    "description": "",
    "min": "0.3",
    "likely": "1.0",
    "max": "2.0",
    "shape": "pert",
    "correlation_model": "exponential",
    "range_m": "40",
}
SCRIPT = "<script>alert(1)</script>"


def page_form(case_id: str, path: str, data: dict, expect: int, field_: str, words: str = "",
              files: dict | None = None) -> Case:  # fmt: skip
    payload = {"path": path, "data": {"expected_revision": "{rev}", **data}}
    if files:
        payload["files"] = files
    return Case(case_id, "form", payload, expect, field_, words)


def unit_form(case_id: str, expect: int, field_: str, words: str = "", **changes: str) -> Case:
    return page_form(
        case_id, "/projects/{pid}/ground/units/0", {**UNIT_FORM, **changes}, expect, field_, words
    )


CSV_HEAD_EXISTING = "id,method,x,y,final_depth_m,base:Made ground,base:Alluvial clay\n"
GIS_TRAVERSAL_ZIP = zip_bytes({"../../escaped.shp": b"x", "../../escaped.dbf": b"y"})

PAGE_FORM_CASES = [
    # Ground model: units, boundaries of interest, hard bounds
    unit_form(
        "ground-min-above-max", 422, "thickness", "above max", min="3", likely="2", max="1"
    ),  # fmt: skip
    unit_form("ground-range-nan", 422, "thickness min", "not a number", min="NaN"),
    unit_form("ground-range-infinity", 422, "thickness max", "not a number", max="inf"),
    unit_form("ground-range-negative", 422, "thickness min", ">= 0", min="-1"),
    unit_form(
        "ground-range-zero-width",
        422,
        "thickness",
        "max must be above min",
        min="1",
        likely="1",
        max="1",
    ),  # fmt: skip
    unit_form("ground-unknown-shape", 422, "thickness shape", "pert", shape="lognormal"),
    unit_form(
        "ground-unknown-correlation",
        422,
        "correlation model",
        "exponential",
        correlation_model="matern",
    ),  # fmt: skip
    unit_form(
        "ground-correlation-range-text",
        422,
        "correlation range",
        "not a number",
        range_m="forty metres",
    ),  # fmt: skip
    unit_form("ground-correlation-range-zero", 422, "correlation range", "> 0", range_m="0"),
    unit_form("ground-name-blank", 422, "name", "required", name="   "),
    unit_form("ground-name-taken", 422, "name", "twice", name="Alluvial clay"),
    unit_form("ground-stale", 409, "revision", "changed since", expected_revision="{stale}"),
    unit_form(
        "ground-revision-missing", 400, "expected_revision", "whole number", expected_revision=""
    ),  # fmt: skip
    unit_form(
        "ground-revision-html", 400, "expected_revision", "whole number", expected_revision=SCRIPT
    ),  # fmt: skip
    page_form(
        "ground-unit-gone",
        "/projects/{pid}/ground/units/40",
        UNIT_FORM,
        409,
        "unit number 41",
        "reload",
    ),  # fmt: skip
    page_form(
        "ground-interest-weight-negative",
        "/projects/{pid}/ground/boundaries",
        {"interest_1": "on", "weight_1": "-2", "tolerance_1": "0.5"},
        422,
        "weight",
        "> 0",
    ),
    page_form(
        "ground-bound-reversed",
        "/projects/{pid}/ground/bounds/add",
        {"base_of": "Made ground", "min_depth_m": "2", "max_depth_m": "1", "geometry_text": ""},
        422,
        "min_depth_m",
        "must be below",
    ),
    page_form(
        "ground-bound-html-unit",
        "/projects/{pid}/ground/bounds/add",
        {"base_of": SCRIPT, "min_depth_m": "1", "max_depth_m": "2", "geometry_text": ""},
        422,
        "base_of",
        "must be one of",
    ),
    # Site: settings, outline, areas, GIS import
    page_form(
        "site-grid-nan",
        "/projects/{pid}/site/settings",
        {"name": "Tiny", "crs": "", "grid_spacing_m": "nan"},
        422,
        "Grid spacing",
        "not a number",
    ),  # fmt: skip
    page_form(
        "site-grid-negative",
        "/projects/{pid}/site/settings",
        {"name": "Tiny", "crs": "", "grid_spacing_m": "-5"},
        422,
        "Grid spacing",
        "> 0",
    ),  # fmt: skip
    page_form(
        "site-grid-too-fine",
        "/projects/{pid}/site/settings",
        {"name": "Tiny", "crs": "", "grid_spacing_m": "0.01"},
        422,
        "Grid spacing",
        "at most 250000",
    ),  # fmt: skip
    page_form(
        "site-crs-degrees",
        "/projects/{pid}/site/settings",
        {"name": "Tiny", "crs": "EPSG:4326", "grid_spacing_m": "5"},
        422,
        "Coordinate system",
        "geographic",
    ),  # fmt: skip
    page_form(
        "site-name-blank",
        "/projects/{pid}/site/settings",
        {"name": " ", "crs": "", "grid_spacing_m": "5"},
        422,
        "name",
        "required",
    ),
    page_form(
        "site-outline-bow-tie",
        "/projects/{pid}/site/outline",
        {"geometry_text": "0, 0\n200, 120\n200, 0\n0, 120"},
        422,
        "Site outline",
        "intersection",
    ),
    page_form(
        "site-outline-junk",
        "/projects/{pid}/site/outline",
        {"geometry_text": "north-west corner\n1, 2"},
        422,
        "line 1",
        "x, y",
    ),
    page_form(
        "site-outline-empty",
        "/projects/{pid}/site/outline",
        {"geometry_text": ""},
        422,
        "Site outline",
    ),  # fmt: skip
    page_form(
        "site-area-weight-negative",
        "/projects/{pid}/site/areas/add",
        {"name": "Verge", "weight": "-1", "geometry_text": "10,10\n20,10\n20,20\n10,20"},
        422,
        "weight",
        "> 0",
    ),
    page_form(
        "site-unknown-role",
        "/projects/{pid}/site/moats/add",
        {"name": "M", "geometry_text": ""},
        404,
        "moats",
    ),  # fmt: skip
    page_form(
        "site-gis-zip-traversal",
        "/projects/{pid}/site/import",
        {"role": "site"},
        422,
        "escaped.shp",
        "escaping the folder",
        files={"gis_file": ("site.zip", GIS_TRAVERSAL_ZIP, "application/zip")},
    ),
    page_form(
        "site-gis-unknown-type",
        "/projects/{pid}/site/import",
        {"role": "site"},
        422,
        "site.docx",
        "unknown file type",
        files={"gis_file": ("site.docx", b"PK not a map", "application/octet-stream")},
    ),
    page_form(
        "site-gis-no-file",
        "/projects/{pid}/site/import",
        {"role": "site"},
        422,
        "gis_file",
        "choose",
    ),  # fmt: skip
    # Options: planned probes and layouts
    page_form(
        "options-probe-outside",
        "/projects/{pid}/options/probes/add",
        {"layout": "Four boreholes", "method": "BH", "x": "5000", "y": "50"},
        422,
        "outside the site",
    ),
    page_form(
        "options-probe-nan",
        "/projects/{pid}/options/probes/add",
        {"layout": "Four boreholes", "method": "BH", "x": "NaN", "y": "50"},
        422,
        "x",
        "not a number",
    ),
    page_form(
        "options-probe-unknown-method",
        "/projects/{pid}/options/probes/add",
        {"layout": "Four boreholes", "method": "AUGER", "x": "50", "y": "50"},
        422,
        "method",
        "must be one of",
    ),
    page_form(
        "options-probe-depth-negative",
        "/projects/{pid}/options/probes/add",
        {"layout": "Four boreholes", "method": "BH", "x": "50", "y": "50", "depth_m": "-3"},
        422,
        "depth_m",
        "above 0",
    ),
    page_form(
        "options-layout-name-blank",
        "/projects/{pid}/options/layouts/new",
        {"name": ""},
        422,
        "name",
        "required",
    ),  # fmt: skip
    page_form(
        "options-layout-name-taken",
        "/projects/{pid}/options/layouts/new",
        {"name": "Four boreholes"},
        422,
        "name",
        "already a layout",
    ),  # fmt: skip
    page_form(
        "options-guidance-spacing-zero",
        "/projects/{pid}/options/guidance",
        {"method": "CPT", "spacing_m": "0"},
        422,
        "spacing_m",
        "positive",
    ),  # fmt: skip
    page_form(
        "options-guidance-too-fine",
        "/projects/{pid}/options/guidance",
        {"method": "CPT", "spacing_m": "0.05"},
        422,
        "spacing_m",
    ),  # fmt: skip
    # the optimiser job
    page_form(
        "optimise-budget-nan", "/projects/{pid}/optimise", {"budget": "NaN"}, 422, "budget"
    ),  # fmt: skip
    page_form(
        "optimise-budget-negative",
        "/projects/{pid}/optimise",
        {"budget": "-100"},
        422,
        "budget",
        "positive",
    ),  # fmt: skip
    page_form(
        "optimise-unknown-method",
        "/projects/{pid}/optimise",
        {"budget": "20000", "methods": "AUGER"},
        422,
        "methods",
        "AUGER",
    ),  # fmt: skip
]
EXISTING_FORM = {  # existing[0] ("HBH1") as the Existing page posts it
    "id": "HBH1",
    "method": "BH",
    "x": "30",
    "y": "30",
    "final_depth_m": "12",
    "base_0": "1.1",
    "base_1": "4.0",
    "base_2": "6.2",
}
METHOD_FORM = {  # methods[0] ("BH") as the Methods page posts it
    "id": "BH",
    "name": "Cable percussive borehole",
    "kind": "borehole",
    "mobilisation": "2500",
    "per_location": "400",
    "per_metre": "95",
    "metres_per_day": "12",
    "max_depth_m": "30",
    "embedment_m": "1.5",
}


def existing_form(case_id: str, expect: int, field_: str, words: str = "", **changes) -> Case:
    data = {**EXISTING_FORM, **changes}
    return page_form(case_id, "/projects/{pid}/existing/0", data, expect, field_, words)


def method_form(case_id: str, expect: int, field_: str, words: str = "", **changes) -> Case:
    data = {**METHOD_FORM, **changes}
    return page_form(case_id, "/projects/{pid}/methods/0", data, expect, field_, words)


PAGE_FORM_CASES += [
    # Existing: earlier probes and what they found
    existing_form("existing-outside", 422, "HBH1", "outside the site", x="5000"),
    existing_form("existing-depth-nan", 422, "final depth", "not a number", final_depth_m="NaN"),
    existing_form("existing-unknown-method", 422, "method", "must be one of", method="AUGER"),
    existing_form(
        "existing-below-final", 422, "River gravel", "below the final depth", base_2="20"
    ),  # fmt: skip
    existing_form(
        "existing-bases-reversed", 422, "Alluvial clay", "above the base of", base_0="5", base_1="2"
    ),  # fmt: skip
    existing_form("existing-id-blank", 422, "id", "required", id=""),
    existing_form("existing-stale", 409, "revision", "changed since", expected_revision="{stale}"),
    page_form(
        "existing-csv-outside",
        "/projects/{pid}/existing/import/csv",
        {},
        422,
        "outside",
        files={
            "csv_file": (
                "p.csv",
                (CSV_HEAD_EXISTING + "N1,BH,5000,50,10,1,3\n").encode(),
                "text/csv",
            )
        },
    ),  # fmt: skip
    page_form(
        "existing-csv-no-file", "/projects/{pid}/existing/import/csv", {}, 422, "csv_file", "choose"
    ),  # fmt: skip
    # Methods: costs, production, reach, precision
    method_form("methods-cost-negative", 422, "per_metre", ">= 0", per_metre="-95"),
    method_form("methods-unknown-kind", 422, "kind", "must be one of", kind="drill"),
    method_form("methods-rate-zero", 422, "metres_per_day", "> 0", metres_per_day="0"),
    method_form("methods-depth-nan", 422, "max_depth_m", "not a number", max_depth_m="nan"),
    method_form(
        "methods-unknown-refusal-unit",
        422,
        "cannot penetrate",
        "not one of the units",
        cannot_penetrate="Granite",
    ),  # fmt: skip
    method_form("methods-id-taken", 422, "id", "used twice", id="CPT"),
    method_form("methods-stale", 409, "revision", "changed since", expected_revision="{stale}"),
    page_form(
        "methods-precision-negative",
        "/projects/{pid}/methods/precision",
        {"precision_0_0": "-0.1"},
        422,
        "precision",
        "> 0",
    ),  # fmt: skip
    page_form(
        "methods-currency-long",
        "/projects/{pid}/methods/currency",
        {"currency": "Pounds sterling, please"},
        422,
        "urrency",
        "longer than 12",
    ),
]
FORM_CASES += PAGE_FORM_CASES


# ---------------------------------------------------------------- command line

GEOJSON_SITE = feature_collection(square(0, 0, 100, 100))
CSV_HEAD = "id,method,x,y,final_depth_m,base:Made ground,base:Alluvial clay\n"


def cli(case_id: str, argv: list[str], files: dict | None, field_: str, words: str = "") -> Case:
    return Case(case_id, "cli", {"argv": argv, "files": files or {}}, 2, field_, words)


def with_tiny(**more: Any) -> dict:
    return {"model.json": model_bytes(TINY), **more}


CLI_CASES = [
    cli("cli-validate-missing-file", ["validate", "{dir}/nope.json"], None, "MODEL", "not found"),
    cli("cli-validate-folder", ["validate", "{dir}"], None, "MODEL", "folder"),
    cli(
        "cli-validate-not-utf8",
        ["validate", "{dir}/m.json"],
        {"m.json": b"\xff\xfe\x00{"},
        "MODEL",
        "UTF-8",
    ),
    cli(
        "cli-validate-nan",
        ["validate", "{dir}/m.json"],
        {"m.json": model_bytes(mutated("grid_spacing_m", math.nan))},
        "grid_spacing_m",
        "finite",
    ),
    cli(
        "cli-validate-million-probes",
        ["validate", "{dir}/m.json"],
        {"m.json": lambda: many_existing_bytes(MILLION)},
        "existing",
        "at most 5000",
    ),
    cli(
        "cli-evaluate-1m-grid-10km-site",
        ["evaluate", "{dir}/m.json", "--json"],
        {"m.json": model_bytes(ten_km_site_at_one_metre())},
        "grid_spacing_m",
        "at most 250000",
    ),
    cli(
        "cli-evaluate-reversed-range",
        ["evaluate", "{dir}/m.json"],
        {"m.json": model_bytes(mutated("units[0].thickness_m", rng(3.0, 2.0, 1.0)))},
        "units[0].thickness_m",
        "above",
    ),
    cli(
        "cli-evaluate-self-intersecting",
        ["evaluate", "{dir}/m.json"],
        {"m.json": model_bytes(mutated("site", BOW_TIE))},
        "site.coordinates",
        "intersection",
    ),
    cli(
        "cli-evaluate-grid-coarser-than-site",
        ["evaluate", "{dir}/m.json"],
        {"m.json": model_bytes(mutated("grid_spacing_m", 5000))},
        "grid_spacing_m",
        "coarser than the site",
    ),
    cli(
        "cli-posterior-at-nan",
        ["posterior", "{dir}/model.json", "--at", "nan,4"],
        with_tiny(),
        "--at",
        "finite",
    ),  # fmt: skip
    cli(
        "cli-posterior-at-inf",
        ["posterior", "{dir}/model.json", "--at", "1,inf"],
        with_tiny(),
        "--at",
        "finite",
    ),  # fmt: skip
    cli(
        "cli-posterior-at-one-number",
        ["posterior", "{dir}/model.json", "--at", "5"],
        with_tiny(),
        "--at",
        "X,Y",
    ),  # fmt: skip
    cli("cli-posterior-no-point", ["posterior", "{dir}/model.json"], with_tiny(), "--at"),
    cli(
        "cli-posterior-unknown-layout",
        ["posterior", "{dir}/model.json", "--at", "5,5", "--layout", "Nine boreholes"],
        with_tiny(),
        "--layout",
    ),
    cli(
        "cli-evaluate-lone-surrogate",
        ["evaluate", "{dir}/m.json"],
        {"m.json": model_bytes(TINY).replace(b'"Tiny example', b'"\\ud800 Tiny example')},
        "name",
        "not valid Unicode",
    ),
    cli("cli-unknown-command", ["dig"], None, "dig", "invalid choice"),
    cli("cli-serve-port-text", ["serve", "--port", "eighty"], None, "--port"),
    cli("cli-serve-port-zero", ["serve", "--db", "{dir}/x.db", "--port", "0"], None, "--port"),
    cli("cli-serve-port-negative", ["serve", "--db", "{dir}/x.db", "--port=-80"], None, "--port"),
    cli("cli-serve-host-empty", ["serve", "--db", "{dir}/x.db", "--host", ""], None, "--host"),
    cli(
        "cli-serve-db-missing-folder",
        ["serve", "--db", "{dir}/no/such/folder/x.db", "--port", "1"],
        None,
        "--db",
    ),
    cli(
        "cli-evaluate-unknown-option",
        ["evaluate", "{dir}/model.json", "--fast"],
        with_tiny(),
        "--fast",
        "unrecognized",
    ),  # fmt: skip
    cli(
        "cli-export-unknown-what",
        ["export", "{dir}/model.json", "--what", "everything", "-o", "{dir}/out.csv"],
        with_tiny(),
        "--what",
    ),
    cli(
        "cli-export-unknown-layout",
        [
            "export",
            "{dir}/model.json",
            "--what",
            "schedule",
            "--layout",
            "Nope",
            "-o",
            "{dir}/out.csv",
        ],
        with_tiny(),
        "--layout",
    ),  # fmt: skip
    cli(
        "cli-import-gis-no-role",
        ["import-gis", "{dir}/model.json", "{dir}/site.geojson", "-o", "{dir}/out.json"],
        with_tiny(**{"site.geojson": GEOJSON_SITE}),
        "--role",
    ),
    cli(
        "cli-import-gis-unknown-type",
        [
            "import-gis",
            "{dir}/model.json",
            "{dir}/site.txt",
            "--role",
            "site",
            "-o",
            "{dir}/out.json",
        ],
        with_tiny(**{"site.txt": b"not a map"}),
        "site.txt",
        "unknown file type",
    ),  # fmt: skip
    cli(
        "cli-import-gis-zip-traversal",
        [
            "import-gis",
            "{dir}/model.json",
            "{dir}/site.zip",
            "--role",
            "site",
            "-o",
            "{dir}/out.json",
        ],
        with_tiny(**{"site.zip": zip_bytes({"../../escaped.shp": b"x", "site.dbf": b"y"})}),
        "escaped.shp",
        "escaping the folder",
    ),  # fmt: skip
    cli(
        "cli-import-gis-zip-absolute",
        [
            "import-gis",
            "{dir}/model.json",
            "{dir}/site.zip",
            "--role",
            "site",
            "-o",
            "{dir}/out.json",
        ],
        with_tiny(**{"site.zip": zip_bytes({"/etc/escaped.shp": b"x"})}),
        "escaped.shp",
        "absolute path",
    ),  # fmt: skip
    cli(
        "cli-import-gis-not-a-zip",
        [
            "import-gis",
            "{dir}/model.json",
            "{dir}/site.zip",
            "--role",
            "site",
            "-o",
            "{dir}/out.json",
        ],
        with_tiny(**{"site.zip": b"PK\x03\x04 truncated"}),
        "site.zip",
        "zip",
    ),  # fmt: skip
    cli(
        "cli-import-probes-unknown-format",
        [
            "import-probes",
            "{dir}/model.json",
            "{dir}/p.csv",
            "--format",
            "xml",
            "-o",
            "{dir}/out.json",
        ],
        with_tiny(**{"p.csv": CSV_HEAD.encode()}),
        "--format",
    ),  # fmt: skip
    cli(
        "cli-import-probes-nan-depth",
        ["import-probes", "{dir}/model.json", "{dir}/p.csv", "-o", "{dir}/out.json"],
        with_tiny(**{"p.csv": (CSV_HEAD + "N1,BH,50,50,nan,1.0,3.0\n").encode()}),
        "final_depth_m",
    ),
    cli(
        "cli-import-probes-outside",
        ["import-probes", "{dir}/model.json", "{dir}/p.csv", "-o", "{dir}/out.json"],
        with_tiny(**{"p.csv": (CSV_HEAD + "N1,BH,5000,50,10,1.0,3.0\n").encode()}),
        "N1",
        "outside",
    ),
    cli(
        "cli-import-probes-unknown-method",
        ["import-probes", "{dir}/model.json", "{dir}/p.csv", "-o", "{dir}/out.json"],
        with_tiny(**{"p.csv": (CSV_HEAD + "N1,AUGER,50,50,10,1.0,3.0\n").encode()}),
        "method",
        "AUGER",
    ),
    cli(
        "cli-import-probes-reversed-depths",
        ["import-probes", "{dir}/model.json", "{dir}/p.csv", "-o", "{dir}/out.json"],
        with_tiny(**{"p.csv": (CSV_HEAD + "N1,BH,50,50,10,4.0,1.0\n").encode()}),
        "Alluvial clay",
    ),
    cli(
        "cli-import-probes-no-columns",
        ["import-probes", "{dir}/model.json", "{dir}/p.csv", "-o", "{dir}/out.json"],
        with_tiny(**{"p.csv": b"name,depth\nA,3\n"}),
        "p.csv",
    ),
]

OPTIMISE = ["optimise", "{dir}/model.json", "--json"]
CLI_CASES += [
    cli("cli-optimise-candidates-too-many", [*OPTIMISE, "--budget", "20000",
        "--candidate-spacing", "0.5"], with_tiny(), "--candidate-spacing",
        "over the limit of 5,000"),
    cli("cli-optimise-budget-nan", [*OPTIMISE, "--budget", "nan"], with_tiny(), "--budget",
        "positive"),
    cli("cli-optimise-budget-negative", [*OPTIMISE, "--budget=-5"], with_tiny(), "--budget",
        "positive"),
    cli("cli-optimise-budget-below-mobilisation", [*OPTIMISE, "--budget", "10"], with_tiny(),
        "--budget", "mobilisation"),
    cli("cli-optimise-unknown-method", [*OPTIMISE, "--budget", "20000", "--methods", "AUGER"],
        with_tiny(), "--methods", "AUGER"),
    cli("cli-optimise-min-spacing-negative", [*OPTIMISE, "--budget", "20000",
        "--min-spacing=-1"], with_tiny(), "--min-spacing", "positive"),
]  # fmt: skip

# Locally present units, ground levels, AGS3 files and text rules (docs/import-formats.md).
API_CASES += [
    api_create("api-presence-zero", mutated("units[1].presence", 0), "units[1].presence", "> 0"),
    api_create("api-presence-above-one", mutated("units[1].presence", 1.5), "units[1].presence",
               "<= 1"),
    api_create("api-presence-nan", mutated("units[1].presence", math.nan), "units[1].presence",
               "finite"),
    api_create("api-presence-on-basal", mutated("units[3].presence", 0.5), "units[3].presence",
               "basal"),
    api_create("api-ground-level-text", mutated("existing[0].ground_level_m", "high"),
               "existing[0].ground_level_m", "number"),
]  # fmt: skip

AGS3_HEAD = (
    '"**HOLE"\r\n"*HOLE_ID","*HOLE_TYPE","*HOLE_NATE","*HOLE_NATN","*HOLE_FDEP"\r\n'
    '"<UNITS>","","m","m","m"\r\n'
)
AGS3_GEOL = (
    '"**GEOL"\r\n"*HOLE_ID","*GEOL_TOP","*GEOL_BASE","*GEOL_DESC"\r\n'
    '"<UNITS>","m","m",""\r\n"B1","0","2","Soft CLAY (ALLUVIUM)"\r\n'
)
IMPORT_AGS = ["import-probes", "{dir}/model.json", "{dir}/gi.ags", "--default-method", "BH",
              "-o", "{dir}/out.json"]  # fmt: skip
CLI_CASES += [
    cli("cli-import-ags3-ragged-row", IMPORT_AGS,
        with_tiny(**{"gi.ags": (AGS3_HEAD + '"B1","CP","50","50","9","extra"\r\n\r\n'
                                + AGS3_GEOL).encode()}),
        "gi.ags line 4", "has 6 fields"),
    cli("cli-import-ags3-text-coordinate", IMPORT_AGS,
        with_tiny(**{"gi.ags": (AGS3_HEAD + '"B1","CP","about 50","50","9"\r\n\r\n'
                                + AGS3_GEOL).encode()}),
        "HOLE_NATE", "not a number"),
    cli("cli-import-ags3-no-geol", IMPORT_AGS,
        with_tiny(**{"gi.ags": (AGS3_HEAD + '"B1","CP","50","50","9"\r\n').encode()}),
        "gi.ags", "no GEOL group"),
    cli("cli-import-mapping-text-bad-regex",
        [*IMPORT_AGS, "--mapping-text", "/(alluv/=Alluvial clay"],
        with_tiny(**{"gi.ags": (AGS3_HEAD + '"B1","CP","50","50","9"\r\n\r\n'
                                + AGS3_GEOL).encode()}),
        "--mapping-text", "regular expression"),
    cli("cli-import-mapping-text-unknown-unit", [*IMPORT_AGS, "--mapping-text", "CLAY=Peat"],
        with_tiny(**{"gi.ags": (AGS3_HEAD + '"B1","CP","50","50","9"\r\n\r\n'
                                + AGS3_GEOL).encode()}),
        "--mapping-text", "'Peat' is not a unit"),
    cli("cli-import-mapping-text-on-a-table",
        ["import-probes", "{dir}/model.json", "{dir}/p.csv", "--mapping-text", "x=Mudstone",
         "-o", "{dir}/out.json"],
        with_tiny(**{"p.csv": (CSV_HEAD + "N1,BH,50,50,10,1.0,3.0\n").encode()}),
        "--mapping-text", "AGS files"),
]  # fmt: skip

# Design elements (docs/model-file.md "Design elements"); the elements are invented.
ELEMENT = {
    "name": "Culvert bed",
    "geometry": square(60, 50, 140, 70),
    "base_of": "Alluvial clay",
    "adverse": "deeper",
    "consequence": {
        "kind": "choice",
        "threshold_depth_m": 4.5,
        "cheaper_cost": 20000,
        "robust_cost": 90000,
    },
}
WITH_ELEMENT = dict(TINY, elements=[ELEMENT])
VALUE = ["value", "{dir}/m.json", "--json"]


def element_case(case_id: str, path: str, value: object, field_: str, words: str) -> Case:
    return cli(
        case_id, VALUE, {"m.json": model_bytes(mutated(path, value, WITH_ELEMENT))}, field_, words
    )


CLI_CASES += [
    element_case("cli-value-fractile-low", "elements[0].design_fractile", 0.3,
                 "elements[0].design_fractile", ">= 0.5"),
    element_case("cli-value-fractile-high", "elements[0].design_fractile", 1.0,
                 "elements[0].design_fractile", "<= 0.999"),
    element_case("cli-value-robust-below-cheaper", "elements[0].consequence.robust_cost", 10,
                 "elements[0].consequence.robust_cost", "below cheaper_cost"),
    element_case("cli-value-element-outside-site", "elements[0].geometry",
                 square(500, 500, 600, 600), "elements[0].geometry", "outside the site"),
    element_case("cli-value-unknown-boundary", "elements[0].base_of", "Peat",
                 "elements[0].base_of", "not one of the units"),
    element_case("cli-value-element-no-cell", "elements[0].geometry", square(1, 1, 2, 2),
                 "elements[0].geometry", "no evaluation cell centre"),
    element_case("cli-value-unknown-kind", "elements[0].consequence.kind", "lump sum",
                 "elements[0].consequence.kind", "quantity"),
    cli("cli-value-unknown-layout", [*VALUE, "--layout", "Nine boreholes"],
        {"m.json": model_bytes(WITH_ELEMENT)}, "--layout", "no layout named"),
    cli("cli-value-no-elements", VALUE, {"m.json": model_bytes(TINY)}, "elements",
        "no design elements"),
]  # fmt: skip

# Ground-model structure (nugget, correlated thicknesses, adopted fits) and stage labels,
# through the commands that read them.
READINGS = ["readings", "{dir}/m.json", "--json"]
PAIR = {"units": ["Made ground", "Alluvial clay"], "rho": -0.5}
CLI_CASES += [
    cli("cli-readings-nugget-one", READINGS,
        {"m.json": model_bytes(mutated("units[0].nugget", 1.0))}, "units[0].nugget", "[0, 1)"),
    cli("cli-readings-nugget-negative", READINGS,
        {"m.json": model_bytes(mutated("units[1].nugget", -0.1))}, "units[1].nugget", "[0, 1)"),
    cli("cli-readings-nugget-text", READINGS,
        {"m.json": model_bytes(mutated("units[1].nugget", "high"))}, "units[1].nugget", "number"),
    cli("cli-readings-nugget-on-basal", READINGS,
        {"m.json": model_bytes(mutated("units[3].nugget", 0.2))}, "units[3].nugget", "basal"),
    cli("cli-readings-spread-zero", READINGS,
        {"m.json": model_bytes(mutated("units[0].spread_multiplier", 0))},
        "units[0].spread_multiplier", "above 0"),
    cli("cli-readings-shift-below-zero", READINGS,
        {"m.json": model_bytes(mutated("units[0].mean_shift_m", -2.5))},
        "units[0].mean_shift_m", "0 or below"),
    cli("cli-readings-rho-one", READINGS,
        {"m.json": model_bytes(mutated("thickness_correlation", [{**PAIR, "rho": 1.0}]))},
        "thickness_correlation[0].rho", "(-1, 1)"),
    cli("cli-readings-pair-basal", READINGS,
        {"m.json": model_bytes(mutated("thickness_correlation",
                                       [{**PAIR, "units": ["Made ground", "Mudstone"]}]))},
        "thickness_correlation[0].units[1]", "basal"),
    cli("cli-readings-pair-unknown-unit", READINGS,
        {"m.json": model_bytes(mutated("thickness_correlation",
                                       [{**PAIR, "units": ["Made ground", "Peat"]}]))},
        "thickness_correlation[0].units[1]", "not one of the units"),
    cli("cli-readings-pair-same-unit", READINGS,
        {"m.json": model_bytes(mutated("thickness_correlation",
                                       [{**PAIR, "units": ["Made ground", "Made ground"]}]))},
        "thickness_correlation[0].units", "same unit"),
    cli("cli-readings-not-positive-definite", READINGS,
        {"m.json": model_bytes(mutated("thickness_correlation", [
            {"units": ["Made ground", "Alluvial clay"], "rho": 0.9},
            {"units": ["Alluvial clay", "River gravel"], "rho": 0.9},
            {"units": ["Made ground", "River gravel"], "rho": -0.9}]))},
        "thickness_correlation", "positive definite"),
    cli("cli-readings-stage-number", READINGS,
        {"m.json": model_bytes(mutated("existing[0].stage", 2))}, "existing[0].stage", "text"),
    cli("cli-fit-nugget-one", ["fit", "{dir}/m.json"],
        {"m.json": model_bytes(mutated("units[0].nugget", 1.0))}, "units[0].nugget", "[0, 1)"),
    cli("cli-readings-correlation-model-unknown", READINGS,
        {"m.json": model_bytes(mutated("units[0].correlation.model", "matern12"))},
        "units[0].correlation.model", ""),
]  # fmt: skip


def cases_of(channel: str) -> list[Case]:
    return [c for c in CASES if c.channel == channel]


# ---------------------------------------------------------------- levels and site history

HISTORY: dict = json.loads((DATA / "history-model.json").read_text())
RULE = "history[0]"


def with_history(path: str, value: object) -> dict:
    return {"m.json": model_bytes(mutated(path, value, HISTORY))}


def history_cli(case_id: str, path: str, value: object, field_: str, words: str) -> Case:
    return cli(case_id, ["validate", "{dir}/m.json"], with_history(path, value), field_, words)


LINE_POINTS = [{"x": float(i), "y": 2.0 * i, "level_m": 3.0} for i in range(4)]
CLI_CASES += [
    history_cli("cli-history-level-min-above-max", f"{RULE}.outside.level_min", 5.0,
                f"{RULE}.outside.level_min", "above level_max"),
    history_cli("cli-history-unknown-reference", f"{RULE}.environments[0].level_min", "HAT",
                f"{RULE}.environments[0].level_min", "not a reference level"),
    history_cli("cli-history-cc-min-above-max", f"{RULE}.settlement.cc.min", 0.9,
                f"{RULE}.settlement.cc.min", "above max"),
    history_cli("cli-history-unit-weight-water", f"{RULE}.settlement.unit_weight_kn_m3", 9.81,
                f"{RULE}.settlement.unit_weight_kn_m3", "water"),
    history_cli("cli-history-compressible-above", f"{RULE}.settlement.compressible_unit",
                "Made ground", f"{RULE}.settlement.compressible_unit", "not below"),
    history_cli("cli-history-basal-compressible", f"{RULE}.settlement.compressible_unit",
                "Mudstone", f"{RULE}.settlement.compressible_unit", "basal"),
    history_cli("cli-history-two-ground-points", "ground_level.points",
                HISTORY["ground_level"]["points"][:2], "ground_level.points", "at least 3"),
    history_cli("cli-history-collinear-ground-points", "ground_level.points", LINE_POINTS,
                "ground_level.points", "one line"),
    history_cli("cli-history-without-ground-level", "ground_level", None, "history",
                "needs ground_level"),
    # the fill base 4.1-5.2 m deep outside the marsh, against bounds[0] (0.5-1.8 m)
    history_cli("cli-history-conflicts-with-bound", f"{RULE}.outside",
                {"level_min": 0.0, "level_max": 0.5}, RULE, "bounds[0]"),
    cli("cli-bounds-conflict", ["bounds", "{dir}/m.json", "--at", "150,60"],
        with_history(f"{RULE}.outside", {"level_min": 0.0, "level_max": 0.5}), RULE,
        "bounds[0]"),
    cli("cli-bounds-no-point", ["bounds", "{dir}/m.json"], with_history("name", "x"), "--at"),
    history_cli("cli-zone-transition-negative", "zones[0].transition_m", -5.0,
                "zones[0].transition_m", "from 0"),
    history_cli("cli-zone-transition-text", "zones[0].transition_m", "wide",
                "zones[0].transition_m", "width in metres"),
]  # fmt: skip
API_CASES += [
    api_create("api-history-unknown-reference",
               mutated(f"{RULE}.environments[0].level_max", "HAT", HISTORY),
               f"{RULE}.environments[0].level_max", "not a reference level"),
    api_create("api-history-collinear-ground", mutated("ground_level.points", LINE_POINTS,
               HISTORY), "ground_level.points", "one line"),
]  # fmt: skip
CASES: list[Case] = API_CASES + UPLOAD_CASES + FORM_CASES + CLI_CASES
