"""Does the potential band behave like the fill or like the natural ground? (docs/model.md
"Behaviour of the potential band").

Each test reading at depth z of a probe where site history bounds the fill base between depths
[lo, hi] (the maximum and minimum potential levels as depths) falls in one domain: fill when
z < lo, band when lo <= z <= hi, natural when z > hi; readings of probes with no history bound
are left out. Per parameter the three samples are compared:

- medians with percentile bootstrap intervals (Efron, B. and Tibshirani, R. 1993, An
  Introduction to the Bootstrap, ch. 13), seeded so that a run repeats exactly; the resampled
  medians are drawn from their order-statistic form (see :func:`bootstrap_medians`);
- Mann-Whitney U (scipy.stats.mannwhitneyu, two-sided): does a value of one sample tend to be
  larger than one of the other (a shift of location, P(X > Y) != 1/2);
- Kolmogorov-Smirnov (scipy.stats.ks_2samp, two-sided): do the two distributions differ in any
  way (location, spread or shape).

Verdict rule (Mann-Whitney at ALPHA): the band is "like the fill" when it differs from the
natural soil, not from the fill, and its median lies nearer the fill's median than the natural
soil's; "like the natural soil" the other way round; "in between" when it differs from both
and its median lies between theirs; "unlike either" when it differs from both and its median
lies outside them; "the data cannot tell" otherwise (it differs from neither, a domain has
fewer than MIN_READINGS readings, or the one difference found points the other way: a few
fill readings that merely fail to differ are not evidence of likeness). Readings along one
sounding are correlated, so the p-values are optimistic: the verdict informs, it does not decide.
"""

from __future__ import annotations

import zlib
from dataclasses import dataclass

import numpy as np
from scipy.stats import ks_2samp, mannwhitneyu

LEFT_OUT = -1
FILL, BAND, NATURAL = 0, 1, 2
DOMAINS = ("fill", "band", "natural")
MIN_READINGS = 3  # below this in a domain, no test and no verdict from it
ALPHA = 0.05
N_BOOTSTRAP = 1000
CI_LEVEL = 0.95

LIKE_FILL = "like the fill"
LIKE_NATURAL = "like the natural soil"
IN_BETWEEN = "in between"
UNLIKE_EITHER = "unlike either"
CANNOT_TELL = "the data cannot tell"


def classify_depths(depth_m: np.ndarray, lo_m: np.ndarray, hi_m: np.ndarray) -> np.ndarray:
    """Domain of each reading: FILL, BAND, NATURAL or LEFT_OUT.

    Parameters
    ----------
    depth_m : (m,) float
        Depth of each reading (m below ground).
    lo_m, hi_m : (m,) float
        Least and greatest depth of the fill base at the reading's probe (the maximum and
        minimum potential levels as depths); ``nan`` where no history bound applies.

    Returns
    -------
    (m,) int
        ``FILL`` where z < lo, ``NATURAL`` where z > hi, ``BAND`` between (ends included),
        ``LEFT_OUT`` where the probe has no bound.
    """
    z = np.asarray(depth_m, dtype=float)
    lo = np.asarray(lo_m, dtype=float)
    hi = np.asarray(hi_m, dtype=float)
    out = np.full(z.shape, BAND, dtype=int)
    out[z < lo] = FILL
    out[z > hi] = NATURAL
    out[~(np.isfinite(lo) & np.isfinite(hi))] = LEFT_OUT
    return out


def seed_for(seed: int, name: str) -> np.random.Generator:
    """A generator for one parameter: the same seed and name give the same stream, whatever
    other parameters a project holds."""
    return np.random.default_rng([int(seed), zlib.crc32(name.encode("utf-8"))])


def bootstrap_medians(values: np.ndarray, rng: np.random.Generator, n_boot: int) -> np.ndarray:
    """Medians of ``n_boot`` bootstrap resamples of ``values``, drawn without resampling.

    A resample of k values takes indices floor(k U_j) of the sorted sample, U_j iid uniform;
    floor is monotone, so its r-th smallest index is floor(k U_(r)) with U_(r) ~ Beta(r,
    k - r + 1), and the next one floor(k U_(r+1)) with U_(r+1) = U_(r) + (1 - U_(r)) B,
    B ~ Beta(1, k - r) (the least of the k - r uniforms above U_(r)). The median is the
    middle order statistic (k odd) or the mean of the two middle ones (k even): the same
    distribution as resampling, at O(n_boot) cost instead of O(n_boot k).

    Parameters
    ----------
    values : (k,) float, k >= 1
    rng : numpy Generator
    n_boot : int

    Returns
    -------
    (n_boot,) float
    """
    x = np.sort(np.asarray(values, dtype=float))
    k = len(x)
    r = (k + 1) // 2  # 1-based rank of the (lower) middle value
    u = rng.beta(r, k - r + 1, size=n_boot)
    low = x[np.minimum((u * k).astype(np.int64), k - 1)]
    if k % 2:
        return low
    v = u + (1.0 - u) * rng.beta(1, k - r, size=n_boot)
    return 0.5 * (low + x[np.minimum((v * k).astype(np.int64), k - 1)])


def bootstrap_median_ci(
    values: np.ndarray,
    rng: np.random.Generator,
    n_boot: int = N_BOOTSTRAP,
    level: float = CI_LEVEL,
) -> tuple[float, float]:
    """Percentile bootstrap interval of the median (:func:`bootstrap_medians`).

    Parameters
    ----------
    values : (k,) float
    rng : numpy Generator
    n_boot : int
    level : float
        Two-sided coverage.

    Returns
    -------
    (low, high) : (float, float)
        ``nan`` for an empty sample.
    """
    if len(values) == 0:
        return float("nan"), float("nan")
    medians = bootstrap_medians(values, rng, n_boot)
    tail = (1.0 - level) / 2.0
    low, high = np.quantile(medians, [tail, 1.0 - tail])
    return float(low), float(high)


@dataclass(frozen=True)
class DomainComparison:
    """One parameter in the three domains (tuples in DOMAINS order); p-values ``None`` where a
    domain has fewer than MIN_READINGS readings, medians ``None`` for an empty domain."""

    n: tuple[int, int, int]
    median: tuple[float | None, float | None, float | None]
    ci_low: tuple[float | None, float | None, float | None]
    ci_high: tuple[float | None, float | None, float | None]
    mannwhitney_p: tuple[float | None, float | None]  # band vs fill, band vs natural
    ks_p: tuple[float | None, float | None]
    verdict: str


def _pair_tests(band: np.ndarray, other: np.ndarray) -> tuple[float | None, float | None]:
    if len(band) < MIN_READINGS or len(other) < MIN_READINGS:
        return None, None
    mw = mannwhitneyu(band, other, alternative="two-sided")
    ks = ks_2samp(band, other, alternative="two-sided")
    return float(mw.pvalue), float(ks.pvalue)


def verdict_of(
    median: tuple[float | None, float | None, float | None],
    mannwhitney_p: tuple[float | None, float | None],
    alpha: float = ALPHA,
) -> str:
    """The plain verdict of the module docstring's rule from the medians (fill, band, natural)
    and the Mann-Whitney p-values (band vs fill, band vs natural)."""
    p_fill, p_nat = mannwhitney_p
    if p_fill is None or p_nat is None:
        return CANNOT_TELL
    off_fill, off_nat = p_fill < alpha, p_nat < alpha
    fill, band, nat = median
    nearer_fill = abs(band - fill) < abs(band - nat)
    nearer_nat = abs(band - nat) < abs(band - fill)
    if off_nat and not off_fill:
        return LIKE_FILL if nearer_fill else CANNOT_TELL
    if off_fill and not off_nat:
        return LIKE_NATURAL if nearer_nat else CANNOT_TELL
    if not off_fill and not off_nat:
        return CANNOT_TELL
    if min(fill, nat) <= band <= max(fill, nat):
        return IN_BETWEEN
    return UNLIKE_EITHER


def compare_domains(
    values: np.ndarray, domain: np.ndarray, rng: np.random.Generator, n_boot: int = N_BOOTSTRAP
) -> DomainComparison:
    """Medians, bootstrap intervals, tests and verdict of one parameter.

    Parameters
    ----------
    values : (m,) float
        Finite values of one parameter.
    domain : (m,) int
        Domain of each value (LEFT_OUT values are ignored).
    rng : numpy Generator
        For the bootstrap (see :func:`seed_for`).
    n_boot : int

    Returns
    -------
    DomainComparison
    """
    values = np.asarray(values, dtype=float)
    domain = np.asarray(domain)
    groups = [values[domain == d] for d in (FILL, BAND, NATURAL)]
    medians, lows, highs = [], [], []
    for g in groups:
        if len(g):
            low, high = bootstrap_median_ci(g, rng, n_boot)
            medians.append(float(np.median(g)))
            lows.append(low)
            highs.append(high)
        else:
            medians.append(None)
            lows.append(None)
            highs.append(None)
    mw_f, ks_f = _pair_tests(groups[BAND], groups[FILL])
    mw_n, ks_n = _pair_tests(groups[BAND], groups[NATURAL])
    median = tuple(medians)
    return DomainComparison(
        n=tuple(len(g) for g in groups),
        median=median,
        ci_low=tuple(lows),
        ci_high=tuple(highs),
        mannwhitney_p=(mw_f, mw_n),
        ks_p=(ks_f, ks_n),
        verdict=verdict_of(median, (mw_f, mw_n)),
    )


def overall_verdict(verdicts: list[str]) -> str:
    """One word for a set of parameter verdicts: the one all decided parameters share
    (LIKE_FILL or LIKE_NATURAL), else "mixed" when they disagree, else CANNOT_TELL."""
    decided = {v for v in verdicts if v != CANNOT_TELL}
    if not decided:
        return CANNOT_TELL
    if len(decided) == 1:
        return decided.pop()
    return "mixed"
