"""`vetting calc`: the headless figures, their JSON keys and their errors.

Expected values come from outside the project: scipy.stats as reference library, the
Taylor-Russell (1939) tables, the Uniform Guidelines' four-fifths rule and hand computation of
published formulas (each named beside its check).
"""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import pytest
from scipy.stats import multivariate_normal, norm

from vetting.cli.main import run

VETTING = Path(sys.executable).with_name("vetting")


def calc_json(capsys, *argv: str) -> dict:
    status = run(["calc", *argv, "--json"])
    out = capsys.readouterr()
    assert status == 0, out.err
    return json.loads(out.out)


def calc_error(capsys, *argv: str) -> str:
    with pytest.raises(SystemExit) as exc:  # argparse-level problems exit via SystemExit(2)
        status = run(["calc", *argv])
        raise SystemExit(status)
    assert exc.value.code == 2
    out = capsys.readouterr()
    assert out.out == ""
    return out.err


def test_scores_keys_and_values(capsys):
    data = calc_json(capsys, "scores", "--mean", "100", "--sd", "15", "--raw", "115")
    assert {"z", "t", "stanine", "sten", "nce", "percentile"} <= set(data)
    assert data["z"] == pytest.approx(1.0)
    assert data["t"] == pytest.approx(60.0)  # T = 50 + 10z
    assert data["stanine"] == 7  # z 1.0 lies in 0.75..1.25 (stanine boundaries)
    assert data["sten"] == 8  # sten = 5.5 + 2z = 7.5 -> boundary, goes up
    assert data["nce"] == pytest.approx(71.06)  # 50 + 21.06 z
    assert data["percentile"] == pytest.approx(100 * norm.cdf(1.0))  # scipy reference


def test_success_matches_taylor_russell_table_and_scipy(capsys):
    # Taylor & Russell (1939): base rate .50, r .50, SR .10 -> .84 (table value, from memory)
    data = calc_json(capsys, "success", "--validity", "0.5", "--base-rate", "0.5", "--selection-ratio", "0.1")
    assert data["success_rate"] == pytest.approx(0.84, abs=0.005)
    ref = multivariate_normal([0, 0], [[1, 0.5], [0.5, 1]]).cdf([norm.ppf(0.1), 0.0]) / 0.1
    assert data["success_rate"] == pytest.approx(ref, abs=1e-8)
    assert "caution" in data and "adverse impact" in data["caution"]


def test_impact_keys_and_values(capsys):
    # d = 1 at a cut passing half the reference group: focal rate = area above +1 SD = .1587
    # (normal table); ratio .317 < 4/5 -> rule not met (29 CFR 1607.4(D)).
    data = calc_json(capsys, "impact", "--d", "1", "--reference-pass-rate", "0.5")
    assert data["focal_pass_rate"] == pytest.approx(0.1587, abs=1e-4)
    assert data["impact_ratio"] == pytest.approx(0.3173, abs=1e-4)
    assert data["four_fifths_met"] is False
    small = calc_json(capsys, "impact", "--d", "0.1", "--reference-pass-rate", "0.9")
    assert small["four_fifths_met"] is True
    assert small["focal_pass_rate"] == pytest.approx(norm.sf(norm.isf(0.9), loc=-0.1))


def test_impact_floor(capsys):
    data = calc_json(capsys, "impact", "--d", "0.5", "--reference-pass-rate", "0.5", "--floor", "0.8")
    p = data["floor"]["min_reference_pass_rate"]
    focal = norm.sf(norm.isf(p), loc=-0.5)  # scipy reference at the reported limit
    assert focal / p == pytest.approx(0.8, abs=1e-8)


def test_sem_keys_and_values(capsys):
    # SEM = 15·√(1 − .91) = 4.5; 95% half-width 1.96 × 4.5 = 8.82 (hand, Gulliksen 1950 formula)
    data = calc_json(capsys, "sem", "--sd", "15", "--reliability", "0.91")
    assert data["sem"] == pytest.approx(4.5)
    assert data["band_half_width"] == pytest.approx(8.82, abs=0.005)
    pct = calc_json(capsys, "sem", "--sd", "15", "--reliability", "0.91", "--confidence", "90", "--score", "100")
    assert pct["band_half_width"] == pytest.approx(1.645 * 4.5, abs=0.005)  # normal table 1.645
    assert pct["score_band"] == pytest.approx([100 - 1.6449 * 4.5, 100 + 1.6449 * 4.5], abs=0.005)


def test_meta_keys_and_values(capsys):
    # Hand computation of the Hunter & Schmidt (2004, ch. 3) equations (see
    # tests/psychometrics/test_validity.py for the working): r̄ .29, S²r .0089, S²e .0067651.
    data = calc_json(capsys, "meta", "--r", ".2", ".3", ".1", ".4", "--n", "100", "200", "50", "150")
    for key in ("mean_r", "var_observed", "var_sampling_error", "sd_residual", "credibility_80",
                "pct_variance_sampling_error"):
        assert key in data
    assert data["mean_r"] == pytest.approx(0.29)
    assert data["var_observed"] == pytest.approx(0.0089)
    assert data["var_sampling_error"] == pytest.approx(0.0067651, abs=1e-7)
    assert data["sd_residual"] == pytest.approx(math.sqrt(0.0089 - 0.0067651), abs=1e-6)
    assert len(data["credibility_80"]) == 2
    assert data["credibility_80"][0] == pytest.approx(0.29 - 1.28 * 0.046205, abs=1e-3)
    assert data["pct_variance_sampling_error"] == pytest.approx(76.01, abs=0.01)


def test_utility_keys_and_values(capsys):
    # Brogden-Cronbach-Gleser, hand computation: 10·2·.5·10000·φ(.8416)/.2 − 50·20 = 138,980.
    data = calc_json(capsys, "utility", "--validity", "0.5", "--selection-ratio", "0.2", "--hires", "10",
                     "--tenure", "2", "--sdy", "10000", "--applicants", "50", "--cost", "20")
    assert data["utility"] == pytest.approx(138_980, abs=5)
    assert data["mean_criterion_z"] == pytest.approx(0.5 * norm.pdf(norm.isf(0.2)) / 0.2)


def test_other_methods(capsys):
    # Spearman-Brown (1910): doubling .60 -> .75; Case II (Thorndike 1949) .25, U 1.5 -> .3612;
    # Cohen (1988, Table 3.4.1, from memory) r .30 -> 85; Flynn (1987) 3 points a decade.
    assert calc_json(capsys, "spearman-brown", "--reliability", ".6", "--factor", "2")["predicted_reliability"] == pytest.approx(0.75)
    assert calc_json(capsys, "spearman-brown", "--reliability", ".6", "--target", ".75")["length_factor"] == pytest.approx(2.0)
    assert calc_json(capsys, "range", "--r", ".25", "--u", "1.5")["corrected_r"] == pytest.approx(0.3612, abs=1e-4)
    assert calc_json(capsys, "attenuation", "--r", ".3", "--criterion-reliability", ".52")["corrected_r"] == pytest.approx(0.4160, abs=1e-4)
    size = calc_json(capsys, "sample-size", "--validity", ".3", "--hires-per-year", "40")
    assert size["n"] == 85 and size["months"] == pytest.approx(25.5)
    drift = calc_json(capsys, "drift", "--norm-year", "1996", "--as-of", "2026")
    assert drift["iq_points"] == pytest.approx(9.0) and "estimate" in drift["caveat"]
    ff = calc_json(capsys, "four-fifths", "--focal-rate", ".48", "--reference-rate", ".6")
    assert ff["impact_ratio"] == pytest.approx(0.8) and ff["four_fifths_met"] is True  # "less than" 4/5 only
    pct = calc_json(capsys, "percentile", "--raw", "15", "--row", "20=10", "60=20")
    assert pct["percentile"] == pytest.approx(40.0) and pct["in_range"] is True


def test_human_readable_output_carries_the_caution(capsys):
    assert run(["calc", "impact", "--d", "0.8", "--reference-pass-rate", "0.3"]) == 0
    out = capsys.readouterr().out
    assert "impact ratio" in out and "NOT met" in out
    assert "local validation" in out and "accommodations" in out


@pytest.mark.parametrize(
    "argv, words",
    [
        (["sem", "--sd", "15", "--reliability", "1.2"], "--reliability: reliability must be between 0 and 1"),
        (["sem", "--sd", "0", "--reliability", ".9"], "--sd: sd must be greater than 0"),
        (["sem", "--sd", "10", "--reliability", ".9", "--confidence", "100"], "--confidence"),
        (["success", "--validity", ".3", "--base-rate", ".5", "--selection-ratio", "0"], "--selection-ratio"),
        (["success", "--validity", ".3", "--base-rate", "1", "--selection-ratio", ".5"], "--base-rate"),
        (["meta", "--r", ".3", "--n", "-5"], "--n: ns must be greater than 3"),
        (["meta", "--r", ".3", ".2", "--n", "50"], "same number of studies"),
        (["utility", "--validity", ".3", "--selection-ratio", ".2", "--hires", "60", "--tenure", "1",
          "--sdy", "100", "--applicants", "50", "--cost", "1"], "applicants must be at least hires"),
        (["impact", "--d", "0.5", "--reference-pass-rate", "0"], "--reference-pass-rate"),
        (["scores", "--mean", "100", "--sd", "abc", "--raw", "1"], "--sd"),
        (["scores", "--mean", "100", "--sd", "nan", "--raw", "1"], "--sd"),
        (["percentile", "--raw", "1", "--row", "20-10"], "PERCENTILE=RAW"),
    ],
)
def test_bad_input_exits_2_naming_the_option(capsys, argv, words):
    assert words in calc_error(capsys, *argv)


def test_real_process_json_and_error():
    ok = subprocess.run(
        [str(VETTING), "calc", "success", "--validity", "0", "--base-rate", "0.3", "--selection-ratio", "0.2", "--json"],
        capture_output=True, text=True, timeout=60,
    )
    assert ok.returncode == 0, ok.stderr
    assert json.loads(ok.stdout)["success_rate"] == pytest.approx(0.3)  # r = 0: base rate (Taylor & Russell)
    bad = subprocess.run(
        [str(VETTING), "calc", "sem", "--sd", "10", "--reliability", "1.2", "--json"],
        capture_output=True, text=True, timeout=60,
    )
    assert bad.returncode == 2
    assert bad.stdout == ""
    assert "--reliability" in bad.stderr and "between 0 and 1" in bad.stderr
