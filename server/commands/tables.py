"""Readable plain-text tables for the command line."""

from __future__ import annotations


def format_table(headers: list[str], rows: list[list[str]], left: int = 1) -> str:
    """Aligned plain-text table; the first ``left`` columns left-aligned, the rest right."""
    cells = [headers, *rows]
    widths = [max(len(r[c]) for r in cells) for c in range(len(headers))]

    def line(row):
        return "  ".join(
            v.ljust(w) if c < left else v.rjust(w)
            for c, (v, w) in enumerate(zip(row, widths, strict=True))
        ).rstrip()

    rule = "  ".join("-" * w for w in widths)
    return "\n".join([line(headers), rule, *(line(r) for r in rows)])


def num(value: float | None, digits: int = 2) -> str:
    return "-" if value is None else f"{value:,.{digits}f}"


def probe_table(plans, boundary_names: tuple[str, ...]) -> str:
    """The planned probes of a layout as a readable table (position, depth, what each reads)."""
    rows = [
        [
            p.probe.id,
            p.probe.method,
            num(p.probe.x, 1),
            num(p.probe.y, 1),
            num(p.depth_m, 2),
            ", ".join(boundary_names[k] for k in p.observes) or "-",
        ]
        for p in plans
    ]
    if not rows:
        return "(no probes)"
    headers = ["Probe", "Method", "X (m)", "Y (m)", "Depth (m)", "Observes base of"]
    return format_table(headers, rows, left=2)
