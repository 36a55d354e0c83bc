"""Where a layout came from, as the model file records it (its ``origin`` field)."""

from __future__ import annotations

from typing import Any

KIND_LABELS = {"hand": "Drawn by hand", "guidance": "Guidance grid", "optimised": "Optimiser"}


def layout_kind(layout: dict[str, Any]) -> str:
    """``"hand"``, ``"guidance"`` or ``"optimised"``: the layout's ``origin`` (default hand)."""
    return layout.get("origin") or "hand"
