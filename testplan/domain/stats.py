"""Reliability-demonstration statistics in closed form (no scipy on the planning path).

Symbols: R reliability to demonstrate at the rated life t0 (cycles), C confidence,
n specimens, beta Weibull shape, L = t / t0 the test-length ratio, r allowed failures.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from testplan.errors import PlanningError


def _check(reliability: float, confidence: float) -> None:
    if not 0.0 < reliability < 1.0:
        raise PlanningError(f"reliability must lie strictly between 0 and 1, got {reliability}")
    if not 0.0 < confidence < 1.0:
        raise PlanningError(f"confidence must lie strictly between 0 and 1, got {confidence}")


def success_run_sample_size(reliability: float, confidence: float) -> int:
    """Specimens needed with zero failures when each is tested to the rated life.

    n = ln(1 - C) / ln(R), rounded up. Returns a count of specimens.
    """
    _check(reliability, confidence)
    exact = math.log(1.0 - confidence) / math.log(reliability)
    return math.ceil(exact - 1e-9)


def chi2_quantile_even(probability: float, dof: int) -> float:
    """Quantile of the chi-squared distribution for an even number of degrees of freedom.

    For dof = 2k the CDF is 1 - exp(-x/2) * sum_{i<k} (x/2)^i / i!, inverted here by
    bisection to 1e-12 relative. Raises ValueError for odd or non-positive dof.
    """
    if dof <= 0 or dof % 2:
        raise ValueError("dof must be a positive even number")
    if not 0.0 < probability < 1.0:
        raise ValueError("probability must lie in (0, 1)")
    k = dof // 2

    def cdf(x: float) -> float:
        half = x / 2.0
        term, total = 1.0, 1.0
        for i in range(1, k):
            term *= half / i
            total += term
        return 1.0 - math.exp(-half) * total

    lo, hi = 0.0, max(1.0, 2.0 * dof)
    while cdf(hi) < probability:
        hi *= 2.0
    for _ in range(200):
        mid = (lo + hi) / 2.0
        if cdf(mid) < probability:
            lo = mid
        else:
            hi = mid
        if hi - lo <= 1e-12 * hi:
            break
    return (lo + hi) / 2.0


# Beyond this many lifetimes per specimen the numbers stop meaning anything (and soon
# overflow); a Weibull shape near zero gets there.
MAX_LENGTH_RATIO = 1e9


def _specimen_lives(reliability: float, confidence: float, failures: int) -> float:
    """n * L^beta the demonstration needs: ln(1-C)/ln R, or chi2(C; 2r+2) / (2 * -ln R)."""
    if failures == 0:
        return math.log(1.0 - confidence) / math.log(reliability)
    return chi2_quantile_even(confidence, 2 * failures + 2) / (2.0 * -math.log(reliability))


def length_ratio(
    reliability: float, confidence: float, specimens: int, shape: float, failures: int = 0
) -> float:
    """Test-length ratio L = t / t0 each of ``specimens`` units must reach.

    Weibull-transformed chi-squared form: n * L^beta >= chi2(C; 2r + 2) / (2 * -ln R).
    With r = 0 this is exactly the zero-failure extension ln(1-C) / (n * ln R).
    """
    _check(reliability, confidence)
    if specimens < 1:
        raise PlanningError(f"need at least one specimen, got {specimens}")
    if shape <= 0:
        raise PlanningError(f"the Weibull shape must be greater than zero, got {shape}")
    if failures < 0:
        raise PlanningError("allowed failures cannot be negative")
    need = _specimen_lives(reliability, confidence, failures)
    log_ratio = math.log(need / specimens) / shape
    if log_ratio > math.log(MAX_LENGTH_RATIO):
        raise PlanningError(
            f"demonstrating R = {reliability:g} at C = {confidence:g} with {specimens} "
            f"specimen(s) and a Weibull shape of {shape:g} needs more than "
            f"{MAX_LENGTH_RATIO:g} times the rated cycles on each specimen",
            fix="check the Weibull shape, or test more specimens",
        )
    return math.exp(log_ratio)


def specimens_for_length(
    reliability: float, confidence: float, lifetimes: float, shape: float, failures: int = 0
) -> int:
    """Specimens needed when each runs ``lifetimes`` rated lives: n * L^beta >= need, rounded up."""
    _check(reliability, confidence)
    need = _specimen_lives(reliability, confidence, failures)
    return max(1, math.ceil(need / float(lifetimes**shape) - 1e-9))


def cycles_to_demonstrate(
    rated_cycles: int,
    reliability: float,
    confidence: float,
    specimens: int,
    shape: float,
    failures: int = 0,
) -> int:
    """Whole cycles per specimen to demonstrate R at C at ``rated_cycles``, rounded up."""
    ratio = length_ratio(reliability, confidence, specimens, shape, failures)
    return math.ceil(rated_cycles * ratio - 1e-6)


def demonstrated_reliability(
    cycles_reached: list[float],
    rated_cycles: float,
    confidence: float,
    shape: float,
    failures: int = 0,
) -> float:
    """Reliability at ``rated_cycles`` demonstrated at ``confidence`` by the cycles reached.

    Sum of (t_i / t0)^beta over all specimens (failed ones at their failure count), and
    R = exp(-chi2(C; 2r + 2) / (2 * sum)). With r = 0 this is the Weibayes bound.
    """
    if not cycles_reached:
        raise PlanningError("no specimen cycles to evaluate")
    if not 0.0 < confidence < 1.0:
        raise PlanningError(f"confidence must lie strictly between 0 and 1, got {confidence}")
    total = sum((t / rated_cycles) ** shape for t in cycles_reached)
    if total <= 0:
        return 0.0
    chi = chi2_quantile_even(confidence, 2 * failures + 2)
    return math.exp(-chi / (2.0 * total))


STATED = "stated"
WITHHELD = "withheld"


@dataclass(frozen=True)
class ReliabilityClaim:
    """A demonstration's statement: ``stated`` when every assumption of the plan held,
    ``withheld`` with the reason otherwise; ``reliability`` is the bound the cycles reached
    and the failures counted give (None when nothing honest can be said)."""

    status: str
    reliability: float | None
    failures: int
    reason: str | None
    text: str


def _n(x: float) -> str:
    return f"{x:,.0f}".replace(",", " ")


def reliability_claim(
    *,
    cycles: dict[str, float],
    failures: list[tuple[str, str]],
    pending: list[str],
    planned_specimens: int,
    planned_cycles: float,
    rated_cycles: float,
    reliability: float,
    confidence: float,
    shape: float,
    allowed_failures: int,
) -> ReliabilityClaim:
    """The zero- (or r-) failure demonstration's claim from what the run showed.

    ``cycles``: cycles each specimen reached (a failed one at its failure); ``failures``:
    (specimen or rig, how) per failure as the campaign's failure definition counts them;
    ``pending``: specimens whose failure count is not yet known (a retest not yet done).
    The claim R >= x at C is stated only when the planned number of specimens reached the
    planned cycles, the failures do not exceed the plan's allowance, every count is known
    and the plan's test length follows from its Weibull shape; otherwise it is withheld
    with the reason, and the bound from the actual cycles and failures is given where the
    shape still stands.
    """
    n_fail = len(failures)
    failed = {who for who, _ in failures}
    reasons: list[str] = []
    if len(cycles) < planned_specimens:
        reasons.append(f"{len(cycles)} specimen(s) cycled where the plan has {planned_specimens}")
    short = [
        f"{s} reached {_n(c)} of the planned {_n(planned_cycles)} cycles"
        for s, c in sorted(cycles.items())
        if c < planned_cycles and s not in failed
    ]
    reasons += short
    if n_fail > allowed_failures:
        listed = ", ".join(f"{who}, {how}" for who, how in failures)
        reasons.append(
            f"{n_fail} failure{'s' if n_fail != 1 else ''} ({listed}) where the plan "
            f"allows {allowed_failures}"
        )
    if pending:
        reasons.append(f"failures not yet all counted: no seal retest of {', '.join(pending)} yet")
    shape_holds = True
    try:
        designed = cycles_to_demonstrate(
            round(rated_cycles),
            reliability,
            confidence,
            planned_specimens,
            shape,
            allowed_failures,
        )
    except PlanningError:
        designed = -1
    if designed != round(planned_cycles):
        shape_holds = False
        reasons.append(
            f"the plan's {_n(planned_cycles)} test cycles do not follow from its Weibull "
            f"shape of {shape:g}"
        )
    r = (
        demonstrated_reliability(list(cycles.values()), rated_cycles, confidence, shape, n_fail)
        if cycles and shape_holds and not pending
        else None
    )
    basis = (
        f"{len(cycles)} specimen(s) reaching "
        f"{', '.join(_n(c) for c in cycles.values())} cycles with {n_fail} failure(s)"
    )
    assumed = f"assuming a Weibull shape of {shape:g} (customer-supplied)"
    if not reasons and r is not None:
        return ReliabilityClaim(
            STATED,
            r,
            n_fail,
            None,
            f"Interpretation, not a measured result: {basis} demonstrate a reliability of at "
            f"least {r:.3f} at {_n(rated_cycles)} cycles with {confidence:.0%} confidence, "
            f"{assumed}.",
        )
    reason = "; ".join(reasons)
    text = f"Reliability claim withheld: {reason}."
    if r is not None:
        text += (
            f" What can still be said, as an interpretation: {basis} show a reliability of "
            f"at least {r:.3f} at {_n(rated_cycles)} cycles with {confidence:.0%} confidence "
            f"(chi-squared with {2 * n_fail + 2} degrees of freedom), {assumed}"
        )
        text += f"; the plan set out to show {reliability:g}." if r < reliability else "."
    return ReliabilityClaim(WITHHELD, r, n_fail, reason, text)
