"""grouped_validity: the bare-bones meta-analysis and the conservative validity rule of many
groups of studies in one call must give each group what bare_bones_meta / conservative_validity
give it alone (Hunter & Schmidt, 2004, Methods of Meta-Analysis, 2nd ed., ch. 3)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from vetting.psychometrics import PsychometricsError
from vetting.psychometrics.validity import bare_bones_meta, conservative_validity, grouped_validity

FIELDS = ("k", "total_n", "mean_n", "mean_r", "var_observed", "var_sampling_error", "var_residual", "sd_residual", "se_mean_r")


def _groups(seed: int, count: int):
    rng = np.random.default_rng(seed)
    sizes = rng.integers(1, 14, size=count)
    r = rng.uniform(-0.7, 0.85, size=sizes.sum())
    n = rng.integers(4, 2000, size=sizes.sum()).astype(float)
    return r, n, sizes


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_every_group_equals_the_one_group_functions(seed):
    r, n, sizes = _groups(seed, 400)
    grouped = grouped_validity(r, n, sizes)
    metas = grouped.metas()
    start = 0
    for g, k in enumerate(sizes):
        rs, ns = r[start:start + k], n[start:start + k]
        start += k
        alone, cons = bare_bones_meta(rs, ns), conservative_validity(rs, ns)
        for name in FIELDS:
            assert getattr(metas[g], name) == pytest.approx(getattr(alone, name), rel=1e-12, abs=1e-15), name
        assert metas[g] == grouped.meta(g)
        assert metas[g].credibility_80 == pytest.approx(alone.credibility_80, rel=1e-12)
        assert metas[g].confidence_95 == pytest.approx(alone.confidence_95, rel=1e-12)
        pct, pct_alone = metas[g].pct_variance_sampling_error, alone.pct_variance_sampling_error
        assert pct == pct_alone or pct == pytest.approx(pct_alone, rel=1e-9)
        assert grouped.conservative[g] == pytest.approx(cons.value, rel=1e-12, abs=1e-15)
        assert grouped.basis[g] == cons.basis
        assert bool(grouped.floored[g]) == cons.floored


def test_hand_worked_example_in_a_group_of_groups():
    # The four studies worked by hand in test_validity.py (H&S 2004, ch. 3 equations): r̄ = .29,
    # S²r = .0089, S²e = .0067651, Sρ = .046205, 80% credibility .2309 .. .3491; the 95% CI of the
    # mean r is .29 ± 1.96·√(.0089/4) = .1975 .. .3825; the conservative figure is the lower of
    # .2309 and .1975, i.e. .1975 (basis "confidence": the small total N is the binding limit).
    # A single study (r = .30, N = 100) beside it gets Fisher's lower 95% limit:
    # tanh(atanh .30 − 1.96/√97) = tanh(.30952 − .19901) = tanh(.11051) = .1101 (hand).
    grouped = grouped_validity([0.30, 0.20, 0.30, 0.10, 0.40], [100, 100, 200, 50, 150], [1, 4])
    meta = grouped.meta(1)
    assert meta.mean_r == pytest.approx(0.29)
    assert meta.var_observed == pytest.approx(0.0089)
    assert meta.sd_residual == pytest.approx(0.046205, abs=1e-6)
    assert meta.credibility_80[0] == pytest.approx(0.2309, abs=1e-3)
    assert grouped.conservative[1] == pytest.approx(0.1975, abs=2e-4)
    assert grouped.basis[1] == "confidence"
    assert grouped.conservative[0] == pytest.approx(0.1101, abs=1e-4)
    assert grouped.basis[0] == "single-study"
    # one study: no spread at all, so sampling error "explains" everything
    assert grouped.meta(0).var_observed == 0.0
    assert grouped.meta(0).pct_variance_sampling_error == math.inf


def test_negative_figures_are_floored_at_zero():
    grouped = grouped_validity([-0.2, -0.1, 0.05], [200, 300, 400], [2, 1])
    assert list(grouped.conservative) == [0.0, 0.0]
    assert list(grouped.floored) == [True, True]


@pytest.mark.parametrize(
    "rs, ns, sizes, words",
    [
        ([0.2, 1.3], [50, 50], [2], "rs"),  # a correlation of 1.3
        ([0.2, 0.3], [50, 0], [2], "ns"),  # a sample of 0
        ([0.2, 0.3], [50, 50], [1, 0], "group_sizes"),  # an empty group
        ([0.2, 0.3], [50, 50], [3], "group_sizes"),  # sizes not adding up
    ],
)
def test_bad_input_is_refused_with_the_argument_named(rs, ns, sizes, words):
    with pytest.raises(PsychometricsError, match=words):
        grouped_validity(rs, ns, sizes)
