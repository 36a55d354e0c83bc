"""Builders for the file import/export tests: models placed in a real CRS and AGS4 text.

Every file the I/O tests read is built here or in the test itself; the data are invented.
"""

from __future__ import annotations

import copy
import sqlite3

# An invented spot in south-east England on the British National Grid (EPSG:27700); the tiny
# model's site grid (0..200 m by 0..120 m) is shifted there.
BNG_OFFSET = (530_000.0, 180_000.0)


def _shift_coords(coords, dx: float, dy: float):
    if coords and isinstance(coords[0], int | float):
        return [coords[0] + dx, coords[1] + dy]
    return [_shift_coords(c, dx, dy) for c in coords]


def _shift_geometry(geometry: dict | None, dx: float, dy: float) -> dict | None:
    if geometry is None:
        return None
    return {**geometry, "coordinates": _shift_coords(geometry["coordinates"], dx, dy)}


def placed_model(model: dict, crs: str = "EPSG:27700", offset=BNG_OFFSET) -> dict:
    """A copy of a site-grid model moved by ``offset`` and given a projected CRS."""
    dx, dy = offset
    out = copy.deepcopy(model)
    out["crs"] = crs
    out["site"] = _shift_geometry(out["site"], dx, dy)
    for key in ("zones", "areas_of_interest", "exclusions", "bounds"):
        for item in out.get(key) or []:
            item["geometry"] = _shift_geometry(item.get("geometry"), dx, dy)
    for probe in out.get("existing") or []:
        probe["x"] += dx
        probe["y"] += dy
    for layout in out.get("layouts") or []:
        for probe in layout["probes"]:
            probe["x"] += dx
            probe["y"] += dy
    return out


def _line(*cells: str) -> str:
    return ",".join('"' + c.replace('"', '""') + '"' for c in cells)


def ags4_group(name: str, headings: list[str], units: list[str], types: list[str], rows) -> str:
    """One AGS4 group in the published layout: GROUP, HEADING, UNIT, TYPE and DATA rows."""
    lines = [
        _line("GROUP", name),
        _line("HEADING", *headings),
        _line("UNIT", *units),
        _line("TYPE", *types),
    ]
    lines += [_line("DATA", *[str(c) for c in row]) for row in rows]
    return "\r\n".join(lines) + "\r\n"


# Five invented locations on the tiny model's site grid: (id, type, x, y, final depth) and
# their GEOL rows (top, base, description, legend, geology code).
TINY_LOCATIONS = [
    ("BH101", "CP", 30.0, 30.0, 12.0),
    ("BH102", "CP", 170.0, 40.0, 5.0),
    ("CPT103", "CPT", 100.0, 60.0, 7.5),
    ("TP104", "TP", 60.0, 100.0, 2.5),
    ("BH105", "CP", 140.0, 20.0, 10.0),
]
TINY_LAYERS = {
    "BH101": [
        (0.0, 0.6, "MADE GROUND: dark brown sandy gravel of brick (invented)", "101", "MG"),
        (0.6, 1.1, "MADE GROUND: grey ashy sand (invented)", "101", "MG"),
        (1.1, 4.0, "Soft grey organic silty CLAY (invented)", "201", "ALV"),
        (4.0, 6.2, "Dense brown sandy GRAVEL (invented)", "401", "RTD"),
        (6.2, 12.0, "Weak grey MUDSTONE (invented)", "801", "MDST"),
    ],
    "BH102": [
        (0.0, 0.8, "MADE GROUND: clayey gravel (invented)", "101", "MG"),
        (0.8, 3.6, "Soft grey silty CLAY (invented)", "201", "ALV"),
        (3.6, 5.0, "Dense sandy GRAVEL (invented)", "401", "RTD"),
    ],
    "CPT103": [
        (0.0, 0.3, "TOPSOIL (inferred, invented)", "001", "TS"),
        (0.3, 1.2, "MADE GROUND (inferred, invented)", "101", "MG"),
        (1.2, 5.5, "Soft CLAY (inferred, invented)", "201", "ALV"),
        (5.5, 7.5, "Dense GRAVEL (inferred, invented)", "401", "RTD"),
    ],
    "TP104": [
        (0.0, 0.9, "MADE GROUND: brick rubble (invented)", "101", "MG"),
        (0.9, 2.5, "Soft grey CLAY (invented)", "201", "ALV"),
    ],
    "BH105": [
        (0.0, 1.0, "MADE GROUND (invented)", "101", "MG"),
        (1.0, 3.0, "Soft grey organic CLAY (invented)", "201", "ALV"),
        (3.0, 4.4, "Firm grey CLAY with peat pockets (invented)", "201", "ALV"),
        (4.4, 7.0, "Dense GRAVEL (invented)", "401", "RTD"),
        (7.0, 10.0, "Weak MUDSTONE (invented)", "801", "MDST"),
    ],
}
# What the import must find with MG, ALV, RTD, MDST mapped to the four units and TS left out.
TINY_EXPECTED = {
    "BH101": {"Made ground": 1.1, "Alluvial clay": 4.0, "River gravel": 6.2},
    "BH102": {"Made ground": 0.8, "Alluvial clay": 3.6},  # ended in the gravel
    "CPT103": {"Made ground": 1.2, "Alluvial clay": 5.5},  # ended in the gravel
    "TP104": {"Made ground": 0.9},  # ended in the clay
    "BH105": {"Made ground": 1.0, "Alluvial clay": 4.4, "River gravel": 7.0},
}
TINY_MAPPING = {
    "MG": "Made ground",
    "ALV": "Alluvial clay",
    "RTD": "River gravel",
    "MDST": "Mudstone",
    "TS": "-",
}


def _abbr_rows(locations, layers) -> list[list[str]]:
    """ABBR entries for every PA code used (AGS4 rule 16), described as invented."""
    rows = [
        ["LOCA_TYPE", t, f"Location type {t} (invented description)", "", ""]
        for t in sorted({loc[1] for loc in locations})
    ]
    legs = sorted({(layer[3], layer[4]) for ls in layers.values() for layer in ls})
    rows += [
        ["GEOL_LEG", leg, f"Legend {leg} (invented description)", "", ""]
        for leg in sorted({leg for leg, _g in legs})
    ]
    rows += [
        ["GEOL_GEOL", geol, f"Geology {geol} (invented description)", "", ""]
        for geol in sorted({g for _l, g in legs})
    ]
    return rows


def ags4_text(
    locations=TINY_LOCATIONS,
    layers=TINY_LAYERS,
    *,
    with_loca: bool = True,
    with_geol: bool = True,
    offset=(0.0, 0.0),
) -> str:
    """An AGS4 file (PROJ, TRAN, UNIT, TYPE, LOCA, GEOL groups) for invented locations."""
    dx, dy = offset
    parts = [
        ags4_group(
            "PROJ",
            ["PROJ_ID", "PROJ_NAME", "PROJ_LOC", "PROJ_CLNT", "PROJ_CONT", "PROJ_ENG"],
            ["", "", "", "", "", ""],
            ["ID", "X", "X", "X", "X", "X"],
            [["PW001", "Invented floodplain plot", "Invented place", "Invented client", "", ""]],
        ),
        ags4_group(
            "TRAN",
            [
                "TRAN_ISNO",
                "TRAN_DATE",
                "TRAN_PROD",
                "TRAN_STAT",
                "TRAN_DESC",
                "TRAN_AGS",
                "TRAN_RECV",
                "TRAN_DLIM",
                "TRAN_RCON",
                "TRAN_REM",
            ],
            ["", "yyyy-mm-dd", "", "", "", "", "", "", "", ""],
            ["X", "DT", "X", "X", "X", "X", "X", "X", "X", "X"],
            [
                [
                    "1",
                    "2024-03-01",
                    "Invented",
                    "FINAL",
                    "Test data (invented)",
                    "4.1",
                    "Invented recipient",
                    "|",
                    "+",
                    "",
                ]
            ],
        ),
        ags4_group(
            "ABBR",
            ["ABBR_HDNG", "ABBR_CODE", "ABBR_DESC", "ABBR_LIST", "ABBR_REM"],
            ["", "", "", "", ""],
            ["X", "X", "X", "X", "X"],
            _abbr_rows(locations, layers),
        ),
        ags4_group(
            "UNIT",
            ["UNIT_UNIT", "UNIT_DESC", "UNIT_REM"],
            ["", "", ""],
            ["X", "X", "X"],
            [["m", "metre", ""], ["yyyy-mm-dd", "year month day", ""]],
        ),
        ags4_group(
            "TYPE",
            ["TYPE_TYPE", "TYPE_DESC"],
            ["", ""],
            ["X", "X"],
            [
                ["ID", "Unique identifier"],
                ["X", "Text"],
                ["PA", "Text listed in ABBR Group"],
                ["2DP", "Value; 2 decimal places"],
                ["DT", "Date time"],
            ],
        ),
    ]
    if with_loca:
        parts.append(
            ags4_group(
                "LOCA",
                [
                    "LOCA_ID",
                    "LOCA_TYPE",
                    "LOCA_STAT",
                    "LOCA_NATE",
                    "LOCA_NATN",
                    "LOCA_GL",
                    "LOCA_FDEP",
                ],
                ["", "", "", "m", "m", "m", "m"],
                ["ID", "PA", "PA", "2DP", "2DP", "2DP", "2DP"],
                [
                    [lid, kind, "", f"{x + dx:.2f}", f"{y + dy:.2f}", "5.00", f"{fdep:.2f}"]
                    for lid, kind, x, y, fdep in locations
                ],
            )
        )
    if with_geol:
        rows = []
        for lid, *_rest in locations:
            for top, base, desc, leg, geol in layers.get(lid, []):
                rows.append([lid, f"{top:.2f}", f"{base:.2f}", desc, leg, geol])
        parts.append(
            ags4_group(
                "GEOL",
                ["LOCA_ID", "GEOL_TOP", "GEOL_BASE", "GEOL_DESC", "GEOL_LEG", "GEOL_GEOL"],
                ["", "m", "m", "", "", ""],
                ["ID", "2DP", "2DP", "X", "PA", "PA"],
                rows,
            )
        )
    return "\r\n".join(parts)


def gpkg_description(path, layer: str) -> str:
    """A layer's description in the GeoPackage's gpkg_contents table (OGC GeoPackage 1.3)."""
    with sqlite3.connect(path) as db:
        [(text,)] = db.execute(
            "SELECT description FROM gpkg_contents WHERE table_name = ?", (layer,)
        ).fetchall()
    return text
