"""The behaviour check of the potential band for both doors (docs/model.md "Behaviour of the
potential band"; the JSON of ``probewise behaviour``, docs/model-file.md).

The test results stored on existing probes are put in canonical units, the derived indices
(Robertson 2009 for CPTu, Marchetti 1980 for DMT) computed with the stresses of
``stress_settings``, each reading classified against the history bounds at its probe
(``probewise.app.levels.history_limits``, the bounds ``probewise bounds`` reports) and each
parameter compared across fill, band and natural ground (``probewise.core.behaviour``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from probewise.app.levels import history_limits
from probewise.core import behaviour as core
from probewise.core.insitu import (
    PARAMETER_BY_NAME,
    PARAMETERS,
    cpt_indices,
    dmt_indices,
    unit_factor,
    vertical_stresses,
)
from probewise.core.model import Project
from probewise.errors import InputError

DEFAULT_UNIT_WEIGHT_KN_M3 = 18.0  # common practice, no source: a typical soil unit weight
DEFAULT_AREA_RATIO = 0.8  # common practice, no source: cone area ratios lie near 0.7-0.85
DEPTH_MATCH_M = 0.01  # readings of one probe at the same depth to the cm are one test depth


@dataclass(frozen=True)
class StressSettings:
    """Water depth, unit weights and cone area ratio, each with where it came from."""

    water_depth_m: float
    fill_unit_weight_kn_m3: float
    natural_unit_weight_kn_m3: float
    cone_area_ratio: float
    sources: tuple[str, ...]


def stress_settings(model: dict, boundary: str) -> StressSettings:
    """The model's ``behaviour`` block first, then the settlement block of the history rule
    on ``boundary`` (unit weights), then the defaults; ``sources`` says which for each."""
    given = model.get("behaviour") or {}
    settle = next(
        (r.get("settlement") for r in model.get("history") or [] if r["base_of"] == boundary),
        None,
    )
    sources = []
    if "water_depth_m" in given:
        water = float(given["water_depth_m"])
        sources.append(f"water at {water:g} m depth (behaviour.water_depth_m)")
    else:
        water = 0.0
        sources.append("water at ground level (assumed: no behaviour.water_depth_m in the model)")
    weights = []
    for key, settle_key, what in (
        ("fill_unit_weight_kn_m3", "fill_unit_weight_kn_m3", "fill"),
        ("natural_unit_weight_kn_m3", "unit_weight_kn_m3", "natural ground"),
    ):
        if key in given:
            value, src = float(given[key]), f"behaviour.{key}"
        elif settle:
            value, src = float(settle[settle_key]), f"the history rule's settlement.{settle_key}"
        else:
            value, src = DEFAULT_UNIT_WEIGHT_KN_M3, "assumed (common practice)"
        weights.append(value)
        sources.append(f"{what} unit weight {value:g} kN/m3 ({src})")
    if "cone_area_ratio" in given:
        area = float(given["cone_area_ratio"])
        sources.append(f"cone area ratio {area:g} (behaviour.cone_area_ratio)")
    else:
        area = DEFAULT_AREA_RATIO
        sources.append(f"cone area ratio {area:g} (assumed: typical of piezocones)")
    return StressSettings(water, weights[0], weights[1], area, tuple(sources))


@dataclass(frozen=True, eq=False)
class Readings:
    """Every reading (stored and derived), arrays ``(m,)``: probe index, depth, parameter
    name, value in the parameter's canonical unit, domain code."""

    probe: np.ndarray
    depth_m: np.ndarray
    parameter: np.ndarray
    value: np.ndarray
    domain: np.ndarray


@dataclass(frozen=True)
class ParameterResult:
    name: str
    label: str
    unit: str
    derived: bool
    comparison: core.DomainComparison


@dataclass(frozen=True)
class ProbeBand:
    """One existing probe against the band: its bound (None where history gives none), the
    readings in each domain and whether the band there has any."""

    probe: str
    lo_m: float | None
    hi_m: float | None
    counts: tuple[int, int, int]
    left_out: int

    @property
    def thickness_m(self) -> float | None:
        return None if self.lo_m is None else self.hi_m - self.lo_m


@dataclass(frozen=True)
class BehaviourReport:
    boundary: str
    domains: dict[str, int]  # stored readings: fill, band, natural, left_out
    parameters: tuple[ParameterResult, ...]
    probes: tuple[ProbeBand, ...]
    settings: StressSettings
    readings: Readings
    probe_ids: tuple[str, ...]
    overall: str
    seed: int


def boundary_index(
    model: dict, project: Project, base_of: str | None, field: str = "--base-of"
) -> int:
    """The boundary a history rule bounds: ``base_of`` (checked; problems name ``field``),
    else the first rule's."""
    rules = [r["base_of"] for r in model.get("history") or []]
    names = project.ground.boundary_names
    if base_of is None:
        if not rules:
            raise InputError(field, "the model has no site history bounding a boundary")
        base_of = rules[0]
    if base_of not in names:
        raise InputError(field, f"{base_of!r} is not a unit with a base in the model")
    if base_of not in rules:
        raise InputError(field, f"no site history rule bounds the base of {base_of!r}")
    return names.index(base_of)


def _stored(model: dict) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    probe, depth, name, value = [], [], [], []
    for i, p in enumerate(model.get("existing") or []):
        for t in p.get("tests") or []:
            spec = PARAMETER_BY_NAME[t["parameter"]]
            probe.append(i)
            depth.append(float(t["depth_m"]))
            name.append(spec.name)
            value.append(float(t["value"]) * unit_factor(spec, t["unit"]))
    return (
        np.array(probe, dtype=int),
        np.array(depth, dtype=float),
        np.array(name, dtype=object),
        np.array(value, dtype=float),
    )


def _at_depths(probe, depth, name, value, wanted: tuple[str, ...]):
    """Rows of one test depth per (probe, depth) holding the ``wanted`` parameters
    (``nan`` where a parameter is missing there): (probe, depth, {name: values})."""
    keys = probe.astype(np.int64) * 10_000_000 + np.round(depth / DEPTH_MATCH_M).astype(np.int64)
    pick = np.isin(name, wanted)
    uniq, where = np.unique(keys[pick], return_inverse=True)
    cols = {w: np.full(len(uniq), np.nan) for w in wanted}
    first = np.full(len(uniq), -1)
    rows = np.flatnonzero(pick)
    first[where[::-1]] = rows[::-1]
    for w in wanted:
        hit = name[rows] == w
        cols[w][where[hit]] = value[rows][hit]
    return probe[first], depth[first], cols


def _derived(probe, depth, name, value, fill_base_m, settings: StressSettings):
    """Derived readings (probe, depth, name, value) from the stored ones."""
    out = []
    for wanted in (("qc", "fs", "u2"), ("p0", "p1")):
        if not np.isin(name, wanted[:1]).any():
            continue
        p, z, cols = _at_depths(probe, depth, name, value, wanted)
        sv0, u0 = vertical_stresses(
            z,
            fill_base_m[p],
            settings.water_depth_m,
            settings.fill_unit_weight_kn_m3,
            settings.natural_unit_weight_kn_m3,
        )
        if wanted[0] == "qc":
            cpt = cpt_indices(cols["qc"], cols["fs"], cols["u2"], sv0, u0, settings.cone_area_ratio)
            found = {"Qtn": cpt.qtn, "Fr": cpt.fr_pct, "Bq": cpt.bq, "Ic": cpt.ic}
        else:
            dmt = dmt_indices(cols["p0"], cols["p1"], u0, sv0 - u0)
            found = {
                "ID": dmt.material_index,
                "KD": dmt.horizontal_stress_index,
                "ED": dmt.modulus_mpa,
            }
        for key, values in found.items():
            ok = np.isfinite(values)
            out.append((p[ok], z[ok], np.full(int(ok.sum()), key, dtype=object), values[ok]))
    return out


def behaviour_report(
    model: dict,
    project: Project,
    base_of: str | None = None,
    seed: int = 0,
    field: str = "--base-of",
) -> BehaviourReport:
    """The behaviour check of the band of ``base_of`` (default: the first history rule's)."""
    k = boundary_index(model, project, base_of, field)
    boundary = project.ground.boundary_names[k]
    probes = model.get("existing") or []
    ids = tuple(p["id"] for p in probes)
    xy = np.array([(p["x"], p["y"]) for p in probes], dtype=float).reshape(-1, 2)
    nan = np.full(len(probes), np.nan)
    lo, hi = history_limits(project, xy).get(k, (nan, nan)) if len(probes) else (nan, nan)
    observed = np.array([p["observed"].get(boundary, np.nan) for p in probes], dtype=float)
    fill_base = np.where(np.isfinite(observed), observed, (lo + hi) / 2.0)
    settings = stress_settings(model, boundary)

    probe, depth, name, value = _stored(model)
    stored_domain = core.classify_depths(depth, lo[probe], hi[probe])
    parts = [(probe, depth, name, value)]
    parts += _derived(probe, depth, name, value, fill_base, settings)
    all_probe = np.concatenate([q[0] for q in parts]).astype(int)
    all_depth = np.concatenate([q[1] for q in parts]).astype(float)
    all_name = np.concatenate([q[2] for q in parts]).astype(object)
    all_value = np.concatenate([q[3] for q in parts]).astype(float)
    domain = core.classify_depths(all_depth, lo[all_probe], hi[all_probe])
    readings = Readings(all_probe, all_depth, all_name, all_value, domain)

    results = []
    for spec in PARAMETERS:
        pick = all_name == spec.name
        if not pick.any():
            continue
        comparison = core.compare_domains(
            all_value[pick], domain[pick], core.seed_for(seed, spec.name)
        )
        results.append(ParameterResult(spec.name, spec.label, spec.unit, spec.derived, comparison))

    counts = {d: int((stored_domain == c).sum()) for c, d in enumerate(core.DOMAINS)}
    counts["left_out"] = int((stored_domain == core.LEFT_OUT).sum())
    bands = []
    for i, pid in enumerate(ids):
        mine = stored_domain[probe == i]
        bounded = bool(np.isfinite(lo[i]))
        bands.append(
            ProbeBand(
                pid,
                float(lo[i]) if bounded else None,
                float(hi[i]) if bounded else None,
                tuple(int((mine == c).sum()) for c in range(3)),
                int((mine == core.LEFT_OUT).sum()),
            )
        )
    overall = core.overall_verdict([r.comparison.verdict for r in results])
    return BehaviourReport(
        boundary, counts, tuple(results), tuple(bands), settings, readings, ids, overall, seed
    )


def _num(value: float | None) -> float | None:
    return None if value is None or not math.isfinite(value) else float(value)


def _trio(values) -> dict:
    return {
        d: _num(v) if not isinstance(v, int) else v
        for d, v in zip(core.DOMAINS, values, strict=True)
    }


def behaviour_json(report: BehaviourReport) -> dict:
    """The ``probewise behaviour --json`` document (docs/model-file.md), with the optional
    extras ``median_ci95``, ``label``, ``derived``, ``summary``, ``settings``, ``probes``."""
    params = []
    for r in report.parameters:
        c = r.comparison
        params.append(
            {
                "name": r.name,
                "unit": r.unit,
                "n": dict(zip(core.DOMAINS, c.n, strict=True)),
                "median": _trio(c.median),
                "mannwhitney_p": {
                    "band_vs_fill": _num(c.mannwhitney_p[0]),
                    "band_vs_natural": _num(c.mannwhitney_p[1]),
                },
                "ks_p": {"band_vs_fill": _num(c.ks_p[0]), "band_vs_natural": _num(c.ks_p[1])},
                "verdict": c.verdict,
                "label": r.label,
                "derived": r.derived,
                "median_ci95": {
                    d: None if lo is None else [_num(lo), _num(hi)]
                    for d, lo, hi in zip(core.DOMAINS, c.ci_low, c.ci_high, strict=True)
                },
            }
        )
    return {
        "boundary": report.boundary,
        "domains": dict(report.domains),
        "parameters": params,
        "overall": report.overall,
        "summary": summary_sentences(report),
        "settings": list(report.settings.sources),
        "seed": report.seed,
        "probes": [
            {
                "id": b.probe,
                "band_top_m": b.lo_m,
                "band_base_m": b.hi_m,
                "readings": dict(zip(core.DOMAINS, b.counts, strict=True))
                | {"left_out": b.left_out},
            }
            for b in report.probes
        ],
    }


def more_tests_where(report: BehaviourReport, limit: int = 5) -> list[ProbeBand]:
    """Probes where tests in the band would settle it: bounded, no reading in the band,
    thickest band first."""
    open_ = [b for b in report.probes if b.lo_m is not None and b.counts[core.BAND] == 0]
    return sorted(open_, key=lambda b: -(b.thickness_m or 0.0))[:limit]


def summary_sentences(report: BehaviourReport) -> list[str]:
    """The overall finding, what adopting either bound would mean, and where to test next."""
    name = report.boundary
    by_verdict: dict[str, list[str]] = {}
    for r in report.parameters:
        by_verdict.setdefault(r.comparison.verdict, []).append(r.name)
    out = []
    if not report.parameters:
        out.append("No test results are stored on the existing probes, so nothing is compared.")
    else:
        out.append(
            "Per parameter: "
            + "; ".join(f"{v}: {', '.join(ns)}" for v, ns in by_verdict.items())
            + "."
        )
    if report.overall == core.LIKE_FILL:
        out.append(
            f"The band behaves like the fill: the tests support taking the base of {name} at "
            "its minimum potential level (the deepest end of the band)."
        )
    elif report.overall == core.LIKE_NATURAL:
        out.append(
            f"The band behaves like the natural soil: the tests support taking the base of "
            f"{name} at its maximum potential level (the shallowest end of the band)."
        )
    elif report.overall == "mixed":
        out.append("The parameters disagree: the tests support neither bound on their own.")
    else:
        out.append("The tests cannot tell the band from the fill or the natural soil.")
    out.append(
        "Adopting the maximum potential level treats the band as natural ground (less fill to "
        "treat or remove, more compressible soil left in place); adopting the minimum "
        "potential level treats it as fill. The choice is the engineer's."
    )
    where = more_tests_where(report)
    if where:
        listed = ", ".join(f"{b.probe} ({b.thickness_m:.1f} m)" for b in where)
        out.append(f"Tests in the band would settle it most at: {listed}.")
    if report.domains["left_out"]:
        out.append(
            f"{report.domains['left_out']} readings lie at probes where no site history bounds "
            f"the base of {name}; they are left out."
        )
    return out
