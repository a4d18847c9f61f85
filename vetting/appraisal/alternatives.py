"""Alternatives analysis for the top choice.

The Uniform Guidelines on Employee Selection Procedures (1978), section 3B (29 CFR 1607.3(B)),
ask a user who finds adverse impact to consider alternative procedures that are
"substantially equally valid" for the same purpose and have less adverse impact.

Rule used here: an alternative is any other eligible instrument whose conservative validity is
at least the top choice's minus VALIDITY_TOLERANCE (0.05), and whose expected impact ratio at
the job's selection ratio is higher than the top choice's. The tolerance of .05 in r is common
practice, no published source: it is about the width of sampling error of a validity
coefficient from a few hundred people (SE of r near .05 at N = 400), so differences within it
are not dependable.
"""

from __future__ import annotations

from vetting.appraisal.types import Alternative, AlternativesReport, InstrumentAppraisal

VALIDITY_TOLERANCE = 0.05
RULE = (
    "Alternatives (Uniform Guidelines 1978, section 3B): other eligible instruments whose "
    f"conservative validity is no more than {VALIDITY_TOLERANCE:.2f} below the top choice's "
    "(substantially equal validity) and whose expected impact ratio at the job's selection "
    "ratio is higher (less adverse impact)."
)


def find_alternatives(results: list[InstrumentAppraisal], tolerance: float = VALIDITY_TOLERANCE) -> AlternativesReport:
    """Alternatives to the top-ranked eligible instrument in `results`."""
    eligible = sorted((r for r in results if r.eligible and r.rank is not None), key=lambda r: r.rank)
    if not eligible:
        return AlternativesReport(None, None, None, tolerance, RULE, [], "no instrument is eligible, so there is no top choice")
    top = eligible[0]
    v_top, ir_top = top.validity.conservative, top.impact_ratio
    report = AlternativesReport(top.instrument, v_top, ir_top, tolerance, RULE)
    if v_top is None:
        report.note = "the top choice has no relevant validity figure, so substantially equal validity cannot be judged"
        return report
    if ir_top is None:
        report.note = (
            "the top choice's expected impact ratio is unknown (no subgroup data or no selection ratio), "
            "so alternatives with less adverse impact cannot be identified; ask the publisher for subgroup data"
        )
        return report
    for r in eligible[1:]:
        v, ir = r.validity.conservative, r.impact_ratio
        if v is None or ir is None:
            continue
        if v >= v_top - tolerance - 1e-12 and ir > ir_top + 1e-12:
            report.alternatives.append(Alternative(
                instrument=r.instrument,
                title=r.title,
                conservative_validity=v,
                validity_difference=v - v_top,
                impact_ratio=ir,
                impact_ratio_gain=ir - ir_top,
                score=r.score,
                reason=(
                    f"conservative validity {v:.2f} vs {v_top:.2f} (within {tolerance:.2f} or higher); "
                    f"expected impact ratio {ir:.2f} vs {ir_top:.2f}"
                ),
            ))
    report.alternatives.sort(key=lambda a: (-a.impact_ratio_gain, -a.conservative_validity, a.instrument))
    if not report.alternatives:
        report.note = "no eligible instrument of substantially equal validity has a better expected impact ratio"
    return report
