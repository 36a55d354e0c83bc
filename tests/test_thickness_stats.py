"""The thickness of each unit in imported holes (server/app/thickness_stats.py).

Quartiles follow type 7 of Hyndman and Fan ("Sample quantiles in statistical packages",
1996; linear interpolation between order statistics at position q (n - 1)); the expected values
below are worked by hand from that definition. The outlier rule is Tukey's fence, Q3 + 1.5 IQR
(Tukey, "Exploratory data analysis", 1977).
"""

from __future__ import annotations

import pytest

from probewise.app.thickness_stats import probe_thicknesses, summarise_unit, unit_thicknesses

UNITS = ["Fill", "Marine deposit", "Alluvium", "Rock"]


def _probe(pid: str, **bases: float) -> dict:
    return {"id": pid, "observed": {k.replace("_", " "): v for k, v in bases.items()}}


def test_thicknesses_need_top_and_base_and_absent_units_read_zero():
    probes = [
        {"id": "A", "observed": {"Fill": 3.0, "Marine deposit": 3.0, "Alluvium": 9.0}},
        {"id": "B", "observed": {"Fill": 2.0, "Marine deposit": 4.5}},
        {"id": "C", "observed": {"Marine deposit": 4.0, "Alluvium": 8.0}},  # no fill base
    ]
    got = probe_thicknesses(UNITS, probes)
    assert got["Fill"] == [("A", 3.0), ("B", 2.0)]
    assert got["Marine deposit"] == [("A", 0.0), ("B", 2.5)]  # C: the top is not known
    assert got["Alluvium"] == [("A", 6.0), ("C", 4.0)]


def test_presence_share_quartiles_and_mean_of_a_local_unit():
    # met in 6 holes of 80 (thickness 1..6 m), absent in 74
    values = [(f"H{i}", float(i)) for i in range(1, 7)] + [(f"Z{i}", 0.0) for i in range(74)]
    summary = summarise_unit("Marine deposit", values)
    assert (summary.holes, summary.met) == (80, 6)
    assert summary.presence == pytest.approx(0.075)
    # type 7 on 1..6: Q1 at position 1.25 -> 2.25, median 3.5, Q3 at 3.75 -> 4.75
    assert summary.quantiles_m == pytest.approx((1.0, 2.25, 3.5, 4.75, 6.0))
    assert summary.mean_present_m == pytest.approx(3.5)
    assert summary.warnings == []


def test_one_deep_hole_alone_setting_the_max_is_warned():
    values = [("A", 2.0), ("B", 2.5), ("C", 3.0), ("D", 3.5), ("E", 4.0), ("DEEP", 14.0)]
    summary = summarise_unit("Fill", values)
    # Q1 = 2.5 + 0.25*0.5 = 2.625, Q3 = 3.5 + 0.75*0.5 = 3.875, fence 3.875 + 1.5*1.25 = 5.75
    assert len(summary.warnings) == 1
    assert summary.warnings[0].startswith("DEEP alone sets the max (14.00 m; next 4.00 m")
    assert "5.75 m" in summary.warnings[0]
    # two holes at the max: not one hole alone
    tied = summarise_unit("Fill", [*values, ("DEEP2", 14.0)])
    assert not any("alone sets the max" in w for w in tied.warnings)
    low = summarise_unit("Fill", [("THIN", 0.1), *values[:5]])
    assert any(w.startswith("THIN alone sets the min") for w in low.warnings)


def test_suggested_range_from_robust_quantiles_survives_an_outlier():
    values = [(f"H{i}", float(i)) for i in range(1, 22)]  # 21 holes, 1..21 m
    summary = summarise_unit("Alluvium", values)
    # P5 at position 1 -> 2, median 11, P95 at position 19 -> 20
    assert summary.suggested == {"min": 2.0, "likely": 11.0, "max": 20.0, "shape": "pert"}
    with_outlier = summarise_unit("Alluvium", [*values, ("DEEP", 100.0)])
    # P95 of 22 values at position 19.95: 20 + 0.95 = 20.95, while the max jumps to 100
    assert with_outlier.suggested["max"] == pytest.approx(20.95)
    assert with_outlier.quantiles_m[-1] == 100.0
    assert any("DEEP alone sets the max" in w for w in with_outlier.warnings)


def test_too_few_holes_give_no_suggestion_and_a_unit_never_met_no_quartiles():
    few = summarise_unit("Fill", [("A", 1.0), ("B", 2.0)])
    assert few.suggested is None and "too few to suggest" in few.warnings[0]
    never = summarise_unit("Fill", [("A", 0.0), ("B", 0.0)])
    assert never.quantiles_m is None and never.presence == 0.0


def test_unit_thicknesses_of_a_model(tiny_model):
    probes = [_probe("A", Made_ground=1.0, Alluvial_clay=4.0)]
    rows = unit_thicknesses(tiny_model, probes)
    assert [r.unit for r in rows] == ["Made ground", "Alluvial clay", "River gravel"]
    assert rows[1].quantiles_m == (3.0, 3.0, 3.0, 3.0, 3.0) and rows[2].holes == 0


def test_cli_thickness_reports_presence_from_existing_probes(tiny_model, tmp_path, capsys):
    import json

    from probewise.cli import main

    model = dict(tiny_model)
    extra = [
        {
            "id": f"E{i}",
            "method": "BH",
            "x": 20.0 + 10 * i,
            "y": 60.0,
            "final_depth_m": 9.0,
            # clay met in E0 only (2 m); elsewhere absent: equal depths
            "observed": {"Made ground": 1.0, "Alluvial clay": 3.0 if i == 0 else 1.0},
        }
        for i in range(4)
    ]
    model["existing"] = [*tiny_model["existing"], *extra]
    path = tmp_path / "model.json"
    path.write_text(json.dumps(model))
    assert main(["thickness", str(path), "--json"]) == 0
    units = {u["unit"]: u for u in json.loads(capsys.readouterr().out)["units"]}
    assert (units["Alluvial clay"]["holes"], units["Alluvial clay"]["met"]) == (6, 3)
    assert units["Alluvial clay"]["presence"] == pytest.approx(0.5)
    assert units["Made ground"]["holes"] == 6
