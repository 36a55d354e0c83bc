"""The model file (schema "probewise/1"): every validation rule, the demo, the canonical dump.

Each broken case is a copy of tests/data/tiny-model.json with one change; the rule it breaks
is the contract in docs/model-file.md.
"""

from __future__ import annotations

import copy
import json
import math
from pathlib import Path

import pytest
import shapely
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from model_edits import DELETE, edited, json_paths

from probewise.errors import InputError
from probewise.io.model_file import (
    MAX_EXISTING,
    MAX_LAYOUT_PROBES,
    MAX_LAYOUTS,
    MAX_UNITS,
    TOP_KEYS,
    dump_model,
    list_notes,
    load_model_file,
    parse_model_text,
    summarise_model,
    to_shapely,
    validate_all,
    validate_model,
)

DATA = Path(__file__).resolve().parent / "data"
TINY = json.loads((DATA / "tiny-model.json").read_text())


def changed(path: str | list, value: object) -> dict:
    """A deep copy of the tiny model with the item at ``path`` replaced (or deleted)."""
    return edited(TINY, path, value)


def problem_of(model: object) -> InputError:
    with pytest.raises(InputError) as info:
        validate_model(model)
    return info.value


def rng(a, b, c, shape="pert"):
    return {"min": a, "likely": b, "max": c, "shape": shape}


def square(x0, y0, x1, y1):
    return {"type": "Polygon", "coordinates": [[[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]]}


# (case id, path changed, new value, expected field ("=": the path), words in the problem)
BROKEN = [
    # schema, name, crs
    ("schema-version", "schema", "probewise/2", "=", "probewise/1"),
    ("schema-missing", "schema", DELETE, "=", "is required"),
    ("name-empty", "name", "  ", "=", "must not be empty"),
    ("crs-geographic", "crs", "EPSG:4326", "=", "geographic (degrees)"),
    ("crs-web-mercator", "crs", "EPSG:3857", "=", "distorts distances"),
    ("crs-feet", "crs", "EPSG:2227", "=", "US survey foot"),
    ("crs-unknown", "crs", "EPSG:99999", "=", "not a CRS"),
    ("crs-number", "crs", 27700, "=", "must be text"),
    ("crs-missing", "crs", DELETE, "=", "is required"),
    # grid
    ("grid-zero", "grid_spacing_m", 0, "=", "must be > 0"),
    ("grid-text", "grid_spacing_m", "5", "=", "must be a number"),
    ("grid-bool", "grid_spacing_m", True, "=", "must be a number"),
    ("grid-nan", "grid_spacing_m", math.nan, "=", "finite"),
    ("grid-infinity", "grid_spacing_m", math.inf, "=", "finite"),
    ("grid-huge-int", "grid_spacing_m", 10**400, "=", "too large"),
    ("grid-too-fine", "grid_spacing_m", 0.01, "=", "at most 250000"),
    ("grid-too-coarse", "grid_spacing_m", 1000, "=", "coarser than the site"),
    # geometries
    (
        "site-self-intersecting",
        "site.coordinates",
        [[[0, 0], [200, 120], [200, 0], [0, 120], [0, 0]]],
        "site.coordinates",
        "self-intersection",
    ),
    (
        "site-ring-open",
        "site.coordinates",
        [[[0, 0], [200, 0], [200, 120], [0, 120]]],
        "site.coordinates[0]",
        "not closed",
    ),
    (
        "zone-ring-short",
        "zones[0].geometry.coordinates",
        [[[0, 0], [10, 0], [0, 0]]],
        "zones[0].geometry.coordinates[0]",
        "at least 4 positions",
    ),
    (
        "site-zero-area",
        "site.coordinates",
        [[[0, 0], [10, 0], [10, 0], [0, 0]]],
        "site.coordinates",
        "",
    ),
    (
        "site-hole-outside",
        "site.coordinates",
        [
            [[0, 0], [200, 0], [200, 120], [0, 120], [0, 0]],
            [[300, 300], [310, 300], [310, 310], [300, 300]],
        ],
        "site.coordinates",
        "hole lies outside shell",
    ),
    (
        "site-position-text",
        "site.coordinates[0][1]",
        ["200", 0],
        "site.coordinates[0][1]",
        "[x, y] numbers",
    ),
    (
        "site-position-nan",
        "site.coordinates[0][1]",
        [200, math.nan],
        "site.coordinates[0][1][1]",
        "finite",
    ),
    ("site-point", "site", {"type": "Point", "coordinates": [1, 2]}, "site.type", "Polygon"),
    ("zone-multipolygon", "zones[0].geometry.type", "MultiPolygon", "=", '"Polygon"'),
    (
        "area-no-coordinates",
        "areas_of_interest[0].geometry.coordinates",
        DELETE,
        "=",
        "is required",
    ),
    # ranges
    (
        "range-min-above-max",
        "units[2].thickness_m",
        rng(4.0, 3.5, 3.0),
        "=",
        "min 4.0 is above max 3.0",
    ),
    (
        "range-min-above-likely",
        "units[0].thickness_m",
        rng(1.5, 1.0, 2.0),
        "=",
        "min 1.5 is above likely 1.0",
    ),
    (
        "range-likely-above-max",
        "units[0].thickness_m",
        rng(0.5, 2.5, 2.0),
        "=",
        "likely 2.5 is above max 2.0",
    ),
    (
        "range-min-equals-max",
        "units[0].thickness_m",
        rng(1.0, 1.0, 1.0),
        "=",
        "max must be above min",
    ),
    ("range-negative", "units[0].thickness_m.min", -0.1, "=", ">= 0"),
    (
        "range-shape",
        "units[0].thickness_m.shape",
        "normal",
        "=",
        '"pert", "triangular" or "uniform"',
    ),
    ("range-missing-max", "units[0].thickness_m.max", DELETE, "=", "is required"),
    ("zone-range", "zones[0].units.Alluvial clay.thickness_m", rng(9, 6, 3), "=", "above max"),
    # units
    ("units-one", "units", [{"name": "Mudstone"}], "=", "at least 2 units"),
    ("units-duplicate", "units[1].name", "Made ground", "=", "used twice"),
    ("unit-name-number", "units[1].name", 7, "=", "must be text"),
    ("basal-with-thickness", "units[3].thickness_m", rng(1, 2, 3), "=", "basal"),
    ("unit-without-thickness", "units[1].thickness_m", DELETE, "=", "is required"),
    ("unit-without-correlation", "units[1].correlation", DELETE, "=", "is required"),
    (
        "correlation-model",
        "units[0].correlation.model",
        "matern",
        "=",
        '"exponential", "gaussian", "spherical", "matern32" or "matern52"',
    ),
    ("correlation-range-zero", "units[0].correlation.range_m", 0, "=", "> 0"),
    # references to units
    ("base-of-unknown", "boundaries_of_interest[0].base_of", "Peat", "=", "not one of the units"),
    ("base-of-basal", "boundaries_of_interest[0].base_of", "Mudstone", "=", "basal unit"),
    ("boi-duplicate", "boundaries_of_interest[1].base_of", "Alluvial clay", "=", "listed twice"),
    ("boi-weight-zero", "boundaries_of_interest[0].weight", 0, "=", "> 0"),
    ("boi-tolerance-negative", "boundaries_of_interest[0].tolerance_m", -1, "=", "> 0"),
    (
        "zone-unit-unknown",
        "zones[0].units.Peat",
        {"thickness_m": rng(1, 2, 3)},
        "=",
        "not one of the units",
    ),
    (
        "zone-unit-basal",
        "zones[0].units.Mudstone",
        {"thickness_m": rng(1, 2, 3)},
        "=",
        "basal unit",
    ),
    ("area-weight-zero", "areas_of_interest[0].weight", 0, "=", "> 0"),
    # bounds
    ("bound-min-above-max", "bounds[0].min_depth_m", 2.0, "bounds[0]", "must be below max_depth_m"),
    ("bound-negative", "bounds[0].min_depth_m", -1.0, "=", ">= 0"),
    ("bound-unknown-unit", "bounds[0].base_of", "Peat", "=", "not one of the units"),
    (
        "bound-geometry",
        "bounds[0].geometry",
        {"type": "Polygon", "coordinates": []},
        "bounds[0].geometry.coordinates",
        "list of rings",
    ),
    # methods
    (
        "method-kind",
        "methods[0].kind",
        "drill",
        "=",
        '"borehole", "cpt", "dmt", "trial_pit" or "other"',
    ),
    ("method-duplicate", "methods[1].id", "BH", "=", "used twice"),
    ("method-cost-negative", "methods[0].cost.per_metre", -1, "=", ">= 0"),
    ("method-rate-zero", "methods[0].metres_per_day", 0, "=", "> 0"),
    ("method-depth-zero", "methods[0].max_depth_m", 0, "=", "> 0"),
    ("method-embedment-negative", "methods[0].embedment_m", -0.5, "=", ">= 0"),
    ("method-precision-zero", "methods[0].precision_m.Made ground", 0, "=", "> 0"),
    ("method-precision-unknown", "methods[0].precision_m.Peat", 0.1, "=", "not one of the units"),
    ("method-precision-basal", "methods[0].precision_m.Mudstone", 0.1, "=", "basal unit"),
    (
        "method-refusal-unknown",
        "methods[1].cannot_penetrate",
        ["Rock"],
        "methods[1].cannot_penetrate[0]",
        "not one of the units",
    ),
    # existing probes
    ("existing-outside-site", "existing[0].x", 250, "existing[0]", "outside the site"),
    ("existing-duplicate", "existing[1].id", "HBH1", "=", "used twice"),
    ("existing-method-unknown", "existing[0].method", "RC", "=", "not one of the method ids"),
    ("existing-final-zero", "existing[0].final_depth_m", 0, "=", "> 0"),
    (
        "observed-decreasing",
        "existing[0].observed.Alluvial clay",
        0.9,
        "=",
        "above the base of",
    ),
    (
        "observed-below-final",
        "existing[1].final_depth_m",
        3.0,
        "existing[1].observed.Alluvial clay",
        "below the final depth",
    ),
    ("observed-negative", "existing[0].observed.Made ground", -1, "=", ">= 0"),
    ("observed-unknown", "existing[0].observed.Peat", 2.0, "=", "not one of the units"),
    ("observed-basal", "existing[1].observed.Mudstone", 4.5, "=", "basal unit"),
    (
        "existing-precision-zero",
        "existing[0].precision_m",
        {"Made ground": 0},
        "existing[0].precision_m.Made ground",
        "> 0",
    ),
    (
        "existing-precision-basal",
        "existing[0].precision_m",
        {"Mudstone": 0.1},
        "existing[0].precision_m.Mudstone",
        "basal unit",
    ),
    ("existing-x-missing", "existing[0].x", DELETE, "=", "is required"),
    # layouts
    (
        "layout-probe-outside-site",
        "layouts[1].probes[3].y",
        -1,
        "layouts[1].probes[3]",
        "outside the site",
    ),
    ("layout-duplicate-name", "layouts[1].name", "Four boreholes", "=", "used twice"),
    ("layout-duplicate-probe", "layouts[0].probes[1].id", "BH01", "=", "used twice"),
    (
        "layout-method-unknown",
        "layouts[0].probes[0].method",
        "RC",
        "=",
        "not one of the method ids",
    ),
    ("layout-depth-zero", "layouts[1].probes[2].depth_m", 0, "=", "> 0"),
    ("layout-depth-beyond-method", "layouts[1].probes[2].depth_m", 40, "=", "maximum depth"),
    # extra fields are free but must be finite
    ("extra-nan", "notes", [1, math.nan], "notes[1]", "finite"),
]


@pytest.mark.parametrize(
    ("path", "value", "field", "words"), [c[1:] for c in BROKEN], ids=[c[0] for c in BROKEN]
)
def test_broken_copy_names_field_and_problem(path, value, field, words):
    error = problem_of(changed(path, value))
    assert error.field == (path if field == "=" else field), str(error)
    assert words in error.problem
    assert "\n" not in str(error)
    assert "Input should" not in error.problem  # no pydantic jargon


def test_message_for_min_above_max():
    model = changed(["units", 2, "thickness_m"], rng(4.0, 3.5, 3.0))
    assert str(problem_of(model)) == "units[2].thickness_m: min 4.0 is above max 3.0"


def test_geographic_crs_suggests_projected_crs():
    error = problem_of(changed(["crs"], "EPSG:4326"))
    assert str(error) == (
        "crs: EPSG:4326 is geographic (degrees); use a projected CRS in metres such as the "
        "local UTM zone"
    )


@pytest.mark.parametrize("crs", ["EPSG:27700", "EPSG:32630", "epsg:2157", None])
def test_projected_metre_crs_and_local_grid_are_accepted(crs):
    assert validate_model(changed(["crs"], crs))["crs"] == crs


def test_tiny_model_validates():
    model = validate_model(copy.deepcopy(TINY))
    assert summarise_model(model) == "4 units, 3 methods, 2 existing probes, 2 layouts"


def test_defaults_are_filled():
    minimal = copy.deepcopy(TINY)
    for key in ("zones", "areas_of_interest", "exclusions", "bounds", "existing", "layouts"):
        del minimal[key]
    del minimal["currency"]
    for unit in minimal["units"]:
        unit.pop("description")
    for method in minimal["methods"]:
        method.pop("cannot_penetrate")
    model = validate_model(minimal)
    for key in ("zones", "areas_of_interest", "exclusions", "bounds", "existing", "layouts"):
        assert model[key] == []
    assert model["currency"] == ""
    assert all(u["description"] == "" for u in model["units"])
    assert all(m["cannot_penetrate"] == [] for m in model["methods"])
    full = validate_model(copy.deepcopy(TINY))
    assert full["existing"][0]["precision_m"] == {}
    assert full["bounds"][0]["geometry"] is None
    assert full["layouts"][0]["probes"][0]["depth_m"] is None
    assert full["units"][1]["thickness_m"]["min"] == 1.0


def test_extra_fields_are_kept_and_exported():
    model = changed(["notes"], "invented")
    model["layouts"][0]["probes"][0]["purpose"] = "culvert founding"
    model["units"][0]["colour"] = "#aa8844"
    normal = validate_model(model)
    assert normal["notes"] == "invented"
    assert normal["layouts"][0]["probes"][0]["purpose"] == "culvert founding"
    again = json.loads(dump_model(normal))
    assert again["notes"] == "invented"
    assert again["units"][0]["colour"] == "#aa8844"


def test_probe_on_the_site_boundary_counts_as_inside():
    model = changed(["existing", 0, "x"], 200)
    assert validate_model(model)["existing"][0]["x"] == 200.0


def test_existing_probe_inside_an_exclusion_is_allowed():
    model = changed(["existing", 0, "x"], 170)
    model["existing"][0]["y"] = 100
    normal = validate_model(model)
    # kept where it was found (a record of the past, not a proposal) and not noted
    assert (normal["existing"][0]["x"], normal["existing"][0]["y"]) == (170.0, 100.0)
    assert not any(note.startswith("existing") for note in list_notes(normal))


def test_planned_probe_inside_an_exclusion_is_allowed_and_noted():
    model = validate_model(changed(["layouts", 0, "probes", 2, "y"], 100))
    notes = list_notes(model)
    assert len(notes) == 1
    assert notes[0].startswith("layouts[0].probes[2]: ")
    assert "Live gas main easement" in notes[0]


def test_site_may_be_a_multipolygon():
    parts = [square(0, 0, 100, 120)["coordinates"], square(100, 0, 200, 120)["coordinates"]]
    parts[1] = [[[110, 0], [200, 0], [200, 120], [110, 120], [110, 0]]]
    model = changed(["site"], {"type": "MultiPolygon", "coordinates": parts})
    model["layouts"][1]["probes"][3]["x"] = 95  # (90, 55) was fine; keep all inside the parts
    model["layouts"][1]["probes"][4]["x"] = 120
    model["layouts"][0]["probes"][1]["x"] = 120
    model["layouts"][0]["probes"][3]["x"] = 120
    assert validate_model(model)["site"]["type"] == "MultiPolygon"


def test_overlapping_multipolygon_site_is_refused():
    parts = [square(0, 0, 150, 120)["coordinates"], square(100, 0, 200, 120)["coordinates"]]
    error = problem_of(changed(["site"], {"type": "MultiPolygon", "coordinates": parts}))
    assert error.field == "site.coordinates"
    assert "not a valid polygon" in error.problem


def test_polygon_with_a_hole_is_valid():
    coords = TINY["site"]["coordinates"] + [[[5, 5], [15, 5], [15, 15], [5, 15], [5, 5]]]
    model = validate_model(changed(["site", "coordinates"], coords))
    assert to_shapely(model["site"]).area == pytest.approx(200 * 120 - 100)


@pytest.mark.parametrize(
    ("key", "cap", "item"),
    [
        ("existing", MAX_EXISTING, TINY["existing"][0]),
        ("layouts", MAX_LAYOUTS, TINY["layouts"][0]),
        ("units", MAX_UNITS, TINY["units"][0]),
    ],
)
def test_absurd_list_sizes_fail_with_the_cap_in_the_message(key, cap, item):
    model = changed([key], [item] * (cap + 1))
    error = problem_of(model)
    assert error.field == key
    assert f"at most {cap}" in error.problem


def test_a_million_existing_probes_fail_fast():
    error = problem_of(changed(["existing"], [TINY["existing"][0]] * 10**6))
    assert str(error) == "existing: has 1000000 existing probes; at most 5000 are allowed"


def test_layout_probe_cap():
    probe = TINY["layouts"][0]["probes"][0]
    error = problem_of(changed(["layouts", 1, "probes"], [probe] * (MAX_LAYOUT_PROBES + 1)))
    assert error.field == "layouts[1].probes"
    assert f"at most {MAX_LAYOUT_PROBES} per layout" in error.problem


def test_deep_nesting_is_refused():
    deep: object = 1
    for _ in range(200):
        deep = [deep]
    error = problem_of(changed(["notes"], deep))
    assert "nested more than" in error.problem


@pytest.mark.parametrize("value", [None, [], "text", 3, True])
def test_top_level_must_be_an_object(value):
    assert str(problem_of(value)) == "MODEL: the model file must be a JSON object"


def test_validate_all_reports_several_problems():
    model = changed(["grid_spacing_m"], "x")
    model["units"][0]["name"] = 3
    model["crs"] = "EPSG:4326"
    fields = [e.field for e in validate_all(model)]
    assert fields == ["crs", "grid_spacing_m", "units[0].name"]


def test_validate_all_reports_several_reference_problems():
    model = changed(["existing", 0, "x"], 999)
    model["layouts"][1]["name"] = "Four boreholes"
    model["methods"][0]["precision_m"]["Mudstone"] = 1.0
    fields = [e.field for e in validate_all(model)]
    assert fields == ["methods[0].precision_m.Mudstone", "existing[0]", "layouts[1].name"]
    assert validate_all(copy.deepcopy(TINY)) == []


# ---------------------------------------------------------------- files and text


def test_load_missing_file(tmp_path):
    with pytest.raises(InputError) as info:
        load_model_file(tmp_path / "nope.json")
    assert info.value.field == "MODEL"
    assert info.value.problem.startswith("file not found: ")


def test_load_bad_json_names_line_and_column(tmp_path):
    path = tmp_path / "bad.json"
    path.write_text('{\n  "schema": "probewise/1",\n  "name": oops\n}\n')
    with pytest.raises(InputError) as info:
        load_model_file(path)
    assert info.value.field == "MODEL"
    assert "line 3 column 11" in info.value.problem


def test_load_folder_and_non_utf8(tmp_path):
    with pytest.raises(InputError, match="folder"):
        load_model_file(tmp_path)
    path = tmp_path / "latin1.json"
    path.write_bytes(b'{"name": "\xe9"}')
    with pytest.raises(InputError, match="UTF-8"):
        load_model_file(path)


def test_duplicate_key_is_refused():
    with pytest.raises(InputError, match='"name" appears twice'):
        parse_model_text('{"name": "a", "name": "b"}')


def test_nan_written_in_the_json_text_is_refused():
    text = json.dumps(TINY).replace('"grid_spacing_m": 5', '"grid_spacing_m": NaN')
    with pytest.raises(InputError) as info:
        parse_model_text(text)
    assert info.value.field == "grid_spacing_m"
    text = json.dumps(TINY).replace('"x": 30', '"x": -Infinity', 1)
    with pytest.raises(InputError) as info:
        parse_model_text(text)
    assert info.value.field == "existing[0].x"


def test_load_tiny_file():
    assert load_model_file(DATA / "tiny-model.json") == validate_model(TINY)


# ---------------------------------------------------------------- canonical dump


@pytest.mark.parametrize("which", ["tiny", "demo"])
def test_dump_round_trips(which, demo_model):
    raw = TINY if which == "tiny" else demo_model
    model = validate_model(copy.deepcopy(raw))
    text = dump_model(model)
    assert validate_model(json.loads(text)) == model
    assert dump_model(json.loads(text)) == text  # canonical: a fixed point
    assert list(json.loads(text))[: len(TOP_KEYS)] == list(TOP_KEYS)


def test_dump_leaves_out_absent_values_as_the_contract_writes_them():
    dumped = json.loads(dump_model(validate_model(copy.deepcopy(TINY))))
    assert "thickness_m" not in dumped["units"][-1]
    assert "depth_m" not in dumped["layouts"][0]["probes"][0]
    assert dumped["bounds"][0]["geometry"] is None


def test_dump_refuses_an_invalid_model():
    with pytest.raises(InputError):
        dump_model(changed(["grid_spacing_m"], -1))


# ---------------------------------------------------------------- the demo project


def test_demo_validates_and_is_marked_invented(demo_model):
    model = validate_model(demo_model)
    assert "(invented)" in model["name"]
    assert "invented" in model["notes"].lower()
    for section in ("zones", "areas_of_interest", "exclusions"):
        assert all("(invented)" in item["name"] for item in model[section])
    assert all("(invented)" in u["description"] for u in model["units"])
    assert all("invented" in m["name"] for m in model["methods"])
    assert list_notes(model) == []  # no planned probe in an exclusion


def test_demo_has_its_invented_scenario(demo_model):
    model = validate_model(demo_model)
    assert model["crs"] == "EPSG:27700"
    assert len(model["units"]) >= 5
    assert len(model["existing"]) >= 8
    assert len(model["layouts"]) >= 3
    assert len(model["exclusions"]) == 2
    assert {m["kind"] for m in model["methods"]} >= {"borehole", "cpt", "dmt", "trial_pit"}
    weights = sorted(a["weight"] for a in model["areas_of_interest"])
    assert weights == [2, 3, 4]
    top = max(model["boundaries_of_interest"], key=lambda b: b["weight"])
    assert top["base_of"] == "Soft alluvial clay and peat"
    assert top["tolerance_m"] == 0.5
    cells = to_shapely(model["site"]).area / model["grid_spacing_m"] ** 2
    assert 2000 <= cells <= 4000


def test_demo_penetration_rules_read_as_the_trade_expects(demo_model):
    """An excavator digs stiff clay: a trial pit is limited by the machine's reach (about
    4.5 m, common practice, no source), groundwater and stability, not by a clay. Cone and
    blade refuse on rock; a cable-percussive borehole stops on rock and rotary coring goes on."""
    methods = {m["id"]: m for m in validate_model(demo_model)["methods"]}
    trial_pit = next(m for m in methods.values() if m["kind"] == "trial_pit")
    assert "Stiff clay" not in trial_pit["cannot_penetrate"]
    assert 4.0 <= trial_pit["max_depth_m"] <= 5.0
    assert "reach" in trial_pit["description"] and "invented" in trial_pit["description"]
    for method in methods.values():
        if method["kind"] in ("cpt", "dmt"):
            assert "Mudstone" in method["cannot_penetrate"]
    assert methods["CP"]["cannot_penetrate"] == ["Mudstone"]
    assert methods["RC"]["cannot_penetrate"] == []  # coring goes into the rock


def test_demo_probes_avoid_exclusions(demo_model):
    model = validate_model(demo_model)
    exclusions = shapely.union_all([to_shapely(e["geometry"]) for e in model["exclusions"]])
    probes = model["existing"] + [p for lay in model["layouts"] for p in lay["probes"]]
    for probe in probes:
        assert not shapely.intersects_xy(exclusions, probe["x"], probe["y"]), probe["id"]


def test_demo_existing_depths_fit_the_conceptual_model(demo_model):
    """Each recorded thickness lies in its unit's range (the zone's where a zone holds it),
    and recorded depths honour the user bounds: the demo is self-consistent."""
    model = validate_model(demo_model)
    names = [u["name"] for u in model["units"]]
    zones = [(to_shapely(z["geometry"]), z["units"]) for z in model["zones"]]
    for probe in model["existing"]:
        ranges = {u["name"]: u["thickness_m"] for u in model["units"][:-1]}
        for geom, overrides in zones:
            if shapely.intersects_xy(geom, probe["x"], probe["y"]):
                ranges.update({k: v["thickness_m"] for k, v in overrides.items()})
                break
        top = 0.0
        for name in names[:-1]:
            if name not in probe["observed"]:
                break
            thickness = probe["observed"][name] - top
            assert ranges[name]["min"] <= thickness <= ranges[name]["max"], (probe["id"], name)
            top = probe["observed"][name]
        for bound in model["bounds"]:
            depth = probe["observed"].get(bound["base_of"])
            inside = bound["geometry"] is None or shapely.intersects_xy(
                to_shapely(bound["geometry"]), probe["x"], probe["y"]
            )
            if depth is not None and inside:
                assert bound["min_depth_m"] <= depth <= bound["max_depth_m"], probe["id"]


# ---------------------------------------------------------------- property test


PATHS = json_paths(TINY)
JSON_SCALARS = (
    st.none()
    | st.booleans()
    | st.integers()
    | st.floats(allow_nan=True, allow_infinity=True)
    | st.text(max_size=12)
    | st.sampled_from(
        ["Mudstone", "Alluvial clay", "BH", "EPSG:4326", "EPSG:27700", "Polygon", "pert", ""]
    )
)
JSON_VALUES = st.recursive(
    JSON_SCALARS,
    lambda inner: (
        st.lists(inner, max_size=5) | st.dictionaries(st.text(max_size=8), inner, max_size=4)
    ),
    max_leaves=12,
)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(path=st.sampled_from(PATHS), value=JSON_VALUES | st.just(DELETE))
def test_random_mutation_validates_or_raises_input_error(path, value):
    model = edited(TINY, path, value)
    try:
        normal = validate_model(model)
    except InputError as exc:
        assert exc.field
        assert exc.problem
        assert "\n" not in str(exc)
    else:
        assert validate_model(json.loads(dump_model(normal))) == normal


def test_equal_observed_depths_record_an_absent_unit(tiny_model):
    """A unit may be absent at a probe (thickness min 0): equal base depths are valid."""
    tiny_model["existing"][0]["observed"]["Alluvial clay"] = 1.1  # same as Made ground
    observed = validate_model(tiny_model)["existing"][0]["observed"]
    assert observed["Made ground"] == observed["Alluvial clay"] == 1.1
    assert observed["River gravel"] == 6.2  # the rest of the record untouched


@pytest.mark.parametrize(
    ("where", "field"),
    [
        (lambda m: m.__setitem__("name", "bad \ud800"), "name"),
        (lambda m: m["units"][1].__setitem__("name", "Alluvial \udc00"), "units[1].name"),
        (
            lambda m: m["zones"][0].__setitem__("units", {"Clay \udc00": {}}),
            "zones[0].units",
        ),
    ],
)
def test_lone_surrogate_text_is_refused(tiny_model, where, field):
    """JSON accepts escapes like \\ud800 that are not Unicode text; they must not be stored."""
    where(tiny_model)
    with pytest.raises(InputError) as err:
        validate_model(tiny_model)
    assert err.value.field == field
    assert "not valid Unicode" in err.value.problem


def test_unique_names_number_repeats(tiny_model):
    from probewise.io.model_file import unique_layout_name, unique_name

    assert unique_name("Stage 1", []) == "Stage 1"
    assert unique_name("Stage 1", ["Stage 1", "Stage 1 (2)"]) == "Stage 1 (3)"
    assert unique_layout_name(tiny_model, "Four boreholes") == "Four boreholes (2)"
    assert unique_layout_name(tiny_model, "New") == "New"
