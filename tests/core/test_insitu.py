"""Derived indices of CPTu (Robertson 2009) and DMT (Marchetti 1980) against hand-worked cases
and an independent scalar implementation of the published formulas."""

from __future__ import annotations

import math

import numpy as np
import pytest

from probewise.core.insitu import cpt_indices, dmt_indices, vertical_stresses

PA = 101.325


def robertson_scalar(qt_kpa, fs_kpa, sv0, u0):
    """Robertson, P.K. (2009), Canadian Geotechnical Journal 46(11), 1337-1355, eqs. for Qtn,
    Fr, Ic and n, written out again as a plain loop: n from 1, iterate until |dn| < 0.01."""
    eff = sv0 - u0
    fr = fs_kpa / (qt_kpa - sv0) * 100.0
    n = 1.0
    for _ in range(100):
        qtn = (qt_kpa - sv0) / PA * (PA / eff) ** n
        ic = math.sqrt((3.47 - math.log10(qtn)) ** 2 + (math.log10(fr) + 1.22) ** 2)
        new = min(1.0, 0.381 * ic + 0.05 * eff / PA - 0.15)
        done = abs(new - n) < 0.01
        n = new
        if done:
            break
    qtn = (qt_kpa - sv0) / PA * (PA / eff) ** n
    ic = math.sqrt((3.47 - math.log10(qtn)) ** 2 + (math.log10(fr) + 1.22) ** 2)
    return qtn, fr, ic, n


def test_robertson_at_reference_stress_by_hand():
    # Hand-worked: with s'v0 = pa the stress exponent drops out, Qtn = (qt - sv0) / pa.
    # qc 2.0 MPa, no u2 (qt = qc), sv0 200 kPa, u0 98.675 kPa, fs 36 kPa:
    # Qtn = 1800 / 101.325 = 17.7646; Fr = 36 / 1800 x 100 = 2.0 %;
    # Ic = sqrt((3.47 - 1.24956)^2 + (0.30103 + 1.22)^2) = sqrt(4.93036 + 2.31353) = 2.6915.
    got = cpt_indices([2.0], [36.0], [np.nan], [200.0], [98.675])
    assert got.qtn[0] == pytest.approx(17.7646, abs=1e-4)
    assert got.fr_pct[0] == pytest.approx(2.0, abs=1e-12)
    assert got.ic[0] == pytest.approx(2.6915, abs=1e-4)
    assert np.isnan(got.bq[0])


def test_pore_pressure_correction_and_bq_by_hand():
    # Hand-worked (Robertson 2009 definitions): qc 2.0 MPa, u2 300 kPa, a = 0.8:
    # qt = 2000 + 300 x 0.2 = 2060 kPa; Bq = (300 - 98.675) / (2060 - 200) = 0.108239.
    got = cpt_indices([2.0], [36.0], [300.0], [200.0], [98.675], area_ratio=0.8)
    assert got.qt_kpa[0] == pytest.approx(2060.0)
    assert got.bq[0] == pytest.approx(201.325 / 1860.0, rel=1e-12)


@pytest.mark.parametrize(
    "qc_mpa, fs_kpa, depth_m",
    [(10.0, 50.0, 5.0), (0.5, 10.0, 5.0), (3.0, 60.0, 12.0), (25.0, 120.0, 20.0), (1.2, 8.0, 2.0)],
)
def test_robertson_matches_an_independent_loop(qc_mpa, fs_kpa, depth_m):
    sv0, u0 = vertical_stresses([depth_m], [1.0], 1.0, 19.0, 18.0)
    got = cpt_indices([qc_mpa], [fs_kpa], [np.nan], sv0, u0)
    qtn, fr, ic, n = robertson_scalar(qc_mpa * 1000.0, fs_kpa, sv0[0], u0[0])
    assert got.qtn[0] == pytest.approx(qtn, rel=1e-9)
    assert got.fr_pct[0] == pytest.approx(fr, rel=1e-12)
    assert got.ic[0] == pytest.approx(ic, rel=1e-9)
    assert got.n[0] == pytest.approx(n, rel=1e-9)
    # at convergence n is (within the 0.01 tolerance) what the formula gives from Ic
    assert abs(got.n[0] - min(1.0, 0.381 * got.ic[0] + 0.05 * (sv0[0] - u0[0]) / PA - 0.15)) < 0.01


def test_robertson_zones_from_memory():
    # From memory (Robertson 2009 chart): clean sand Ic below about 2.05, clays above 2.95.
    sv0, u0 = vertical_stresses([6.0, 6.0], [0.0, 0.0], 1.0, 18.0, 18.0)
    got = cpt_indices([12.0, 0.45], [60.0, 12.0], [np.nan, 200.0], sv0, u0)
    assert got.ic[0] < 2.05
    assert got.ic[1] > 2.95


def test_undefined_cpt_readings_are_nan():
    got = cpt_indices([0.05, 2.0], [5.0, 0.0], [np.nan, np.nan], [100.0, 100.0], [0.0, 0.0])
    assert np.isnan(got.qtn).all() and np.isnan(got.ic).all()


def test_marchetti_indices_by_hand():
    # Hand-worked from Marchetti (1980), J. Geotech. Eng. Div. ASCE 106(GT3):
    # p0 200, p1 500, u0 50, s'v0 60 kPa: ID = 300 / 150 = 2.0; KD = 150 / 60 = 2.5;
    # ED = 34.7 x 300 kPa = 10.41 MPa.
    got = dmt_indices([200.0], [500.0], [50.0], [60.0])
    assert got.material_index[0] == pytest.approx(2.0)
    assert got.horizontal_stress_index[0] == pytest.approx(2.5)
    assert got.modulus_mpa[0] == pytest.approx(10.41)


def test_marchetti_material_classes_from_memory():
    # From memory (Marchetti 1980): ID below 0.6 clay, 0.6-1.8 silt, above 1.8 sand.
    got = dmt_indices([300.0, 250.0, 150.0], [360.0, 500.0, 900.0], [50.0] * 3, [80.0] * 3)
    assert got.material_index[0] < 0.6
    assert 0.6 < got.material_index[1] < 1.8
    assert got.material_index[2] > 1.8


def test_vertical_stresses_by_hand():
    # fill 18.5 kN/m3 to 2 m, natural 16.5 below, water at 1 m; at 5 m:
    # sv0 = 18.5 x 2 + 16.5 x 3 = 86.5 kPa; u0 = 9.81 x 4 = 39.24 kPa.
    sv0, u0 = vertical_stresses([5.0, 0.5], [2.0, 2.0], 1.0, 18.5, 16.5)
    assert sv0 == pytest.approx([86.5, 9.25])
    assert u0 == pytest.approx([39.24, 0.0])
