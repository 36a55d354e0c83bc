"""Test results by depth: the parameters a probe may carry, and the indices derived from them
(docs/model.md "Behaviour of the potential band").

Stored parameters (``existing[i].tests``) are measured values; each has one canonical unit and
the units accepted for it with their factor to the canonical one. The derived indices:

- CPTu (Robertson, P.K. 2009, "Interpretation of cone penetration tests - a unified
  approach", Canadian Geotechnical Journal 46(11), 1337-1355): qt = qc + u2 (1 - a) with a the
  cone area ratio; Fr = fs / (qt - sv0) x 100 %; Bq = (u2 - u0) / (qt - sv0);
  Qtn = ((qt - sv0) / pa) (pa / s'v0)^n; Ic = sqrt((3.47 - log10 Qtn)^2 + (log10 Fr + 1.22)^2);
  n = 0.381 Ic + 0.05 s'v0 / pa - 0.15 <= 1, iterated from n = 1 until n moves less than 0.01.
- DMT (Marchetti, S. 1980, "In situ tests by flat dilatometer", Journal of the Geotechnical
  Engineering Division, ASCE 106(GT3), 299-321): from the corrected pressures p0 and p1,
  material index ID = (p1 - p0) / (p0 - u0), horizontal stress index KD = (p0 - u0) / s'v0,
  dilatometer modulus ED = 34.7 (p1 - p0).

Stresses come in from the caller (sv0, u0 in kPa): :func:`vertical_stresses` gives them for a
two-layer profile (fill over natural ground) and a water depth.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

PA_KPA = 101.325  # atmospheric pressure, the reference stress of Qtn
GAMMA_WATER_KN_M3 = 9.81
ED_FACTOR = 34.7  # Marchetti (1980): ED = 34.7 (p1 - p0), from the membrane geometry
N_TOLERANCE = 0.01  # Robertson (2009): iterate until the change in n is below 0.01
N_MAX_ITERATIONS = 100


@dataclass(frozen=True, eq=False)
class Parameter:
    """A test parameter: its stored ``name``, words, canonical ``unit`` and the accepted units
    (``units``: unit -> factor to the canonical unit). ``derived`` ones are computed, not
    stored; ``needs`` names the stored parameters they come from."""

    name: str
    label: str
    unit: str
    units: dict[str, float] = field(default_factory=dict)
    derived: bool = False
    needs: tuple[str, ...] = ()


_KPA = {"kPa": 1.0, "MPa": 1000.0}
PARAMETERS: tuple[Parameter, ...] = (
    Parameter("qc", "Cone resistance qc", "MPa", {"MPa": 1.0, "kPa": 0.001}),
    Parameter("fs", "Sleeve friction fs", "kPa", dict(_KPA)),
    Parameter("u2", "Pore pressure behind the cone u2", "kPa", dict(_KPA)),
    Parameter("p0", "Dilatometer corrected pressure p0", "kPa", {**_KPA, "bar": 100.0}),
    Parameter("p1", "Dilatometer corrected pressure p1", "kPa", {**_KPA, "bar": 100.0}),
    Parameter("N", "SPT blow count N", "blows", {"blows": 1.0, "-": 1.0}),
    Parameter("w", "Water content w", "%", {"%": 1.0}),
    Parameter("LL", "Liquid limit LL", "%", {"%": 1.0}),
    Parameter("PL", "Plastic limit PL", "%", {"%": 1.0}),
    Parameter("PI", "Plasticity index PI", "%", {"%": 1.0, "-": 1.0}),
    Parameter("cu", "Undrained shear strength cu", "kPa", dict(_KPA)),
    Parameter("bulk_density", "Bulk density", "Mg/m3", {"Mg/m3": 1.0, "t/m3": 1.0}),
    Parameter("e0", "Initial void ratio e0", "-", {"-": 1.0}),
    Parameter("Qtn", "Normalised cone resistance Qtn", "-", derived=True, needs=("qc", "fs")),
    Parameter("Fr", "Normalised friction ratio Fr", "%", derived=True, needs=("qc", "fs")),
    Parameter("Bq", "Pore pressure ratio Bq", "-", derived=True, needs=("qc", "u2")),
    Parameter("Ic", "Soil behaviour type index Ic", "-", derived=True, needs=("qc", "fs")),
    Parameter("ID", "Material index ID", "-", derived=True, needs=("p0", "p1")),
    Parameter("KD", "Horizontal stress index KD", "-", derived=True, needs=("p0",)),
    Parameter("ED", "Dilatometer modulus ED", "MPa", derived=True, needs=("p0", "p1")),
)
PARAMETER_BY_NAME = {p.name: p for p in PARAMETERS}
STORED = tuple(p.name for p in PARAMETERS if not p.derived)


def find_parameter(name: str) -> Parameter | None:
    """The parameter named ``name`` (exact, else the one match ignoring case), or None."""
    if name in PARAMETER_BY_NAME:
        return PARAMETER_BY_NAME[name]
    hits = [p for p in PARAMETERS if p.name.lower() == name.strip().lower()]
    return hits[0] if len(hits) == 1 else None


def unit_factor(parameter: Parameter, unit: str) -> float | None:
    """Factor from ``unit`` to the parameter's canonical unit (case ignored), or None."""
    if unit in parameter.units:
        return parameter.units[unit]
    for name, factor in parameter.units.items():
        if name.lower() == unit.strip().lower():
            return factor
    return None


def vertical_stresses(
    depth_m: np.ndarray,
    fill_base_m: np.ndarray,
    water_depth_m: float,
    fill_unit_weight_kn_m3: float,
    natural_unit_weight_kn_m3: float,
) -> tuple[np.ndarray, np.ndarray]:
    """Total vertical stress and hydrostatic pore pressure at depths (kPa).

    sv0 = g_fill min(z, d) + g_nat max(0, z - d), u0 = g_w max(0, z - z_w): fill of unit
    weight g_fill down to its base d, natural ground below, water standing at depth z_w.

    Parameters
    ----------
    depth_m, fill_base_m : (m,) float
        Depth of each reading and of the fill base at its probe (m below ground).
    water_depth_m : float
    fill_unit_weight_kn_m3, natural_unit_weight_kn_m3 : float

    Returns
    -------
    (sigma_v0_kpa, u0_kpa) : ((m,) float, (m,) float)
    """
    z = np.asarray(depth_m, dtype=float)
    d = np.asarray(fill_base_m, dtype=float)
    sv0 = fill_unit_weight_kn_m3 * np.minimum(z, d) + natural_unit_weight_kn_m3 * np.maximum(
        0.0, z - d
    )
    u0 = GAMMA_WATER_KN_M3 * np.maximum(0.0, z - water_depth_m)
    return sv0, u0


@dataclass(frozen=True, eq=False)
class CptIndices:
    """Robertson (2009) indices at ``m`` readings, arrays ``(m,)``; ``nan`` where undefined
    (qt <= sv0, fs <= 0, s'v0 <= 0, or no u2 for Bq)."""

    qt_kpa: np.ndarray
    qtn: np.ndarray
    fr_pct: np.ndarray
    bq: np.ndarray
    ic: np.ndarray
    n: np.ndarray


def _ic(qtn: np.ndarray, fr: np.ndarray) -> np.ndarray:
    return np.sqrt((3.47 - np.log10(qtn)) ** 2 + (np.log10(fr) + 1.22) ** 2)


def cpt_indices(
    qc_mpa: np.ndarray,
    fs_kpa: np.ndarray,
    u2_kpa: np.ndarray,
    sigma_v0_kpa: np.ndarray,
    u0_kpa: np.ndarray,
    area_ratio: float = 0.8,
) -> CptIndices:
    """Qtn, Fr, Bq and Ic of CPTu readings (Robertson 2009, iterative stress exponent n).

    Parameters
    ----------
    qc_mpa, fs_kpa : (m,) float
        Cone resistance (MPa) and sleeve friction (kPa).
    u2_kpa : (m,) float
        Pore pressure behind the cone (kPa); ``nan`` where not measured (qt = qc, no Bq).
    sigma_v0_kpa, u0_kpa : (m,) float
        Total vertical stress and hydrostatic pore pressure (kPa).
    area_ratio : float
        Cone area ratio a in qt = qc + u2 (1 - a).

    Returns
    -------
    CptIndices
    """
    qc = np.asarray(qc_mpa, dtype=float) * 1000.0
    fs = np.asarray(fs_kpa, dtype=float)
    u2 = np.asarray(u2_kpa, dtype=float)
    sv0 = np.asarray(sigma_v0_kpa, dtype=float)
    u0 = np.asarray(u0_kpa, dtype=float)
    qt = qc + np.where(np.isfinite(u2), u2, 0.0) * (1.0 - area_ratio)
    eff = sv0 - u0
    with np.errstate(divide="ignore", invalid="ignore"):
        qn = qt - sv0
        ok = (qn > 0) & (fs > 0) & (eff > 0)
        qn_ok = np.where(ok, qn, np.nan)
        fr = fs / qn_ok * 100.0
        bq = (u2 - u0) / qn_ok
        ratio = PA_KPA / np.where(ok, eff, np.nan)
        n = np.ones_like(qn_ok)
        for _ in range(N_MAX_ITERATIONS):
            qtn = qn_ok / PA_KPA * ratio**n
            ic = _ic(qtn, fr)
            new_n = np.minimum(1.0, 0.381 * ic + 0.05 / ratio - 0.15)
            moved = np.abs(new_n - n)
            n = new_n
            if not np.any(moved >= N_TOLERANCE):
                break
        qtn = qn_ok / PA_KPA * ratio**n
        ic = _ic(qtn, fr)
    return CptIndices(qt, qtn, fr, bq, ic, n)


@dataclass(frozen=True, eq=False)
class DmtIndices:
    """Marchetti (1980) indices at ``m`` readings, arrays ``(m,)``; ``nan`` where undefined."""

    material_index: np.ndarray
    horizontal_stress_index: np.ndarray
    modulus_mpa: np.ndarray


def dmt_indices(
    p0_kpa: np.ndarray, p1_kpa: np.ndarray, u0_kpa: np.ndarray, sigma_v0_eff_kpa: np.ndarray
) -> DmtIndices:
    """ID, KD and ED of dilatometer readings (Marchetti 1980).

    Parameters
    ----------
    p0_kpa, p1_kpa : (m,) float
        Corrected first and second readings (kPa); ``p1`` may be ``nan`` (KD only).
    u0_kpa, sigma_v0_eff_kpa : (m,) float
        Hydrostatic pore pressure and effective vertical stress (kPa).

    Returns
    -------
    DmtIndices
        ID = (p1 - p0) / (p0 - u0), KD = (p0 - u0) / s'v0, ED = 34.7 (p1 - p0) / 1000 (MPa).
    """
    p0 = np.asarray(p0_kpa, dtype=float)
    p1 = np.asarray(p1_kpa, dtype=float)
    u0 = np.asarray(u0_kpa, dtype=float)
    eff = np.asarray(sigma_v0_eff_kpa, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        above = p0 - u0
        material = np.where(above > 0, (p1 - p0) / above, np.nan)
        kd = np.where(eff > 0, above / eff, np.nan)
    ed = ED_FACTOR * (p1 - p0) / 1000.0
    return DmtIndices(material, kd, ed)
