"""An invented reclaimed-land AGS3 file and a model for it, for the import tests.

Fill over, in one hole only, marine deposit, over alluvium, over weathered rock. The legend
codes are too coarse to tell the units apart (SAND is used for fill and marine deposit alike);
the unit is written in the description, as "(FILL)", "(MARINE DEPOSIT)"... All invented.
"""

from __future__ import annotations

import json

RENAME = {
    "Made ground": "Fill",
    "Alluvial clay": "Marine deposit",
    "River gravel": "Alluvium",
    "Mudstone": "Weathered rock",
}


def reclaimed_model_of(tiny_model: dict) -> dict:
    """The tiny model with its four units renamed for reclaimed land (same ranges)."""
    text = json.dumps(tiny_model)
    for old, new in RENAME.items():
        text = text.replace(f'"{old}"', f'"{new}"')
    return json.loads(text)


def _ags3(holes: list[tuple[str, float, list[tuple[float, float, str, str]]]]) -> bytes:
    lines = [
        '"**HOLE"',
        '"*HOLE_ID","*HOLE_TYPE","*HOLE_NATE","*HOLE_NATN","*HOLE_GL","*HOLE_FDEP"',
        '"<UNITS>","","m","m","m","m"',
    ]
    lines += [
        f'"{h}","CP","{20 + 30 * i}","40","4.0","{fdep}"' for i, (h, fdep, _l) in enumerate(holes)
    ]
    lines += [
        "",
        '"**GEOL"',
        '"*HOLE_ID","*GEOL_TOP","*GEOL_BASE","*GEOL_DESC","*GEOL_LEG"',
        '"<UNITS>","m","m","",""',
    ]
    for hid, _f, layers in holes:
        lines += [f'"{hid}","{t}","{b}","{d}","{leg}"' for t, b, d, leg in layers]
    return "\r\n".join(lines).encode()


FILE = _ags3(
    [
        (
            "BH1",
            20.0,
            [
                (0.0, 4.0, "Loose grey fine SAND with shell fragments (FILL)", "SAND"),
                (4.0, 6.5, "Very soft dark grey clayey SAND (MARINE DEPOSIT)", "SAND"),
                (6.5, 12.0, "Firm grey mottled brown silty CLAY (ALLUVIUM)", "CLAY"),
                (12.0, 20.0, "Extremely weak GRANITE, completely decomposed (ROCK)", "GRAN"),
            ],
        ),
        (
            "BH2",
            18.0,
            [
                (0.0, 0.3, "Grass over brown silty TOPSOIL", "TOPS"),
                (0.3, 5.0, "Medium dense grey SAND (FILL)", "SAND"),
                (5.0, 11.0, "Stiff grey CLAY, alluvial (ALLUVIUM)", "CLAY"),
                (11.0, 18.0, "Weathered GRANITE (ROCK)", "GRAN"),
            ],
        ),
    ]
)
RULES = [
    "(FILL)=Fill",
    "/\\(marine\\s+deposits?\\)/=Marine deposit",
    "alluvium=Alluvium",
    "(rock)=Weathered rock",
]
