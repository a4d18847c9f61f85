"""`vetting calc`: quick figures from the psychometrics engine, for practitioners.

    vetting calc scores --mean M --sd S --raw X [--json]
    vetting calc percentile --raw X --row PCT=RAW ... [--json]
    vetting calc sem --sd S --reliability R [--confidence C] [--score X] [--cut X] [--json]
    vetting calc spearman-brown --reliability R (--factor K | --target T) [--json]
    vetting calc attenuation --r R --criterion-reliability RYY [--predictor-reliability RXX] [--json]
    vetting calc range --r R --u U [--json]
    vetting calc meta --r R1 R2 ... --n N1 N2 ... [--json]
    vetting calc success --validity R --base-rate B --selection-ratio S [--json]
    vetting calc utility --validity R --selection-ratio S --hires H --tenure T --sdy Y
                         --applicants A --cost C [--json]
    vetting calc impact --d D --reference-pass-rate P [--floor F] [--json]
    vetting calc four-fifths --focal-rate F --reference-rate R [--json]
    vetting calc drift --norm-year Y [--as-of Y] [--points-per-decade P] [--json]
    vetting calc sample-size --validity R [--power P] [--alpha A] [--one-sided] [--hires-per-year H] [--json]

Every number comes from vetting.psychometrics; this module only parses, names and prints.
JSON keys are documented in docs/methods.md (Part 1). Impossible input: exit 2, message on stderr
naming the option and the rule.
"""

from __future__ import annotations

import argparse
import datetime as dt
import math
import sys
from typing import Any, Callable

from vetting.cli.common import EXIT_OK, BadInput, print_json


class _LazyPsychometrics:
    """vetting.psychometrics, imported on first use so `vetting --help` need not load scipy."""

    def __getattr__(self, name: str) -> Any:
        from vetting import psychometrics

        return getattr(psychometrics, name)


psy = _LazyPsychometrics()

CAUTION = (
    "Caution: a figure to support, not replace, professional judgement; model-based figures rest "
    "on the assumptions in docs/methods.md. Before using it for decisions about people: monitor "
    "adverse impact in your own applicant flow, seek local validation, make sure users are "
    "qualified, provide accommodations, and follow local employment law and licensed practice."
)


# ---------------------------------------------------------------------------
# Parsing and error helpers
# ---------------------------------------------------------------------------


def _num(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"must be a finite number, got {text!r}")
    return value


def _int(text: str) -> int:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a whole number: {text!r}") from None
    if not math.isfinite(value) or value != int(value):
        raise argparse.ArgumentTypeError(f"must be a whole number, got {text!r}")
    return int(value)


def _row(text: str) -> tuple[float, float]:
    pct, sep, raw = text.partition("=")
    if not sep:
        raise argparse.ArgumentTypeError(f"expected PERCENTILE=RAW, got {text!r}")
    return _num(pct.strip()), _num(raw.strip())


def _engine(call: Callable[[], Any], options: dict[str, str]) -> Any:
    """Run an engine call; turn PsychometricsError into BadInput naming the command-line option.

    `options` maps the engine's argument names to this command's option names.
    """
    try:
        return call()
    except psy.PsychometricsError as exc:
        message = str(exc)
        for name in sorted(options, key=len, reverse=True):
            if message.startswith(name + " "):
                raise BadInput(f"calc: {options[name]}: {message}") from None
        mentioned = [opt for name, opt in options.items() if name in message]
        where = f"{', '.join(dict.fromkeys(mentioned))}: " if mentioned else ""
        raise BadInput(f"calc: {where}{message}") from None


def _fmt(value: Any, digits: int = 4) -> str:
    if value is None:
        return "n/a"
    if isinstance(value, float):
        if math.isinf(value):
            return "infinite" if value > 0 else "-infinite"
        return f"{value:.{digits}f}"
    return str(value)


def _emit(args: argparse.Namespace, data: dict[str, Any], lines: list[str], caution: bool = False) -> int:
    if caution:
        data = {**data, "caution": CAUTION}
    if args.json:
        print_json(data)
    else:
        for line in lines:
            print(line)
        if caution:
            print()
            print(CAUTION)
    return EXIT_OK


# ---------------------------------------------------------------------------
# Registration
# ---------------------------------------------------------------------------


def register(sub: argparse._SubParsersAction) -> None:
    calc = sub.add_parser(
        "calc",
        help="quick psychometric figures (standard scores, SEM, validity, utility, impact ...)",
        description="Quick figures from the published methods vetting uses. See docs/methods.md.",
    )
    calc.set_defaults(func=_no_subcommand, calc_parser=calc)
    cs = calc.add_subparsers(dest="calc_command", metavar="METHOD", parser_class=type(calc))

    def add(name: str, help_text: str, func: Callable[[argparse.Namespace], int]) -> argparse.ArgumentParser:
        p = cs.add_parser(name, help=help_text, description=help_text)
        p.add_argument("--json", action="store_true", help="print JSON (keys in docs/methods.md)")
        p.set_defaults(func=func)
        return p

    p = add("scores", "standard scores for a raw score under normality", cmd_scores)
    p.add_argument("--mean", type=_num, required=True, help="norm-group mean")
    p.add_argument("--sd", type=_num, required=True, help="norm-group standard deviation (> 0)")
    p.add_argument("--raw", type=_num, required=True, help="the raw score")

    p = add("percentile", "percentile rank from an empirical norm table (monotone interpolation)", cmd_percentile)
    p.add_argument("--raw", type=_num, required=True, help="the raw score")
    p.add_argument(
        "--row", type=_row, nargs="+", required=True, metavar="PCT=RAW",
        help="norm-table rows: percentile=raw score (at least two)",
    )

    p = add("sem", "standard error of measurement and a confidence band", cmd_sem)
    p.add_argument("--sd", type=_num, required=True, help="score standard deviation (> 0)")
    p.add_argument("--reliability", type=_num, required=True, help="reliability, 0..1")
    p.add_argument("--confidence", type=_num, default=0.95, help="confidence level, 0.95 or 95 (default 0.95)")
    p.add_argument("--score", type=_num, help="an observed score to put a band around")
    p.add_argument("--cut", type=_num, help="a cut score to put a band around")

    p = add("spearman-brown", "reliability at a changed test length, or the length needed for a target", cmd_sb)
    p.add_argument("--reliability", type=_num, required=True, help="current reliability, 0..1")
    how = p.add_mutually_exclusive_group(required=True)
    how.add_argument("--factor", type=_num, help="length multiplier (2 = twice as long)")
    how.add_argument("--target", type=_num, help="target reliability, 0..1 exclusive")

    p = add("attenuation", "correct a validity for criterion (and optionally predictor) unreliability", cmd_attenuation)
    p.add_argument("--r", type=_num, required=True, help="observed correlation")
    p.add_argument("--criterion-reliability", type=_num, required=True, help="criterion reliability, 0..1")
    p.add_argument("--predictor-reliability", type=_num, help="predictor reliability, 0..1 (omit for operational validity)")

    p = add("range", "Thorndike Case II correction for direct range restriction", cmd_range)
    p.add_argument("--r", type=_num, required=True, help="correlation in the restricted sample")
    p.add_argument("--u", type=_num, required=True, help="unrestricted SD / restricted SD of the predictor (> 0)")

    p = add("meta", "bare-bones meta-analysis of validity coefficients (Hunter & Schmidt)", cmd_meta)
    p.add_argument("--r", type=_num, nargs="+", required=True, metavar="R", help="correlations, one per study")
    p.add_argument("--n", type=_int, nargs="+", required=True, metavar="N", help="sample sizes, same order")

    p = add("success", "Taylor-Russell expected success rate among those selected", cmd_success)
    p.add_argument("--validity", type=_num, required=True, help="validity, -1..1")
    p.add_argument("--base-rate", type=_num, required=True, help="share successful without the test, 0..1 exclusive")
    p.add_argument("--selection-ratio", type=_num, required=True, help="share of applicants selected, 0 < S <= 1")

    p = add("utility", "Brogden-Cronbach-Gleser utility of selecting with the test", cmd_utility)
    p.add_argument("--validity", type=_num, required=True, help="validity, -1..1")
    p.add_argument("--selection-ratio", type=_num, required=True, help="share of applicants selected, 0 < S <= 1")
    p.add_argument("--hires", type=_num, required=True, help="number hired (> 0)")
    p.add_argument("--tenure", type=_num, required=True, help="average tenure, in the time unit of --sdy (> 0)")
    p.add_argument("--sdy", type=_num, required=True, help="SD of job performance in money per time unit (>= 0)")
    p.add_argument("--applicants", type=_num, required=True, help="number of applicants tested (>= hires)")
    p.add_argument("--cost", type=_num, required=True, help="testing cost per applicant (>= 0)")

    p = add("impact", "expected adverse impact for a standardised subgroup difference d", cmd_impact)
    p.add_argument("--d", type=_num, required=True, help="focal mean is d reference SDs lower")
    p.add_argument("--reference-pass-rate", type=_num, required=True, help="share of the reference group passing, 0 < P <= 1")
    p.add_argument("--floor", type=_num, help="also find the most selective cut keeping the ratio >= this (e.g. 0.8)")

    p = add("four-fifths", "four-fifths rule on observed selection rates (29 CFR 1607.4(D))", cmd_four_fifths)
    p.add_argument("--focal-rate", type=_num, required=True, help="selection rate of the group compared, 0..1")
    p.add_argument("--reference-rate", type=_num, required=True, help="selection rate of the group with the highest rate, 0 < R <= 1")

    p = add("drift", "estimated drift of an old ability norm (Flynn effect)", cmd_drift)
    p.add_argument("--norm-year", type=_num, required=True, help="year the norm data were collected")
    p.add_argument("--as-of", type=_num, help="year to estimate for (default: this year)")
    p.add_argument("--points-per-decade", type=_num, default=3.0, help="IQ points per decade (default 3.0, Flynn 1987)")

    p = add("sample-size", "people needed for a local validation study (Fisher z)", cmd_sample_size)
    p.add_argument("--validity", type=_num, required=True, help="expected validity, 0..1 exclusive")
    p.add_argument("--power", type=_num, default=0.80, help="power, 0..1 exclusive (default 0.80)")
    p.add_argument("--alpha", type=_num, default=0.05, help="significance level (default 0.05)")
    p.add_argument("--one-sided", action="store_true", help="one-sided test (default two-sided)")
    p.add_argument("--hires-per-year", type=_num, help="hiring rate, to estimate months to gather the sample")


def _no_subcommand(args: argparse.Namespace) -> int:
    args.calc_parser.print_usage(sys.stderr)
    raise BadInput("calc: choose a method, e.g. `vetting calc scores --help`")


# ---------------------------------------------------------------------------
# Commands
# ---------------------------------------------------------------------------


def cmd_scores(args: argparse.Namespace) -> int:
    s = _engine(lambda: psy.standard_scores(args.raw, args.mean, args.sd), {"raw": "--raw", "mean": "--mean", "sd": "--sd"})
    lines = [
        f"raw {args.raw:g} (norm mean {args.mean:g}, SD {args.sd:g}), assuming normal scores:",
        f"  z            {_fmt(s['z'], 3)}",
        f"  T            {_fmt(s['t'], 1)}",
        f"  stanine      {s['stanine']}",
        f"  sten         {s['sten']}",
        f"  NCE          {_fmt(s['nce'], 1)}",
        f"  percentile   {_fmt(s['percentile'], 1)}",
    ]
    return _emit(args, s, lines)


def cmd_percentile(args: argparse.Namespace) -> int:
    r = _engine(lambda: psy.percentile_from_table(args.raw, args.row), {"raw": "--raw", "points": "--row"})
    data = {"raw": r.raw, "percentile": r.percentile, "position": r.position, "in_range": r.in_range, "note": r.note}
    lines = [f"raw {r.raw:g}: percentile {_fmt(r.percentile, 1)} ({r.note})"]
    return _emit(args, data, lines)


def cmd_sem(args: argparse.Namespace) -> int:
    opts = {"sd": "--sd", "reliability": "--reliability", "confidence": "--confidence", "score": "--score", "cut": "--cut"}
    conf = _engine(lambda: psy.confidence_fraction(args.confidence), opts)
    e = _engine(lambda: psy.sem(args.sd, args.reliability), opts)
    half = _engine(lambda: psy.band_half_width(e, conf), opts)
    data: dict[str, Any] = {"sem": e, "band_half_width": half, "confidence": conf}
    lines = [
        f"standard error of measurement: {_fmt(e)}",
        f"band half-width at confidence {conf:g}: ±{_fmt(half)}",
    ]
    if args.score is not None:
        data["score_band"] = list(_engine(lambda: psy.confidence_band(args.score, e, conf), opts))
        lines.append(f"band around score {args.score:g}: {_fmt(data['score_band'][0], 2)} to {_fmt(data['score_band'][1], 2)}")
    if args.cut is not None:
        data["cut_band"] = list(_engine(lambda: psy.cut_band(args.cut, e, conf), opts))
        lines.append(
            f"scores from {_fmt(data['cut_band'][0], 2)} to {_fmt(data['cut_band'][1], 2)} cannot be told apart "
            f"from the cut {args.cut:g} at this confidence"
        )
    return _emit(args, data, lines)


def cmd_sb(args: argparse.Namespace) -> int:
    if args.factor is not None:
        opts = {"r": "--reliability", "k": "--factor"}
        value = _engine(lambda: psy.spearman_brown(args.reliability, args.factor), opts)
        data = {"reliability": args.reliability, "factor": args.factor, "predicted_reliability": value}
        lines = [f"reliability at {args.factor:g} × the length: {_fmt(value, 3)}"]
    else:
        opts = {"r": "--reliability", "target": "--target"}
        value = _engine(lambda: psy.spearman_brown_length(args.reliability, args.target), opts)
        data = {"reliability": args.reliability, "target": args.target, "length_factor": value}
        lines = [f"length factor needed to reach {args.target:g}: {_fmt(value, 3)}"]
    return _emit(args, data, lines)


def cmd_attenuation(args: argparse.Namespace) -> int:
    opts = {"r_xy": "--r", "r_yy": "--criterion-reliability", "r_xx": "--predictor-reliability", "the corrected": "--r"}
    value = _engine(
        lambda: psy.correct_attenuation(args.r, args.criterion_reliability, args.predictor_reliability), opts
    )
    both = args.predictor_reliability is not None
    data = {"r": args.r, "corrected_r": value, "corrected_for": "both" if both else "criterion"}
    what = "both measures' unreliability" if both else "criterion unreliability (operational validity)"
    return _emit(args, data, [f"corrected for {what}: {_fmt(value, 3)}"])


def cmd_range(args: argparse.Namespace) -> int:
    value = _engine(lambda: psy.range_restriction_case2(args.r, args.u), {"r": "--r", "u": "--u"})
    data = {"r": args.r, "u": args.u, "corrected_r": value}
    return _emit(args, data, [f"corrected for direct range restriction (Case II): {_fmt(value, 3)}"])


def cmd_meta(args: argparse.Namespace) -> int:
    opts = {"rs": "--r", "ns": "--n"}
    if len(args.r) != len(args.n):
        raise BadInput(
            f"calc: --r and --n must list the same number of studies; got {len(args.r)} "
            f"correlation(s) and {len(args.n)} sample size(s)"
        )
    m = _engine(lambda: psy.bare_bones_meta(args.r, args.n), opts)
    c = _engine(lambda: psy.conservative_validity(args.r, args.n), opts)
    data = {
        "k": m.k,
        "total_n": m.total_n,
        "mean_r": m.mean_r,
        "var_observed": m.var_observed,
        "var_sampling_error": m.var_sampling_error,
        "var_residual": m.var_residual,
        "sd_residual": m.sd_residual,
        "pct_variance_sampling_error": m.pct_variance_sampling_error,
        "credibility_80": list(m.credibility_80),
        "confidence_95": list(m.confidence_95),
        "conservative_validity": c.value,
        "conservative_rule": c.rule,
    }
    lines = [
        f"studies {m.k}, total N {m.total_n}",
        f"sample-size-weighted mean r      {_fmt(m.mean_r, 3)}",
        f"observed variance                {_fmt(m.var_observed, 5)}",
        f"sampling-error variance          {_fmt(m.var_sampling_error, 5)}",
        f"residual SD                      {_fmt(m.sd_residual, 4)}",
        f"% variance from sampling error   {_fmt(m.pct_variance_sampling_error, 1)}",
        f"80% credibility interval         {_fmt(m.credibility_80[0], 3)} to {_fmt(m.credibility_80[1], 3)}",
        f"95% confidence interval (mean)   {_fmt(m.confidence_95[0], 3)} to {_fmt(m.confidence_95[1], 3)}",
        f"conservative validity            {_fmt(c.value, 3)}",
        f"  rule: {c.rule}",
    ]
    return _emit(args, data, lines)


def cmd_success(args: argparse.Namespace) -> int:
    opts = {"validity": "--validity", "base_rate": "--base-rate", "selection_ratio": "--selection-ratio"}
    rate = _engine(lambda: psy.taylor_russell(args.validity, args.base_rate, args.selection_ratio), opts)
    cut = _engine(lambda: psy.cut_z_for_selection_ratio(args.selection_ratio), opts)
    data = {
        "success_rate": rate,
        "base_rate": args.base_rate,
        "validity": args.validity,
        "selection_ratio": args.selection_ratio,
        "cut_z": cut,
    }
    lines = [
        f"expected success rate among those selected: {_fmt(rate, 3)} (base rate {args.base_rate:g})",
        f"predictor cut: z = {_fmt(cut, 3)} (selects {args.selection_ratio:g} of applicants)",
    ]
    return _emit(args, data, lines, caution=True)


def cmd_utility(args: argparse.Namespace) -> int:
    opts = {
        "validity": "--validity", "selection_ratio": "--selection-ratio", "hires": "--hires",
        "tenure": "--tenure", "sdy": "--sdy", "applicants": "--applicants", "cost": "--cost",
    }
    u = _engine(
        lambda: psy.bcg_utility(
            args.validity, args.selection_ratio, args.hires, args.tenure, args.sdy, args.applicants, args.cost
        ),
        opts,
    )
    data = {
        "utility": u.utility,
        "mean_criterion_z": u.mean_criterion_z,
        "gain": u.gain,
        "testing_cost": u.testing_cost,
        "cut_z": u.cut_z,
    }
    lines = [
        f"utility over the tenure: {u.utility:,.2f} (gain {u.gain:,.2f} less testing cost {u.testing_cost:,.2f})",
        f"mean standardised performance of those selected: {_fmt(u.mean_criterion_z, 3)}",
    ]
    return _emit(args, data, lines, caution=True)


def cmd_impact(args: argparse.Namespace) -> int:
    opts = {"d": "--d", "reference_pass_rate": "--reference-pass-rate", "floor": "--floor"}
    focal, ratio = _engine(lambda: psy.expected_impact(args.d, args.reference_pass_rate), opts)
    met = _engine(lambda: psy.four_fifths(focal, args.reference_pass_rate), opts)[1]
    data: dict[str, Any] = {
        "focal_pass_rate": focal,
        "impact_ratio": ratio,
        "four_fifths_met": met,
        "d": args.d,
        "reference_pass_rate": args.reference_pass_rate,
    }
    lines = [
        f"expected focal pass rate: {_fmt(focal, 3)} (reference {args.reference_pass_rate:g})",
        f"expected impact ratio: {_fmt(ratio, 3)} — four-fifths rule {'met' if met else 'NOT met'}",
    ]
    if args.floor is not None:
        lim = _engine(lambda: psy.max_selection_ratio_for_floor(args.d, args.floor), opts)
        data["floor"] = {
            "floor": lim.floor,
            "exists": lim.exists,
            "min_reference_pass_rate": lim.min_reference_pass_rate,
            "max_cut_z": lim.max_cut_z,
            "note": lim.note,
        }
        lines.append(f"floor {lim.floor:g}: {lim.note}")
    return _emit(args, data, lines, caution=True)


def cmd_four_fifths(args: argparse.Namespace) -> int:
    opts = {"focal_rate": "--focal-rate", "reference_rate": "--reference-rate"}
    ratio, met = _engine(lambda: psy.four_fifths(args.focal_rate, args.reference_rate), opts)
    data = {"impact_ratio": ratio, "four_fifths_met": met}
    lines = [
        f"impact ratio: {_fmt(ratio, 3)} — "
        + ("four-fifths rule met" if met else "less than four-fifths: evidence of adverse impact (29 CFR 1607.4(D))")
    ]
    return _emit(args, data, lines, caution=True)


def cmd_drift(args: argparse.Namespace) -> int:
    as_of = args.as_of if args.as_of is not None else float(dt.date.today().year)
    opts = {"norm_year": "--norm-year", "as_of_year": "--as-of", "points_per_decade": "--points-per-decade"}
    d = _engine(lambda: psy.norm_drift(args.norm_year, as_of, args.points_per_decade), opts)
    data = {
        "years": d.years,
        "iq_points": d.iq_points,
        "sd_units": d.sd_units,
        "percentile_at_old_mean": d.percentile_at_old_mean,
        "caveat": d.caveat,
    }
    lines = [
        f"norm age {d.years:g} years: estimated drift {_fmt(d.iq_points, 1)} IQ points ({_fmt(d.sd_units, 2)} SD)",
        f"an average person today would score at about percentile {_fmt(d.percentile_at_old_mean, 0)} of the old norm",
        d.caveat,
    ]
    return _emit(args, data, lines)


def cmd_sample_size(args: argparse.Namespace) -> int:
    opts = {"r": "--validity", "power": "--power", "alpha": "--alpha", "n": "--validity", "hires_per_year": "--hires-per-year"}
    n = _engine(lambda: psy.n_for_validity(args.validity, args.power, args.alpha, not args.one_sided), opts)
    data: dict[str, Any] = {"n": n}
    lines = [f"people with test and criterion scores needed: {n}"]
    if args.hires_per_year is not None:
        months = _engine(lambda: psy.months_to_gather(n, args.hires_per_year), opts)
        data["months"] = months
        lines.append(f"at {args.hires_per_year:g} hires a year: about {_fmt(months, 1)} months")
    return _emit(args, data, lines)
