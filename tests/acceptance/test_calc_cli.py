"""Issue 3 from the outside: every `vetting calc` subcommand and JSON key named in the issue,
with values recomputed here independently (scipy.stats / math), not copied from our output."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from tests.acceptance.conftest import run_cli, run_inproc


def test_scores_keys_and_values_subprocess(tmp_path):
    res = run_cli(["calc", "scores", "--mean", "100", "--sd", "15", "--raw", "115", "--json"], tmp_path / "h")
    assert res.code == 0, res.err
    data = res.json()
    assert {"z", "t", "stanine", "sten", "nce", "percentile"} <= set(data)
    assert data["z"] == pytest.approx(1.0)
    assert data["t"] == pytest.approx(60.0)  # T = 50 + 10z (McCall, 1922)
    # Stanine 7 covers z 0.75..1.25 (boundaries at +-0.25, +-0.75, +-1.25, +-1.75 SD, as in issue 3).
    assert data["stanine"] == 7
    # Sten: mean 5.5, SD 2 (Canfield, 1951). 5.5 + 2z = 7.5 sits on the 7/8 boundary; stens are
    # reported as whole numbers in practice (common practice, no published source) and the
    # documented rule (docs/methods.md: "a boundary goes up") gives 8.
    assert isinstance(data["sten"], int) and data["sten"] == 8
    assert data["nce"] == pytest.approx(50 + 21.06 * 1.0)  # NCE = 50 + 21.06 z
    assert data["percentile"] == pytest.approx(100 * stats.norm.cdf(1.0), abs=1e-6)  # 84.13


@pytest.mark.parametrize("z", [-2.3, -1.6, -1.0, -0.5, -0.1, 0.0, 0.3, 0.8, 1.3, 1.8, 2.4])
def test_scores_against_independent_bands(capsys, z):
    mean, sd = 50.0, 10.0
    raw = mean + z * sd
    data = run_inproc(["calc", "scores", "--mean", mean, "--sd", sd, "--raw", repr(raw), "--json"], capsys).json()
    assert data["z"] == pytest.approx(z)
    assert data["t"] == pytest.approx(50 + 10 * z)
    assert data["nce"] == pytest.approx(50 + 21.06 * z, abs=0.01)
    assert data["percentile"] == pytest.approx(100 * stats.norm.cdf(z), abs=1e-6)
    # Stanine: 1..9, half-SD bands centred on 5 (boundaries from issue 3); sten: 1..10, half-SD bands.
    stanine = int(np.clip(np.searchsorted([-1.75, -1.25, -0.75, -0.25, 0.25, 0.75, 1.25, 1.75], z, side="right") + 1, 1, 9))
    sten = int(np.clip(np.searchsorted([-2, -1.5, -1, -0.5, 0, 0.5, 1, 1.5, 2], z, side="right") + 1, 1, 10))
    assert data["stanine"] == stanine
    assert data["sten"] == sten


def test_stanine_percentages(capsys):
    """Stanine shares 4-7-12-17-20-17-12-7-4 % of a normal group (Anastasi & Urbina, 1997,
    Psychological Testing, 7th ed., ch. 3; values from memory). Checked by converting the
    normal quantiles of a fine grid through the command."""
    counts = np.zeros(10)
    for p in np.linspace(0.005, 0.995, 100):
        z = stats.norm.ppf(p)
        s = run_inproc(["calc", "scores", "--mean", "0", "--sd", "1", "--raw", repr(float(z)), "--json"], capsys).json()["stanine"]
        counts[s] += 1
    assert list(counts[1:]) == [4, 7, 12, 17, 20, 17, 12, 7, 4]


def test_success_rate_against_bivariate_normal_and_table(tmp_path, capsys):
    res = run_cli(
        ["calc", "success", "--validity", "0.5", "--base-rate", "0.5", "--selection-ratio", "0.2", "--json"], tmp_path / "h"
    )
    assert res.code == 0, res.err
    rate = res.json()["success_rate"]
    # Taylor & Russell (1939), table for base rate .50: r = .50, SR = .20 -> .78 (value from memory).
    assert rate == pytest.approx(0.78, abs=0.006)
    for r, base, sr in [(0.5, 0.5, 0.2), (0.3, 0.3, 0.5), (0.65, 0.6, 0.1), (0.0, 0.4, 0.3), (0.2, 0.05, 0.9)]:
        got = run_inproc(
            ["calc", "success", "--validity", r, "--base-rate", base, "--selection-ratio", sr, "--json"], capsys
        ).json()["success_rate"]
        xc, yc = stats.norm.ppf(1 - sr), stats.norm.ppf(1 - base)
        both = stats.multivariate_normal(mean=[0, 0], cov=[[1, r], [r, 1]]).cdf([-xc, -yc])
        assert got == pytest.approx(both / sr, abs=2e-4), (r, base, sr)


def test_impact_against_normal_shift(capsys):
    for d, p in [(0.5, 0.5), (1.0, 0.3), (0.2, 0.8), (0.0, 0.5), (-0.3, 0.4)]:
        data = run_inproc(["calc", "impact", "--d", d, "--reference-pass-rate", p, "--json"], capsys).json()
        cut = stats.norm.ppf(1 - p)
        focal = stats.norm.sf(cut + d)  # focal mean d SD lower (positive d: focal lower)
        assert data["focal_pass_rate"] == pytest.approx(focal, abs=1e-9)
        assert data["impact_ratio"] == pytest.approx(focal / p, abs=1e-9)
        # Uniform Guidelines (1978), 29 CFR 1607.4(D): a rate below four-fifths (80%) of the
        # highest group's rate is evidence of adverse impact.
        assert data["four_fifths_met"] is bool(focal / p >= 0.8)


def test_sem_and_band(capsys, tmp_path):
    res = run_cli(["calc", "sem", "--sd", "15", "--reliability", "0.91", "--json"], tmp_path / "h")
    assert res.code == 0, res.err
    data = res.json()
    # SEM = SD * sqrt(1 - r): 15 * sqrt(.09) = 4.5 (Gulliksen, 1950, Theory of Mental Tests, ch. 2).
    assert data["sem"] == pytest.approx(4.5)
    assert data["band_half_width"] == pytest.approx(4.5 * stats.norm.ppf(0.975))  # default 95%
    data = run_inproc(["calc", "sem", "--sd", "10", "--reliability", "0.84", "--confidence", "0.68", "--json"], capsys).json()
    assert data["sem"] == pytest.approx(4.0)
    assert data["band_half_width"] == pytest.approx(4.0 * stats.norm.ppf(0.84))


def test_meta_bare_bones(capsys, tmp_path):
    rs, ns = [0.20, 0.35, 0.10, 0.28], [120, 80, 200, 60]
    res = run_cli(["calc", "meta", "--r", *rs, "--n", *ns, "--json"], tmp_path / "h")
    assert res.code == 0, res.err
    data = res.json()
    # Hunter & Schmidt (2004), Methods of Meta-Analysis, 2nd ed., ch. 3 (bare-bones):
    r, n = np.array(rs), np.array(ns)
    mean_r = float((n * r).sum() / n.sum())
    var_obs = float((n * (r - mean_r) ** 2).sum() / n.sum())
    var_e = (1 - mean_r**2) ** 2 / (n.mean() - 1)
    var_res = max(var_obs - var_e, 0.0)
    assert data["mean_r"] == pytest.approx(mean_r)
    assert data["var_observed"] == pytest.approx(var_obs)
    assert data["var_sampling_error"] == pytest.approx(var_e)
    assert data["sd_residual"] == pytest.approx(math.sqrt(var_res))
    lo, hi = data["credibility_80"]
    z80 = stats.norm.ppf(0.9)
    assert lo == pytest.approx(mean_r - z80 * math.sqrt(var_res))
    assert hi == pytest.approx(mean_r + z80 * math.sqrt(var_res))
    assert var_e < var_obs  # chosen so: the share is below 100 % and needs no capping
    assert data["pct_variance_sampling_error"] == pytest.approx(100 * var_e / var_obs)


def test_utility_bcg(capsys, tmp_path):
    args = ["--validity", "0.4", "--selection-ratio", "0.2", "--hires", "10", "--tenure", "2",
            "--sdy", "10000", "--applicants", "50", "--cost", "20", "--json"]
    res = run_cli(["calc", "utility", *args], tmp_path / "h")
    assert res.code == 0, res.err
    data = res.json()
    # Naylor & Shine (1965): mean standard criterion score of those selected = r * phi(z_c) / SR.
    zc = stats.norm.ppf(1 - 0.2)
    mz = 0.4 * stats.norm.pdf(zc) / 0.2
    assert data["mean_criterion_z"] == pytest.approx(mz)
    # Brogden (1949), Cronbach & Gleser (1965): hires * tenure * SDy * mean z - applicants * cost.
    assert data["utility"] == pytest.approx(10 * 2 * 10000 * mz - 50 * 20)


@pytest.mark.parametrize(
    "argv",
    [
        ["calc", "sem", "--sd", "10", "--reliability", "1.2", "--json"],
        ["calc", "sem", "--sd", "0", "--reliability", "0.8"],
        ["calc", "scores", "--mean", "100", "--sd", "0", "--raw", "115"],
        ["calc", "success", "--validity", "0.3", "--base-rate", "0.5", "--selection-ratio", "0", "--json"],
        ["calc", "success", "--validity", "1.5", "--base-rate", "0.5", "--selection-ratio", "0.3"],
        ["calc", "impact", "--d", "0.5", "--reference-pass-rate", "1.5"],
        ["calc", "meta", "--r", "0.2", "0.3", "--n", "-5", "40"],
        ["calc", "meta", "--r", "0.2", "0.3", "--n", "50"],
        ["calc", "utility", "--validity", "0.4", "--selection-ratio", "0.2", "--hires", "10", "--tenure", "2",
         "--sdy", "10000", "--applicants", "-50", "--cost", "20"],
        ["calc", "scores", "--mean", "100", "--sd", "15", "--raw", "abc"],
    ],
)
def test_impossible_input_exit_2(capsys, argv):
    res = run_inproc(argv, capsys)
    assert res.code == 2, (argv, res.code, res.out)
    assert res.err.strip() and res.out == ""
    assert "Traceback" not in res.err


def test_impossible_input_exit_2_subprocess(tmp_path):
    res = run_cli(["calc", "sem", "--sd", "10", "--reliability", "1.2", "--json"], tmp_path / "h")
    assert res.code == 2 and "--reliability" in res.err and res.out == ""
