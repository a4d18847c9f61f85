"""Validity: corrections and bare-bones psychometric meta-analysis.

* Correction for attenuation: Spearman (1904); criterion-only ("operational validity") or
  both measures (Hunter & Schmidt, 2004, *Methods of Meta-Analysis*, 2nd ed., ch. 3).
* Thorndike Case II for direct range restriction on the predictor: Thorndike (1949),
  *Personnel Selection* ("Case II"); the same formula as Pearson (1903).
* Bare-bones meta-analysis: Hunter & Schmidt (2004), ch. 3 (sample-size-weighted mean r,
  weighted observed variance, sampling-error variance (1 − r̄²)² / (N̄ − 1), residual
  variance, 80% credibility interval).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
from vetting.psychometrics import _normal as norm

from vetting.psychometrics import _checks as ck
from vetting.psychometrics.errors import PsychometricsError

Z80 = float(norm.ppf(0.90))  # two-sided 80% -> 1.2816 (Hunter & Schmidt round to 1.28)
Z95 = float(norm.ppf(0.975))  # 1.95996


def correct_attenuation(r_xy: Any, r_yy: Any, r_xx: Any = None) -> Any:
    """Disattenuated correlation: r_xy / √r_yy (criterion only), or r_xy / √(r_xx · r_yy).

    A result beyond ±1 means the inputs are inconsistent (a reliability too low for the
    observed correlation, or reliabilities of the wrong kind); that is rejected, not clipped.
    """
    scalar = ck.is_scalar(r_xy, r_yy, r_xx)
    r = ck.correlation(r_xy, "r_xy")
    ryy = ck.in_range(r_yy, "r_yy", 0.0, 1.0, lo_open=True)
    denom = np.sqrt(ryy)
    if r_xx is not None:
        denom = denom * np.sqrt(ck.in_range(r_xx, "r_xx", 0.0, 1.0, lo_open=True))
    result = r / denom
    if np.any(np.abs(result) > 1.0 + 1e-12):
        raise PsychometricsError(
            "the corrected correlation would exceed 1 in absolute value: r_xy is too large for "
            "the reliabilities given (check that they are of the right kind and sample)"
        )
    return ck.out(np.clip(result, -1.0, 1.0), scalar)


def range_restriction_case2(r: Any, u: Any) -> Any:
    """Thorndike Case II: r·U / √(1 + r²(U² − 1)), U = unrestricted SD / restricted SD.

    Assumes direct selection on the predictor, linearity and homoscedasticity. U < 1 (a
    sample more spread than the population) is allowed and shrinks r.
    """
    scalar = ck.is_scalar(r, u)
    rr = ck.correlation(r, "r")
    uu = ck.positive(u, "u")
    return ck.out(rr * uu / np.sqrt(1.0 + rr**2 * (uu**2 - 1.0)), scalar)


def fisher_interval(r: float, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Confidence interval for one correlation via Fisher's z: tanh(atanh r ± z_C / √(n − 3))."""
    rr = float(ck.correlation(r, "r", closed=False))
    nn = float(ck.in_range(n, "n", 3.0, lo_open=True))
    c = float(ck.probability(confidence, "confidence"))
    half = norm.ppf((1.0 + c) / 2.0) / math.sqrt(nn - 3.0)
    z = math.atanh(rr)
    return math.tanh(z - half), math.tanh(z + half)


@dataclass(frozen=True)
class MetaAnalysis:
    """Bare-bones meta-analysis results (Hunter & Schmidt, 2004, ch. 3)."""

    k: int
    total_n: int
    mean_n: float
    mean_r: float
    var_observed: float
    var_sampling_error: float
    var_residual: float  # floored at 0
    sd_residual: float
    pct_variance_sampling_error: float  # may exceed 100 (second-order sampling error); inf if var_observed is 0
    credibility_80: tuple[float, float]
    confidence_95: tuple[float, float]
    se_mean_r: float


def _studies(rs: Sequence[float], ns: Sequence[float]) -> tuple[np.ndarray, np.ndarray]:
    r = ck.correlation(rs, "rs", closed=False).reshape(-1)
    n = ck.in_range(ns, "ns", 3.0, lo_open=True, hint=" (each study needs at least 4 people)").reshape(-1)
    if (n != np.round(n)).any():  # the method: no per-call wrapper overhead
        raise PsychometricsError("ns must be whole numbers of people")
    if r.size != n.size:
        raise PsychometricsError(f"rs and ns must have the same length; got {r.size} and {n.size}")
    return r, n


def bare_bones_meta(rs: Sequence[float], ns: Sequence[float]) -> MetaAnalysis:
    """Bare-bones meta-analysis of k correlations rs with sample sizes ns.

    r̄ = ΣNr/ΣN;  S²r = ΣN(r − r̄)²/ΣN;  S²e = (1 − r̄²)²/(N̄ − 1);  S²ρ = max(0, S²r − S²e);
    80% credibility interval r̄ ± 1.2816·Sρ;  95% confidence interval for r̄: r̄ ± 1.96·Sr/√k
    (Hunter & Schmidt, 2004, ch. 3 and 5). For k = 1 the confidence interval is Fisher's
    interval for the single r, and the credibility interval is degenerate (r, r).
    """
    r, n = _studies(rs, ns)
    k = int(r.size)
    total = float(n.sum())
    mean_n = total / k
    mean_r = float(np.sum(n * r) / total)
    # one study has no spread: exactly 0 (the formula leaves a rounding residue of ~1e-32)
    var_obs = float(np.sum(n * (r - mean_r) ** 2) / total) if k > 1 else 0.0
    var_e = (1.0 - mean_r**2) ** 2 / (mean_n - 1.0)
    var_res = max(0.0, var_obs - var_e)
    sd_res = math.sqrt(var_res)
    pct = 100.0 * var_e / var_obs if var_obs > 0 else math.inf
    cred = (max(-1.0, mean_r - Z80 * sd_res), min(1.0, mean_r + Z80 * sd_res))
    if k == 1:
        se = math.sqrt(var_e)
        conf = fisher_interval(mean_r, int(total), 0.95)
    else:
        se = math.sqrt(var_obs / k)
        conf = (max(-1.0, mean_r - Z95 * se), min(1.0, mean_r + Z95 * se))
    return MetaAnalysis(
        k=k,
        total_n=int(total),
        mean_n=mean_n,
        mean_r=mean_r,
        var_observed=var_obs,
        var_sampling_error=var_e,
        var_residual=var_res,
        sd_residual=sd_res,
        pct_variance_sampling_error=pct,
        credibility_80=cred,
        confidence_95=conf,
        se_mean_r=se,
    )


CONSERVATIVE_RULE = (
    "k >= 2: the lower end of the 80% credibility interval of a bare-bones meta-analysis "
    "(the '90% credibility value', Hunter & Schmidt, 2004, ch. 3), but no higher than the lower "
    "95% confidence limit of the mean r (which guards against a small total N); k = 1: the lower "
    "95% confidence limit of the single r by Fisher's z. Floored at 0."
)


@dataclass(frozen=True)
class ConservativeValidity:
    value: float
    rule: str
    basis: str  # "credibility", "confidence" or "single-study"
    floored: bool  # True when the figure would have been negative and was set to 0
    meta: MetaAnalysis | None


def conservative_validity(rs: Sequence[float], ns: Sequence[float]) -> ConservativeValidity:
    """One defensible validity figure for decisions (rule in CONSERVATIVE_RULE)."""
    r, n = _studies(rs, ns)
    if r.size == 1:
        lo, _ = fisher_interval(float(r[0]), int(n[0]), 0.95)
        value, basis, meta = lo, "single-study", None
    else:
        meta = bare_bones_meta(r, n)
        cred_lo, conf_lo = meta.credibility_80[0], meta.confidence_95[0]
        value, basis = (cred_lo, "credibility") if cred_lo <= conf_lo else (conf_lo, "confidence")
    floored = value < 0.0
    return ConservativeValidity(max(0.0, value), CONSERVATIVE_RULE, basis, floored, meta)


@dataclass(frozen=True)
class GroupedValidity:
    """`bare_bones_meta` and `conservative_validity` for many sets of studies at once.

    Every field is an array with one element per group (per instrument, say), in group order.
    The formulas are those of `bare_bones_meta` and `conservative_validity`, applied to each
    group's studies; `meta(g)` gives group g's MetaAnalysis (for k = 1 the single-study
    summary, as `bare_bones_meta` gives it).
    """

    k: np.ndarray
    total_n: np.ndarray
    mean_n: np.ndarray
    mean_r: np.ndarray
    var_observed: np.ndarray
    var_sampling_error: np.ndarray
    var_residual: np.ndarray
    sd_residual: np.ndarray
    pct_variance_sampling_error: np.ndarray
    credibility_lo: np.ndarray
    credibility_hi: np.ndarray
    confidence_lo: np.ndarray
    confidence_hi: np.ndarray
    se_mean_r: np.ndarray
    #: the conservative figure (floored at 0), its basis ("credibility", "confidence",
    #: "single-study") and whether it was floored
    conservative: np.ndarray
    basis: np.ndarray
    floored: np.ndarray

    def metas(self) -> list[MetaAnalysis]:
        """Every group's MetaAnalysis, in group order."""
        cols = [
            self.k.tolist(), self.total_n.tolist(), self.mean_n.tolist(), self.mean_r.tolist(),
            self.var_observed.tolist(), self.var_sampling_error.tolist(), self.var_residual.tolist(),
            self.sd_residual.tolist(), self.pct_variance_sampling_error.tolist(),
            self.credibility_lo.tolist(), self.credibility_hi.tolist(),
            self.confidence_lo.tolist(), self.confidence_hi.tolist(), self.se_mean_r.tolist(),
        ]
        return [
            MetaAnalysis(k, total, mean_n, mean_r, vo, ve, vr, sd, pct, (c_lo, c_hi), (f_lo, f_hi), se)
            for k, total, mean_n, mean_r, vo, ve, vr, sd, pct, c_lo, c_hi, f_lo, f_hi, se in zip(*cols)
        ]

    def meta(self, g: int) -> MetaAnalysis:
        return MetaAnalysis(
            k=int(self.k[g]),
            total_n=int(self.total_n[g]),
            mean_n=float(self.mean_n[g]),
            mean_r=float(self.mean_r[g]),
            var_observed=float(self.var_observed[g]),
            var_sampling_error=float(self.var_sampling_error[g]),
            var_residual=float(self.var_residual[g]),
            sd_residual=float(self.sd_residual[g]),
            pct_variance_sampling_error=float(self.pct_variance_sampling_error[g]),
            credibility_80=(float(self.credibility_lo[g]), float(self.credibility_hi[g])),
            confidence_95=(float(self.confidence_lo[g]), float(self.confidence_hi[g])),
            se_mean_r=float(self.se_mean_r[g]),
        )


def grouped_validity(rs: Sequence[float], ns: Sequence[float], group_sizes: Sequence[int]) -> GroupedValidity:
    """Bare-bones meta-analysis and the conservative validity figure of many groups of studies.

    rs, ns: every group's correlations and sample sizes, one group after another; group_sizes:
    the number of studies in each group (each at least 1). Same rules and formulas as
    `bare_bones_meta` and `conservative_validity` (Hunter & Schmidt, 2004, ch. 3), computed for
    all groups with a few array operations instead of one call per group.
    """
    r, n = _studies(rs, ns) if len(rs) else (np.zeros(0), np.zeros(0))
    sizes = np.asarray(group_sizes, dtype=np.int64).reshape(-1)
    if (sizes < 1).any():
        raise PsychometricsError("group_sizes: every group needs at least one study")
    if int(sizes.sum()) != r.size:
        raise PsychometricsError(f"group_sizes must add up to the number of studies ({r.size}); got {int(sizes.sum())}")
    g = sizes.size
    gid = np.repeat(np.arange(g), sizes)
    k = sizes.astype(float)
    total = np.bincount(gid, weights=n, minlength=g)
    mean_n = total / k
    mean_r = np.bincount(gid, weights=n * r, minlength=g) / total
    var_obs = np.bincount(gid, weights=n * (r - mean_r[gid]) ** 2, minlength=g) / total
    single = sizes == 1
    var_obs[single] = 0.0  # one study: no spread (exactly, as bare_bones_meta gives)
    var_e = (1.0 - mean_r**2) ** 2 / (mean_n - 1.0)
    var_res = np.maximum(0.0, var_obs - var_e)
    sd_res = np.sqrt(var_res)
    with np.errstate(divide="ignore", invalid="ignore"):
        pct = np.where(var_obs > 0, 100.0 * var_e / np.where(var_obs > 0, var_obs, 1.0), math.inf)
    cred_lo = np.maximum(-1.0, mean_r - Z80 * sd_res)
    cred_hi = np.minimum(1.0, mean_r + Z80 * sd_res)
    se = np.where(single, np.sqrt(var_e), np.sqrt(var_obs / k))
    conf_lo = np.maximum(-1.0, mean_r - Z95 * se)
    conf_hi = np.minimum(1.0, mean_r + Z95 * se)
    if single.any():  # Fisher's interval for a single r (as fisher_interval)
        z = np.arctanh(mean_r[single])
        half = Z95 / np.sqrt(total[single] - 3.0)
        conf_lo[single] = np.tanh(z - half)
        conf_hi[single] = np.tanh(z + half)
    use_cred = cred_lo <= conf_lo
    value = np.where(single, conf_lo, np.where(use_cred, cred_lo, conf_lo))
    basis = np.where(single, "single-study", np.where(use_cred, "credibility", "confidence"))
    return GroupedValidity(
        k=sizes, total_n=total.astype(np.int64), mean_n=mean_n, mean_r=mean_r, var_observed=var_obs,
        var_sampling_error=var_e, var_residual=var_res, sd_residual=sd_res,
        pct_variance_sampling_error=pct, credibility_lo=cred_lo, credibility_hi=cred_hi,
        confidence_lo=conf_lo, confidence_hi=conf_hi, se_mean_r=se,
        conservative=np.maximum(0.0, value), basis=basis, floored=value < 0.0,
    )
