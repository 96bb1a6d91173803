"""The reliability demonstration is stated only when the plan's assumptions held.

The sample campaign's mode-selector knob: R = 0.90 at 20 000 cycles with C = 0.90, three
specimens, Weibull shape 2, no failure allowed, 53 981 test cycles each.
"""

from __future__ import annotations

import math
from typing import Any

import pytest
from scipy.stats import binom, chi2

from testplan.domain import stats as S

KNOB: dict[str, Any] = {
    "planned_specimens": 3,
    "planned_cycles": 53_981,
    "rated_cycles": 20_000,
    "reliability": 0.90,
    "confidence": 0.90,
    "shape": 2.0,
    "allowed_failures": 0,
}
ALL = {"S03": 54_000.0, "S04": 54_000.0, "S05": 54_000.0}


def claim(cycles: dict[str, float] = ALL, **kw: Any) -> S.ReliabilityClaim:
    args = {**KNOB, "failures": [], "pending": [], **kw}
    return S.reliability_claim(cycles=cycles, **args)


def test_the_plan_s_test_length_is_the_weibull_extension() -> None:
    # n L^beta = ln(1 - C) / ln R: L = sqrt(ln 0.1 / (3 ln 0.9)) = 2.6990, so 53 981 cycles.
    # source: scipy.stats.chi2 (chi2(0.90; 2) / 2 = -ln 0.1)
    ratio = math.sqrt(chi2.ppf(0.90, 2) / 2 / (3 * -math.log(0.90)))
    assert math.ceil(20_000 * ratio - 1e-6) == 53_981
    assert S.cycles_to_demonstrate(20_000, 0.90, 0.90, 3, 2.0, 0) == 53_981


def test_a_zero_failure_demonstration_whose_assumptions_held_is_stated() -> None:
    c = claim()
    # source: scipy.stats.chi2
    expected = math.exp(-chi2.ppf(0.90, 2) / (2 * 3 * 2.7**2))
    assert c.status == S.STATED and c.reason is None
    assert c.reliability == pytest.approx(expected, rel=1e-9)
    # Each specimen run to the rated life only, zero failures: the success-run bound
    # R = (1 - C)^(1/n) is the binomial P(0 failures) = R^n = 1 - C.
    # source: scipy.stats.binom
    r_success = S.demonstrated_reliability([20_000.0] * 3, 20_000, 0.90, 2.0, 0)
    assert binom.pmf(0, 3, 1 - r_success) == pytest.approx(0.10, rel=1e-9)
    assert c.text == (
        "Interpretation, not a measured result: 3 specimen(s) reaching 54 000, 54 000, "
        "54 000 cycles with 0 failure(s) demonstrate a reliability of at least 0.900 at "
        "20 000 cycles with 90% confidence, assuming a Weibull shape of 2 (customer-supplied)."
    )


def test_an_ingress_at_the_retest_the_plan_does_not_allow_withholds_the_claim() -> None:
    c = claim(failures=[("S04", "ingress at the seal retest")])
    assert c.status == S.WITHHELD
    assert c.reason == "1 failure (S04, ingress at the seal retest) where the plan allows 0"
    # What can still be said: the bound with the one failure, chi-squared with 4 dof.
    # source: scipy.stats.chi2
    expected = math.exp(-chi2.ppf(0.90, 4) / (2 * 3 * 2.7**2))
    assert c.reliability == pytest.approx(expected, rel=1e-9)
    assert f"{expected:.3f}" == "0.837"
    assert c.text == (
        "Reliability claim withheld: 1 failure (S04, ingress at the seal retest) where the "
        "plan allows 0. What can still be said, as an interpretation: 3 specimen(s) reaching "
        "54 000, 54 000, 54 000 cycles with 1 failure(s) show a reliability of at least "
        "0.837 at 20 000 cycles with 90% confidence (chi-squared with 4 degrees of freedom), "
        "assuming a Weibull shape of 2 (customer-supplied); the plan set out to show 0.9."
    )


def test_a_failure_the_plan_allows_still_gives_a_stated_claim() -> None:
    planned = S.cycles_to_demonstrate(20_000, 0.90, 0.90, 3, 2.0, 1)
    c = claim(
        {"S03": 30_000.0, "S04": float(planned), "S05": float(planned)},
        failures=[("S03", "failure at 30000 cycles")],
        planned_cycles=planned,
        allowed_failures=1,
    )
    assert c.status == S.STATED and c.failures == 1
    # source: scipy.stats.chi2
    total = (1.5**2) + 2 * (planned / 20_000) ** 2
    assert c.reliability == pytest.approx(math.exp(-chi2.ppf(0.90, 4) / (2 * total)), rel=1e-9)


def test_specimens_short_of_the_planned_cycles_or_number_withhold_the_claim() -> None:
    c = claim({"S03": 54_000.0, "S04": 54_000.0, "S05": 40_000.0})
    assert c.status == S.WITHHELD
    assert c.reason == "S05 reached 40 000 of the planned 53 981 cycles"
    # The bound from the cycles actually reached still stands (shape 2, no failure).
    # source: scipy.stats.chi2
    total = 2 * 2.7**2 + 2.0**2
    assert c.reliability == pytest.approx(math.exp(-chi2.ppf(0.90, 2) / (2 * total)), rel=1e-9)
    c = claim({"S03": 54_000.0, "S04": 54_000.0})
    assert c.reason == "2 specimen(s) cycled where the plan has 3"


def test_failures_not_yet_all_counted_withhold_the_claim_and_any_bound() -> None:
    c = claim(pending=["S03", "S05"])
    assert c.status == S.WITHHELD and c.reliability is None
    assert c.text == (
        "Reliability claim withheld: failures not yet all counted: no seal retest of S03, S05 yet."
    )


def test_a_test_length_that_does_not_follow_from_the_weibull_shape_withholds_it() -> None:
    c = claim(shape=3.0)
    assert c.status == S.WITHHELD and c.reliability is None
    assert c.reason == "the plan's 53 981 test cycles do not follow from its Weibull shape of 3"
