"""The thickness of each unit in a set of probes, for checking or suggesting its range.

A probe gives a thickness for unit k where it recorded both the base of the unit above (or k
is the first unit: its top is ground level) and the base of unit k; equal depths are an absent
unit (thickness 0, docs/model-file.md). From those thicknesses:

- the share of holes that met the unit (thickness > 0), an estimate of the unit's
  ``presence`` (docs/model.md "Locally present units");
- min, quartiles and max of the thicknesses where the unit is present (quartiles by linear
  interpolation, numpy's default, type 7 of Hyndman and Fan, "Sample quantiles in statistical
  packages", 1996);
- a warning when one hole alone sets the max (or the min) and lies beyond Tukey's fences,
  Q3 + 1.5 IQR (Q1 - 1.5 IQR) (Tukey, "Exploratory data analysis", 1977): a range taken from
  min and max would then be stretched by that hole alone;
- a suggested range from robust quantiles: min P5, likely the median, max P95 (PERT), given
  at least ``MIN_HOLES_FOR_SUGGESTION`` holes where the unit is present.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

ZERO_M = 1e-6  # thinner than this is absent
MIN_HOLES_FOR_SUGGESTION = 5
TUKEY_K = 1.5


@dataclass(frozen=True)
class UnitThickness:
    """What the probes say about one unit's thickness (m)."""

    unit: str
    holes: int  # probes that give a thickness (the unit's top and base both known)
    met: int  # of those, probes where the unit is present
    quantiles_m: tuple[float, float, float, float, float] | None  # min, Q1, median, Q3, max
    mean_present_m: float | None
    mean_all_m: float | None  # over every hole that gives a thickness, zeros included
    suggested: dict | None  # {"min", "likely", "max", "shape"} from P5 / median / P95
    warnings: list[str] = field(default_factory=list)

    @property
    def presence(self) -> float | None:
        """Share of the holes that met the unit (None without holes)."""
        return self.met / self.holes if self.holes else None


def probe_thicknesses(units: list[str], probes: list[dict]) -> dict[str, list[tuple[str, float]]]:
    """(probe id, thickness m) per non-basal unit, from probes whose top and base are known."""
    out: dict[str, list[tuple[str, float]]] = {name: [] for name in units[:-1]}
    for probe in probes:
        observed = probe.get("observed") or {}
        top: float | None = 0.0
        for name in units[:-1]:
            base = observed.get(name)
            if top is not None and base is not None:
                out[name].append((probe["id"], max(float(base) - top, 0.0)))
            top = None if base is None else float(base)
    return out


def unit_thicknesses(model: dict, probes: list[dict]) -> list[UnitThickness]:
    """The thickness summary of every non-basal unit of ``model`` in ``probes``."""
    units = [u["name"] for u in model.get("units") or []]
    return [
        summarise_unit(name, values) for name, values in probe_thicknesses(units, probes).items()
    ]


def summarise_unit(unit: str, values: list[tuple[str, float]]) -> UnitThickness:
    """Counts, quartiles, outlier warnings and a suggested range for one unit."""
    present = [(pid, t) for pid, t in values if t > ZERO_M]
    mean_all = float(np.mean([v for _pid, v in values])) if values else None
    if not present:
        return UnitThickness(unit, len(values), 0, None, None, mean_all, None)
    t = np.array([v for _pid, v in present])
    q = np.quantile(t, [0.0, 0.25, 0.5, 0.75, 1.0])
    warnings = _lone_extremes(present, q)
    suggested = None
    if len(t) >= MIN_HOLES_FOR_SUGGESTION:
        low, likely, high = (float(v) for v in np.quantile(t, [0.05, 0.5, 0.95]))
        if high > low:
            suggested = {
                "min": round(low, 2),
                "likely": round(min(max(likely, low), high), 2),
                "max": round(high, 2),
                "shape": "pert",
            }
    else:
        warnings.append(
            f"only {len(t)} hole(s) met {unit}: too few to suggest a range "
            f"(at least {MIN_HOLES_FOR_SUGGESTION})"
        )
    return UnitThickness(
        unit=unit,
        holes=len(values),
        met=len(present),
        quantiles_m=tuple(float(v) for v in q),
        mean_present_m=float(t.mean()),
        mean_all_m=mean_all,
        suggested=suggested,
        warnings=warnings,
    )


def _lone_extremes(present: list[tuple[str, float]], q: np.ndarray) -> list[str]:
    """Warnings for a max (min) held by one hole alone and beyond Tukey's fence."""
    if len(present) < 4:
        return []
    iqr = q[3] - q[1]
    ordered = sorted(present, key=lambda item: item[1])
    out = []
    top_id, top = ordered[-1]
    next_top = ordered[-2][1]
    upper = q[3] + TUKEY_K * iqr
    if top > next_top + ZERO_M and top > upper:
        out.append(
            f"{top_id} alone sets the max ({top:.2f} m; next {next_top:.2f} m, "
            f"Q3 + 1.5 IQR = {upper:.2f} m): a range up to {top:.2f} m rests on one hole"
        )
    low_id, low = ordered[0]
    next_low = ordered[1][1]
    lower = q[1] - TUKEY_K * iqr
    if low < next_low - ZERO_M and low < lower:
        out.append(
            f"{low_id} alone sets the min ({low:.2f} m; next {next_low:.2f} m, "
            f"Q1 - 1.5 IQR = {lower:.2f} m): a range down to {low:.2f} m rests on one hole"
        )
    return out


def _range_text(spec: dict) -> str:
    return f"{spec['min']:g} / {spec['likely']:g} / {spec['max']:g} {spec.get('shape', 'pert')}"


def _mean_of(spec: dict, presence: float) -> float:
    from probewise.app.to_core import core_range
    from probewise.core.priors import presence_moments, thickness_moments

    return presence_moments(*thickness_moments(core_range(spec)), presence)[0]


def display_rows(model: dict, summaries: list[UnitThickness]) -> list[dict[str, str]]:
    """Text cells per unit for the CLI and the web preview: holes, quartiles, ranges, means."""
    units = {u["name"]: u for u in model.get("units") or []}
    rows = []
    for s in summaries:
        unit = units.get(s.unit, {})
        spec = unit.get("thickness_m")
        model_p = float(unit.get("presence") or 1.0)
        row = {
            "unit": s.unit,
            "met": f"{s.met} of {s.holes}" + (f" ({s.presence:.2f})" if s.holes else ""),
            "quartiles": " / ".join(f"{v:.2f}" for v in s.quantiles_m) if s.quantiles_m else "-",
            "mean_all": f"{s.mean_all_m:.2f}" if s.mean_all_m is not None else "-",
            "model": "-",
            "suggested": "-",
        }
        if spec:
            extra = f", presence {model_p:g}" if model_p < 1 else ""
            row["model"] = f"{_range_text(spec)}{extra}, mean {_mean_of(spec, model_p):.2f}"
        if s.suggested:
            p = s.presence if s.presence is not None and s.met < s.holes else 1.0
            extra = f", presence {p:.2f}" if p < 1 else ""
            mean = _mean_of(s.suggested, p)
            row["suggested"] = f"{_range_text(s.suggested)}{extra}, mean {mean:.2f}"
        rows.append(row)
    return rows


def thickness_view(model: dict, probes: list[dict]) -> dict | None:
    """Rows and warnings for the import previews; None when no probe gives a thickness."""
    summaries = unit_thicknesses(model, probes)
    if not any(s.holes for s in summaries):
        return None
    return {
        "rows": display_rows(model, summaries),
        "warnings": [w for s in summaries for w in s.warnings],
    }
