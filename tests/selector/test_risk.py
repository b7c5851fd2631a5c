"""Checks of the estimate-uncertainty computation against references outside the project.

References: the PERT formulas of Malcolm, Roseboom, Clark and Fazar (Operations Research
7(5), 1959), worked by hand in the comments; scipy.stats (beta, lognorm, norm) for
distributions, quantiles and moments; scipy.special.betaincinv / betainc for the table
sampler's quantile map; numerical convolution with numpy for exact fit probabilities; the
Berry-Esseen bound for the normal approximation.
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import special, stats

from server.selector import risk
from server.selector.risk import (
    EstimateError,
    FitEstimate,
    SamplingMethod,
    ThreePoint,
    default_seed,
    effort_quantile,
    efforts_at_confidence,
    fit_probability,
    pert_beta_sd,
    pert_beta_shapes,
    pert_beta_variance,
    pert_mean,
    pert_sd,
    sample_efforts,
    spread_contributors,
    table_quantiles,
    validate_confidence,
    validate_three_point,
)

REPO_ROOT = Path(__file__).resolve().parents[2]
METHODS: list[SamplingMethod] = ["table", "exact"]
# The table sampler's stated tolerance (docs/benchmarks.md, Risk): every fraction of
# [low, high] it returns is within this of the exact PERT-beta quantile of its uniform.
TABLE_TOLERANCE = 5e-5
# Largest density of Beta(alpha, 6 - alpha) on [0, 1] for alpha in [1, 5]: 5, reached by
# Beta(5, 1) at 1 (density 5 x^4) and Beta(1, 5) at 0. A quantile error of d moves the cdf
# by at most 5 d.
MAX_PERT_DENSITY = 5.0


def scipy_pert(e: ThreePoint) -> stats.rv_continuous:
    """The reference distribution: scipy.stats.beta with the PERT shapes on [low, high]."""
    alpha, beta = pert_beta_shapes(e)
    return stats.beta(alpha, beta, loc=e.low, scale=e.high - e.low)


def mc_tolerance(p: float, draws: int) -> float:
    """Four binomial standard errors of a Monte Carlo proportion around the exact p.

    A correct sampler misses by more with probability about 6e-5 per check.
    """
    return 4 * math.sqrt(p * (1 - p) / draws)


def random_estimates(count: int, seed: int) -> list[ThreePoint]:
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(count):
        low = rng.uniform(0.5, 4)
        likely = low + rng.uniform(0, 4)
        out.append(ThreePoint(low, likely, likely + rng.uniform(0.5, 8)))
    return out


# --- PERT formulas -------------------------------------------------------------------------


def test_pert_mean_sd_and_shapes_on_worked_values() -> None:
    # Malcolm et al. 1959 formulas, by hand for a=2, m=4, b=12:
    # mean = (2 + 4*4 + 12) / 6 = 30 / 6 = 5; sd = (12 - 2) / 6 = 5/3;
    # alpha = 1 + 4 (4 - 2) / 10 = 1.8; beta = 1 + 4 (12 - 4) / 10 = 4.2.
    e = ThreePoint(2, 4, 12)
    assert pert_mean(e) == pytest.approx(5.0, rel=1e-15)
    assert pert_sd(e) == pytest.approx(5 / 3, rel=1e-15)
    assert pert_beta_shapes(e) == pytest.approx((1.8, 4.2), rel=1e-15)
    # By hand for a=1, m=2, b=9: mean = (1 + 8 + 9) / 6 = 3; sd = 8 / 6 = 4/3;
    # alpha = 1 + 4/8 = 1.5, beta = 1 + 28/8 = 4.5.
    e = ThreePoint(1, 2, 9)
    assert pert_mean(e) == pytest.approx(3.0, rel=1e-15)
    assert pert_sd(e) == pytest.approx(4 / 3, rel=1e-15)
    assert pert_beta_shapes(e) == pytest.approx((1.5, 4.5), rel=1e-15)
    # Symmetric a=3, m=5, b=7: mean 5, sd 4/6; shapes 3 and 3. The beta's own variance is
    # alpha beta / ((alpha + beta)^2 (alpha + beta + 1)) * width^2 = 9 / 252 * 16 = 4/7.
    e = ThreePoint(3, 5, 7)
    assert pert_mean(e) == pytest.approx(5.0)
    assert pert_sd(e) == pytest.approx(2 / 3)
    assert pert_beta_variance(e) == pytest.approx(4 / 7, rel=1e-14)


def test_certain_estimate_has_its_value_and_no_spread() -> None:
    e = ThreePoint.from_single(0.1)
    assert e.is_certain
    assert (e.low, e.likely, e.high) == (0.1, 0.1, 0.1)
    assert pert_mean(e) == 0.1  # exactly, not (6 * 0.1) / 6
    assert pert_sd(e) == 0
    assert pert_beta_variance(e) == 0
    assert effort_quantile(e, 0.9) == 0.1
    with pytest.raises(ValueError, match="certain"):
        pert_beta_shapes(e)


def test_from_single_with_spread() -> None:
    # +/- 20 % of 10 days, by hand: 8, 10, 12.
    e = ThreePoint.from_single(10, spread=0.2)
    assert (e.low, e.likely, e.high) == pytest.approx((8, 10, 12))
    assert not e.is_certain
    assert pert_beta_shapes(e) == pytest.approx((3.0, 3.0))


@pytest.mark.parametrize(
    ("low", "likely", "high"),
    [(2, 4, 12), (1, 2, 9), (3, 5, 7), (0, 1, 10), (4, 4, 9), (4, 9, 9), (0.5, 0.6, 40)],
)
def test_shapes_give_scipy_beta_the_pert_mean_and_stated_variance(
    low: float, likely: float, high: float
) -> None:
    # Reference: scipy.stats.beta(alpha, beta, loc=a, scale=b-a) with the shapes we use.
    # Its mean is the PERT mean exactly (alpha + beta = 6); its variance is what we call
    # pert_beta_variance, which differs from ((b - a) / 6)^2 by the factor alpha beta / 7.
    e = ThreePoint(low, likely, high)
    reference = scipy_pert(e)
    alpha, beta = pert_beta_shapes(e)
    assert alpha + beta == pytest.approx(6.0, rel=1e-14)
    assert reference.mean() == pytest.approx(pert_mean(e), rel=1e-12)
    assert reference.var() == pytest.approx(pert_beta_variance(e), rel=1e-12)
    assert pert_beta_sd(e) == pytest.approx(pert_sd(e) * math.sqrt(alpha * beta / 7), rel=1e-12)
    assert reference.support() == pytest.approx((low, high))


# --- sampling --------------------------------------------------------------------------------


@pytest.mark.parametrize("method", METHODS)
def test_sampled_mean_and_sd_match_scipy_beta(method: SamplingMethod) -> None:
    estimates = [
        ThreePoint(2, 4, 12),
        ThreePoint(1, 1, 6),  # alpha = 1: density highest at the low end
        ThreePoint(3, 8, 8),  # beta = 1: highest at the high end
        ThreePoint(10, 15, 20),
        ThreePoint.from_single(7),
    ]
    draws = 200_000
    sample = sample_efforts(estimates, draws, seed=20240611, method=method)
    assert sample.shape == (draws, len(estimates))
    assert np.all(sample[:, 4] == 7)
    for column, e in enumerate(estimates[:4]):
        reference = scipy_pert(e)
        mean, variance, excess_kurtosis = (float(x) for x in reference.stats(moments="mvk"))
        sd = math.sqrt(variance)
        values = sample[:, column]
        assert values.min() >= e.low
        assert values.max() <= e.high
        # Standard error of a sample mean: sd / sqrt(n).
        assert abs(values.mean() - mean) <= 4 * sd / math.sqrt(draws)
        # Standard error of a sample sd (delta method): sqrt(mu4 - sd^4) / (2 sd sqrt(n)),
        # with the fourth central moment mu4 = (excess kurtosis + 3) sd^4 from scipy.
        mu4 = (excess_kurtosis + 3) * variance**2
        sd_error = math.sqrt(mu4 - variance**2) / (2 * sd * math.sqrt(draws))
        assert abs(values.std(ddof=1) - sd) <= 4 * sd_error
        # Whole distribution: Kolmogorov-Smirnov against scipy's beta; a correct sampler
        # falls below p = 0.001 one time in a thousand.
        assert stats.kstest(values[:20_000], reference.cdf).pvalue > 1e-3


def test_sample_columns_are_independent() -> None:
    # Independent efforts: the sample correlation has standard error about 1 / sqrt(n).
    draws = 100_000
    sample = sample_efforts([ThreePoint(1, 2, 5), ThreePoint(1, 4, 5)], draws, seed=5)
    correlation = np.corrcoef(sample.T)[0, 1]
    assert abs(correlation) <= 4 / math.sqrt(draws)


@pytest.mark.parametrize("method", METHODS)
def test_tails_are_drawn_as_often_as_scipy_says(method: SamplingMethod) -> None:
    # Beta(5, 1) and Beta(1, 5) have power-law ends that equal-width tables get wrong. The
    # share of draws beyond scipy's 1e-3 and 1e-5 quantiles is binomial around 1e-3 and 1e-5
    # (four standard errors, plus one draw for the 1e-5 count).
    lower_heavy = ThreePoint(0, 1, 1)  # alpha 5, beta 1: rarely near 0
    upper_heavy = ThreePoint(2, 2, 3)  # alpha 1, beta 5: rarely near 3
    draws = 400_000
    sample = sample_efforts([lower_heavy, upper_heavy], draws, seed=17, method=method)
    for share in (1e-3, 1e-5):
        allowed = 4 * math.sqrt(share * draws) + 1
        below = np.count_nonzero(sample[:, 0] <= scipy_pert(lower_heavy).ppf(share))
        above = np.count_nonzero(sample[:, 1] >= scipy_pert(upper_heavy).isf(share))
        assert abs(below - share * draws) <= allowed
        assert abs(above - share * draws) <= allowed


# --- table sampler ----------------------------------------------------------------------------


def test_table_quantiles_are_within_the_stated_tolerance_of_betaincinv() -> None:
    # Reference: scipy.special.betaincinv (= scipy.stats.beta.ppf), and betainccinv for the
    # upper end, which keeps full precision at 1 - v. Shapes: those of the estimates in this
    # file, the ends 1 and 5, and halfway between the table's alpha nodes (steps of 1/8),
    # where interpolating in alpha is worst. Levels: 4 per 1/1024 of u, so every body cell's
    # middle, where interpolating in u is worst, plus random levels (rounded to the 24-bit
    # grid of float32 uniforms, as the sampler's are); 64 per halving of the distance v to
    # either end from 2^-24 to 2^-6; and a few points nearer the end still.
    file_estimates = [
        ThreePoint(2, 4, 12),
        ThreePoint(1, 2, 9),
        ThreePoint(3, 5, 7),
        ThreePoint(0, 1, 10),
        ThreePoint(0.5, 0.6, 40),
        ThreePoint(2, 3, 9),
        ThreePoint(1, 2, 6),
        ThreePoint(2, 3, 4),
        ThreePoint(0.5, 3, 3.5),
        ThreePoint(10, 15, 20),
        *random_estimates(20, seed=11),
    ]
    alphas = np.unique(
        np.concatenate(
            [
                [1.0, 5.0],
                [pert_beta_shapes(e)[0] for e in file_estimates],
                1 + 1 / 16 + np.arange(32) / 8,
            ]
        )
    )
    body = np.concatenate(
        [np.arange(64, 4096 - 64) / 4096, np.random.default_rng(1).uniform(1 / 64, 63 / 64, 999)]
    )
    octaves = np.arange(-24, -6)[:, np.newaxis]
    near_end = np.ldexp(1 + np.arange(64) / 64, octaves).ravel()
    near_end = np.concatenate([near_end, [2.0**-59, 2.0**-40, 2.0**-30, 2.0**-21]])
    a, b = alphas[np.newaxis, :], 6 - alphas[np.newaxis, :]
    for levels, from_top in ((body, False), (near_end, False), (near_end, True)):
        got = table_quantiles(alphas, levels, from_top=from_top)
        u = levels[:, np.newaxis]
        if from_top:
            exact = special.betainccinv(a, b, u)
            cdf_gap = special.betaincc(a, b, got) - u
        else:
            exact = special.betaincinv(a, b, u)
            cdf_gap = special.betainc(a, b, got) - u
        assert np.all((got >= 0) & (got <= 1))
        assert np.max(np.abs(got - exact)) <= TABLE_TOLERANCE
        assert np.max(np.abs(cdf_gap)) <= MAX_PERT_DENSITY * TABLE_TOLERANCE
    # u = 0 maps to low itself, as exact inversion would.
    assert table_quantiles([3.0], [0.0])[0, 0] == 0.0


def test_table_sampler_mean_and_sd_are_exact_to_a_few_millionths() -> None:
    # The sampler's distribution is its quantile map applied to a uniform, so its moments are
    # integrals of that map over u; the map is linear between knots, so the midpoint rule on
    # sub-cells nested in the knots gives the mean exactly (and the second moment nearly).
    # Reference: the partial moments of scipy's beta between the quantiles x0 and x1,
    # E[X^k; x0 < X <= x1] = B(a + k, b) / B(a, b) (I_x1(a + k, b) - I_x0(a + k, b)) with
    # scipy.special.betainc. Only u within 2^-20 of 0 or 1 is left out: there the sampler
    # calls betaincinv itself.
    alphas = np.array([1.0, 1.0625, 1.5, 1.8, 2.4375, 3.0, 3.7, 4.2, 4.9375, 5.0])
    body = ((np.arange(16 * 1024) + 0.5) / (16 * 1024))[16 * 16 : -16 * 16]
    body_width = 1 / (16 * 1024)
    starts = np.ldexp(1.0, np.arange(-20, -6))[:, np.newaxis]
    near_end = (starts + (np.arange(64) + 0.5) * starts / 64).ravel()
    near_end_width = np.repeat(starts.ravel() / 64, 64)[:, np.newaxis]
    pieces = [
        (table_quantiles(alphas, body), body_width),
        (table_quantiles(alphas, near_end), near_end_width),
        (table_quantiles(alphas, near_end, from_top=True), near_end_width),
    ]
    first = sum((q * width).sum(axis=0) for q, width in pieces)
    second = sum((q**2 * width).sum(axis=0) for q, width in pieces)
    a, b = alphas, 6 - alphas
    x0, x1 = special.betaincinv(a, b, 2.0**-20), special.betainccinv(a, b, 2.0**-20)

    def partial(k: int) -> np.ndarray:
        ratio = special.beta(a + k, b) / special.beta(a, b)
        return ratio * (special.betainc(a + k, b, x1) - special.betainc(a + k, b, x0))

    mass = 1 - 2 * 2.0**-20
    exact_sd = np.sqrt(partial(2) / mass - (partial(1) / mass) ** 2)
    table_sd = np.sqrt(second / mass - (first / mass) ** 2)
    assert np.max(np.abs(first - partial(1))) <= 2e-6
    assert np.max(np.abs(table_sd - exact_sd)) <= 1e-5


def test_table_quantiles_refuse_what_the_sampler_never_sees() -> None:
    with pytest.raises(ValueError, match="levels"):
        table_quantiles([2.0], [1.0])
    with pytest.raises(ValueError, match="levels"):
        table_quantiles([2.0], [0.0], from_top=True)
    with pytest.raises(ValueError, match=r"\[1, 5\]"):
        table_quantiles([5.5], [0.5])


def test_table_and_exact_samplers_agree_on_fit_probability() -> None:
    # Two independent Monte Carlo estimates of the same probability: their difference has
    # standard error sqrt(2 p (1 - p) / n); allow four.
    estimates = random_estimates(120, seed=31)
    mean = sum(pert_mean(e) for e in estimates)
    sd = math.sqrt(sum(pert_beta_variance(e) for e in estimates))
    draws = 20_000
    for z in (-1.0, 0.3, 1.5):
        table = fit_probability(estimates, mean + z * sd, draws=draws)
        exact = fit_probability(estimates, mean + z * sd, draws=draws, method="exact")
        p = (table.probability + exact.probability) / 2
        assert abs(table.probability - exact.probability) <= 4 * math.sqrt(2 * p * (1 - p) / draws)


def test_chunk_size_changes_no_draw(monkeypatch: pytest.MonkeyPatch) -> None:
    # Body uniforms and end distances come from separate streams, each read in a fixed order
    # (column by column within a block), so the working-array size is not part of what
    # defines a figure. The sizes below give 1, 3, 4 and all 8 uncertain columns per chunk.
    estimates = [*random_estimates(7, seed=9), ThreePoint.from_single(3), ThreePoint(1, 1, 2)]
    reference = sample_efforts(estimates, 2_500, seed=12)
    for cells in (1, 3 * 1024, 5_000, 1 << 20):
        monkeypatch.setattr(risk, "_CHUNK_CELLS", cells)
        np.testing.assert_array_equal(sample_efforts(estimates, 2_500, seed=12), reference)


# --- fit probability --------------------------------------------------------------------------


@pytest.mark.parametrize("method", METHODS)
def test_fit_probability_matches_closed_form_for_one_uncertain_effort(
    method: SamplingMethod,
) -> None:
    # One uncertain effort plus certain ones: P(total <= c) = beta.cdf(c - certain sum),
    # exactly (scipy.stats.beta).
    uncertain = ThreePoint(2, 3, 9)
    certain = [ThreePoint.from_single(x) for x in (4, 2.5, 0.5)]
    draws = 10_000
    for capacity in (10.5, 11.5, 13.0, 15.5):
        exact = float(scipy_pert(uncertain).cdf(capacity - 7))
        result = fit_probability([*certain, uncertain], capacity, draws=draws, method=method)
        assert result.draws == draws
        assert abs(result.probability - exact) <= mc_tolerance(exact, draws)


def exact_fit_by_convolution(
    uncertain: list[ThreePoint], certain_total: float, capacity: float, step: float
) -> float:
    """P(certain + sum of uncertain <= capacity) by numerical convolution.

    Every uncertain effort but the last becomes point masses at cell midpoints, with
    each cell's exact mass from scipy.stats.beta.cdf; np.convolve adds them; the last effort
    enters through its exact cdf. Widths must be whole multiples of `step` so the grids line
    up.
    """
    masses = np.array([1.0])
    offset = certain_total
    for e in uncertain[:-1]:
        cells = round((e.high - e.low) / step)
        assert abs(cells * step - (e.high - e.low)) < 1e-9
        edges = e.low + step * np.arange(cells + 1)
        cell_masses = np.diff(scipy_pert(e).cdf(edges))
        masses = np.convolve(masses, cell_masses)
        offset += e.low + step / 2  # midpoint of cell 0
    positions = offset + step * np.arange(masses.size)
    last = scipy_pert(uncertain[-1])
    return float(np.dot(masses, last.cdf(capacity - positions)))


@pytest.mark.parametrize("method", METHODS)
def test_fit_probability_matches_exact_convolution(method: SamplingMethod) -> None:
    uncertain = [ThreePoint(1, 2, 6), ThreePoint(2, 3, 4), ThreePoint(0.5, 3, 3.5)]
    certain = [ThreePoint.from_single(3), ThreePoint.from_single(2.5)]
    mean = 5.5 + sum(pert_mean(e) for e in uncertain)
    draws = 10_000
    for capacity in (mean - 2, mean - 0.5, mean, mean + 1, mean + 2.5):
        exact = exact_fit_by_convolution(uncertain, 5.5, capacity, step=1e-3)
        # The grid itself is accurate far beyond the Monte Carlo error: halving the step
        # moves the figure by less than 1e-5.
        finer = exact_fit_by_convolution(uncertain, 5.5, capacity, step=5e-4)
        assert abs(exact - finer) < 1e-5
        result = fit_probability([*uncertain, *certain], capacity, draws=draws, method=method)
        assert abs(result.probability - exact) <= mc_tolerance(exact, draws)


def absolute_third_moments(alphas: np.ndarray, betas: np.ndarray) -> np.ndarray:
    """E|X - E X|^3 for X ~ Beta(alpha, beta), in closed form (vectorised).

    |y|^3 = y^3 + 2 (-y)^3 [y < 0], and with m = E X both parts are sums of the moments
    E[X^k] = B(alpha + k, beta) / B(alpha, beta) and of the partial moments
    E[X^k; X < m] = E[X^k] I_m(alpha + k, beta) (scipy.special.beta and betainc).
    """
    mean = alphas / (alphas + betas)
    whole = np.zeros_like(mean)
    below = np.zeros_like(mean)
    for k in range(4):
        moment = special.beta(alphas + k, betas) / special.beta(alphas, betas)
        weight = math.comb(3, k) * (-mean) ** (3 - k)
        whole += weight * moment
        below += weight * moment * special.betainc(alphas + k, betas, mean)
    return whole - 2 * below  # E[(X - m)^3] + 2 E[(m - X)^3; X < m]


def berry_esseen_bound(estimates: list[ThreePoint]) -> float:
    """Largest possible gap between the cdf of a sum of independent efforts and its normal.

    Berry-Esseen for non-identical summands: sup |F - Phi| <= C sum(rho_i) / sigma^3 with
    rho_i = E|X_i - mu_i|^3 and C = 0.5600 (Shevtsova 2010; constant from memory).
    """
    shapes = np.array([pert_beta_shapes(e) for e in estimates])
    widths = np.array([e.high - e.low for e in estimates])
    third = absolute_third_moments(shapes[:, 0], shapes[:, 1]) @ widths**3
    variance = float(np.sum(stats.beta(shapes[:, 0], shapes[:, 1]).var() * widths**2))
    return 0.5600 * float(third) / variance**1.5


def test_absolute_third_moment_matches_numerical_integration() -> None:
    # The closed form above against scipy.stats.beta.expect (adaptive quadrature).
    for alpha in (1.0, 1.8, 3.0, 4.6):
        unit = stats.beta(alpha, 6 - alpha)
        centre = float(unit.mean())
        numeric = unit.expect(lambda x, c=centre: abs(x - c) ** 3, points=[centre])
        closed = absolute_third_moments(np.array([alpha]), np.array([6 - alpha]))[0]
        assert closed == pytest.approx(numeric, rel=1e-7)


def test_fit_probability_matches_normal_approximation_for_many_efforts() -> None:
    # Central limit theorem: the total of 200 independent efforts is close to normal with
    # the summed PERT-beta means and variances; the gap is at most the Berry-Esseen bound
    # (about 0.07 here), to which the Monte Carlo error is added.
    estimates = random_estimates(200, seed=11)
    mean = sum(pert_mean(e) for e in estimates)
    sd = math.sqrt(sum(pert_beta_variance(e) for e in estimates))
    bound = berry_esseen_bound(estimates)
    assert bound < 0.1
    draws = 20_000
    for z in (-1.5, -1.0, 0.0, 1.0, 1.5):
        normal = float(stats.norm.cdf(z))
        result = fit_probability(estimates, mean + z * sd, draws=draws)
        assert abs(result.probability - normal) <= bound + mc_tolerance(normal, draws)


def test_symmetric_efforts_fit_their_mean_half_the_time() -> None:
    # A sum of independent symmetric distributions is symmetric about its mean, so
    # P(total <= mean) = 1/2 exactly (symmetry; no approximation).
    estimates = [ThreePoint.from_single(x, spread=s) for x, s in [(5, 0.2), (8, 0.5), (2, 1.0)]]
    estimates *= 40
    mean = sum(pert_mean(e) for e in estimates)
    result = fit_probability(estimates, mean, draws=10_000)
    assert abs(result.probability - 0.5) <= mc_tolerance(0.5, 10_000)


def test_fit_probability_agrees_with_sample_efforts() -> None:
    # The fast totals path and the full sample come from the same draws (canonical order:
    # sorted by low, likely, high).
    estimates = sorted(random_estimates(30, seed=3), key=lambda e: (e.low, e.likely, e.high))
    capacity = sum(pert_mean(e) for e in estimates) + 3
    result = fit_probability(estimates, capacity, draws=5_000, seed=99)
    sample = sample_efforts(estimates, 5_000, seed=99)
    assert result.probability == np.mean(sample.sum(axis=1) <= capacity)


def test_certain_plan_is_exact_and_tolerates_float_sums() -> None:
    # 0.1 + 0.2 is 0.30000000000000004 in floating point; a plan of exactly the capacity fits.
    plan = [ThreePoint.from_single(0.1), ThreePoint.from_single(0.2)]
    fits = fit_probability(plan, 0.3)
    assert (fits.probability, fits.standard_error, fits.draws, fits.exact) == (1.0, 0.0, 0, True)
    assert fits.label() == "100 %"
    misses = fit_probability(plan, 0.29)
    assert (misses.probability, misses.exact) == (0.0, True)
    assert misses.label() == "0 %"
    assert fit_probability([], 0).probability == 1.0
    assert fit_probability([], 0, shared_overrun=0.2).exact  # nothing to slip
    # A shared overrun makes even certain efforts uncertain: P(4 F <= 4.2) from scipy.
    slipping = fit_probability([ThreePoint.from_single(4)], 4.2, shared_overrun=0.1)
    log_sd = math.sqrt(math.log1p(0.01))
    exact = float(stats.lognorm(s=log_sd, scale=math.exp(-(log_sd**2) / 2)).cdf(4.2 / 4))
    assert not slipping.exact
    assert abs(slipping.probability - exact) <= mc_tolerance(exact, slipping.draws)


# --- confidence levels ----------------------------------------------------------------------


@pytest.mark.parametrize("q", [0.05, 0.5, 0.8, 0.9, 0.99])
def test_effort_quantile_matches_scipy_ppf(q: float) -> None:
    for e in [ThreePoint(2, 4, 12), ThreePoint(1, 1, 6), ThreePoint(3, 8, 8), ThreePoint(0, 1, 3)]:
        assert effort_quantile(e, q) == pytest.approx(float(scipy_pert(e).ppf(q)), rel=1e-12)


def test_efforts_at_confidence_uses_the_quantiles() -> None:
    estimates = [*random_estimates(25, seed=8), ThreePoint.from_single(4)]
    previous = None
    for q in (0.5, 0.8, 0.9):
        efforts = efforts_at_confidence(estimates, q)
        assert efforts.shape == (len(estimates),)
        expected = [float(scipy_pert(e).ppf(q)) for e in estimates[:-1]]
        np.testing.assert_allclose(efforts[:-1], expected, rtol=1e-12)
        assert efforts[-1] == 4
        if previous is not None:
            assert np.all(efforts >= previous)
        previous = efforts
    assert efforts_at_confidence([], 0.8).shape == (0,)


def test_validate_confidence_reads_levels() -> None:
    assert validate_confidence(0.8) == 0.8
    assert validate_confidence("0.9") == 0.9
    assert validate_confidence("P80") == pytest.approx(0.8)
    assert validate_confidence("p 50") == pytest.approx(0.5)
    assert validate_confidence("90 %") == pytest.approx(0.9)
    # Typed text of 1 or more is a percentage, as on the plan page's custom level.
    assert validate_confidence("80") == pytest.approx(0.8)
    assert validate_confidence(" 97.5 ") == pytest.approx(0.975)


@pytest.mark.parametrize(
    "level", [0, 1, 1.2, 80, -0.1, float("nan"), float("inf"), "100", "150", "P100", "0", "x"]
)
def test_confidence_outside_zero_one_is_rejected(level: object) -> None:
    with pytest.raises(EstimateError, match=r"^confidence: ") as caught:
        validate_confidence(level)
    assert caught.value.field == "confidence"
    if not isinstance(level, str):
        with pytest.raises(EstimateError, match=r"^confidence: "):
            effort_quantile(ThreePoint(1, 2, 3), level)  # type: ignore[arg-type]
        with pytest.raises(EstimateError, match=r"^confidence: "):
            efforts_at_confidence([ThreePoint(1, 2, 3)], level)  # type: ignore[arg-type]


# --- determinism ----------------------------------------------------------------------------


def test_same_plan_shows_the_same_figure() -> None:
    estimates = random_estimates(40, seed=21)
    capacity = sum(pert_mean(e) for e in estimates)
    first = fit_probability(estimates, capacity, draws=3_000)
    assert fit_probability(estimates, capacity, draws=3_000) == first
    # Order of the initiatives does not matter.
    assert fit_probability(estimates[::-1], capacity, draws=3_000) == first
    assert first.seed == default_seed(estimates) == default_seed(estimates[::-1])
    # Neither does the number of threads.
    assert fit_probability(estimates, capacity, draws=3_000, workers=1) == first
    assert fit_probability(estimates, capacity, draws=3_000, workers=3) == first
    for method in METHODS:
        one = sample_efforts(estimates, 3_000, seed=4, workers=1, method=method)
        two = sample_efforts(estimates, 3_000, seed=4, workers=2, method=method)
        np.testing.assert_array_equal(two, one)


def test_different_seed_gives_different_draws() -> None:
    estimates = random_estimates(10, seed=2)
    first = sample_efforts(estimates, 2_000, seed=1)
    assert not np.array_equal(sample_efforts(estimates, 2_000, seed=2), first)
    assert default_seed(estimates) != default_seed(random_estimates(10, seed=3))
    assert default_seed(estimates, 10) != default_seed(estimates, 11)


def test_default_seed_does_not_depend_on_python_hash() -> None:
    # Python's hash() of strings changes per process (PYTHONHASHSEED); the seed must not.
    code = (
        "from server.selector.risk import ThreePoint, default_seed;"
        "print(default_seed([ThreePoint(1, 2, 3), ThreePoint(2.5, 2.5, 2.5)], 40))"
    )
    expected = default_seed([ThreePoint(1, 2, 3), ThreePoint(2.5, 2.5, 2.5)], 40)
    for hash_seed in ("1", "2"):
        env = {**os.environ, "PYTHONHASHSEED": hash_seed, "PYTHONPATH": str(REPO_ROOT)}
        done = subprocess.run(
            [sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True
        )
        assert int(done.stdout) == expected


def test_fit_probability_never_falls_as_capacity_grows() -> None:
    # The default seed leaves the capacity out, so all capacities share the same draws.
    estimates = random_estimates(50, seed=6)
    mean = sum(pert_mean(e) for e in estimates)
    figures = [
        fit_probability(estimates, mean + step, draws=2_000).probability
        for step in np.linspace(-15, 15, 13)
    ]
    assert figures == sorted(figures)
    assert figures[0] < 0.5 < figures[-1]


# --- shared overrun -----------------------------------------------------------------------


@pytest.mark.parametrize("overrun", [0.1, 0.8])
def test_shared_overrun_factor_has_mean_one_and_the_given_sd(overrun: float) -> None:
    # A certain effort of 1 day shows the factor itself. Reference: scipy.stats.lognorm with
    # s = sqrt(ln(1 + sd^2)) and scale exp(-s^2 / 2) has mean 1 and standard deviation sd.
    draws = 100_000
    factor = sample_efforts([ThreePoint.from_single(1)], draws, seed=7, shared_overrun=overrun)
    factor = factor[:, 0]
    log_sd = math.sqrt(math.log1p(overrun**2))
    reference = stats.lognorm(s=log_sd, scale=math.exp(-(log_sd**2) / 2))
    mean, variance, excess_kurtosis = (float(x) for x in reference.stats(moments="mvk"))
    assert mean == pytest.approx(1.0)
    assert variance == pytest.approx(overrun**2)
    assert abs(factor.mean() - 1) <= 4 * overrun / math.sqrt(draws)
    # Standard error of a sample sd, as above: sqrt(mu4 - sd^4) / (2 sd sqrt(n)).
    sd_error = math.sqrt((excess_kurtosis + 2) * variance**2) / (2 * overrun * math.sqrt(draws))
    assert abs(factor.std(ddof=1) - overrun) <= 4 * sd_error
    assert stats.kstest(factor[:20_000], reference.cdf).pvalue > 1e-3


def test_shared_overrun_widens_the_total_and_keeps_its_mean() -> None:
    # Var(F S) = (1 + s^2) Var(S) + s^2 E(S)^2 for F independent of S with E F = 1, sd s.
    estimates = random_estimates(60, seed=4)
    draws = 50_000
    mean = sum(pert_mean(e) for e in estimates)
    variance = sum(pert_beta_variance(e) for e in estimates)
    totals = sample_efforts(estimates, draws, seed=8, shared_overrun=0.1).sum(axis=1)
    expected_variance = 1.01 * variance + 0.01 * mean**2
    assert expected_variance > 2 * variance
    assert abs(totals.mean() - mean) <= 4 * math.sqrt(expected_variance / draws)
    # Standard error of a sample variance: sqrt((mu4 - var^2) / n), mu4 from the sample.
    centred = totals - totals.mean()
    variance_error = math.sqrt((np.mean(centred**4) - expected_variance**2) / draws)
    assert abs(totals.var(ddof=1) - expected_variance) <= 4 * variance_error


def test_shared_overrun_lowers_the_chance_of_a_plan_with_some_headroom() -> None:
    # Capacity half a standard deviation above the mean: widening the total moves mass past
    # it. (At the mean itself the figure may even rise a little: the lognormal's median is
    # below 1.)
    estimates = random_estimates(100, seed=12)
    mean = sum(pert_mean(e) for e in estimates)
    sd = math.sqrt(sum(pert_beta_variance(e) for e in estimates))
    for headroom in (0.5 * sd, 1.5 * sd):
        alone = fit_probability(estimates, mean + headroom, draws=10_000)
        together = fit_probability(estimates, mean + headroom, draws=10_000, shared_overrun=0.1)
        assert together.probability < alone.probability - 4 * alone.standard_error


def test_shared_overrun_fit_matches_lognormal_integral() -> None:
    # One uncertain effort X plus 4 certain days, all times F:
    # P(F (4 + X) <= c) = E_F[beta.cdf(c / F - 4)], integrated with scipy.stats.lognorm.expect.
    uncertain = ThreePoint(2, 3, 7)
    plan = [uncertain, ThreePoint.from_single(4)]
    log_sd = math.sqrt(math.log1p(0.15**2))
    factor = stats.lognorm(s=log_sd, scale=math.exp(-(log_sd**2) / 2))
    draws = 10_000
    for capacity in (7.5, 8.5, 10.0):
        exact = factor.expect(lambda f, c=capacity: scipy_pert(uncertain).cdf(c / f - 4))
        result = fit_probability(plan, capacity, draws=draws, shared_overrun=0.15)
        assert abs(result.probability - exact) <= mc_tolerance(exact, draws)


# --- spread contributors ------------------------------------------------------------------


def test_spread_contributors_are_variance_shares() -> None:
    estimates = [
        ThreePoint(1, 2, 3),
        ThreePoint(1, 5, 20),
        ThreePoint.from_single(8),
        ThreePoint(2, 2, 10),
        ThreePoint(1, 2, 3),
    ]
    keys = ["a", "b", "c", "d", "e"]
    variances = {
        key: float(scipy_pert(e).var())
        for key, e in zip(keys, estimates, strict=True)
        if key != "c"
    }
    total = sum(variances.values())
    shares = spread_contributors(keys, estimates, top=10)
    assert [key for key, _ in shares] == ["b", "d", "a", "e"]  # equal a and e: by key
    for key, share in shares:
        assert share == pytest.approx(variances[key] / total, rel=1e-12)
    assert sum(share for _, share in shares) == pytest.approx(1.0)
    assert spread_contributors(keys, estimates, top=2) == shares[:2]
    assert spread_contributors(["x"], [ThreePoint.from_single(3)]) == []
    with pytest.raises(ValueError, match="keys"):
        spread_contributors(["x"], estimates)


# --- labels -------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("probability", "draws", "label"),
    [
        # sqrt(0.87 * 0.13 / 1000) = 1.06 %, rounded up to 2 %.
        (0.87, 1_000, "87 % ± 2 %"),
        # sqrt(0.87 * 0.13 / 10000) = 0.336 %, rounded up to 0.4 %.
        (0.87, 10_000, "87.0 % ± 0.4 %"),
        # sqrt(0.5 * 0.5 / 10000) = 0.5 % exactly: shown as 0.5, not 0.6.
        (0.5, 10_000, "50.0 % ± 0.5 %"),
        # sqrt(0.9991 * 0.0009 / 10000) = 0.03 %: never shown as 0, so 0.1.
        (0.9991, 10_000, "99.9 % ± 0.1 %"),
        # All 10,000 draws fit: rule of three, 1 - 3/10000 = 99.97 %, floored.
        (1.0, 10_000, "> 99.9 %"),
        (0.0, 10_000, "< 0.1 %"),
        (0.0, 100, "< 3.0 %"),
    ],
)
def test_label_rounds_the_error_up(probability: float, draws: int, label: str) -> None:
    error = math.sqrt(probability * (1 - probability) / draws)
    assert FitEstimate(probability, error, draws, seed=1).label() == label


@settings(max_examples=200, deadline=None)
@given(st.integers(min_value=1, max_value=100_000), st.floats(0, 1))
def test_label_never_shows_a_zero_error(draws: int, share: float) -> None:
    hits = round(share * draws)
    probability = hits / draws
    error = math.sqrt(probability * (1 - probability) / draws)
    label = FitEstimate(probability, error, draws, seed=1).label()
    assert "± 0 %" not in label
    assert "± 0.0 %" not in label
    assert label.endswith("%")


# --- bad input ----------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("low", "likely", "high", "field"),
    [
        ("5", "3", "8", "low"),  # low > likely
        ("1", "5", "3", "high"),  # likely > high
        ("-1", "2", "3", "low"),  # negative
        ("1", "-2", "3", "likely"),
        ("1", "2", "-3", "high"),
        ("nan", "2", "3", "low"),
        ("1", "inf", "3", "likely"),
        ("1", "2", "-inf", "high"),
        ("abc", "2", "3", "low"),
        ("1", "two", "3", "likely"),
        ("1", "2", "3 days", "high"),
        ("0", "0", "0", "likely"),  # zero effort
        ("", "0", "", "likely"),
        (None, 0.0, None, "likely"),
        ("1", "", "3", "likely"),  # missing
        ("1", "2", "", "high"),
        ("", "2", "3", "low"),
        (1, True, 3, "likely"),  # a tick box is not a number
        (1, [2], 3, "likely"),
        (float("nan"), 2, 3, "low"),
        (1, 2, float("inf"), "high"),
        (3, 4, 3, "high"),  # equal bounds around another likely value
    ],
)
def test_bad_estimate_names_the_field(
    low: object, likely: object, high: object, field: str
) -> None:
    with pytest.raises(EstimateError) as caught:
        validate_three_point(low, likely, high)
    assert caught.value.field == field
    assert str(caught.value).startswith(f"{field}: ")
    assert isinstance(caught.value, ValueError)


def test_direct_construction_is_validated_too() -> None:
    with pytest.raises(EstimateError, match=r"^low: must not be more than likely"):
        ThreePoint(5, 3, 8)
    with pytest.raises(EstimateError, match=r"^high: must not be less than likely"):
        ThreePoint(1, 5, 3)
    with pytest.raises(EstimateError, match=r"^likely: must be a number, not NaN"):
        ThreePoint(1, float("nan"), 3)
    with pytest.raises(EstimateError, match=r"^effort: must be more than zero"):
        ThreePoint.from_single(0)
    with pytest.raises(EstimateError, match=r"^effort: must not be negative"):
        ThreePoint.from_single(-2)
    for spread in (-0.1, 1.5, float("nan")):
        with pytest.raises(EstimateError, match=r"^spread: "):
            ThreePoint.from_single(2, spread)
    with pytest.raises(EstimateError, match=r"^spread: "):
        validate_three_point("", "3", "", default_spread=2)


def test_equal_bounds_are_a_certain_estimate() -> None:
    # The issue lists equal bounds as suspect; low == likely == high is accepted as the
    # certain (single) estimate, and blank bounds give the same thing.
    assert validate_three_point("3", "3", "3") == ThreePoint(3, 3, 3)
    assert validate_three_point("", " 3 ", None) == ThreePoint(3, 3, 3)
    assert validate_three_point("", "3", "").is_certain
    spread = validate_three_point("", "10", "", default_spread=0.2)
    assert (spread.low, spread.likely, spread.high) == pytest.approx((8, 10, 12))
    assert validate_three_point(0, "1.5", 4.0) == ThreePoint(0, 1.5, 4)


def test_bad_risk_settings_name_the_field() -> None:
    plan = [ThreePoint(1, 2, 3)]
    for kwargs, field in [
        ({"capacity": -1}, "capacity"),
        ({"capacity": float("nan")}, "capacity"),
        ({"capacity": 5, "draws": 0}, "draws"),
        ({"capacity": 5, "draws": 2.5}, "draws"),
        ({"capacity": 5, "seed": -1}, "seed"),
        ({"capacity": 5, "shared_overrun": -0.1}, "shared_overrun"),
        ({"capacity": 5, "workers": 0}, "workers"),
        ({"capacity": 5, "method": "beta"}, "method"),
    ]:
        with pytest.raises(EstimateError, match=rf"^{field}: "):
            fit_probability(plan, **kwargs)  # type: ignore[arg-type]
    with pytest.raises(TypeError, match="ThreePoint"):
        fit_probability([(1, 2, 3)], 5)  # type: ignore[list-item]


@settings(max_examples=100, deadline=None)
@given(
    st.floats(0, 1e4, allow_nan=False),
    st.floats(0, 1e4, allow_nan=False),
    st.floats(0, 1e4, allow_nan=False),
    st.floats(0.01, 0.99),
)
def test_any_ordered_estimate_round_trips_and_its_quantile_stays_inside(
    x: float, y: float, z: float, q: float
) -> None:
    low, likely, high = sorted((x, y, z))
    if likely == 0:
        with pytest.raises(EstimateError, match=r"^likely: "):
            validate_three_point(repr(low), repr(likely), repr(high))
        return
    e = validate_three_point(repr(low), repr(likely), repr(high))
    assert (e.low, e.likely, e.high) == (low, likely, high)
    assert low <= effort_quantile(e, q) <= high
    assert low <= pert_mean(e) <= high
