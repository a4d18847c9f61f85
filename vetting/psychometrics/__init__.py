"""vetting.psychometrics: pure published psychometric methods (no I/O, no other layer).

Every function rejects impossible input with PsychometricsError (a ValueError) naming the
argument and its allowed range. See docs/methods.md, Part 1, for formulas and sources.
"""

from vetting.psychometrics.drift import CAVEAT as DRIFT_CAVEAT
from vetting.psychometrics.drift import NormDrift, norm_drift
from vetting.psychometrics.error import (
    band_half_width,
    confidence_band,
    confidence_fraction,
    cut_band,
    se_difference,
    sem,
    spearman_brown,
    spearman_brown_length,
    z_for_confidence,
)
from vetting.psychometrics.errors import PsychometricsError
from vetting.psychometrics.impact import (
    FOUR_FIFTHS,
    ImpactLimit,
    expected_impact,
    four_fifths,
    impact_ratio,
    max_selection_ratio_for_floor,
)
from vetting.psychometrics.planning import months_to_gather, n_for_validity
from vetting.psychometrics.scales import (
    TablePercentile,
    nce_from_z,
    percentile_from_table,
    percentile_from_z,
    percentiles_from_table,
    raw_from_z,
    standard_scores,
    stanine_from_z,
    sten_from_z,
    t_from_z,
    z_from_percentile,
    z_from_raw,
    z_from_t,
)
from vetting.psychometrics.utility import (
    Utility,
    bcg_utility,
    bvn_cdf,
    cut_z_for_selection_ratio,
    naylor_shine,
    taylor_russell,
)
from vetting.psychometrics.validity import (
    CONSERVATIVE_RULE,
    ConservativeValidity,
    MetaAnalysis,
    bare_bones_meta,
    conservative_validity,
    correct_attenuation,
    fisher_interval,
    range_restriction_case2,
)

__all__ = [
    "CONSERVATIVE_RULE",
    "DRIFT_CAVEAT",
    "FOUR_FIFTHS",
    "ConservativeValidity",
    "ImpactLimit",
    "MetaAnalysis",
    "NormDrift",
    "PsychometricsError",
    "TablePercentile",
    "Utility",
    "band_half_width",
    "bare_bones_meta",
    "bcg_utility",
    "bvn_cdf",
    "confidence_band",
    "confidence_fraction",
    "conservative_validity",
    "correct_attenuation",
    "cut_band",
    "cut_z_for_selection_ratio",
    "expected_impact",
    "fisher_interval",
    "four_fifths",
    "impact_ratio",
    "max_selection_ratio_for_floor",
    "months_to_gather",
    "n_for_validity",
    "naylor_shine",
    "nce_from_z",
    "norm_drift",
    "percentile_from_table",
    "percentile_from_z",
    "percentiles_from_table",
    "range_restriction_case2",
    "raw_from_z",
    "se_difference",
    "sem",
    "spearman_brown",
    "spearman_brown_length",
    "standard_scores",
    "stanine_from_z",
    "sten_from_z",
    "t_from_z",
    "taylor_russell",
    "z_for_confidence",
    "z_from_percentile",
    "z_from_raw",
    "z_from_t",
]
