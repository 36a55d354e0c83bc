"""Existing probes in from CSV/XLSX tables and AGS files, as model-file "existing" entries.

The readers live in server/io/probes_table.py (CSV, XLSX) and server/io/probes_ags.py (AGS4,
AGS3), sharing the layer rules of server/io/probes_common.py; this module keeps their public
names in one place and merges the result into a model. Nothing here writes a store.
"""

from __future__ import annotations

import copy

from probewise.errors import InputError
from probewise.io.probes_ags import ags4_legends, ags4_to_existing, read_ags, read_ags3, read_ags4
from probewise.io.probes_common import (
    DEPTH_TOL_M,
    Ags4Hole,
    Ags4Holes,
    Ags4Layer,
    ImportResult,
    ProbePreview,
    observed_from_layers,
    outside_error,
    probes_outside_site,
    resolve_mapping,
)
from probewise.io.probes_mapping import (
    RuleHits,
    TextRule,
    decide_layers,
    make_text_rule,
    parse_text_rules,
)
from probewise.io.probes_table import parse_csv, preview_csv

__all__ = [
    "DEPTH_TOL_M",
    "Ags4Hole",
    "Ags4Holes",
    "Ags4Layer",
    "ImportResult",
    "ProbePreview",
    "RuleHits",
    "TextRule",
    "ags4_legends",
    "ags4_to_existing",
    "decide_layers",
    "make_text_rule",
    "merge_existing",
    "observed_from_layers",
    "outside_error",
    "parse_csv",
    "parse_text_rules",
    "preview_csv",
    "probes_outside_site",
    "read_ags",
    "read_ags3",
    "read_ags4",
    "resolve_mapping",
]

# ---------------------------------------------------------------------------------------------
# Into the model


def merge_existing(model: dict, probes: list[dict], mode: str = "append") -> dict:
    """A new model with the probes added to (or replacing) its existing probes.

    Refuses an id that appears twice among the probes or, when appending, that the model
    already holds. The result is checked against the model-file schema.
    """
    if mode not in ("append", "replace"):
        raise InputError("mode", f"'{mode}' is not append or replace")
    seen: set[str] = set()
    for p in probes:
        if p["id"] in seen:
            raise InputError(f"existing {p['id']}", "the id appears twice in the import")
        seen.add(p["id"])
    out = copy.deepcopy(model)
    current = [] if mode == "replace" else list(out.get("existing") or [])
    held = {p["id"] for p in current}
    clash = [pid for pid in seen if pid in held]
    if clash:
        raise InputError(
            f"existing {sorted(clash)[0]}",
            f"already in the model ({len(clash)} id(s) clash); replace the existing probes "
            "or rename the imported ones",
        )
    out["existing"] = current + copy.deepcopy(probes)
    from probewise.io.model_file import validate_model

    validate_model(out)
    return out
